"""Min-cut improvement of the boundary between two shards, by maximum flow on a boundary region.

For a shard pair ``(a, b)`` the region is grown by breadth-first search from
the boundary (nodes of ``a`` with a neighbour in ``b`` and vice versa), at most
``layers`` layers deep on each side and at most ``region · W / k`` node weight
per side, always leaving at least one node of each shard outside. The rest of
``a`` is contracted into the source, the rest of ``b`` into the sink; edges to
other shards are left out (they are cut whichever side a node takes). A minimum
source–sink cut of this network (``scipy.sparse.csgraph.maximum_flow``, Dinic's
algorithm) is then the smallest ``a``–``b`` cut among all ways of reassigning
the region — the flow-based refinement of Sanders & Schulz (ESA 2011).

Capacities must be int32: integer (fixed-point) edge weights are used as they
are when the network's total capacity fits; otherwise every capacity is scaled
by the same factor and rounded down (kept at least 1 for positive weights),
and the proposal is judged by its exactly recounted cut. Of the two extreme
minimum cuts (nodes reachable from the source in the residual network; nodes
that cannot reach the sink) the one whose loads break the bounds less is taken
(tie: the source-reachable one). If its loads break the rule, the cheapest
nodes are moved back across (:func:`partition.refine.rebalance.rebalance_kernel`
on the pair). The new sides are kept only if the rule holds and the ``a``–``b``
cut strictly dropped; otherwise the pair keeps its old sides.

Units are disjoint pairs, as for the pairwise moves: a unit reads and writes
only the nodes of its two shards, so the units of a round are independent.
"""

from __future__ import annotations

import time

import numba
import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import breadth_first_order, maximum_flow

from partition.errors import ParameterError
from partition.refine.rebalance import rebalance_kernel
from partition.refine.rounds import PAIR_SCHEDULES as SCHEDULES
from partition.refine.units import fixed_point_weights, refine_pairs, shard_index

__all__ = ["boundary_region", "pair_min_cut", "flow_pair", "refine_flow"]

_INT32_MAX = 2**31 - 1


@numba.njit(cache=True, nogil=True)
def boundary_region(indptr, indices, node_weights, parts, a, b, nodes, layers, budget_a, budget_b):
    """Nodes within ``layers`` BFS layers of the ``(a, b)`` boundary, each side within its budget (numba kernel).

    Parameters
    ----------
    indptr, indices, node_weights : ndarray
        The graph.
    parts : ndarray of int, shape (n,)
    a, b : int
    nodes : ndarray of int, shape (L,)
        All nodes of ``a`` and ``b``, ascending.
    layers : int
        Depth of the search on each side (1 = boundary nodes only).
    budget_a, budget_b : int
        Most node weight taken from each side.

    Returns
    -------
    ndarray of int64
        Region nodes, ascending.
    """
    L = nodes.shape[0]
    inreg = np.zeros(L, dtype=np.bool_)
    queue = np.empty(L, dtype=np.int64)
    depth = np.zeros(L, dtype=np.int64)
    used = np.zeros(2, dtype=np.int64)
    count = np.zeros(2, dtype=np.int64)
    total = np.zeros(2, dtype=np.int64)
    budget = (budget_a, budget_b)
    for i in range(L):
        total[0 if parts[nodes[i]] == a else 1] += 1
    head = 0
    tail = 0
    for i in range(L):  # boundary nodes in id order
        v = nodes[i]
        sv = 0 if parts[v] == a else 1
        other = b if sv == 0 else a
        for q in range(indptr[v], indptr[v + 1]):
            if parts[indices[q]] == other:
                if used[sv] + node_weights[v] <= budget[sv] and count[sv] + 1 < total[sv]:
                    inreg[i] = True
                    used[sv] += node_weights[v]
                    count[sv] += 1
                    queue[tail] = i
                    depth[i] = 1
                    tail += 1
                break
    while head < tail:
        i = queue[head]
        head += 1
        if depth[i] >= layers:
            continue
        v = nodes[i]
        sv = 0 if parts[v] == a else 1
        own = a if sv == 0 else b
        for q in range(indptr[v], indptr[v + 1]):
            u = indices[q]
            if parts[u] != own:
                continue
            j = np.searchsorted(nodes, u)
            if inreg[j] or used[sv] + node_weights[u] > budget[sv] or count[sv] + 1 >= total[sv]:
                continue
            inreg[j] = True
            used[sv] += node_weights[u]
            count[sv] += 1
            depth[j] = depth[i] + 1
            queue[tail] = j
            tail += 1
    out = np.empty(tail, dtype=np.int64)
    c = 0
    for i in range(L):
        if inreg[i]:
            out[c] = nodes[i]
            c += 1
    return out


def pair_min_cut(graph, parts, a, b, region, weights=None):
    """Minimum ``a``–``b`` cut over all reassignments of ``region`` (rest of ``a`` = source, rest of ``b`` = sink).

    Parameters
    ----------
    graph : Graph
    parts : ndarray of int, shape (n,)
    a, b : int
    region : ndarray of int
        Nodes of ``a`` or ``b``, ascending, leaving at least one node of each
        shard outside (otherwise that terminal has no edges: still a valid cut).
    weights : ndarray of int64, optional
        Integer edge weights per CSR entry (default :func:`fixed_point_weights`).

    Returns
    -------
    sides : list of ndarray of bool
        For each of the two extreme minimum cuts, ``True`` where the region
        node goes to ``b`` (source-reachable cut first).
    cut : int
        The minimum cut value in int32 capacity units (equal to the integer
        weight when no scaling was needed).
    scale : float
        The factor applied to the weights to fit int32 (1.0: none).

    References
    ----------
    P. Sanders and C. Schulz, "Engineering multilevel graph partitioning
    algorithms", Proc. 19th European Symposium on Algorithms (ESA), 2011.
    E. A. Dinic, "Algorithm for solution of a problem of maximum flow in a
    network with power estimation", Soviet Math. Doklady 11, 1970.
    """
    w = fixed_point_weights(graph)[0] if weights is None else weights
    parts = np.asarray(parts)
    region = np.asarray(region, dtype=np.int64)
    r = region.shape[0]
    src_t, sink_t = r, r + 1
    deg = graph.indptr[region + 1] - graph.indptr[region]
    rows = np.repeat(np.arange(r, dtype=np.int64), deg)
    entry = np.repeat(graph.indptr[region] - np.cumsum(np.concatenate(([0], deg[:-1]))), deg) + np.arange(rows.size)
    nbr = graph.indices[entry].astype(np.int64)
    ew = w[entry]
    pos = np.minimum(np.searchsorted(region, nbr), max(r - 1, 0))
    inside = (region[pos] == nbr) if r else np.zeros(0, dtype=bool)
    col = np.where(inside, pos, -1)
    pn = parts[nbr]
    col[~inside & (pn == a)] = src_t
    col[~inside & (pn == b)] = sink_t
    keep = col >= 0
    rows, col, ew = rows[keep], col[keep], ew[keep]
    term = col >= r  # edges to a terminal appear once: add the reverse arc
    u = np.concatenate((rows, col[term]))
    v = np.concatenate((col, rows[term]))
    c = np.concatenate((ew, ew[term])).astype(np.int64)
    cap = sp.csr_matrix((c, (u, v)), shape=(r + 2, r + 2))
    cap.sum_duplicates()
    scale = 1.0
    out_of_source = int(cap[src_t].sum())
    if cap.data.size and max(out_of_source, int(cap.data.max())) > _INT32_MAX // 2:
        scale = (_INT32_MAX // 2) / max(out_of_source, int(cap.data.max()))
        data = np.floor(cap.data * scale).astype(np.int64)
        cap.data = np.where(cap.data > 0, np.maximum(data, 1), 0)
    cap.data = cap.data.astype(np.int32)
    res = maximum_flow(cap, src_t, sink_t)
    resid = (cap - res.flow).tocsr()
    resid.data = (resid.data > 0).astype(np.int8)
    resid.eliminate_zeros()
    reach_s = np.zeros(r + 2, dtype=bool)
    reach_s[breadth_first_order(resid, src_t, directed=True, return_predecessors=False)] = True
    reach_t = np.zeros(r + 2, dtype=bool)
    reach_t[breadth_first_order(resid.T.tocsr(), sink_t, directed=True, return_predecessors=False)] = True
    return [~reach_s[:r], reach_t[:r]], int(res.flow_value), scale


def _pair_cut(graph, w, parts, a, b, nodes):
    """Integer weight of the edges between shards a and b (nodes = all nodes of a and b)."""
    deg = graph.indptr[nodes + 1] - graph.indptr[nodes]
    src = np.repeat(nodes, deg)
    entry = np.repeat(graph.indptr[nodes] - np.cumsum(np.concatenate(([0], deg[:-1]))), deg) + np.arange(src.size)
    pu, pv = parts[src], parts[graph.indices[entry]]
    return int(w[entry][(pu == a) & (pv == b)].sum())


def flow_pair(graph, parts, a, b, nodes, rule, weights, layers=3, region=0.25):
    """One min-cut improvement of the pair ``(a, b)``, applied to ``parts`` in place if accepted.

    Parameters
    ----------
    graph : Graph
    parts : ndarray of int64, shape (n,)
        Modified in place (only nodes of ``a`` and ``b``).
    a, b : int
    nodes : ndarray of int64
        All nodes of ``a`` and ``b``, ascending.
    rule : BalanceRule
    weights : ndarray of int64
        Integer edge weights per CSR entry.
    layers : int
        BFS depth of the region on each side.
    region : float
        Most node weight per side, as a fraction of the average shard weight.

    Returns
    -------
    int
        Decrease of the integer ``a``–``b`` cut (0 when rejected).
    """
    nw = graph.node_weight_array()
    budget = int(np.ceil(region * rule.total / rule.k))
    reg = boundary_region(graph.indptr, graph.indices, nw, parts, a, b, nodes, layers, budget, budget)
    if reg.size == 0:
        return 0
    old_cut = _pair_cut(graph, weights, parts, a, b, nodes)
    old_side = parts[reg].copy()
    old_all = parts[nodes].copy()
    sides, _, _ = pair_min_cut(graph, parts, a, b, reg, weights)
    load_a = int(nw[nodes][parts[nodes] == a].sum())
    load_b = int(nw[nodes].sum()) - load_a

    def violation(to_b):
        moved_b = int(nw[reg][to_b & (old_side == a)].sum()) - int(nw[reg][~to_b & (old_side == b)].sum())
        la, lb = load_a - moved_b, load_b + moved_b
        return sum(max(x - rule.cap, 0) + max(rule.floor - x, 0) for x in (la, lb))

    viol = [violation(s) for s in sides]
    to_b = sides[0] if viol[0] <= viol[1] else sides[1]
    parts[reg] = np.where(to_b, b, a)
    loads = np.zeros(rule.k, dtype=np.int64)
    loads[a] = int(nw[nodes][parts[nodes] == a].sum())
    loads[b] = int(nw[nodes].sum()) - loads[a]
    if not rule.check(loads[[a, b]]):
        active = np.zeros(rule.k, dtype=bool)
        active[[a, b]] = True
        new, _ = rebalance_kernel(graph.indptr, graph.indices, weights, nw, parts, nodes, loads, active,
                                  rule.cap, rule.floor)
        parts[nodes] = new
    new_cut = _pair_cut(graph, weights, parts, a, b, nodes)
    la = int(nw[nodes][parts[nodes] == a].sum())
    if new_cut < old_cut and rule.check(np.array([la, int(nw[nodes].sum()) - la])):
        return old_cut - new_cut
    parts[nodes] = old_all
    return 0


def refine_flow(graph, parts, rule, schedule="round_robin", max_rounds=None, seed=0, layers=3, region=0.25,
                weights=None, tol=0.0):
    """Min-cut improvement of shard pairs, in rounds of disjoint pairs.

    Parameters
    ----------
    graph : Graph
    parts : ndarray of int, shape (n,)
        Start partition (not modified).
    rule : BalanceRule
    schedule : {"round_robin", "line", "matched"}
        As in :func:`partition.refine.fm.refine_fm`.
    max_rounds : int, optional
        As in :func:`partition.refine.rounds.pair_rounds`; stops earlier when no
        pair can gain.
    seed : int
        Orders the round-robin rounds (``numpy.random.default_rng(seed)``).
    layers : int, default 3
        BFS depth of each region side.
    region : float, default 0.25
        Most node weight per region side, as a fraction of ``W / k``.
    weights : ndarray of int64, optional
        Integer edge weights (default :func:`fixed_point_weights`).
    tol : float, default 0
        Stop after two rounds that each removed at most ``tol`` times the cut
        (:func:`partition.refine.rounds.pair_rounds`).

    Returns
    -------
    parts : ndarray of int64
    stats : dict
        ``cut_before``, ``cut_after``, ``rounds`` (pairs tried and gain of each
        round), ``balanced``, ``seconds``.

    Raises
    ------
    ParameterError
        For an unknown schedule, ``layers < 1`` or ``region <= 0``.

    References
    ----------
    P. Sanders and C. Schulz, "Engineering multilevel graph partitioning
    algorithms", Proc. 19th European Symposium on Algorithms (ESA), 2011.
    """
    t0 = time.perf_counter()
    if schedule not in SCHEDULES:
        raise ParameterError(f"unknown schedule {schedule!r}; choose one of {', '.join(SCHEDULES)}")
    if int(layers) < 1 or not region > 0:
        raise ParameterError(f"layers must be >= 1 and region > 0, got {layers!r} and {region!r}")
    k = rule.k

    def make_round(weights):
        def run_round(current, pairs):
            current = current.copy()
            order, bounds = shard_index(current, k)
            gains = []
            for a, b in pairs:
                nodes = np.sort(np.concatenate((order[bounds[a]:bounds[a + 1]], order[bounds[b]:bounds[b + 1]])))
                gains.append(flow_pair(graph, current, a, b, nodes, rule, weights, layers, region))
            return current, gains, [g > 0 for g in gains]

        return run_round

    return refine_pairs(graph, parts, rule, weights, make_round, schedule, max_rounds, seed, tol, t0)
