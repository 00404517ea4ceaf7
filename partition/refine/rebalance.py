"""Rebalance a partition: move the lowest-loss nodes out of over-full shards into shards with room.

Two greedy phases, each a sequence of single-node moves taken cheapest first
from a max-heap keyed by ``−loss``: after a move the neighbours that may
still move are re-keyed, and an entry that surfaces is recomputed and pushed
again if its loss changed for another reason (loads, so the best target). The loss of moving node ``u``
from its shard ``s`` to ``t`` is ``w(u, s) − w(u, t)``, the amount the cut
grows (the gain of Fiduccia & Mattheyses 1982 with the sign turned).

1. While an allowed shard weighs more than ``cap``: move a node of an
   over-full shard to the allowed shard with room (``load + w <= cap``) that
   it is most connected to, or, when none of its neighbours' shards has room,
   to the lightest allowed shard with room (ties: smaller shard number).
2. Only when ``floor > 0`` (unit weights, ε = 0): while an allowed shard
   weighs less than ``floor``, move a node of a shard above ``floor`` into an
   under-full shard, by the same rule.

Ties between nodes go to the smaller node index. Neighbours of more than
``rescan_degree`` edges get an upper-bound key instead of a rescan after each
move next to them (see :func:`rebalance_kernel`). Every node moves at most once
per phase. The phases cannot always succeed with weighted nodes (a node may
be heavier than any room); the result then reports ``balanced = False`` and
the caller decides (multilevel refinement and min-cut repair keep their old
partition).
"""

from __future__ import annotations

import numba
import numpy as np

from partition.refine.units import check_partition, edge_cut, fixed_point_weights, heap_pop, heap_push

__all__ = ["rebalance_kernel", "rebalance"]


@numba.njit(cache=True, nogil=True, inline="always")
def _shard(v, parts, nodes, local, active):
    """Current shard of node v: the overlay ``local`` for listed nodes, else ``parts``."""
    s = parts[v]
    if active[s]:
        if nodes.shape[0] == parts.shape[0]:  # every node is listed: nodes[v] == v
            return local[v]
        j = np.searchsorted(nodes, v)
        if j < nodes.shape[0] and nodes[j] == v:
            return local[j]
    return s


@numba.njit(cache=True, nogil=True)
def _cheapest(i, indptr, indices, weights, node_weights, parts, nodes, local, load, active, cap, floor, mode,
              conn, mark, touched):
    """(-loss, target) of the cheapest allowed move of listed node ``nodes[i]``; target -1 when none."""
    k = load.shape[0]
    v = nodes[i]
    nt = 0
    for q in range(indptr[v], indptr[v + 1]):
        s = _shard(indices[q], parts, nodes, local, active)
        if not mark[s]:
            mark[s] = True
            touched[nt] = s
            nt += 1
        conn[s] += weights[q]
    own = local[i]
    w = node_weights[v]
    best_t = -1
    best_c = conn[own] * 0
    for r in range(nt):
        t = touched[r]
        if t == own or not active[t] or load[t] + w > cap or (mode == 1 and load[t] >= floor):
            continue
        if best_t < 0 or conn[t] > best_c or (conn[t] == best_c and t < best_t):
            best_c = conn[t]
            best_t = t
    if best_t < 0:  # no neighbouring shard has room: the lightest allowed one that has
        for t in range(k):
            if t == own or not active[t] or load[t] + w > cap or (mode == 1 and load[t] >= floor):
                continue
            if best_t < 0 or load[t] < load[best_t]:
                best_t = t
        best_c = conn[own] * 0
    neg_loss = best_c - conn[own]
    for r in range(nt):
        conn[touched[r]] = 0
        mark[touched[r]] = False
    return neg_loss, best_t


@numba.njit(cache=True, nogil=True)
def rebalance_kernel(indptr, indices, weights, node_weights, parts, nodes, loads, active, cap, floor,
                     rescan_degree=64):
    """Greedy cheapest-first rebalancing moves among the ``active`` shards (numba kernel).

    Parameters
    ----------
    indptr, indices, weights, node_weights : ndarray
        The graph (CSR, edge weight per entry, node weights).
    parts : ndarray of int, shape (n,)
        Current shard of every node; only read.
    nodes : ndarray of int, shape (L,)
        The nodes that may move: every node of the active shards, ascending
        (looked up by binary search, so the work is independent of ``n``).
    loads : ndarray of int64, shape (k,)
        Current weight of every shard.
    active : ndarray of bool, shape (k,)
        Shards that may give or take nodes.
    cap, floor : int
        Bounds on every shard's weight (``floor`` 0 disables phase 2).
    rescan_degree : int, default 64
        After a move, a neighbour of at most this degree has its cheapest
        move recomputed at once; a neighbour of higher degree is pushed with
        its previous key raised by twice the edge weight (the most its
        ``−loss`` can have grown), and recomputed when that entry surfaces —
        so hubs are not rescanned after each move of one of their neighbours.

    Returns
    -------
    new_parts : ndarray of int64, shape (L,)
        New shard of each listed node, in the order of ``nodes``.
    loss : scalar of the weights' dtype
        Total increase of the weight cut.

    References
    ----------
    C. M. Fiduccia and R. M. Mattheyses, "A linear-time heuristic for improving
    network partitions", Proc. 19th Design Automation Conference (DAC), 1982.
    """
    k = loads.shape[0]
    L = nodes.shape[0]
    load = loads.astype(np.int64)
    local = np.empty(L, dtype=np.int64)
    for i in range(L):
        local[i] = parts[nodes[i]]
    conn = np.zeros(k, dtype=weights.dtype)
    mark = np.zeros(k, dtype=np.bool_)
    touched = np.empty(k, dtype=np.int64)
    cap_heap = L + 1  # per phase: initial entries plus one per re-keyed neighbour of a moved node
    for i in range(L):
        cap_heap += indptr[nodes[i] + 1] - indptr[nodes[i]]
    hk = np.empty(cap_heap, dtype=weights.dtype)
    hn = np.empty(cap_heap, dtype=np.int64)
    loss = np.zeros(1, dtype=weights.dtype)
    key = np.zeros(L, dtype=weights.dtype)  # the last key pushed for each node
    for mode in range(2):
        if mode == 1 and floor <= 0:
            break
        moved = np.zeros(L, dtype=np.bool_)
        size = 0
        for i in range(L):
            s = local[i]
            if active[s] and (load[s] > cap if mode == 0 else load[s] > floor):
                g, t = _cheapest(i, indptr, indices, weights, node_weights, parts, nodes, local, load, active,
                                 cap, floor, mode, conn, mark, touched)
                if t >= 0:
                    key[i] = g
                    size = heap_push(hk, hn, size, g, i)
        short = 0  # active shards still out of bounds in this phase
        for s in range(k):
            if active[s] and (load[s] > cap if mode == 0 else load[s] < floor):
                short += 1
        while size > 0:
            if short == 0:
                break
            g0 = hk[0]
            i = hn[0]
            size = heap_pop(hk, hn, size)
            v = nodes[i]
            s = local[i]
            if moved[i] or not (load[s] > cap if mode == 0 else load[s] - node_weights[v] >= floor):
                continue
            g, t = _cheapest(i, indptr, indices, weights, node_weights, parts, nodes, local, load, active,
                             cap, floor, mode, conn, mark, touched)
            if t < 0:
                continue
            if g != g0:
                key[i] = g
                size = heap_push(hk, hn, size, g, i)
                continue
            was_s = load[s] > cap if mode == 0 else load[s] < floor
            was_t = load[t] > cap if mode == 0 else load[t] < floor
            load[s] -= node_weights[v]
            load[t] += node_weights[v]
            short += (load[s] > cap if mode == 0 else load[s] < floor) - was_s
            short += (load[t] > cap if mode == 0 else load[t] < floor) - was_t
            local[i] = t
            moved[i] = True
            loss[0] -= g
            for q in range(indptr[v], indptr[v + 1]):  # neighbours' losses changed: re-key them
                j = indices[q] if L == parts.shape[0] else np.searchsorted(nodes, indices[q])
                if j >= L or nodes[j] != indices[q] or moved[j]:
                    continue
                sj = local[j]
                if active[sj] and (load[sj] > cap if mode == 0 else load[sj] > floor):
                    if indptr[indices[q] + 1] - indptr[indices[q]] > rescan_degree:
                        key[j] += 2 * weights[q]
                        size = heap_push(hk, hn, size, key[j], j)
                        continue
                    gj, tj = _cheapest(j, indptr, indices, weights, node_weights, parts, nodes, local, load,
                                       active, cap, floor, mode, conn, mark, touched)
                    if tj >= 0:
                        key[j] = gj
                        size = heap_push(hk, hn, size, gj, j)
    return local, loss[0]


def rebalance(graph, parts, rule, weights=None, shards=None):
    """Move lowest-loss nodes until every shard satisfies ``rule`` (when the greedy moves can).

    Parameters
    ----------
    graph : Graph
    parts : ndarray of int, shape (n,)
        Start partition (not modified).
    rule : BalanceRule
        Its ``cap`` and ``floor`` are the bounds.
    weights : ndarray of int64, optional
        Fixed-point edge weights (default :func:`fixed_point_weights`).
    shards : sequence of int, optional
        Only these shards give or take nodes (default: all).

    Returns
    -------
    parts : ndarray of int64
    stats : dict
        ``moved`` (nodes moved), ``cut_before``, ``cut_after``, ``balanced``.

    References
    ----------
    C. M. Fiduccia and R. M. Mattheyses, "A linear-time heuristic for improving
    network partitions", Proc. 19th Design Automation Conference (DAC), 1982.
    """
    k = rule.k
    parts = check_partition(graph, parts, k)
    if weights is None:
        weights = fixed_point_weights(graph)[0]
    nw = graph.node_weight_array()
    loads = np.bincount(parts, weights=nw, minlength=k).astype(np.int64)
    active = np.zeros(k, dtype=bool)
    if shards is None:
        active[:] = True
    else:
        active[np.asarray(list(shards), dtype=np.int64)] = True
    nodes = np.flatnonzero(active[parts]).astype(np.int64)
    new, _ = rebalance_kernel(graph.indptr, graph.indices, weights, nw, parts, nodes, loads, active,
                              rule.cap, rule.floor)
    out = parts.copy()
    out[nodes] = new
    new_loads = np.bincount(out, weights=nw, minlength=k)
    stats = {
        "moved": int(np.count_nonzero(out != parts)),
        "cut_before": float(edge_cut(graph, parts)),
        "cut_after": float(edge_cut(graph, out)),
        "balanced": bool(rule.check(new_loads)),
    }
    return out, stats
