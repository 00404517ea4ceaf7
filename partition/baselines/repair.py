"""Balance repair: bring any node→shard assignment within the balance rule with few moves.

A partitioner that ignores capacity (a hash of the id, say) leaves some shards
too heavy. :func:`repair_balance` moves nodes out of the shards that break
:class:`partition.balance.BalanceRule` and into the ones with room, moving as
few nodes as it can and choosing them by a caller-given priority so the result
is deterministic. Shards that already keep the rule are left alone.

Two cases:

* exact (unit weights, ε = 0): every shard must end with ``⌊n/k⌋`` or
  ``⌈n/k⌉`` nodes. The ``n_full`` ceiling slots go to the currently largest
  shards, which makes the total number of moves ``Σ max(0, load − target)``
  the least possible (each shard must shed at least that much); the surplus
  nodes fill the deficits in shard order. Fully vectorised.
* capped (weights, or ε > 0): every over-cap shard sheds its heaviest nodes
  (fewest moves; ties by priority) until it is within the cap, and each shed
  node goes to the currently lightest shard. That shard always has room: while
  a node of weight ``w ≥ 1`` is unplaced the placed weight is at most
  ``W − w``, so the lightest shard holds at most ``⌈W/k⌉ − 1`` and
  ``⌈W/k⌉ − 1 + w ≤ ⌈W/k⌉ + w_max − 1 ≤ cap``. A small compiled kernel does
  the placement (O(moves · k)).
"""

from __future__ import annotations

import numba
import numpy as np

from partition.balance import balance_rule
from partition.errors import ParameterError

__all__ = ["repair_balance", "shard_loads", "prepare", "check_seed"]


def check_seed(seed):
    """Validate a seed for :func:`numpy.random.default_rng` (a whole number >= 0)."""
    if isinstance(seed, (bool, np.bool_)) or not isinstance(seed, (int, np.integer)):
        raise ParameterError(f"seed must be a whole number >= 0, got {seed!r}")
    if seed < 0:
        raise ParameterError(f"seed must be a whole number >= 0, got {seed}")
    return int(seed)


def prepare(graph, k, eps, seed):
    """Validate the common parameters of a baseline; return ``(rule, weights, seed)``.

    Raises
    ------
    ParameterError
        ``k < 1``, ``k > n``, a negative or non-finite imbalance, or a bad seed.
    """
    rule = balance_rule(graph.node_weights, k, eps, graph.n)
    return rule, graph.node_weight_array(), check_seed(seed)


def shard_loads(parts, node_weights, k):
    """Total node weight on each shard (int64 array of length ``k``)."""
    return np.bincount(parts, weights=node_weights, minlength=k).astype(np.int64)


def repair_balance(parts, k, rule, node_weights=None, priority=None):
    """Move few nodes so that the shard loads keep ``rule``.

    Parameters
    ----------
    parts : ndarray of int, shape (n,)
        Shard of each node, values in ``[0, k)``.
    k : int
        Number of shards (``rule.k``).
    rule : BalanceRule
        The rule to meet (from :func:`partition.balance.balance_rule`).
    node_weights : ndarray of int64 or None
        Node weights (``None``: unit).
    priority : ndarray or None
        Sort key per node: within an over-full shard the nodes with the largest
        key leave first (after heavier nodes, in the capped case). ``None``:
        the largest node index leaves first.

    Returns
    -------
    ndarray of int64, shape (n,)
        The repaired assignment (a new array; nodes of shards that keep the
        rule never move).

    Raises
    ------
    ParameterError
        ``parts`` has the wrong length or values outside ``[0, k)``.
    """
    parts = np.asarray(parts)
    n = parts.shape[0]
    if parts.ndim != 1 or (n and (parts.min() < 0 or parts.max() >= k)):
        raise ParameterError(f"parts must be a 1-d array of shard numbers in [0, {k})")
    w = np.ones(n, dtype=np.int64) if node_weights is None else np.asarray(node_weights, dtype=np.int64)
    if w.shape[0] != n:
        raise ParameterError(f"node_weights has {w.shape[0]} entries for {n} nodes")
    # work with the rank of the key (any sortable dtype, no overflow on negation)
    if priority is None:
        rank = np.arange(n, dtype=np.int64)
    else:
        priority = np.asarray(priority)
        if priority.shape != (n,):
            raise ParameterError(f"priority has shape {priority.shape}, expected ({n},)")
        rank = np.empty(n, dtype=np.int64)
        rank[np.argsort(priority, kind="stable")] = np.arange(n, dtype=np.int64)
    parts = parts.astype(np.int64, copy=True)
    loads = shard_loads(parts, w, k)
    if rule.check(loads):
        return parts
    if rule.exact:
        return _repair_exact(parts, k, rule, loads, rank)
    return _repair_capped(parts, k, rule.cap, loads, w, rank)


def _repair_exact(parts, k, rule, loads, priority):
    """Unit weights, ε = 0: sizes ⌊n/k⌋ or ⌈n/k⌉ with the fewest moves."""
    ceil = rule.cap
    # the n_full largest shards (ties: lower index) may keep the ceiling
    by_load = np.lexsort((np.arange(k), -loads))
    target = np.full(k, rule.floor, dtype=np.int64)
    if ceil > rule.floor:
        target[by_load[: rule.n_full]] = ceil
    surplus = np.maximum(loads - target, 0)
    deficit = np.maximum(target - loads, 0)
    # within each shard, rank nodes by descending priority; the first
    # surplus[shard] of them leave
    order = np.lexsort((-priority, parts))
    starts = np.concatenate(([0], np.cumsum(loads)[:-1]))
    rank = np.arange(parts.shape[0]) - np.repeat(starts, loads)
    leaving = order[rank < surplus[parts[order]]]
    # fill deficits in shard order; leaving nodes in priority order (largest first)
    leaving = leaving[np.argsort(-priority[leaving], kind="stable")]
    dest = np.repeat(np.arange(k, dtype=np.int64), deficit)
    parts[leaving] = dest
    return parts


def _repair_capped(parts, k, cap, loads, w, priority):
    """Weighted or ε > 0: shed heaviest nodes from over-cap shards; place on the lightest."""
    over = loads > cap
    cand = np.flatnonzero(over[parts] & (w > 0))
    # per over-cap shard: heaviest first, then largest priority
    cand = cand[np.lexsort((-priority[cand], -w[cand], parts[cand]))]
    cshard = parts[cand]
    cw = w[cand]
    # cumulative weight shed within each shard, before each candidate
    csum = np.cumsum(cw)
    first = np.concatenate(([True], cshard[1:] != cshard[:-1]))
    group_start = np.maximum.accumulate(np.where(first, np.arange(cand.shape[0]), 0))
    before = csum - cw - (csum[group_start] - cw[group_start])
    need = loads[cshard] - cap
    leaving = cand[before < need]
    # place heaviest first (then priority), each on the lightest shard at that moment
    leaving = leaving[np.lexsort((-priority[leaving], -w[leaving]))]
    new_loads = loads.copy()
    np.subtract.at(new_loads, parts[leaving], w[leaving])
    parts[leaving] = _place_lightest(w[leaving], new_loads)
    return parts


@numba.njit(cache=True, nogil=True)
def _place_lightest(weights, loads):
    """Shard for each weight in turn: the lightest at that moment (ties: lowest index)."""
    k = loads.shape[0]
    out = np.empty(weights.shape[0], dtype=np.int64)
    for t in range(weights.shape[0]):
        best = 0
        for i in range(1, k):
            if loads[i] < loads[best]:
                best = i
        loads[best] += weights[t]
        out[t] = best
    return out
