"""The in-memory engine: Shardline's linear-embedding partitioner on one machine.

The pipeline (each stage in its own module, each citing its method):

1. :mod:`partition.affinity` — edge affinities (closed-neighbourhood Jaccard
   by default, or truncated personalised PageRank, input weights, unit),
   fixed-point integers.
2. :mod:`partition.hierarchy` — Borůvka-style affinity clustering
   (Bateni et al., NIPS 2017) until no edge is left.
3. :mod:`partition.embedding` — the hierarchy's leaf order puts every node on a
   line (Aydin, Bateni & Mirrokni, WSDM 2016); optionally a second start from
   the spectral (Fiedler) order (Pothen, Simon & Liou, 1990), on the driver.
4. :mod:`partition.cut` — the line is cut into ``k`` pieces of equal weight.
5. :mod:`partition.refine` — window DP over cut positions, multilevel
   Fiduccia–Mattheyses moves on the hierarchy's levels, pairwise FM rounds and
   pairwise swaps; none of them ever breaks the balance rule of
   :mod:`partition.balance`.

Every start is refined the same way; the start with the smaller final cut wins
(ties: the earlier start in ``starts``). The refinement steps work in rounds of
independent units (disjoint shard pairs or disjoint windows of the line), so the
Spark engine runs the same units in parallel tasks with the same result.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field

import numpy as np

from partition.affinity import DEFAULT_HUB_CAP, METHODS as AFFINITIES, edge_affinity
from partition.balance import balance_rule
from partition.cut import line_cut
from partition.embedding import linear_order, spectral_order
from partition.errors import ParameterError, check_imbalance, check_parts
from partition.hierarchy import build_hierarchy
from partition.refine.gains import cut_total, cut_weights
from partition.rules import LINKAGES

__all__ = ["PartitionResult", "partition_graph", "STARTS", "REFINEMENTS", "DEFAULT_REFINE"]

STARTS = ("hierarchy", "spectral")
REFINEMENTS = ("window", "multilevel", "flow", "fm", "swaps", "kway")
# Driver-only steps: global sequential passes (run on the driver by both engines).
DRIVER_ONLY = ("kway",)
DEFAULT_REFINE = ("window", "multilevel", "fm", "swaps")
# Parameters of every refinement step, in one place: both engines read them.
STEP_OPTIONS = {
    "window": {},
    "multilevel": {"schedule": "matched"},
    "flow": {"schedule": "matched"},
    "fm": {"schedule": "matched"},
    "swaps": {},
    "kway": {},
}
SPECTRAL_NODE_LIMIT = 300_000  # "auto" starts add the spectral order up to this many nodes


@dataclass(eq=False)
class PartitionResult:
    """What :func:`partition_graph` returns.

    Attributes
    ----------
    parts : ndarray of int64
        Shard of every dense node.
    order : ndarray of int64
        The linear order of the winning start (``order[p]`` = node at position p).
    hierarchy : partition.hierarchy.Hierarchy
    report : dict
        Options, per-stage times and cuts, the chosen start.
    """

    parts: np.ndarray
    order: np.ndarray
    hierarchy: object
    report: dict = field(default_factory=dict)


class _Clock:
    def __init__(self, progress):
        self.rows = []
        self.progress = progress

    def stage(self, name, seconds, **info):
        row = {"stage": name, "seconds": round(seconds, 4), **info}
        self.rows.append(row)
        if self.progress is not None:
            self.progress(row)
        return row


def _resolve_starts(starts, n):
    if starts in (None, "auto"):
        return ("hierarchy", "spectral") if n <= SPECTRAL_NODE_LIMIT else ("hierarchy",)
    if isinstance(starts, str):
        starts = tuple(s.strip() for s in starts.split(",") if s.strip())
    for s in starts:
        if s not in STARTS:
            raise ParameterError(f"unknown start {s!r}; expected one of {', '.join(STARTS)}")
    if not starts:
        raise ParameterError("at least one start is needed")
    return tuple(starts)


def _resolve_refine(refine):
    if refine in (None, "default"):
        return DEFAULT_REFINE
    if refine == "none":
        return ()
    if isinstance(refine, str):
        refine = tuple(s.strip() for s in refine.split(",") if s.strip())
    for s in refine:
        if s not in REFINEMENTS:
            raise ParameterError(f"unknown refinement {s!r}; expected some of {', '.join(REFINEMENTS)}")
    return tuple(refine)


def partition_graph(
    graph,
    k,
    eps=0.0,
    seed=0,
    affinity="jaccard",
    linkage="sum",
    hub_cap=DEFAULT_HUB_CAP,
    starts="auto",
    refine="default",
    progress=None,
):
    """Balanced ``k``-way partition of ``graph`` by linear embedding.

    Parameters
    ----------
    graph : partition.graph.Graph
    k : int
        Number of shards, ``1 ≤ k ≤ n``.
    eps : float
        Allowed imbalance ε ≥ 0 (see :mod:`partition.balance`).
    seed : int
        Seed of every tie-break hash and random choice.
    affinity : {"jaccard", "ppr", "weights", "unit"}
    linkage : {"sum", "average", "max"}
    hub_cap : int
        Nodes of larger degree add no common-neighbour wedges to affinities.
    starts : "auto" or sequence of {"hierarchy", "spectral"}
        Linear orders to cut and refine; "auto" adds the spectral order for
        graphs of at most ``SPECTRAL_NODE_LIMIT`` nodes.
    refine : "default", "none" or sequence of {"window", "multilevel", "fm", "swaps", "kway"}
        Refinement steps, run in this order on every start. ``kway`` is a
        global sequential pass (driver-only option).
    progress : callable or None
        Called with one dict per finished stage.

    Returns
    -------
    PartitionResult

    Raises
    ------
    ParameterError
        For ``k`` out of range, a negative ε, unknown options.

    References
    ----------
    K. Aydin, M. Bateni and V. Mirrokni, "Distributed balanced partitioning via
    linear embedding", WSDM 2016.
    """
    k = check_parts(k, graph.n)
    eps = check_imbalance(eps)
    if affinity not in AFFINITIES:
        raise ParameterError(f"unknown affinity {affinity!r}; expected one of {', '.join(AFFINITIES)}")
    if linkage not in LINKAGES:
        raise ParameterError(f"unknown linkage {linkage!r}; expected one of {', '.join(LINKAGES)}")
    if affinity == "weights" and not graph.weighted:
        raise ParameterError("affinity 'weights' needs a weighted graph (--weighted or --weight-column)")
    starts = _resolve_starts(starts, graph.n)
    steps = _resolve_refine(refine)
    rule = balance_rule(graph.node_weights, k, eps, n_nodes=graph.n)
    clock = _Clock(progress)
    weights, _ = cut_weights(graph.edge_weights)
    total = max(cut_total(graph.indptr, graph.indices, weights, np.zeros(graph.n, dtype=np.int32)), 0)
    all_weight = _total_weight(graph, weights)

    t = time.perf_counter()
    aff = edge_affinity(graph, method=affinity, hub_cap=hub_cap, seed=seed)
    clock.stage("affinity", time.perf_counter() - t, method=affinity)
    t = time.perf_counter()
    hierarchy = build_hierarchy(graph, aff, seed=seed, linkage=linkage)
    clock.stage("hierarchy", time.perf_counter() - t, rounds=hierarchy.rounds,
                clusters=[int(x) for x in hierarchy.sizes], edges=[int(x) for x in hierarchy.edges])
    del aff, total

    best = None
    start_rows = []
    for name in starts:
        t = time.perf_counter()
        order = linear_order(hierarchy, graph) if name == "hierarchy" else spectral_order(graph, seed=seed)
        clock.stage(f"{name}: order", time.perf_counter() - t)
        t = time.perf_counter()
        parts = np.asarray(line_cut(order, graph.node_weights, k, eps), dtype=np.int64)
        cut0 = _cut(graph, weights, parts)
        clock.stage(f"{name}: line cut", time.perf_counter() - t, cut_after=_frac(cut0, all_weight))
        raw = cut0
        for step in steps:
            t = time.perf_counter()
            before = _cut(graph, weights, parts)
            parts = _refine_step(step, graph, order, parts, k, rule, hierarchy, seed)
            after = _cut(graph, weights, parts)
            if after > before:  # a step never makes the cut worse: keep its input
                raise AssertionError(f"refinement step {step} increased the cut ({before} -> {after})")
            clock.stage(f"{name}: {step}", time.perf_counter() - t,
                        cut_before=_frac(before, all_weight), cut_after=_frac(after, all_weight))
        final = _cut(graph, weights, parts)
        loads = np.bincount(parts, weights=graph.node_weight_array(), minlength=k)
        if not rule.check(loads):
            raise AssertionError(f"start {name} broke the balance rule: {rule.violations(loads)[:3]}")
        start_rows.append({"start": name, "raw_cut_fraction": _frac(raw, all_weight),
                           "cut_fraction": _frac(final, all_weight)})
        if best is None or final < best[0]:
            best = (final, name, parts, order)

    _, chosen, parts, order = best
    report = {
        "engine": "memory",
        "k": k,
        "imbalance_allowed": eps,
        "seed": seed,
        "options": {"affinity": affinity, "linkage": linkage, "hub_cap": hub_cap,
                    "starts": list(starts), "refine": list(steps)},
        "balance": {"cap": rule.cap, "floor": rule.floor, "exact": rule.exact},
        "hierarchy": {"rounds": hierarchy.rounds, "clusters": [int(x) for x in hierarchy.sizes],
                      "edges": [int(x) for x in hierarchy.edges]},
        "starts": start_rows,
        "chosen_start": chosen,
        "stages": clock.rows,
        "seconds": round(sum(r["seconds"] for r in clock.rows), 4),
    }
    return PartitionResult(parts=parts, order=np.asarray(order, dtype=np.int64), hierarchy=hierarchy, report=report)


def _total_weight(graph, weights):
    if weights.size == 0:
        return graph.m
    return int(weights.sum() // 2)


def _cut(graph, weights, parts):
    return int(cut_total(graph.indptr, graph.indices, weights, parts))


def _frac(cut, total):
    return round(cut / total, 6) if total else 0.0


def _refine_step(step, graph, order, parts, k, rule, hierarchy, seed):
    opts = STEP_OPTIONS[step]
    if step == "window":
        from partition.cut import boundaries_from_parts
        from partition.refine.window_dp import refine_window

        try:
            boundaries = boundaries_from_parts(order, parts, k)
        except ParameterError:
            return parts  # pieces no longer contiguous: the window DP applies to a line cut only
        new, _ = refine_window(graph, order, boundaries, k, rule, **opts)
    elif step == "multilevel":
        from partition.refine.multilevel import refine_multilevel

        new, _ = refine_multilevel(graph, hierarchy.labels, parts, rule, seed=seed, **opts)
    elif step == "fm":
        from partition.refine.fm import refine_fm

        new, _ = refine_fm(graph, parts, rule, seed=seed, **opts)
    elif step == "flow":
        from partition.refine.flow import refine_flow

        new, _ = refine_flow(graph, parts, rule, seed=seed, **opts)
    elif step == "swaps":
        from partition.refine.swaps import refine_swaps

        new, _ = refine_swaps(graph, parts, k, rule, **opts)
    elif step == "kway":
        from partition.refine.fm import refine_fm_kway

        new, _ = refine_fm_kway(graph, parts, rule, **opts)
    else:  # pragma: no cover - validated above
        raise ParameterError(f"unknown refinement {step!r}")
    return np.asarray(new, dtype=np.int64)
