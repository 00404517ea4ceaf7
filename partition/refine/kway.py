"""Global k-way Fiduccia–Mattheyses passes: a sequential kernel over the whole graph.

Each boundary node's candidate move is to the adjacent shard with the largest
gain among those with room; moves are taken best first from one max-heap, the
moved node is locked, its neighbours' candidates are updated (lazy heap:
an entry whose gain is stale is recomputed and pushed again when it surfaces),
negative gains are allowed and each pass rolls back to its best prefix
(Fiduccia & Mattheyses 1982, extended from two sides to k shards by taking the
best target per node). Unlike the pairwise units this is one sequential loop,
so an engine that spreads work over tasks runs it on the driver.

Cost control: when a node moves, a neighbour of degree at most
``rescan_degree`` gets its best move recomputed; a higher-degree neighbour
instead has its heap key raised by the most its gain can have grown (twice the
edge weight when it sat in the mover's old shard, once otherwise; a neighbour
in the mover's new shard only loses gain), and its exact gain is computed when
the entry reaches the top (pushed again if lower). So hubs are not rescanned
after every move of one of their many neighbours. A shard that gains room
makes moves into it possible that a raised key does not reflect until the
node is next examined: the pass is a heuristic, and every move it makes keeps
the bounds.
"""

from __future__ import annotations

import numba
import numpy as np

from partition.refine.units import heap_pop, heap_push

__all__ = ["fm_kway"]


@numba.njit(cache=True, nogil=True)
def _best_target(v, indptr, indices, weights, node_weights, p, load, conn, mark, touched, cap, floor):
    """Best allowed other shard for node v: (gain, target); target -1 when none (or v is interior)."""
    nt = 0
    for q in range(indptr[v], indptr[v + 1]):
        s = p[indices[q]]
        if not mark[s]:
            mark[s] = True
            touched[nt] = s
            nt += 1
        conn[s] += weights[q]
    own = p[v]
    w = node_weights[v]
    best_t = -1
    best_g = conn[own] * 0
    for r in range(nt):
        t = touched[r]
        if t == own or load[t] + w > cap or load[own] - w < floor:
            continue
        g = conn[t] - conn[own]
        if best_t < 0 or g > best_g or (g == best_g and t < best_t):
            best_g = g
            best_t = t
    for r in range(nt):
        conn[touched[r]] = 0
        mark[touched[r]] = False
    return best_g, best_t


@numba.njit(cache=True, nogil=True)
def fm_kway(indptr, indices, weights, node_weights, parts, k, cap, floor, max_passes, max_stall=-1,
            rescan_degree=64):
    """Global k-way Fiduccia–Mattheyses passes (numba kernel; one sequential pass over the graph).

    Each boundary node's candidate move is to the adjacent shard with the
    largest gain among those with room (``load + w <= cap`` and the source stays
    ``>= floor``; ties to the smaller shard). Moves are taken best first, the
    moved node is locked, its neighbours' candidates are updated (see the
    module docstring), negative gains are allowed, and each pass rolls back to its best prefix. Every state
    along the way satisfies the bounds, so a balanced start stays balanced.

    Parameters
    ----------
    indptr, indices, weights, node_weights : ndarray
        The graph in CSR form with edge weights per entry and node weights.
    parts : ndarray of int, shape (n,)
        Start partition (not modified).
    k, cap, floor : int
        Number of shards and the weight bounds of every shard.
    max_passes, max_stall : int
        Most passes; end a pass after ``max_stall`` moves without a new best (-1: never).
    rescan_degree : int, default 64
        Neighbours of a moved node up to this degree are recomputed at once;
        higher-degree ones get an upper-bound key.

    Returns
    -------
    new_parts : ndarray of int64, shape (n,)
    gain : scalar of the weights' dtype
        Total decrease of the weight cut.

    References
    ----------
    C. M. Fiduccia and R. M. Mattheyses, "A linear-time heuristic for improving
    network partitions", Proc. 19th Design Automation Conference (DAC), 1982.
    """
    n = parts.shape[0]
    p = parts.astype(np.int64)
    load = np.zeros(k, dtype=np.int64)
    for v in range(n):
        load[p[v]] += node_weights[v]
    conn = np.zeros(k, dtype=weights.dtype)
    mark = np.zeros(k, dtype=np.bool_)
    touched = np.empty(k, dtype=np.int64)
    tot = np.zeros(3, dtype=weights.dtype)
    hsize = n + indices.shape[0] + 1
    hk = np.empty(hsize, dtype=weights.dtype)
    hn = np.empty(hsize, dtype=np.int64)
    locked = np.zeros(n, dtype=np.bool_)
    moved = np.empty(n, dtype=np.int64)
    came = np.empty(n, dtype=np.int64)
    key = np.zeros(n, dtype=weights.dtype)
    has = np.zeros(n, dtype=np.bool_)
    for _ in range(max_passes):
        size = 0
        locked[:] = False
        for v in range(n):
            g, t = _best_target(v, indptr, indices, weights, node_weights, p, load, conn, mark, touched, cap, floor)
            has[v] = t >= 0
            if t >= 0:
                key[v] = g
                size = heap_push(hk, hn, size, g, v)
        tot[0] = 0
        tot[1] = 0
        nmoves = 0
        best_n = 0
        while size > 0:
            g0 = hk[0]
            u = hn[0]
            size = heap_pop(hk, hn, size)
            if locked[u] or not has[u] or g0 != key[u]:
                continue
            g, t = _best_target(u, indptr, indices, weights, node_weights, p, load, conn, mark, touched, cap, floor)
            if t < 0:
                has[u] = False
                continue
            if g != g0:
                key[u] = g
                size = heap_push(hk, hn, size, g, u)
                continue
            src = p[u]
            came[nmoves] = src
            load[src] -= node_weights[u]
            load[t] += node_weights[u]
            p[u] = t
            locked[u] = True
            moved[nmoves] = u
            nmoves += 1
            tot[0] += g
            for q in range(indptr[u], indptr[u + 1]):
                j = indices[q]
                if locked[j] or p[j] == t:
                    continue  # a neighbour in t only loses gain: its key stays an upper bound
                if has[j] and indptr[j + 1] - indptr[j] > rescan_degree:
                    key[j] += 2 * weights[q] if p[j] == src else weights[q]
                    size = heap_push(hk, hn, size, key[j], j)
                else:
                    gj, tj = _best_target(j, indptr, indices, weights, node_weights, p, load, conn, mark, touched, cap, floor)
                    was = has[j]
                    has[j] = tj >= 0
                    if tj >= 0 and (not was or gj != key[j]):
                        key[j] = gj
                        size = heap_push(hk, hn, size, gj, j)
            if tot[0] > tot[1]:
                tot[1] = tot[0]
                best_n = nmoves
            elif max_stall >= 0 and nmoves - best_n > max_stall:
                break
        for r in range(nmoves - 1, best_n - 1, -1):
            u = moved[r]
            load[p[u]] -= node_weights[u]
            load[came[r]] += node_weights[u]
            p[u] = came[r]
        tot[2] += tot[1]
        if best_n == 0:
            break
    return p, tot[2]
