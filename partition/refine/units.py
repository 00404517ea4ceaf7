"""Shared pieces of the refinement units: fixed-point weights, partition checks, cut counts, a heap.

Every refinement step (pairwise moves, multilevel moves, min-cut repair,
rebalancing) compares sums of edge weights. To make those comparisons exact,
and identical whichever engine runs them, the steps work on int64 fixed-point
weights (:func:`fixed_point_weights`, rule 1 of :mod:`partition.rules`). The binary max-heap below orders
``(key, node)`` by larger key, then smaller node index: that is the tie rule of
every priority queue in refinement. It is a plain array heap (Williams, 1964)
kept in two arrays so numba kernels can own it.
"""

from __future__ import annotations

import time

import numba
import numpy as np

from partition.errors import ParameterError
from partition.refine.rounds import pair_rounds
from partition.rules import AFFINITY_SCALE, quantise, weights_kept

__all__ = [
    "refine_pairs",
    "heap_push",
    "heap_pop",
    "fixed_point_weights",
    "check_partition",
    "edge_cut",
    "shard_cut_matrix",
    "shard_index",
]


# --- max-heap over (key, node): larger key first, then smaller node (Williams 1964)
@numba.njit(cache=True, nogil=True, inline="always")
def _above(k1, n1, k2, n2):
    return k1 > k2 or (k1 == k2 and n1 < n2)


@numba.njit(cache=True, nogil=True)
def heap_push(hk, hn, size, key, node):
    """Push ``(key, node)`` onto the heap held in ``hk[:size], hn[:size]``; returns the new size."""
    i = size
    hk[i] = key
    hn[i] = node
    while i > 0:
        p = (i - 1) >> 1
        if _above(hk[i], hn[i], hk[p], hn[p]):
            hk[i], hk[p] = hk[p], hk[i]
            hn[i], hn[p] = hn[p], hn[i]
            i = p
        else:
            break
    return size + 1


@numba.njit(cache=True, nogil=True)
def heap_pop(hk, hn, size):
    """Remove the top entry; returns the new size."""
    size -= 1
    hk[0] = hk[size]
    hn[0] = hn[size]
    i = 0
    while True:
        c = 2 * i + 1
        if c >= size:
            break
        if c + 1 < size and _above(hk[c + 1], hn[c + 1], hk[c], hn[c]):
            c += 1
        if _above(hk[c], hn[c], hk[i], hn[i]):
            hk[i], hk[c] = hk[c], hk[i]
            hn[i], hn[c] = hn[c], hn[i]
            i = c
        else:
            break
    return size


def fixed_point_weights(graph):
    """Edge weights as int64, for exact integer gains, and the scale applied.

    Unit weights give ones (scale 1); integer-valued weights (total below
    ``2**53``) are kept as they are (scale 1); any other weights are put in
    fixed point by rule 1 of :mod:`partition.rules` (``quantise``: multiply by
    ``AFFINITY_SCALE = 2**20`` and round half to even). Gains and cuts in the
    original unit are ``integer / scale``.

    Parameters
    ----------
    graph : Graph

    Returns
    -------
    weights : ndarray of int64, shape (2 m,)
    scale : int

    Raises
    ------
    ParameterError
        When an edge weight is negative or not finite, or the fixed-point total
        would not fit int64.
    """
    if graph.edge_weights is None:
        return np.ones(graph.indices.shape[0], dtype=np.int64), 1
    w = graph.edge_weights
    if w.size and (not np.all(np.isfinite(w)) or w.min() < 0):
        raise ParameterError("edge weights must be finite and >= 0 for refinement")
    total = float(w.sum())
    if weights_kept("fm", not np.all(w == np.floor(w)), float(w.max(initial=0.0)), total):
        return w.astype(np.int64), 1
    if total * AFFINITY_SCALE >= 2.0**62:
        raise ParameterError(f"total edge weight {total:.6g} is too large for fixed point; rescale the weights")
    return quantise(w), AFFINITY_SCALE


def check_partition(graph, parts, k):
    """Validate a partition of ``graph`` into ``k`` shards; returns it as int64.

    Raises
    ------
    ParameterError
        When ``parts`` has the wrong length or a value outside ``[0, k)``.
    """
    parts = np.asarray(parts)
    if parts.ndim != 1 or parts.shape[0] != graph.n:
        raise ParameterError(f"the partition must have one entry per node ({graph.n}), got shape {parts.shape}")
    if parts.dtype.kind not in "iu":
        raise ParameterError(f"the partition must hold integer shard numbers, got dtype {parts.dtype}")
    if parts.size and (parts.min() < 0 or parts.max() >= k):
        raise ParameterError(f"shard numbers must lie in [0, {k})")
    return parts.astype(np.int64)


def edge_cut(graph, parts, weights=None):
    """Total weight of the edges whose ends are in different shards (each edge once)."""
    w = graph.edge_weight_array() if weights is None else weights
    parts = np.asarray(parts)
    diff = parts[graph.rows()] != parts[graph.indices]
    return w[diff].sum() / 2


def shard_cut_matrix(graph, parts, k, weights=None):
    """``k × k`` matrix of the edge weight between every two shards (zero diagonal)."""
    if weights is not None and np.asarray(weights).dtype.kind in "iu":
        from partition.refine.gains import shard_cut_matrix as _integer_matrix

        return _integer_matrix(graph.indptr, graph.indices, np.asarray(weights, dtype=np.int64),
                               np.asarray(parts, dtype=np.int64), k)
    w = graph.edge_weight_array() if weights is None else weights
    parts = np.asarray(parts, dtype=np.int64)
    src, dst = parts[graph.rows()], parts[graph.indices]
    diff = src != dst
    c = np.bincount(src[diff] * k + dst[diff], weights=w[diff], minlength=k * k)
    return c.reshape(k, k)


def shard_index(parts, k):
    """Nodes grouped by shard: ``order[bounds[s]:bounds[s + 1]]`` are the nodes of shard ``s``, ascending."""
    order = np.argsort(parts, kind="stable")
    bounds = np.zeros(k + 1, dtype=np.int64)
    np.cumsum(np.bincount(parts, minlength=k), out=bounds[1:])
    return order, bounds


def refine_pairs(graph, parts, rule, weights, make_round, schedule="round_robin", max_rounds=None, seed=0, tol=0.0,
                 t0=None):
    """A pairwise refinement step end to end: fixed-point weights, the pair rounds, statistics.

    Parameters
    ----------
    graph : Graph
    parts : ndarray of int64
        Checked with :func:`check_partition` and copied.
    rule : partition.balance.BalanceRule
    weights : ndarray of int64 or None
        Integer edge weights; ``None``: :func:`fixed_point_weights` (the
        statistics' gains are then divided by its scale).
    make_round : callable
        ``make_round(weights) -> run_round`` for :func:`~partition.refine.rounds.pair_rounds`.
    schedule, max_rounds, seed, tol
        As :func:`partition.refine.rounds.pair_rounds`.
    t0 : float or None
        ``time.perf_counter()`` when the step started (default: now).

    Returns
    -------
    parts : ndarray of int64
    stats : dict
        ``cut_before``, ``cut_after`` (original weights), ``rounds`` (pairs and
        gain of each round), ``balanced`` (the rule holds at the end), ``seconds``.
    """
    t0 = time.perf_counter() if t0 is None else t0
    k = rule.k
    parts = check_partition(graph, parts, k).copy()
    if weights is None:
        weights, scale = fixed_point_weights(graph)
    else:
        scale = 1.0
    cut_before = float(edge_cut(graph, parts))
    parts, rounds = pair_rounds(parts, k, lambda p: shard_cut_matrix(graph, p, k, weights), make_round(weights),
                                schedule, max_rounds, seed, tol)
    for r in rounds:
        r["gain"] = float(r["gain"]) / scale
    loads = np.bincount(parts, weights=graph.node_weight_array(), minlength=k)
    stats = {
        "cut_before": cut_before,
        "cut_after": float(edge_cut(graph, parts)),
        "rounds": rounds,
        "balanced": bool(rule.check(loads)),
        "seconds": time.perf_counter() - t0,
    }
    return parts, stats
