"""The in-memory engine: Shardline's linear-embedding partitioner on one machine.

The pipeline (each stage in its own module, each citing its method):

1. :mod:`partition.affinity` — edge affinities (closed-neighbourhood Jaccard
   by default, or truncated personalised PageRank, input weights, unit),
   fixed-point integers.
2. :mod:`partition.hierarchy` — Borůvka-style affinity clustering
   (Bateni et al., NIPS 2017) until no edge is left.
3. :mod:`partition.embedding` — the hierarchy's leaf order puts every node on a
   line (Aydin, Bateni & Mirrokni, WSDM 2016). Small graphs get more starts
   (``AUTO_STARTS``): the spectral (Fiedler) order (Pothen, Simon & Liou,
   1990), the degree order (larger degree first: core before periphery) and
   the leaf orders of hierarchies built with other seeds; orders are computed
   on the driver.
4. :mod:`partition.cut` — each line is cut into ``k`` pieces of equal weight.
5. :mod:`partition.refine` — window DP over the cut positions, multilevel
   Fiduccia–Mattheyses moves on the hierarchy's levels, V-cycles (multilevel
   moves again on fresh levels that respect the current shards,
   :mod:`partition.refine.coarsen`), min-cut repair of shard pairs and
   pairwise swaps; none of them ever breaks the balance rule of
   :mod:`partition.balance`.

The refinement plan is ``DEFAULT_REFINE`` with the parameters in
``STEP_OPTIONS``; both engines read them from here. The steps before ``"pick"``
run on every start; at ``"pick"`` the start with the smallest cut so far
continues alone (ties: the earlier start) and the remaining steps refine it.
A plan without ``"pick"`` refines every start fully and picks at the end.
``"prune"`` drops the starts whose cut exceeds the best one's by more than the
fraction ``within`` (the best start always stays).
The refinement steps work in rounds of independent units (disjoint shard pairs,
disjoint windows of the line, or single shards for the clustering of the
V-cycles), so the Spark engine can run the same units in parallel tasks with
the same result; steps in ``DRIVER_ONLY`` are global sequential passes run on
the driver.

Effort scales with the graph, by rules that depend only on ``m`` (never on the
clock): "auto" uses the first ``start_edges // m`` of ``AUTO_STARTS`` (at least
one), and every ``vcycle`` step makes ``min(cycles, ⌊(cycle_edges / m)²⌋)``
V-cycles at most, ending after ``patience`` cycles without gain. So a graph of
10⁴ edges gets six starts of up to twelve cycles each, one of 2·10⁵ edges
three, and one of 10⁶ edges one start and no V-cycle, which keeps it within
seconds.

Plan history. (1) window, multilevel, fm, swaps on the hierarchy and spectral
starts. (2) FM passes search ``max(1000, L/4)`` moves past their best (``L``
movable nodes) instead of 256: the short limit ended bisections of
collaboration graphs early (ca-CondMat k = 2: 0.109 → 0.070 after
multilevel); pair rounds stop after two rounds that each gain at most ``tol``
of the cut; new ``vcycle`` step; degree and reseeded hierarchy starts;
``pick`` after the V-cycles, then ``flow`` and ``swaps`` on the winner only;
``fm`` left out of the default plan (after the V-cycles it gained < 0.01 % of
the cut on the benchmark graphs), still available. (3) V-cycles alternate
cluster-size factors (16, 6, 40) and the label-propagation rating (edge
weights, edge affinities), and run once more on the winner after ``pick``:
consecutive cycles then coarsen differently, which took the cells of
``jobs/benchmark.py`` that had been closest to the table (ca-GrQc k = 8,
ε = 0.03: 0.0706 → 0.0673; ca-CondMat k = 2, ε = 0.03: 0.0669 → 0.0648) below
it. New ``prune`` step after ``multilevel`` (``within`` 0.25): starts more than
25 % behind the best one get no V-cycles (the degree order on p2p-Gnutella31
at k = 20, for one); a tighter 10 % dropped the spectral start of
ca-AstroPh-lcc at k = 8, which the V-cycles would have made the best.
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

__all__ = ["PartitionResult", "partition_graph", "STARTS", "REFINEMENTS", "DEFAULT_REFINE", "STEP_OPTIONS",
           "DRIVER_ONLY", "refine_step"]

STARTS = ("hierarchy", "spectral", "degree")  # and "hierarchy:<j>": the hierarchy of seed + j
REFINEMENTS = ("window", "multilevel", "vcycle", "flow", "fm", "swaps", "kway", "prune", "pick")
# Driver-only steps: global sequential passes (run on the driver by both engines).
DRIVER_ONLY = ("kway",)
DEFAULT_REFINE = ("window", "multilevel", "prune", "vcycle", "pick", "vcycle", "flow", "swaps")
# Parameters of every refinement step, in one place: both engines read them.
_FM = {"schedule": "matched", "max_stall": 1000, "stall_fraction": 0.25, "tol": 1e-4}
STEP_OPTIONS = {
    "window": {},
    "multilevel": {**_FM, "overfill": 0.03},
    # V-cycles: multilevel refinement on fresh partition-respecting levels (partition.refine.coarsen);
    # min(cycles, (cycle_edges // m)²) cycles (none on the largest graphs), ending after ``patience``
    # cycles without gain.
    "vcycle": {**_FM, "overfill": 0.03, "factor": (16, 6, 40), "rating": ("weights", "affinity"), "cycles": 12,
               "cycle_edges": 800_000, "patience": 3},
    "flow": {"schedule": "matched", "tol": 1e-4},
    "fm": dict(_FM),
    "swaps": {},
    "kway": {},
    # "auto" starts: the first min(len(AUTO_STARTS), start_edges // m) of AUTO_STARTS (at least one).
    "pick": {"start_edges": 600_000},
    # drop the starts whose cut exceeds the best start's by more than this fraction (integer test below)
    "prune": {"within": 0.25},
}
AUTO_STARTS = ("hierarchy", "spectral", "degree", "hierarchy:1", "hierarchy:2", "hierarchy:3")
SPECTRAL_NODE_LIMIT = 300_000  # "auto" starts leave the spectral order out above this many nodes


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


def resolve_starts(starts, n, m):
    """The starts of a plan as a tuple: ``"auto"`` by the effort rule on ``n`` and ``m``, else the list given, checked."""
    if starts in (None, "auto"):
        pool = [x for x in AUTO_STARTS if x != "spectral" or n <= SPECTRAL_NODE_LIMIT]
        count = max(1, min(len(pool), int(STEP_OPTIONS["pick"]["start_edges"]) // max(int(m), 1)))
        return tuple(pool[:count])
    if isinstance(starts, str):
        starts = tuple(s.strip() for s in starts.split(",") if s.strip())
    for s in starts:
        base, _, offset = s.partition(":")
        if base not in STARTS or (offset and (base != "hierarchy" or not offset.isdigit())):
            raise ParameterError(f"unknown start {s!r}; expected one of {', '.join(STARTS)} or hierarchy:<j>")
    if not starts:
        raise ParameterError("at least one start is needed")
    if len(set(starts)) != len(starts):
        raise ParameterError(f"starts repeat: {', '.join(starts)}")
    return tuple(starts)


def resolve_refine(refine):
    """The refinement steps of a plan as a tuple: ``"default"``, ``"none"`` or a comma list, checked."""
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
    starts : "auto" or sequence of {"hierarchy", "spectral", "degree"}
        Linear orders to cut and refine; "auto" adds the spectral and degree
        orders for graphs of at most ``SPECTRAL_NODE_LIMIT`` nodes and
        ``START_EDGES`` edges.
    refine : "default", "none" or sequence of step names
        Refinement steps in order, from ``REFINEMENTS``: "window",
        "multilevel", "vcycle", "flow", "fm", "swaps", "kway", "prune",
        "pick" (module docstring); ``kway`` is a global sequential pass
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
    k = check_parts(k, graph.n)
    eps = check_imbalance(eps)
    if affinity not in AFFINITIES:
        raise ParameterError(f"unknown affinity {affinity!r}; expected one of {', '.join(AFFINITIES)}")
    if linkage not in LINKAGES:
        raise ParameterError(f"unknown linkage {linkage!r}; expected one of {', '.join(LINKAGES)}")
    if affinity == "weights" and not graph.weighted:
        raise ParameterError("affinity 'weights' needs a weighted graph (--weighted or --weight-column)")
    starts = resolve_starts(starts, graph.n, graph.m)
    steps = resolve_refine(refine)
    rule = balance_rule(graph.node_weights, k, eps, n_nodes=graph.n)
    clock = _Clock(progress)
    if progress is not None:  # the plan, for progress bars: stage entries in the order they finish
        progress({"plan": ["affinity", "hierarchy", "orders"] + [s for s in steps if s not in ("pick", "prune")]})
    weights, _ = cut_weights(graph.edge_weights)
    all_weight = _total_weight(graph, weights)

    t = time.perf_counter()
    aff = edge_affinity(graph, method=affinity, hub_cap=hub_cap, seed=seed)
    clock.stage("affinity", time.perf_counter() - t, method=affinity)
    t = time.perf_counter()
    hierarchy = build_hierarchy(graph, aff, seed=seed, linkage=linkage)
    clock.stage("hierarchy", time.perf_counter() - t, rounds=hierarchy.rounds,
                clusters=[int(x) for x in hierarchy.sizes], edges=[int(x) for x in hierarchy.edges])
    hierarchies = {0: hierarchy}

    # one state per start: [name, order, parts, hierarchy]
    states = []
    for name in starts:
        t = time.perf_counter()
        offset = int(name.partition(":")[2] or 0)
        if offset not in hierarchies:
            hierarchies[offset] = build_hierarchy(graph, aff, seed=seed + offset, linkage=linkage)
        order = _start_order(name, graph, hierarchies[offset], seed)
        clock.stage(f"{name}: order", time.perf_counter() - t)
        t = time.perf_counter()
        parts = np.asarray(line_cut(order, graph.node_weights, k, eps), dtype=np.int64)
        clock.stage(f"{name}: line cut", time.perf_counter() - t,
                    cut_after=_frac(_cut(graph, weights, parts), all_weight))
        states.append([name, order, parts, hierarchies[offset]])
    finals = {}
    for step in steps + (() if "pick" in steps else ("pick",)):
        if step in ("pick", "prune"):
            cuts = [_cut(graph, weights, st[2]) for st in states]
            finals.update({st[0]: c for st, c in zip(states, cuts)})
            if step == "pick":
                states = [states[int(np.argmin(cuts))]]  # argmin: the earlier start on ties
            else:
                limit = min(cuts) + int(STEP_OPTIONS["prune"]["within"] * min(cuts))
                states = [st for st, c in zip(states, cuts) if c <= limit]
            continue
        for st in states:
            name, order, parts, hier = st
            t = time.perf_counter()
            before = _cut(graph, weights, parts)
            parts = refine_step(step, graph, order, parts, k, rule, hier, seed, aff)
            after = _cut(graph, weights, parts)
            if after > before:  # a step never makes the cut worse
                raise AssertionError(f"refinement step {step} increased the cut ({before} -> {after})")
            clock.stage(f"{name}: {step}", time.perf_counter() - t,
                        cut_before=_frac(before, all_weight), cut_after=_frac(after, all_weight))
            st[2] = parts
    chosen, order, parts, hierarchy = states[0]
    final = _cut(graph, weights, parts)
    finals[chosen] = final
    loads = np.bincount(parts, weights=graph.node_weight_array(), minlength=k)
    if not rule.check(loads):
        raise AssertionError(f"start {chosen} broke the balance rule: {rule.violations(loads)[:3]}")
    start_rows = [{"start": r["stage"][: -len(": line cut")], "raw_cut_fraction": r["cut_after"]}
                  for r in clock.rows if r["stage"].endswith(": line cut")]
    for row in start_rows:
        row["cut_fraction"] = _frac(finals[row["start"]], all_weight)
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


def _frac(cut, total):
    return round(cut / total, 6) if total else 0.0


def _cycles(opts, m):
    """Number of V-cycles for a graph of ``m`` edges: ``min(cycles, ⌊(cycle_edges / m)²⌋)``.

    The work of the cycles, ``cycles × m``, then falls like ``1 / m`` once the
    cap is reached: twice the edges, a quarter of the cycles. Integer
    arithmetic, so both engines agree.
    """
    m = max(int(m), 1)
    return min(int(opts["cycles"]), (int(opts["cycle_edges"]) ** 2) // (m * m))


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
    for c in range(_cycles(opts, graph.m)):
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
