"""Shared helpers for refinement: integer edge weights, cut weight, move gains.

Refinement compares sums of edge weights, and both engines must make the same
comparisons, so every sum here is an int64 sum (independent of the order of
evaluation). :func:`cut_weights` turns a graph's edge weights into integers:
unit graphs stay unit (``None``, the kernels count 1 per edge), integral
weights are used as they are (scale 1), and any other weights are put in fixed
point with :func:`partition.rules.quantise` (scale ``AFFINITY_SCALE = 2**20``,
rule 1 of :mod:`partition.rules`). Cut figures reported to users are the
integer cut divided by the scale.

The gain of moving node ``u`` from shard ``a`` to shard ``b`` is the weight of
its edges to ``b`` minus the weight of its edges to ``a`` (its own shard): the
amount by which the cut drops when ``u`` alone moves (Kernighan & Lin, 1970;
Fiduccia & Mattheyses, 1982). Edges to other shards stay cut either way.
"""

from __future__ import annotations

import numba
import numpy as np

from partition.errors import ParameterError
from partition.rules import AFFINITY_SCALE, MAX_EXACT_WEIGHT, quantise, weights_kept

__all__ = [
    "cut_weights",
    "local_index",
    "cut_total",
    "shard_cut_matrix",
    "pair_gains",
    "MAX_EXACT_WEIGHT",
]

_EMPTY_I64 = np.empty(0, dtype=np.int64)


def cut_weights(edge_weights):
    """Integer edge weights for refinement, and the scale they are counted in.

    Parameters
    ----------
    edge_weights : ndarray of float64 or int64, shape (2 m,), or None
        One weight per CSR entry (``Graph.edge_weights``); ``None`` for unit
        weights.

    Returns
    -------
    weights : ndarray of int64, shape (2 m,) or (0,)
        Empty for unit weights (the kernels then count 1 per edge).
    scale : int
        1 when the weights were integral, ``AFFINITY_SCALE`` when they were
        put in fixed point.

    Raises
    ------
    ParameterError
        If a weight is negative, not finite, or the total weight does not fit
        int64 in fixed point.
    """
    if edge_weights is None:
        return _EMPTY_I64, 1
    w = np.asarray(edge_weights)
    if w.dtype.kind in "iu":
        if w.size and w.min() < 0:
            raise ParameterError("edge weights must be >= 0")
        return w.astype(np.int64, copy=False), 1
    w = w.astype(np.float64, copy=False)
    if not np.isfinite(w).all() or (w.size and w.min() < 0):
        raise ParameterError("edge weights must be finite and >= 0")
    total = float(w.sum())
    if w.size == 0 or weights_kept("cut", not np.all(w == np.floor(w)), float(w.max()), total):
        return w.astype(np.int64), 1
    if total * AFFINITY_SCALE >= 2.0**62:
        raise ParameterError(
            f"total edge weight {total:.6g} is too large for fixed point with scale 2**20; "
            "rescale the weights"
        )
    return quantise(w), AFFINITY_SCALE


def local_index(parts, k):
    """Rank of every node among the nodes of its shard (nodes taken in id order).

    Parameters
    ----------
    parts : ndarray of int, shape (n,)
        Shard of each node, values in ``[0, k)``.
    k : int

    Returns
    -------
    rank : ndarray of int64, shape (n,)
        ``rank[u]`` = number of nodes ``v < u`` with ``parts[v] == parts[u]``.
    grouped : ndarray of int64, shape (n,)
        All nodes grouped by shard, each group in increasing id order.
    starts : ndarray of int64, shape (k + 1,)
        Shard ``s`` is ``grouped[starts[s]:starts[s + 1]]``.
    """
    parts = np.asarray(parts)
    grouped = np.argsort(parts, kind="stable").astype(np.int64)
    counts = np.bincount(parts, minlength=k).astype(np.int64)
    starts = np.zeros(k + 1, dtype=np.int64)
    np.cumsum(counts, out=starts[1:])
    rank = np.empty(parts.shape[0], dtype=np.int64)
    rank[grouped] = np.arange(parts.shape[0], dtype=np.int64) - starts[parts[grouped]]
    return rank, grouped, starts


def _entry_rows(indptr):
    n = indptr.shape[0] - 1
    return np.repeat(np.arange(n, dtype=np.int64), np.diff(indptr))


def cut_total(indptr, indices, weights, parts):
    """Integer weight of the edges whose endpoints lie in different shards.

    Parameters
    ----------
    indptr, indices : ndarray
        Symmetric CSR (every undirected edge stored in both directions).
    weights : ndarray of int64, shape (2 m,) or (0,)
        Integer weights per CSR entry; empty means unit weights.
    parts : ndarray of int, shape (n,)

    Returns
    -------
    int
        Each cut edge counted once.
    """
    parts = np.asarray(parts)
    cut = parts[_entry_rows(indptr)] != parts[indices]
    if weights.shape[0] == 0:
        return int(np.count_nonzero(cut)) // 2
    return int(weights[cut].sum()) // 2


def shard_cut_matrix(indptr, indices, weights, parts, k):
    """Integer edge weight between every two shards.

    Parameters
    ----------
    indptr, indices, weights, parts
        As in :func:`cut_total`.
    k : int

    Returns
    -------
    ndarray of int64, shape (k, k)
        Symmetric, zero diagonal; entry ``(a, b)`` is the weight of the edges
        with one end in ``a`` and the other in ``b``.
    """
    return _cut_matrix_kernel(indptr, indices, weights, np.asarray(parts), int(k))


@numba.njit(cache=True, nogil=True)
def _cut_matrix_kernel(indptr, indices, weights, parts, k):
    unit = weights.shape[0] == 0
    mat = np.zeros((k, k), dtype=np.int64)
    for u in range(indptr.shape[0] - 1):
        pu = parts[u]
        for e in range(indptr[u], indptr[u + 1]):
            pv = parts[indices[e]]
            if pv != pu:
                mat[pu, pv] += 1 if unit else weights[e]
    # a cut edge is seen from both ends: once as (a, b), once as (b, a)
    return mat


@numba.njit(cache=True, nogil=True)
def pair_gains(indptr, indices, weights, parts, nodes, a, b):
    """Gain of moving each of ``nodes`` to the other shard of the pair ``(a, b)``.

    Parameters
    ----------
    indptr, indices : ndarray
        Symmetric CSR.
    weights : ndarray of int64, shape (2 m,) or (0,)
        Empty means unit weights.
    parts : ndarray of int
        Shard of every node.
    nodes : ndarray of int64
        Nodes of shard ``a`` or ``b``.
    a, b : int

    Returns
    -------
    ndarray of int64
        ``gain[i]`` = weight of ``nodes[i]``'s edges to the other shard of the
        pair minus the weight of its edges to its own shard.

    References
    ----------
    B. W. Kernighan and S. Lin, "An efficient heuristic procedure for
    partitioning graphs", Bell System Technical Journal 49(2), 1970.
    """
    unit = weights.shape[0] == 0
    out = np.zeros(nodes.shape[0], dtype=np.int64)
    for i in range(nodes.shape[0]):
        u = nodes[i]
        own = parts[u]
        other = b if own == a else a
        g = 0
        for e in range(indptr[u], indptr[u + 1]):
            pv = parts[indices[e]]
            w = 1 if unit else weights[e]
            if pv == other:
                g += w
            elif pv == own:
                g -= w
        out[i] = g
    return out
