"""Pairwise boundary swaps: exchange nodes between two shards without losing balance.

For a pair of shards ``(a, b)`` every node gets the gain of moving to the other
shard (edge weight to the other shard minus edge weight to its own; Kernighan
& Lin, 1970). The nodes of ``a`` and of ``b`` are each sorted by gain, best
first, and paired in that order: the ``i``-th best of ``a`` with the ``i``-th best
of ``b``. Swapping a prefix of the pairs moves as many nodes each way, so with
unit node weights both shard sizes stay exactly as they were. The prefixes are
scored exactly: the pairs are applied one after another on a scratch copy and
each move's cut change is counted against the current state, which accounts for
edges between swapped nodes (two adjacent swapped nodes ``u``, ``v`` gain
``g_u + g_v − 2·w(u, v)``; two swapped nodes of the same shard gain their edge
back). The prefix with the largest cut reduction is kept if that reduction is
positive. One unit repeats this for a few iterations on its own state.

Rules (deterministic, identical in both engines):

* sums are int64 (:func:`partition.refine.gains.cut_weights`);
* candidates are the nodes with an edge to the other shard, plus the nodes
  with no edge inside the pair at all (gain 0); a node whose edges in the
  pair all stay in its own shard is not a candidate (alone it can only raise
  the cut). Candidates are sorted by gain descending, ties by smaller node id;
* the kept prefix is the one with the largest reduction, ties by the shorter
  prefix; nothing is kept unless the reduction is > 0. The scan stops after
  ``patience`` pairs (default 64) in a row bring no new best, as passes of
  Fiduccia & Mattheyses (1982) are commonly cut short; later pairs are lower
  in gain and rarely pay back (a common-practice limit, the value is ours);
* between iterations the edge sums of the nodes next to moved nodes are
  updated in place, so an iteration costs the edges of the moved and scanned
  nodes, not of the whole pair;
* node weights: a prefix is admissible only if each of the two shards ends
  with ``min(floor, start) ≤ load ≤ max(cap, start)`` where ``start`` is its load
  at the start of the iteration. With unit weights every prefix keeps both
  loads, so this is no restriction; with node weights the shards may drift but
  never beyond the cap, and a shard that was already too heavy never gets
  heavier.

A round works on disjoint pairs (:mod:`partition.refine.schedule`). Unit
``(a, b)`` reads only the shards of nodes in ``a`` and ``b`` and moves nodes only
between ``a`` and ``b``, so it cannot see the moves of another unit of the same
round: all units are computed from the state at the start of the round, in any
order or in parallel, with the same result. The cut can only go down, and it
goes down by exactly the sum of the units' reductions.
"""

from __future__ import annotations

import numba
import numpy as np

from partition.errors import ParameterError
from partition.refine.gains import cut_total, cut_weights, local_index, shard_cut_matrix
from partition.refine.rounds import SWAP_SCHEDULES as SCHEDULES, swap_rounds

__all__ = ["swap_pair", "swap_round", "refine_swaps", "SCHEDULES"]

PATIENCE = 64  # pairs scanned past the best prefix before an iteration gives up
_EMPTY_I64 = np.empty(0, dtype=np.int64)


@numba.njit(cache=True, nogil=True)
def _split(u, side, glob, indptr, indices, weights, parts, rank, a, b, na):
    """Edge weight from local node ``u`` to the other side and to its own side."""
    unit = weights.shape[0] == 0
    s = side[u]
    node = glob[u]
    ext = 0
    own = 0
    for e in range(indptr[node], indptr[node + 1]):
        x = indices[e]
        px = parts[x]
        if px == a:
            j = rank[x]
        elif px == b:
            j = na + rank[x]
        else:
            continue
        if j == u:
            continue
        w = 1 if unit else weights[e]
        if side[j] == s:
            own += w
        else:
            ext += w
    return ext, own


@numba.njit(cache=True, nogil=True)
def _move(u, cur, glob, indptr, indices, weights, parts, rank, a, b, na):
    """Flip local node ``u`` in ``cur``; return the cut reduction of that move."""
    ext, own = _split(u, cur, glob, indptr, indices, weights, parts, rank, a, b, na)
    cur[u] = 1 - cur[u]
    return ext - own


@numba.njit(cache=True, nogil=True)
def _apply(u, side, ext, own, glob, indptr, indices, weights, parts, rank, a, b, na):
    """Move local node ``u`` for good: flip its side and update the edge sums around it."""
    unit = weights.shape[0] == 0
    s = side[u]
    node = glob[u]
    for e in range(indptr[node], indptr[node + 1]):
        x = indices[e]
        px = parts[x]
        if px == a:
            j = rank[x]
        elif px == b:
            j = na + rank[x]
        else:
            continue
        if j == u:
            continue
        w = 1 if unit else weights[e]
        if side[j] == s:  # j loses a neighbour on its side, gains one across
            own[j] -= w
            ext[j] += w
        else:
            ext[j] -= w
            own[j] += w
    ext[u], own[u] = own[u], ext[u]
    side[u] = 1 - s


@numba.njit(cache=True, nogil=True)
def _swap_pair_kernel(
    indptr, indices, weights, parts, rank, node_weights, a, b, nodes_a, nodes_b, cap, floor, iterations, patience
):
    na = nodes_a.shape[0]
    nb = nodes_b.shape[0]
    nu = na + nb
    glob = np.empty(nu, dtype=np.int64)
    glob[:na] = nodes_a
    glob[na:] = nodes_b
    side = np.zeros(nu, dtype=np.int8)
    side[na:] = 1
    nw = np.ones(nu, dtype=np.int64)
    if node_weights.shape[0] > 0:
        for i in range(nu):
            nw[i] = node_weights[glob[i]]
    load0 = 0
    load1 = 0
    for i in range(nu):
        if side[i] == 0:
            load0 += nw[i]
        else:
            load1 += nw[i]
    cur = side.copy()
    ext = np.empty(nu, dtype=np.int64)
    own = np.empty(nu, dtype=np.int64)
    for i in range(nu):
        ext[i], own[i] = _split(i, side, glob, indptr, indices, weights, parts, rank, a, b, na)
    by_id = np.argsort(glob, kind="mergesort")
    total = 0
    for _ in range(iterations):
        cnt0 = 0
        cnt1 = 0
        for i in range(nu):
            if ext[i] > 0 or own[i] == 0:
                if side[i] == 0:
                    cnt0 += 1
                else:
                    cnt1 += 1
        # candidates of each side in node-id order, then stably by gain descending
        c0 = np.empty(cnt0, dtype=np.int64)
        c1 = np.empty(cnt1, dtype=np.int64)
        p0 = 0
        p1 = 0
        for t in range(nu):
            i = by_id[t]
            if ext[i] == 0 and own[i] > 0:
                continue
            if side[i] == 0:
                c0[p0] = i
                p0 += 1
            else:
                c1[p1] = i
                p1 += 1
        c0 = c0[np.argsort(own[c0] - ext[c0], kind="mergesort")]
        c1 = c1[np.argsort(own[c1] - ext[c1], kind="mergesort")]
        npairs = min(c0.shape[0], c1.shape[0])
        lo0 = min(floor, load0)
        hi0 = max(cap, load0)
        lo1 = min(floor, load1)
        hi1 = max(cap, load1)
        cum = 0
        best = 0
        best_len = 0
        l0 = load0
        l1 = load1
        scanned = 0
        for t in range(npairs):
            u = c0[t]
            v = c1[t]
            cum += _move(u, cur, glob, indptr, indices, weights, parts, rank, a, b, na)
            cum += _move(v, cur, glob, indptr, indices, weights, parts, rank, a, b, na)
            scanned = t + 1
            l0 += nw[v] - nw[u]
            l1 += nw[u] - nw[v]
            if cum > best and lo0 <= l0 <= hi0 and lo1 <= l1 <= hi1:
                best = cum
                best_len = t + 1
            elif t + 1 - best_len >= patience:
                break
        for t in range(best_len, scanned):
            cur[c0[t]] = 0
            cur[c1[t]] = 1
        if best_len == 0:
            break
        for t in range(best_len):
            u = c0[t]
            v = c1[t]
            load0 += nw[v] - nw[u]
            load1 += nw[u] - nw[v]
            _apply(u, side, ext, own, glob, indptr, indices, weights, parts, rank, a, b, na)
            _apply(v, side, ext, own, glob, indptr, indices, weights, parts, rank, a, b, na)
        total += best
    count = 0
    for i in range(nu):
        if (i < na and side[i] == 1) or (i >= na and side[i] == 0):
            count += 1
    moved = np.empty(count, dtype=np.int64)
    target = np.empty(count, dtype=np.int64)
    t = 0
    for i in range(nu):
        if (i < na and side[i] == 1) or (i >= na and side[i] == 0):
            moved[t] = glob[i]
            target[t] = b if i < na else a
            t += 1
    order = np.argsort(moved, kind="mergesort")
    return moved[order], target[order], total


def swap_pair(
    indptr, indices, weights, parts, rank, node_weights, a, b, nodes_a, nodes_b, cap, floor, iterations=4, patience=PATIENCE
):
    """Boundary swaps between shards ``a`` and ``b``: one unit of a round.

    Parameters
    ----------
    indptr, indices : ndarray
        Symmetric CSR covering at least the nodes of ``a`` and ``b`` and their
        neighbours (a Spark task may pass the unit's subgraph).
    weights : ndarray of int64, shape (2 m,) or (0,)
        Integer edge weight per CSR entry; empty means unit weights.
    parts : ndarray of int
        Shard of every node at the start of the round (not modified).
    rank : ndarray of int64
        For each node of ``a`` (of ``b``), its index in ``nodes_a`` (``nodes_b``);
        see :func:`partition.refine.gains.local_index`. Other entries are unused.
    node_weights : ndarray of int64, shape (n,) or (0,)
        Empty means unit weights.
    a, b : int
        The two shards.
    nodes_a, nodes_b : ndarray of int64
        All nodes of shard ``a`` and of shard ``b``.
    cap, floor : int
        Balance limits (:class:`partition.balance.BalanceRule`).
    iterations : int
        Sort–pair–swap iterations (each on the unit's state after the previous
        one); stops early when an iteration finds nothing.
    patience : int
        An iteration stops scanning pairs after this many pairs in a row that
        bring no new best prefix (default 64).

    Returns
    -------
    nodes : ndarray of int64
        Nodes that change shard, ascending.
    targets : ndarray of int64
        Their new shard (``b`` for nodes of ``a`` and vice versa).
    gain : int
        Exact reduction of the cut weight (integer units) when the moves are
        applied; ``≥ 0``.

    References
    ----------
    B. W. Kernighan and S. Lin, "An efficient heuristic procedure for
    partitioning graphs", Bell System Technical Journal 49(2), 1970.
    """
    if a == b:
        raise ParameterError(f"a pair needs two different shards, got ({a}, {b})")
    if iterations < 0 or patience < 1:
        raise ParameterError(f"need iterations >= 0 and patience >= 1, got {iterations}, {patience}")
    moved, target, gain = _swap_pair_kernel(
        np.asarray(indptr, dtype=np.int64),
        indices,
        np.asarray(weights, dtype=np.int64),
        parts,
        np.asarray(rank, dtype=np.int64),
        np.asarray(node_weights, dtype=np.int64),
        int(a),
        int(b),
        np.asarray(nodes_a, dtype=np.int64),
        np.asarray(nodes_b, dtype=np.int64),
        int(cap),
        int(floor),
        int(iterations),
        int(patience),
    )
    return moved, target, int(gain)


def _check_parts_array(parts, n, k):
    parts = np.asarray(parts)
    if parts.shape != (n,) or parts.dtype.kind not in "iu":
        raise ParameterError(f"parts must be an integer array of length {n}")
    if n and (parts.min() < 0 or parts.max() >= k):
        raise ParameterError(f"parts must take values in [0, {k})")
    return parts


def _check_pairs(pairs, k):
    used = set()
    out = []
    for a, b in pairs:
        a, b = int(a), int(b)
        if not (0 <= a < k and 0 <= b < k) or a == b:
            raise ParameterError(f"invalid shard pair ({a}, {b}) for k = {k}")
        if a in used or b in used:
            raise ParameterError(f"shard pairs of one round must be disjoint; ({a}, {b}) repeats a shard")
        used.update((a, b))
        out.append((a, b))
    return out


def swap_round(graph, parts, pairs, rule, iterations=4, weights=None):
    """One round of boundary swaps over disjoint shard pairs.

    Parameters
    ----------
    graph : partition.graph.Graph
    parts : ndarray of int, shape (n,)
        Current shards (not modified).
    pairs : list of (int, int)
        Disjoint shard pairs (e.g. from :func:`partition.refine.schedule.line_pairs`).
    rule : partition.balance.BalanceRule
    iterations : int
        Iterations per unit (see :func:`swap_pair`).
    weights : ndarray of int64 or None
        Integer edge weights from :func:`partition.refine.gains.cut_weights`;
        computed from the graph when ``None``.

    Returns
    -------
    parts : ndarray of int32
        The new shards.
    gain : int
        Reduction of the integer cut weight.
    moved : int
        Number of nodes that changed shard.

    Raises
    ------
    ParameterError
        If the pairs are not disjoint or ``parts`` is malformed.
    """
    k = rule.k
    parts = _check_parts_array(parts, graph.n, k)
    pairs = _check_pairs(pairs, k)
    if weights is None:
        weights, _ = cut_weights(graph.edge_weights)
    new, gains, moved = _units(graph, parts, pairs, rule, iterations, weights, _node_weights(graph))
    return new, sum(gains), sum(moved)


def _node_weights(graph):
    return _EMPTY_I64 if graph.node_weights is None else graph.node_weights.astype(np.int64, copy=False)


def _units(graph, parts, pairs, rule, iterations, weights, nweights):
    """Run every unit of a round on the start state; per-unit gains and move counts."""
    rank, grouped, starts = local_index(parts, rule.k)
    new = parts.astype(np.int32, copy=True)
    gains, moved = [], []
    for a, b in pairs:
        nodes, targets, g = swap_pair(
            graph.indptr, graph.indices, weights, parts, rank, nweights, a, b,
            grouped[starts[a]:starts[a + 1]], grouped[starts[b]:starts[b + 1]],
            rule.cap, rule.floor, iterations,
        )
        new[nodes] = targets
        gains.append(g)
        moved.append(int(nodes.shape[0]))
    return new, gains, moved


def refine_swaps(graph, parts, k, rule, max_rounds=20, tol=1e-3, schedule="matched", iterations=4):
    """Improve a partition by rounds of pairwise boundary swaps.

    Parameters
    ----------
    graph : partition.graph.Graph
    parts : ndarray of int, shape (n,)
        Starting shards (not modified).
    k : int
        Number of shards (must equal ``rule.k``).
    rule : partition.balance.BalanceRule
    max_rounds : int
        Most rounds to run.
    tol : float
        Stopping threshold (default 0.1 %). ``"line"`` and ``"round_robin"``:
        after each sweep (the two parities; every pair once) refinement stops
        when the sweep removed at most ``tol`` times the cut it started from.
        ``"matched"``: a pair whose unit removed at most ``tol`` times the cut
        between its two shards is set aside until a unit moves nodes of one of
        its shards; refinement stops when no pair with cut edges is left.
    schedule : {"line", "matched", "round_robin"}
        Where the pairs of each round come from (:mod:`partition.refine.schedule`):
        line neighbours, a fresh greedy matching of the shard-to-shard cut
        each round (heaviest first), or every pair by the circle method.
    iterations : int
        Iterations per unit (see :func:`swap_pair`).

    Returns
    -------
    parts : ndarray of int32
    stats : dict
        ``cut_before`` and ``cut_after`` (edge weight, in the graph's units),
        ``rounds``, ``moved`` (node moves summed over rounds), ``gains`` (cut
        reduction of each round, graph units), ``schedule``.

    Raises
    ------
    ParameterError
        If ``k`` disagrees with the rule, the schedule is unknown, or ``parts``
        is malformed.

    References
    ----------
    B. W. Kernighan and S. Lin, "An efficient heuristic procedure for
    partitioning graphs", Bell System Technical Journal 49(2), 1970.
    """
    if k != rule.k:
        raise ParameterError(f"k = {k} but the balance rule is for k = {rule.k}")
    if schedule not in SCHEDULES:
        raise ParameterError(f"schedule must be one of {', '.join(SCHEDULES)}, got {schedule!r}")
    if max_rounds < 0 or not (tol >= 0):
        raise ParameterError("max_rounds and tol must be >= 0")
    parts = _check_parts_array(parts, graph.n, k).astype(np.int32, copy=True)
    weights, scale = cut_weights(graph.edge_weights)
    cut = cut_total(graph.indptr, graph.indices, weights, parts)
    nweights = _node_weights(graph)
    parts, st = swap_rounds(
        parts, k, cut, lambda p: shard_cut_matrix(graph.indptr, graph.indices, weights, p, k),
        lambda p, pairs: _units(graph, p, pairs, rule, iterations, weights, nweights),
        schedule, max_rounds, tol,
    )
    stats = {"cut_before": cut / scale, "rounds": st["rounds"], "moved": st["moved"],
             "gains": [g / scale for g in st["gains"]], "schedule": schedule, "cut_after": st["cut"] / scale}
    return parts, stats
