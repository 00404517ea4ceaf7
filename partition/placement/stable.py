"""Stable re-partitioning: keep a new partition close to the current placement.

Three steps. First the new partition's shards are renamed by optimal assignment
on the overlap matrix (:func:`partition.placement.relabel.relabel_to_match`),
which keeps the most node weight in place without changing the cut. Then, with
a move cost ``λ > 0``, pairwise Fiduccia–Mattheyses rounds trade cut for fewer
moves: the gain of moving node ``v`` from shard ``s`` to shard ``t`` becomes

    cut gain + λ·w(v)·[t = old(v)] − λ·w(v)·[s = old(v)],

so returning a node to its old shard earns ``λ·w(v)`` and leaving it costs as
much. The bias is exactly the gain of an extra edge of weight ``λ·w(v)`` from
``v`` to a fixed *anchor* that sits in ``v``'s old shard (the fixed-vertex
model of migration cost in repartitioning: Çatalyürek, Boman, Devine, Bozdağ,
Heaphy & Riesen, IPDPS 2007). So the refinement runs the project's own pairwise
kernel (:func:`partition.refine.fm.fm_pair`) on the graph plus ``k`` fixed
anchor nodes of weight 0, one per shard, and what it lowers, round after round,
is ``cut + λ · moved weight``. Last, the shards are renamed once more (the
refinement may have made another naming better; renaming never changes the
cut and never lowers the kept weight, since keeping the names is one of the
candidates). The balance rule is kept (the kernel never
breaks it from a balanced start). Units are disjoint shard pairs scheduled by
:func:`partition.refine.rounds.pair_rounds`; a unit reads and moves only the
nodes of its two shards, so the rounds give the same result in any order.

Integer arithmetic. Edge weights are the integer weights of
:func:`partition.refine.gains.cut_weights` (scale ``S`` = 1 or ``2**20``)
multiplied by ``M`` (a power of two, ``2**16`` unless the total would not fit
int64), and the anchor of ``v`` weighs ``round(λ · S · M · w(v))``. So ``λ`` is
counted in units of ``1 / (S·M)`` of an edge weight, and every comparison is
exact.

Previous shard ids. A previous placement may use shard ids ``≥ k`` (the shard
count went down): those shards are drained, their nodes must move, they get no
anchor, and the renaming only uses names ``0..k−1``. With more shards than
before (``k > k_old``) the new shards left without a partner take the unused
names ``k_old ..`` (as in :func:`relabel_to_match`). Nodes without a previous
shard (``-1``, new nodes) have no anchor and are not counted in the moved
fraction.
"""

from __future__ import annotations


import numpy as np

from partition.errors import ParameterError, check_move_cost  # noqa: F401 - check_move_cost is re-exported
from partition.graph import Graph
from partition.placement.relabel import moved_fraction, relabel_to_match
from partition.refine.fm import fm_pair
from partition.refine.gains import cut_total, cut_weights
from partition.refine.rounds import pair_rounds
from partition.refine.units import check_partition, shard_cut_matrix, shard_index

__all__ = ["stabilise", "anchored_graph", "move_objective", "check_move_cost"]

_MULTIPLIER = 1 << 16  # sub-unit resolution of λ (our choice)
_LIMIT = 1 << 61  # largest integer total kept (headroom below int64 for gain sums)


def _check_old(graph, old_parts):
    old = np.asarray(old_parts)
    if old.ndim != 1 or old.shape[0] != graph.n or old.dtype.kind not in "iu":
        raise ParameterError(f"the previous placement must hold one integer shard per node ({graph.n}), "
                             f"got {old.dtype} {old.shape}")
    old = old.astype(np.int64, copy=False)
    if old.size and old.min() < -1:
        raise ParameterError(f"previous shard ids must be >= 0 (or -1 for a node without one), found {int(old.min())}")
    return old


def anchored_graph(graph, old_parts, k, move_cost):
    """The graph plus one fixed anchor per shard, tied to every node's old shard.

    Parameters
    ----------
    graph : Graph
    old_parts : ndarray of int64, shape (n,)
        Previous shard of each node; ``-1`` or ``>= k``: no anchor.
    k : int
    move_cost : float
        ``λ >= 0``, in edge-weight units per unit of node weight.

    Returns
    -------
    indptr : ndarray of int64, shape (n + k + 1,)
    indices : ndarray of int64
        Rows ``0..n−1`` are the graph's rows, each followed by its anchor
        entry ``n + old(v)`` when it has one; row ``n + s`` lists the nodes
        anchored in shard ``s``, ascending.
    weights : ndarray of int64
        The integer edge weights of :func:`partition.refine.gains.cut_weights`
        times ``M``; anchor entries ``round(λ·S·M·w(v))`` (module docstring).
    unit : int
        ``S·M``: an integer weight divided by ``unit`` is in edge-weight units.

    Raises
    ------
    ParameterError
        When ``λ`` is negative or so large that the anchors do not fit int64.

    References
    ----------
    Ü. V. Çatalyürek, E. G. Boman, K. D. Devine, D. Bozdağ, R. T. Heaphy and
    L. A. Riesen, "Hypergraph-based dynamic load balancing for adaptive
    scientific computations", IPDPS 2007 (migration cost as fixed vertices).
    """
    lam = check_move_cost(move_cost)
    n = graph.n
    w_int, scale = cut_weights(graph.edge_weights)
    if w_int.shape[0] == 0:
        w_int = np.ones(graph.indices.shape[0], dtype=np.int64)
    nw = graph.node_weight_array().astype(np.int64)
    total = int(w_int.sum()) + 1
    mult = _MULTIPLIER
    while mult > 1 and total * mult >= _LIMIT:
        mult //= 2
    unit = scale * mult
    anchored = (old_parts >= 0) & (old_parts < k)
    anchor_w = np.rint(lam * float(unit) * nw.astype(np.float64))
    if anchor_w.size and float(anchor_w[anchored].sum()) + total * mult >= _LIMIT:
        raise ParameterError(f"move cost {lam} is too large for integer gains; use a smaller one")
    anchor_w = anchor_w.astype(np.int64)
    anchored &= anchor_w > 0
    nodes = np.flatnonzero(anchored)
    # each anchored row gets one extra entry at its end (rows need not be sorted for the kernel)
    extra = np.zeros(n + 1, dtype=np.int64)
    np.cumsum(anchored, out=extra[1:])
    ends = graph.indptr[1:][nodes]
    idx = np.insert(graph.indices.astype(np.int64), ends, n + old_parts[nodes])
    wts = np.insert(w_int * mult, ends, anchor_w[nodes])
    by_shard = nodes[np.argsort(old_parts[nodes], kind="stable")]
    counts = np.bincount(old_parts[nodes], minlength=k)
    indptr = np.concatenate((graph.indptr + extra, idx.shape[0] + np.cumsum(counts)))
    indices = np.concatenate((idx, by_shard))
    weights = np.concatenate((wts, anchor_w[by_shard]))
    return indptr.astype(np.int64), indices, weights, unit


def move_objective(graph, parts, old_parts, move_cost):
    """``cut weight + λ · weight of the nodes off their old shard`` (nodes with a previous shard).

    Parameters
    ----------
    graph : Graph
    parts, old_parts : ndarray of int, shape (n,)
    move_cost : float

    Returns
    -------
    float
        In edge-weight units.
    """
    lam = check_move_cost(move_cost)
    parts = np.asarray(parts)
    old = _check_old(graph, old_parts)
    w_int, scale = cut_weights(graph.edge_weights)
    cut = cut_total(graph.indptr, graph.indices, w_int, parts) / scale
    has = old >= 0
    moved = float(graph.node_weight_array()[has & (parts != old)].sum())
    return cut + lam * moved


def stabilise(graph, new_parts, old_parts, k, rule, move_cost=0.0, refine=None, seed=0,
              schedule="matched", max_rounds=None, max_passes=8, max_stall=256):
    """Rename and (with a move cost) refine a new partition to stay near the old one.

    Parameters
    ----------
    graph : Graph
    new_parts : array_like of int, shape (n,)
        The new partition, values in ``[0, k)``.
    old_parts : array_like of int, shape (n,)
        The current placement: shard ids ``>= 0`` (ids ``>= k`` are drained
        shards), or ``-1`` for nodes that have no shard yet.
    k : int
        Shards of the new partition (``rule.k``).
    rule : BalanceRule
        Balance rule kept by the refinement.
    move_cost : float
        ``λ >= 0``: edge weight one unit of node weight may cost to stay put.
        0: rename only (unless ``refine``).
    refine : bool or None
        Run the pairwise rounds (default: when ``λ > 0``); with ``λ = 0`` they
        are plain pairwise FM on the renamed partition.
    seed : int
        Orders the round-robin rounds (``numpy.random.default_rng(seed)``).
    schedule : {"matched", "round_robin", "line"}
        Pair schedule (:func:`partition.refine.rounds.pair_rounds`).
    max_rounds, max_passes, max_stall : int
        Limits passed to the pair rounds and to :func:`partition.refine.fm.fm_pair`.

    Returns
    -------
    parts : ndarray of int64, shape (n,)
    stats : dict
        ``k``, ``previous_k`` (largest old id + 1), ``mapping`` (new name of each
        shard of ``new_parts``), ``drained_shards`` / ``drained_nodes`` (old
        shards ``>= k`` holding nodes), ``new_nodes`` (no previous shard),
        ``move_cost``, ``moved_fraction_renamed`` (after renaming only),
        ``moved_fraction`` and ``moved_nodes`` (final; by node weight, over the
        nodes with a previous shard), ``cut_before`` / ``cut_after`` (edge
        weight), ``objective_before`` / ``objective_after`` (cut + λ · moved
        weight), ``rounds``, ``balanced``.

    Raises
    ------
    ParameterError
        Malformed partitions, ``k`` unlike ``rule.k``, a negative or
        non-finite move cost.

    References
    ----------
    H. W. Kuhn, "The Hungarian method for the assignment problem", Naval
    Research Logistics Quarterly 2, 1955 (the renaming).
    C. M. Fiduccia and R. M. Mattheyses, "A linear-time heuristic for improving
    network partitions", DAC 1982 (the pairwise passes).
    Ü. V. Çatalyürek, E. G. Boman, K. D. Devine, D. Bozdağ, R. T. Heaphy and
    L. A. Riesen, "Hypergraph-based dynamic load balancing for adaptive
    scientific computations", IPDPS 2007 (migration cost as fixed vertices).
    """
    if k != rule.k:
        raise ParameterError(f"k = {k} but the balance rule is for k = {rule.k}")
    lam = check_move_cost(move_cost)
    new = check_partition(graph, new_parts, k)
    old = _check_old(graph, old_parts)
    n = graph.n
    nw = graph.node_weight_array()
    has = old >= 0
    k_old = int(old.max(initial=-1)) + 1
    inside = has & (old < k)
    drained = np.unique(old[has & (old >= k)])

    # 1. renaming over the names 0..k-1: drained and new nodes weigh nothing in the overlaps
    k_match = max(1, min(k_old, k))
    mapping, parts = relabel_to_match(np.where(inside, old, 0), new, k_match, k,
                                      weights=np.where(inside, nw, 0).astype(np.float64))
    parts = parts.astype(np.int64)
    w_int, scale = cut_weights(graph.edge_weights)
    cut0 = cut_total(graph.indptr, graph.indices, w_int, parts) / scale

    def moved(p):
        return moved_fraction(old[has], p[has], weights=nw[has]) if has.any() else 0.0

    stats = {
        "k": k, "previous_k": k_old, "mapping": [int(x) for x in mapping],
        "drained_shards": [int(x) for x in drained], "drained_nodes": int((has & (old >= k)).sum()),
        "new_nodes": int((~has).sum()), "move_cost": lam,
        "moved_fraction_renamed": moved(parts), "cut_before": cut0,
        "objective_before": move_objective(graph, parts, old, lam), "rounds": 0,
    }

    # 2. pairwise rounds with the anchors
    if (lam > 0 if refine is None else refine) and k > 1:
        indptr, indices, weights, _ = anchored_graph(graph, old, k, lam)
        aug = Graph(indptr, indices.astype(np.int32), None,
                    np.concatenate((nw, np.zeros(k, dtype=np.int64))), None)
        nw_aug = aug.node_weights
        state = np.concatenate((parts, np.arange(k, dtype=np.int64)))

        def run_round(current, pairs):
            current = current.copy()
            order, bounds = shard_index(current[:n], k)
            gains, changed = [], []
            for a, b in pairs:
                nodes = np.concatenate((order[bounds[a]:bounds[a + 1]], order[bounds[b]:bounds[b + 1]]))
                before = current[nodes]
                out, g = fm_pair(aug.indptr, aug.indices, weights, nw_aug, current, a, b, nodes,
                                 rule.cap, rule.cap, rule.floor, rule.floor, max_passes, max_stall)
                current[nodes] = out
                gains.append(int(g))
                changed.append(bool(np.any(out != before)))
            return current, gains, changed

        state, rounds = pair_rounds(state, k, lambda p: shard_cut_matrix(aug, p, k, weights), run_round,
                                    schedule=schedule, max_rounds=max_rounds, seed=seed)
        parts = state[:n].copy()
        stats["rounds"] = len(rounds)
        # rename once more: the cut stays, and the kept weight can only grow
        _, parts = relabel_to_match(np.where(inside, old, 0), parts, k_match, k,
                                    weights=np.where(inside, nw, 0).astype(np.float64))
        parts = parts.astype(np.int64)

    loads = np.bincount(parts, weights=nw, minlength=k)
    stats.update({
        "moved_fraction": moved(parts),
        "moved_nodes": int((has & (parts != old)).sum()),
        "cut_after": cut_total(graph.indptr, graph.indices, w_int, parts) / scale,
        "objective_after": move_objective(graph, parts, old, lam),
        "balanced": bool(rule.check(loads)),
    })
    return parts, stats
