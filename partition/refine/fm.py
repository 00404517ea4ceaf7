"""Pairwise Fiduccia–Mattheyses refinement of a balanced partition, in rounds of disjoint shard pairs.

A unit of work is one pair of shards ``(a, b)``: the nodes of ``a`` and ``b``
may move between the two, every other node is fixed. A pass repeatedly moves
the unlocked node with the largest gain (cut reduction) whose move is allowed,
locks it and updates its neighbours' gains, keeps going through negative gains
(that is how it climbs out of local optima), and finally rolls back to the best
prefix of moves; passes repeat until one finds nothing (Kernighan & Lin 1970
for the two-sided exchange idea, Fiduccia & Mattheyses 1982 for single moves
with gain updates). Gains are integers (fixed-point edge weights, see
:func:`partition.refine.units.fixed_point_weights`), held in two max-heaps (one per direction) with
lazy deletion.

Balance. A move is allowed when both shards stay within their bounds widened
by a slack of ``s`` = the largest node weight of the unit, or when it lessens
the total violation of the (unwidened) bounds. So with unit weights and ε = 0
(``floor = cap``) the pass alternates directions, one node of slack at a time.
A prefix only counts as "best" by the lexicographic order (violation of the
true bounds, −gain, number of moves): from a balanced start the kept prefix is
always balanced, and from an unbalanced start the violation never grows.

Tie rules (part of the result, identical in every engine): the larger gain
first; between the two directions, the move out of the side with the larger
``load − cap``; then the smaller node index. Every movable node starts in
the heap of its side (interior nodes have negative gains and are reached only
late in a pass, which ``max_stall`` usually ends first).

Independence of the units of a round: a unit reads the shard of a fixed
neighbour only to ask "is it in ``a``, in ``b``, or elsewhere"; other units of
the round move nodes only between their own shards, none of which is ``a`` or
``b``, so their moves change no answer this unit sees. Running the units of a
round one after another in any order, or in parallel from the start-of-round
state, gives the same partition.
"""

from __future__ import annotations

import time
from concurrent.futures import ThreadPoolExecutor

import numba
import numpy as np

from partition.errors import ParameterError
from partition.refine.kway import fm_kway
from partition.refine.rounds import PAIR_SCHEDULES as SCHEDULES
from partition.refine.units import (
    check_partition,
    edge_cut,
    fixed_point_weights,
    heap_pop,
    heap_push,
    refine_pairs,
    shard_index,
)

__all__ = ["fm_pair", "fm_round", "refine_fm", "refine_fm_kway"]

@numba.njit(cache=True, nogil=True, inline="always")
def _viol(l0, l1, cap0, cap1, floor0, floor1):
    return (max(l0 - cap0, 0) + max(floor0 - l0, 0)) + (max(l1 - cap1, 0) + max(floor1 - l1, 0))


@numba.njit(cache=True, nogil=True)
def _clean_top(hk, hn, size, gain, locked):
    while size > 0:
        u = hn[0]
        if locked[u] or hk[0] != gain[u]:
            size = heap_pop(hk, hn, size)
        else:
            break
    return size


@numba.njit(cache=True, nogil=True)
def fm_pair(indptr, indices, weights, node_weights, parts, a, b, nodes,
            cap_a, cap_b, floor_a, floor_b, max_passes, max_stall=-1):
    """Fiduccia–Mattheyses passes on the shard pair ``(a, b)`` (numba kernel).

    Parameters
    ----------
    indptr, indices : ndarray
        CSR of the symmetric graph (rows sorted or not).
    weights : ndarray, shape (len(indices),)
        Edge weight per CSR entry; integer dtype gives exact gains.
    node_weights : ndarray of int64, shape (n,)
    parts : ndarray of int, shape (n,)
        Current shard of every node; only read.
    a, b : int
        The two shards.
    nodes : ndarray of int, shape (L,)
        The movable nodes, each in ``a`` or ``b`` (distinct). Nodes of ``a`` and
        ``b`` not listed are fixed.
    cap_a, cap_b, floor_a, floor_b : int
        Bounds on the weight of the listed nodes placed in ``a`` / ``b`` (the
        caller subtracts the weight of unlisted nodes of the shard).
    max_passes : int
        Most passes; stops earlier when a pass improves nothing.
    max_stall : int, default -1
        End a pass after this many moves without a new best prefix (-1: never).

    Returns
    -------
    new_parts : ndarray of int64, shape (L,)
        New shard (``a`` or ``b``) of each listed node, in the order of ``nodes``.
    gain : scalar of the weights' dtype
        Total decrease of the weight cut between ``a`` and ``b``.

    Raises
    ------
    ValueError
        When a listed node is in neither ``a`` nor ``b``.

    References
    ----------
    C. M. Fiduccia and R. M. Mattheyses, "A linear-time heuristic for improving
    network partitions", Proc. 19th Design Automation Conference (DAC), 1982.
    B. W. Kernighan and S. Lin, "An efficient heuristic procedure for
    partitioning graphs", Bell System Technical Journal 49(2), 1970.
    """
    L = nodes.shape[0]
    tot = np.zeros(4, dtype=weights.dtype)  # 0: current, 1: best, 2: total gain
    out = np.empty(L, dtype=np.int64)
    if L == 0:
        return out, tot[2]
    order = np.argsort(nodes)
    sn = nodes[order]
    side = np.empty(L, dtype=np.int8)
    wn = np.empty(L, dtype=np.int64)
    load0 = 0
    load1 = 0
    slack = 0
    nnz = 0
    for i in range(L):
        v = sn[i]
        if parts[v] == a:
            side[i] = 0
            load0 += node_weights[v]
        elif parts[v] == b:
            side[i] = 1
            load1 += node_weights[v]
        else:
            raise ValueError("fm_pair: a listed node is in neither shard of the pair")
        wn[i] = node_weights[v]
        slack = max(slack, wn[i])
        nnz += indptr[v + 1] - indptr[v]
    # Local CSR over movable neighbours; fixed neighbours in a or b only shift gains.
    lptr = np.zeros(L + 1, dtype=np.int64)
    lidx = np.empty(nnz, dtype=np.int64)
    lw = np.empty(nnz, dtype=weights.dtype)
    fix = np.zeros(L, dtype=weights.dtype)  # w(fixed in b) - w(fixed in a)
    e = 0
    for i in range(L):
        v = sn[i]
        for q in range(indptr[v], indptr[v + 1]):
            u = indices[q]
            pu = parts[u]
            if pu != a and pu != b:
                continue
            j = np.searchsorted(sn, u)
            if j < L and sn[j] == u:
                lidx[e] = j
                lw[e] = weights[q]
                e += 1
            elif pu == a:
                fix[i] -= weights[q]
            else:
                fix[i] += weights[q]
        lptr[i + 1] = e
    caps = (cap_a, cap_b)
    floors = (floor_a, floor_b)
    gain = np.empty(L, dtype=weights.dtype)
    locked = np.zeros(L, dtype=np.bool_)
    hsize = L + e + 1  # initial entries plus one per gain update
    hk0 = np.empty(hsize, dtype=weights.dtype)
    hn0 = np.empty(hsize, dtype=np.int64)
    hk1 = np.empty(hsize, dtype=weights.dtype)
    hn1 = np.empty(hsize, dtype=np.int64)
    moved = np.empty(L, dtype=np.int64)
    for _ in range(max_passes):
        s0 = 0
        s1 = 0
        for i in range(L):
            locked[i] = False
            g = fix[i] if side[i] == 0 else -fix[i]
            for q in range(lptr[i], lptr[i + 1]):
                if side[lidx[q]] != side[i]:
                    g += lw[q]
                else:
                    g -= lw[q]
            gain[i] = g
            if side[i] == 0:
                s0 = heap_push(hk0, hn0, s0, g, i)
            else:
                s1 = heap_push(hk1, hn1, s1, g, i)
        viol = _viol(load0, load1, caps[0], caps[1], floors[0], floors[1])
        best_viol = viol
        tot[0] = 0
        tot[1] = 0
        nmoves = 0
        best_n = 0
        while True:
            s0 = _clean_top(hk0, hn0, s0, gain, locked)
            s1 = _clean_top(hk1, hn1, s1, gain, locked)
            ok0 = False
            ok1 = False
            if s0 > 0:  # a -> b
                w = wn[hn0[0]]
                nv = _viol(load0 - w, load1 + w, caps[0], caps[1], floors[0], floors[1])
                ok0 = (load1 + w <= caps[1] + slack and load0 - w >= floors[0] - slack) or nv < viol
            if s1 > 0:  # b -> a
                w = wn[hn1[0]]
                nv = _viol(load0 + w, load1 - w, caps[0], caps[1], floors[0], floors[1])
                ok1 = (load0 + w <= caps[0] + slack and load1 - w >= floors[1] - slack) or nv < viol
            if not ok0 and not ok1:
                break
            if ok0 and ok1:
                if hk0[0] != hk1[0]:
                    pick = 0 if hk0[0] > hk1[0] else 1
                elif load0 - caps[0] != load1 - caps[1]:
                    pick = 0 if load0 - caps[0] > load1 - caps[1] else 1
                else:
                    pick = 0 if hn0[0] < hn1[0] else 1
            else:
                pick = 0 if ok0 else 1
            if pick == 0:
                i = hn0[0]
                s0 = heap_pop(hk0, hn0, s0)
                load0 -= wn[i]
                load1 += wn[i]
            else:
                i = hn1[0]
                s1 = heap_pop(hk1, hn1, s1)
                load1 -= wn[i]
                load0 += wn[i]
            tot[0] += gain[i]
            old = side[i]
            side[i] = 1 - old
            locked[i] = True
            moved[nmoves] = i
            nmoves += 1
            for q in range(lptr[i], lptr[i + 1]):
                j = lidx[q]
                if locked[j]:
                    continue
                if side[j] == old:
                    gain[j] += 2 * lw[q]
                else:
                    gain[j] -= 2 * lw[q]
                if side[j] == 0:
                    s0 = heap_push(hk0, hn0, s0, gain[j], j)
                else:
                    s1 = heap_push(hk1, hn1, s1, gain[j], j)
            viol = _viol(load0, load1, caps[0], caps[1], floors[0], floors[1])
            if viol < best_viol or (viol == best_viol and tot[0] > tot[1]):
                best_viol = viol
                tot[1] = tot[0]
                best_n = nmoves
            elif max_stall >= 0 and nmoves - best_n > max_stall:
                break
        for t in range(nmoves - 1, best_n - 1, -1):
            i = moved[t]
            if side[i] == 0:
                load0 -= wn[i]
                load1 += wn[i]
            else:
                load1 -= wn[i]
                load0 += wn[i]
            side[i] = 1 - side[i]
        tot[2] += tot[1]
        if best_n == 0:
            break
    for i in range(L):
        out[order[i]] = a if side[i] == 0 else b
    return out, tot[2]


# --- drivers ------------------------------------------------------------------
def fm_round(graph, parts, pairs, rule, weights=None, max_passes=8, max_stall=256, n_jobs=1, stall_fraction=0.0):
    """Refine every pair of one round; returns ``(new_parts, gains)``.

    With ``n_jobs == 1`` the units run one after another in the order of
    ``pairs``, each writing its result before the next starts; with more jobs
    they run in threads from the start-of-round partition. Both give the same
    partition because the pairs are disjoint (see the module docstring).

    Parameters
    ----------
    graph : Graph
    parts : ndarray of int, shape (n,)
    pairs : list of (int, int)
        Disjoint shard pairs.
    rule : BalanceRule
        Supplies ``cap`` and ``floor`` for every shard.
    weights : ndarray of int64, optional
        Edge weights per CSR entry (default :func:`fixed_point_weights`).
    max_passes, max_stall, n_jobs : int
    stall_fraction : float, default 0
        A unit of ``L`` movable nodes ends a pass after
        ``max(max_stall, ⌊stall_fraction · L⌋)`` moves without a new best
        (``max_stall < 0``: never), so large units search longer.

    Returns
    -------
    new_parts : ndarray of int64
    gains : list
        Cut decrease of each pair, in the unit of ``weights``.

    Raises
    ------
    ParameterError
        When the pairs are not disjoint or name a shard outside ``[0, k)``.
    """
    k = rule.k
    parts = check_partition(graph, parts, k).copy()
    flat = [s for pair in pairs for s in pair]
    if len(set(flat)) != len(flat) or any(s < 0 or s >= k for s in flat):
        raise ParameterError(f"the pairs of a round must be disjoint shards in [0, {k}): {pairs}")
    w = fixed_point_weights(graph)[0] if weights is None else weights
    nw = graph.node_weight_array()
    order, bounds = shard_index(parts, k)

    def unit(pair):
        a, b = pair
        nodes = np.concatenate((order[bounds[a]:bounds[a + 1]], order[bounds[b]:bounds[b + 1]]))
        stall = max_stall if max_stall < 0 else max(int(max_stall), int(stall_fraction * nodes.shape[0]))
        new, g = fm_pair(graph.indptr, graph.indices, w, nw, parts, a, b, nodes,
                         rule.cap, rule.cap, rule.floor, rule.floor, max_passes, stall)
        return nodes, new, g

    gains = []
    if n_jobs <= 1:
        for pair in pairs:
            nodes, new, g = unit(pair)
            parts[nodes] = new
            gains.append(g)
    else:
        with ThreadPoolExecutor(max_workers=n_jobs) as pool:
            results = list(pool.map(unit, pairs))
        for nodes, new, g in results:
            parts[nodes] = new
            gains.append(g)
    return parts, gains


def refine_fm(graph, parts, rule, schedule="round_robin", max_rounds=None, seed=0,
              max_passes=8, max_stall=256, n_jobs=1, weights=None, stall_fraction=0.0, tol=0.0):
    """Pairwise Fiduccia–Mattheyses refinement in rounds of disjoint shard pairs.

    Parameters
    ----------
    graph : Graph
    parts : ndarray of int, shape (n,)
        Start partition (not modified).
    rule : BalanceRule
        The balance rule to keep (its ``cap`` and ``floor``).
    schedule : {"round_robin", "line", "matched"}
        Where the pairs of each round come from (:mod:`partition.refine.schedule`):
        all pairs in a seeded order of round-robin rounds, line neighbours, or a
        greedy matching of the start-of-round shard cut matrix; pairs that
        cannot gain are skipped (:func:`partition.refine.rounds.pair_rounds`).
    max_rounds : int, optional
        Default: one round-robin tour (``k - 1`` or ``k`` rounds), ``k`` rounds
        for ``matched``, 4 for ``line``. Stops earlier when no pair can gain.
    seed : int
        Orders the round-robin rounds (``numpy.random.default_rng(seed)``).
    max_passes, max_stall, stall_fraction
        Passed to :func:`fm_pair` (see :func:`fm_round`).
    tol : float, default 0
        Stop after two rounds in a row that each removed at most ``tol`` times
        the cut at their start (:func:`partition.refine.rounds.pair_rounds`).
    n_jobs : int
        Threads per round (the result does not depend on it).
    weights : ndarray of int64, optional
        Fixed-point edge weights (default :func:`fixed_point_weights`).

    Returns
    -------
    parts : ndarray of int64
    stats : dict
        ``cut_before``, ``cut_after`` (original weights), ``rounds`` (pairs and
        gain of each round), ``balanced`` (the rule holds at the end), ``seconds``.

    Raises
    ------
    ParameterError
        For an unknown schedule or a malformed partition.

    References
    ----------
    C. M. Fiduccia and R. M. Mattheyses, "A linear-time heuristic for improving
    network partitions", Proc. 19th Design Automation Conference (DAC), 1982.
    B. W. Kernighan and S. Lin, "An efficient heuristic procedure for
    partitioning graphs", Bell System Technical Journal 49(2), 1970.
    """
    t0 = time.perf_counter()
    if schedule not in SCHEDULES:
        raise ParameterError(f"unknown schedule {schedule!r}; choose one of {', '.join(SCHEDULES)}")
    k = rule.k

    def make_round(weights):
        def run_round(current, pairs):
            new, gains = fm_round(graph, current, pairs, rule, weights, max_passes, max_stall, n_jobs, stall_fraction)
            order, bounds = shard_index(current, k)
            changed = [bool(np.any(new[order[bounds[a]:bounds[a + 1]]] != a)
                            or np.any(new[order[bounds[b]:bounds[b + 1]]] != b)) for a, b in pairs]
            return new, gains, changed

        return run_round

    return refine_pairs(graph, parts, rule, weights, make_round, schedule, max_rounds, seed, tol, t0)


def refine_fm_kway(graph, parts, rule, max_passes=4, max_stall=1000, rescan_degree=64, weights=None):
    """Global k-way Fiduccia–Mattheyses: one sequential pass over the whole graph (driver only).

    Every boundary node may move to its best adjacent shard with room. This is
    a single sequential loop over the graph, not a set of independent units, so
    an engine that spreads work over tasks runs it on the driver, as an option.

    Parameters
    ----------
    graph : Graph
    parts : ndarray of int, shape (n,)
        Start partition (not modified).
    rule : BalanceRule
    max_passes, max_stall, rescan_degree : int
        Passed to :func:`partition.refine.kway.fm_kway`.
    weights : ndarray of int64, optional
        Fixed-point edge weights (default :func:`fixed_point_weights`).

    Returns
    -------
    parts : ndarray of int64
    stats : dict
        ``cut_before``, ``cut_after``, ``gain``, ``balanced``, ``seconds``.

    References
    ----------
    C. M. Fiduccia and R. M. Mattheyses, "A linear-time heuristic for improving
    network partitions", Proc. 19th Design Automation Conference (DAC), 1982.
    """
    t0 = time.perf_counter()
    k = rule.k
    parts = check_partition(graph, parts, k)
    if weights is None:
        weights, scale = fixed_point_weights(graph)
    else:
        scale = 1.0
    cut_before = float(edge_cut(graph, parts))
    new, gain = fm_kway(graph.indptr, graph.indices, weights, graph.node_weight_array(), parts,
                        k, rule.cap, rule.floor, max_passes, max_stall, rescan_degree)
    loads = np.bincount(new, weights=graph.node_weight_array(), minlength=k)
    stats = {
        "cut_before": cut_before,
        "cut_after": float(edge_cut(graph, new)),
        "gain": float(gain) / scale,
        "balanced": bool(rule.check(loads)),
        "seconds": time.perf_counter() - t0,
    }
    return new, stats
