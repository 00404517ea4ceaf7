"""The in-memory engine: the pipeline of :mod:`partition.pipeline` over the CSR arrays of one machine.

The pipeline (each stage in its own module, each citing its method):

1. :mod:`partition.affinity` — edge affinities (closed-neighbourhood Jaccard
   by default, or truncated personalised PageRank, input weights, unit),
   fixed-point integers.
2. :mod:`partition.hierarchy` — Borůvka-style affinity clustering
   (Bateni et al., NIPS 2017) until no edge is left.
3. :mod:`partition.embedding` — the hierarchy's leaf order puts every node on a
   line (Aydin, Bateni & Mirrokni, WSDM 2016). Small graphs get more starts:
   the spectral (Fiedler) order (Pothen, Simon & Liou, 1990), the degree order
   (larger degree first: core before periphery) and the leaf orders of
   hierarchies built with other seeds.
4. :mod:`partition.cut` — each line is cut into ``k`` pieces of equal weight.
5. :mod:`partition.refine` — window DP over the cut positions, multilevel
   Fiduccia–Mattheyses moves on the hierarchy's levels, V-cycles (multilevel
   moves again on fresh levels that respect the current shards,
   :mod:`partition.refine.coarsen`), min-cut repair of shard pairs and
   pairwise swaps; none of them ever breaks the balance rule of
   :mod:`partition.balance`.

The plan (starts, steps, their parameters and the effort rules) is
:mod:`partition.plan`; the loop over starts and steps, with its ``prune`` and
``pick`` rules, is :func:`partition.pipeline.run_plan`, which the Spark engine
runs too. This module supplies the in-memory backend (:class:`MemoryBackend`)
and :func:`refine_step`, the in-memory runner of one step. The refinement steps
work in rounds of independent units (disjoint shard pairs, disjoint windows of
the line, or single shards for the clustering of the V-cycles), whose round
loops are :mod:`partition.refine.rounds`, so the Spark engine runs the same
units in parallel tasks with the same result; steps in ``DRIVER_ONLY`` are
global sequential passes run on the driver.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from partition.affinity import DEFAULT_HUB_CAP, edge_affinity
from partition.embedding import linear_order, spectral_order
from partition.errors import ParameterError
from partition.hierarchy import build_hierarchy
from partition.plan import (  # noqa: F401 - the plan's names, also read from here
    AUTO_STARTS,
    DEFAULT_REFINE,
    DRIVER_ONLY,
    REFINEMENTS,
    SPECTRAL_NODE_LIMIT,
    STARTS,
    STEP_OPTIONS,
    make_plan,
    resolve_refine,
    resolve_starts,
    vcycle_count,
)
from partition.refine.gains import cut_total, cut_weights

__all__ = ["PartitionResult", "partition_graph", "run_memory", "MemoryBackend", "STARTS", "REFINEMENTS",
           "DEFAULT_REFINE", "STEP_OPTIONS", "DRIVER_ONLY", "refine_step"]


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


class MemoryBackend:
    """The bulk operations of :func:`partition.pipeline.run_plan` over a :class:`~partition.graph.Graph` in memory."""

    def __init__(self, graph, plan):
        self.graph, self.plan = graph, plan
        self.n, self.m = graph.n, graph.m
        self.node_weights = graph.node_weights
        self.weights, _ = cut_weights(graph.edge_weights)
        self.total_weight = _total_weight(graph, self.weights)

    def affinity(self):
        return edge_affinity(self.graph, method=self.plan.affinity, hub_cap=self.plan.hub_cap, seed=self.plan.seed)

    def hierarchy(self, affinity, seed):
        return build_hierarchy(self.graph, affinity, seed=seed, linkage=self.plan.linkage)

    def order(self, name, hierarchy):
        return _start_order(name, self.graph, hierarchy, self.plan.seed)

    def cut(self, parts):
        return _cut(self.graph, self.weights, parts)

    def refine(self, step, start, order, parts, rule, hierarchy, affinity):
        return refine_step(step, self.graph, order, parts, self.plan.k, rule, hierarchy, self.plan.seed,
                           affinity), None


def run_memory(graph, plan, progress=None):
    """Run a checked :class:`~partition.plan.Plan` on ``graph`` in memory; returns a :class:`PartitionResult`."""
    from partition.pipeline import run_plan

    plan = plan.for_graph(graph.n, graph.m, graph.weighted)
    parts, order, hierarchy, report = run_plan(plan, MemoryBackend(graph, plan), progress)
    return PartitionResult(parts=parts, order=order, hierarchy=hierarchy, report=report)


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
    starts : "auto" or sequence of {"hierarchy", "spectral", "degree", "hierarchy:<j>"}
        Linear orders to cut and refine; "auto" follows the effort rule of
        :mod:`partition.plan`.
    refine : "default", "none" or sequence of step names
        Refinement steps in order, from ``REFINEMENTS``: "window",
        "multilevel", "vcycle", "flow", "fm", "swaps", "kway", "prune",
        "pick" (:mod:`partition.plan`); ``kway`` is a global sequential pass
        (driver-only option).
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
    plan = make_plan(k, eps, seed, affinity=affinity, linkage=linkage, hub_cap=hub_cap, starts=starts,
                     refine=refine)
    return run_memory(graph, plan, progress)


def _start_order(name, graph, hierarchy, seed):
    if name.startswith("hierarchy"):
        return linear_order(hierarchy, graph)
    if name == "spectral":
        return spectral_order(graph, seed=seed)
    # degree order: larger degree first, ties by node id (a stable sort)
    return np.argsort(-graph.degrees().astype(np.int64), kind="stable").astype(np.int64)


def _total_weight(graph, weights):
    if weights.size == 0:
        return graph.m
    return int(weights.sum() // 2)


def _cut(graph, weights, parts):
    return int(cut_total(graph.indptr, graph.indices, weights, parts))


def _vcycles(graph, parts, rule, seed, opts, affinity):
    """Multilevel refinement repeated on fresh partition-respecting levels until it stops paying.

    Cycle ``c`` (from 0) clusters with seed ``seed + c + 1``, cluster-size
    factor ``factor[c mod len(factor)]`` and label-propagation rating
    ``rating[c mod len(rating)]``: ``"weights"`` (the edge weights) or
    ``"affinity"`` (the pipeline's edge affinities), so consecutive cycles
    coarsen differently.
    """
    from partition.refine.coarsen import partition_levels
    from partition.refine.multilevel import refine_multilevel

    skip = ("cycles", "cycle_edges", "factor", "patience", "rating")
    args = {k: v for k, v in opts.items() if k not in skip}
    weights = cut_weights(graph.edge_weights)[0]
    ratings = {"weights": weights if weights.size else None, "affinity": affinity}
    factors, kinds = tuple(opts["factor"]), tuple(opts["rating"])
    best = _cut(graph, weights, parts)
    idle = 0
    for c in range(vcycle_count(graph.m, opts)):
        levels = partition_levels(graph, parts, rule.k, seed=seed + c + 1, factor=factors[c % len(factors)],
                                  weights=ratings[kinds[c % len(kinds)]])
        parts, _ = refine_multilevel(graph, levels, parts, rule, seed=seed + c + 1, **args)
        cut = _cut(graph, weights, parts)
        idle = idle + 1 if cut >= best else 0
        best = min(best, cut)
        if idle >= opts["patience"]:
            break
    return parts


def refine_step(step, graph, order, parts, k, rule, hier, seed, affinity=None):
    """Run one refinement step of the plan on ``parts`` and return the new shards.

    ``step`` is a name of :data:`REFINEMENTS`, run with its options of
    :data:`STEP_OPTIONS`; ``affinity`` (the pipeline's edge affinities) feeds the
    V-cycles' clustering rating and defaults to the Jaccard affinity of ``graph``."""
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

        new, _ = refine_multilevel(graph, hier.labels, parts, rule, seed=seed, **opts)
    elif step == "vcycle":
        if affinity is None:
            affinity = edge_affinity(graph, method="jaccard", seed=seed)
        new = _vcycles(graph, parts, rule, seed, opts, affinity)
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
