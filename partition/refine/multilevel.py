"""Move refinement on the levels of the affinity hierarchy: whole clusters move first, single nodes last.

The affinity hierarchy gives nested labellings ``labels[0] = arange(n)``,
``labels[1]``, ... (each level merges clusters of the one below). A start
partition may split a cluster between shards, so the unit that moves at level
``r`` is an *atom*: the part of a level-``r`` cluster inside one shard of the
start partition (the pair ``(labels[r][v], start[v])``, numbered densely).
Atoms are nested too, and every atom lies in one shard at every moment of the
downward sweep, because the coarser atom containing it only ever moved whole.
So each level's graph is a contraction of the level below
(:func:`partition.contract.contract`, summed node and edge weights), the cut
of a level's graph is the cut of the fine partition, and projecting a level's
partition to the level below loses nothing.

The sweep goes from the coarsest level with at least ``min_atoms`` atoms down
to level 1, running pairwise Fiduccia–Mattheyses rounds
(:func:`partition.refine.fm.refine_fm`) on each level's graph with the cap
raised by ``overfill · W / k`` (and the floor lowered as much): whole clusters
may overfill a shard a little. At level 0 the partition is first brought back
to the exact rule (:func:`partition.refine.rebalance.rebalance`, cheapest
nodes out of over-full shards), then refined once more with the exact rule.
"Overfill coarse, rebalance fine" lets a cluster cross even when no shard has
exactly its weight of room. If the end result is worse than the start (or the
repair cannot restore balance), the start partition is returned.

Reference for moving clusters level by level: Hendrickson & Leland,
"A multilevel algorithm for partitioning graphs", Supercomputing 1995, and
Karypis & Kumar, "A fast and high quality multilevel scheme for partitioning
irregular graphs", SIAM J. Sci. Comput. 20(1), 1998 (refinement while
uncoarsening); the hierarchy itself is the affinity clustering of Bateni et
al., NIPS 2017.
"""

from __future__ import annotations

import dataclasses
import math
import time

import numpy as np

from partition.contract import contract, dense_labels
from partition.errors import ParameterError
from partition.graph import Graph
from partition.refine.fm import refine_fm
from partition.refine.rebalance import rebalance
from partition.refine.units import check_partition, edge_cut, fixed_point_weights

__all__ = ["atom_levels", "refine_multilevel"]


def atom_levels(graph, hierarchy_labels, parts, min_atoms=1):
    """Nested atom graphs of the hierarchy levels for the start partition ``parts``.

    Parameters
    ----------
    graph : Graph
        Level 0 (its edge weights are summed as they are).
    hierarchy_labels : list of ndarray of int, each of shape (n,)
        Nested cluster labels, finest first.
    parts : ndarray of int64, shape (n,)
    min_atoms : int
        Levels with fewer atoms are left out (and all coarser ones).

    Returns
    -------
    list of (level, Graph, up)
        One entry per kept level ``>= 1`` whose atom count differs from the
        level below, finest first; ``up`` maps the atoms of the previous kept
        level (level 0 = nodes) to this level's atoms.

    Raises
    ------
    ParameterError
        When a labelling has the wrong length or the levels are not nested.
    """
    n = graph.n
    out = []
    prev_atoms = np.arange(n, dtype=np.int64)
    prev_count = n
    g = graph
    for r, lab in enumerate(hierarchy_labels):
        lab = np.asarray(lab)
        if lab.shape != (n,) or lab.dtype.kind not in "iu":
            raise ParameterError(f"hierarchy level {r} must be an integer array of length {n}")
        if r == 0:
            continue
        atoms, count = dense_labels(lab, parts)
        if count < min_atoms:
            break
        if count == prev_count:
            continue
        rep = np.empty(prev_count, dtype=np.int64)
        rep[prev_atoms] = np.arange(n, dtype=np.int64)
        up = atoms[rep]
        if not np.array_equal(up[prev_atoms], atoms):
            raise ParameterError(f"hierarchy level {r} does not nest the levels below it")
        g = contract(g, up, count)
        out.append((r, g, up))
        prev_atoms, prev_count = atoms, count
    return out


def refine_multilevel(graph, hierarchy_labels, parts, rule, overfill=0.03, min_atoms=None,
                      schedule="round_robin", max_rounds=None, max_passes=8, max_stall=256, seed=0,
                      stall_fraction=0.0, tol=0.0):
    """Refine ``parts`` level by level on the hierarchy, then rebalance and refine at the nodes.

    Parameters
    ----------
    graph : Graph
    hierarchy_labels : list of ndarray of int64
        ``Hierarchy.labels``: ``labels[0] = arange(n)``, coarser as ``r`` grows,
        nested.
    parts : ndarray of int, shape (n,)
        Start partition (not modified); normally one that satisfies ``rule``.
    rule : BalanceRule
    overfill : float, default 0.03
        Extra room on coarse levels, as a fraction of the average shard weight.
    min_atoms : int, optional
        Coarsest level used has at least this many atoms (default ``2 k``).
    schedule, max_rounds, max_passes, max_stall, seed, stall_fraction, tol
        Passed to :func:`partition.refine.fm.refine_fm` at every level.

    Returns
    -------
    parts : ndarray of int64
    stats : dict
        ``levels``: one dict per level visited (``level``, ``atoms``,
        ``cut_before``, ``cut_after``, ``max_load``), then the rebalance and the
        final level 0; ``cut_before``, ``cut_after``, ``balanced``, ``kept_start``
        (True when the start was returned), ``seconds``.

    Raises
    ------
    ParameterError
        For a negative ``overfill`` or malformed levels or partition.

    References
    ----------
    M. Bateni, S. Behnezhad, M. Derakhshan, M. Hajiaghayi, R. Kiveris,
    S. Lattanzi and V. Mirrokni, "Affinity clustering: hierarchical clustering
    at scale", NIPS 2017.
    B. Hendrickson and R. Leland, "A multilevel algorithm for partitioning
    graphs", Proc. Supercomputing 1995.
    G. Karypis and V. Kumar, "A fast and high quality multilevel scheme for
    partitioning irregular graphs", SIAM J. Sci. Comput. 20(1), 1998.
    """
    t0 = time.perf_counter()
    k = rule.k
    start = check_partition(graph, parts, k)
    if not (overfill >= 0 and math.isfinite(overfill)):
        raise ParameterError(f"overfill must be a finite number >= 0, got {overfill!r}")
    min_atoms = 2 * k if min_atoms is None else int(min_atoms)
    w_int, scale = fixed_point_weights(graph)
    # Contract the fixed-point weights: integer sums stay exact in float64 below 2**53.
    wgraph = Graph(graph.indptr, graph.indices, w_int.astype(np.float64), graph.node_weights, None)
    levels = atom_levels(wgraph, hierarchy_labels, start, min_atoms)
    extra = math.ceil(overfill * rule.total / k)
    loose = dataclasses.replace(rule, cap=rule.cap + extra, floor=max(rule.floor - extra, 0))
    fm_args = dict(schedule=schedule, max_rounds=max_rounds, max_passes=max_passes,
                   max_stall=max_stall, seed=seed, stall_fraction=stall_fraction, tol=tol)
    stats_levels = []
    cut_start = float(edge_cut(wgraph, start)) / scale
    # Atom partition of the coarsest level: the start shard of any member.
    q = start
    for _, _, up in levels:
        q_next = np.empty(int(up.max()) + 1 if up.size else 0, dtype=np.int64)
        q_next[up] = q
        q = q_next
    for i in range(len(levels) - 1, -1, -1):
        r, g, up = levels[i]
        w_level = g.edge_weights.astype(np.int64)
        q, st = refine_fm(g, q, loose, weights=w_level, **fm_args)
        loads = np.bincount(q, weights=g.node_weights, minlength=k)
        stats_levels.append({"level": r, "atoms": g.n, "cut_before": st["cut_before"] / scale,
                             "cut_after": st["cut_after"] / scale, "max_load": int(loads.max())})
        q = q[up]
    fine = q
    cut_mid = float(edge_cut(wgraph, fine)) / scale
    fine, rb = rebalance(wgraph, fine, rule, weights=w_int)
    stats_levels.append({"level": "rebalance", "atoms": graph.n, "cut_before": cut_mid,
                         "cut_after": rb["cut_after"] / scale, "moved": rb["moved"]})
    fine, st = refine_fm(wgraph, fine, rule, weights=w_int, **fm_args)
    loads = np.bincount(fine, weights=graph.node_weight_array(), minlength=k)
    stats_levels.append({"level": 0, "atoms": graph.n, "cut_before": st["cut_before"] / scale,
                         "cut_after": st["cut_after"] / scale, "max_load": int(loads.max())})
    balanced = bool(rule.check(loads))
    cut_end = st["cut_after"] / scale
    start_ok = bool(rule.check(np.bincount(start, weights=graph.node_weight_array(), minlength=k)))
    kept = (not balanced and start_ok) or (balanced == start_ok and cut_end > cut_start)
    if kept:
        fine, cut_end, balanced = start, cut_start, start_ok
    stats = {
        "levels": stats_levels,
        "cut_before": float(edge_cut(graph, start)),
        "cut_after": float(edge_cut(graph, fine)),
        "balanced": balanced,
        "kept_start": bool(kept),
        "seconds": time.perf_counter() - t0,
    }
    return fine, stats
