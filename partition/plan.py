"""The plan of a run: one immutable value, built and checked in one place, read by both engines.

A :class:`Plan` says what a run does — ``k``, ε, seed, the affinity and
linkage of the hierarchy, the starts (linear orders to cut) and the
refinement steps in order, the engine and, for Spark, its mode — and
:func:`make_plan` is the only place that checks those choices. The command
line (``shardline run`` and ``spark-submit jobs/spark_partition.py``, one
parser), the Python entry (:mod:`partition.api`) and both engines build their
plan with it; :func:`partition.pipeline.run_plan` carries it out over an
engine's backend.

The effort rules live here too. They depend only on the graph's size, never
on the clock, so both engines agree: ``"auto"`` starts are the first
``start_edges // m`` of :data:`AUTO_STARTS` (at least one; the spectral order
only up to :data:`SPECTRAL_NODE_LIMIT` nodes), and every ``vcycle`` step makes
at most :func:`vcycle_count` cycles. So a graph of 10⁴ edges gets six starts
of up to twelve cycles each, one of 2·10⁵ edges three, and one of 10⁶ edges
one start and no V-cycle.

The steps before ``"pick"`` run on every start; at ``"pick"`` the start with
the smallest cut so far continues alone (ties: the earlier start). A plan
without ``"pick"`` refines every start fully and picks at the end.
``"prune"`` drops the starts whose cut exceeds the best one's by more than the
fraction ``within`` (the best start always stays). The history of the default
plan, with the measurements behind each change, is in ``partition/PLAN-NOTES.md``.

This module imports no numba, so the command line can build its parser and
check a plan without compiling anything.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

from partition.errors import ParameterError, check_imbalance, check_parts
from partition.rules import AFFINITIES, DEFAULT_HUB_CAP, LINKAGES

__all__ = ["Plan", "make_plan", "resolve_starts", "resolve_refine", "vcycle_count", "STARTS", "REFINEMENTS",
           "DRIVER_ONLY", "UNIT_STEPS", "DEFAULT_REFINE", "STEP_OPTIONS", "AUTO_STARTS", "SPECTRAL_NODE_LIMIT",
           "ENGINES", "MODES", "DISTRIBUTED_STARTS"]

STARTS = ("hierarchy", "spectral", "degree")  # and "hierarchy:<j>": the hierarchy of seed + j
REFINEMENTS = ("window", "multilevel", "vcycle", "flow", "fm", "swaps", "kway", "prune", "pick")
DRIVER_ONLY = ("kway",)
"""Global sequential passes: run on the driver by both engines."""
UNIT_STEPS = ("window", "fm", "swaps")
"""Steps the Spark engine runs as Spark tasks (one unit per task); the others run on the driver."""
DEFAULT_REFINE = ("window", "multilevel", "prune", "vcycle", "pick", "vcycle", "flow", "swaps")
_FM = {"schedule": "matched", "max_stall": 1000, "stall_fraction": 0.25, "tol": 1e-4}
STEP_OPTIONS = {
    "window": {},
    "multilevel": {**_FM, "overfill": 0.03},
    # V-cycles: multilevel refinement on fresh partition-respecting levels (partition.refine.coarsen);
    # vcycle_count(...) cycles (none on the largest graphs), ending after ``patience`` cycles without gain.
    "vcycle": {**_FM, "overfill": 0.03, "factor": (16, 6, 40), "rating": ("weights", "affinity"), "cycles": 12,
               "cycle_edges": 800_000, "patience": 3},
    "flow": {"schedule": "matched", "tol": 1e-4},
    "fm": dict(_FM),
    "swaps": {},
    "kway": {},
    # "auto" starts: the first min(len(AUTO_STARTS), start_edges // m) of AUTO_STARTS (at least one).
    "pick": {"start_edges": 600_000},
    # drop the starts whose cut exceeds the best start's by more than this fraction (integer test)
    "prune": {"within": 0.25},
}
"""Parameters of every refinement step, in one place: both engines read them."""
AUTO_STARTS = ("hierarchy", "spectral", "degree", "hierarchy:1", "hierarchy:2", "hierarchy:3")
SPECTRAL_NODE_LIMIT = 300_000  # "auto" starts leave the spectral order out above this many nodes
ENGINES = ("memory", "spark")
MODES = ("distributed", "full")
DISTRIBUTED_STARTS = ("hierarchy", "spectral")
"""Starts of the Spark engine's distributed mode: the hierarchy's order in Spark, the spectral one on the driver."""


def resolve_starts(starts, n, m):
    """The starts as a tuple: ``"auto"`` by the effort rule on ``n`` and ``m``, else the list given, checked."""
    if starts in (None, "auto"):
        pool = [x for x in AUTO_STARTS if x != "spectral" or n <= SPECTRAL_NODE_LIMIT]
        count = max(1, min(len(pool), int(STEP_OPTIONS["pick"]["start_edges"]) // max(int(m), 1)))
        return tuple(pool[:count])
    return _check_starts(starts)


def _check_starts(starts):
    if isinstance(starts, str):
        starts = tuple(s.strip() for s in starts.split(",") if s.strip())
    starts = tuple(starts)
    for s in starts:
        base, _, offset = s.partition(":")
        if base not in STARTS or (offset and (base != "hierarchy" or not offset.isdigit())):
            raise ParameterError(f"unknown start {s!r}; expected one of {', '.join(STARTS)} or hierarchy:<j>")
    if not starts:
        raise ParameterError("at least one start is needed")
    if len(set(starts)) != len(starts):
        raise ParameterError(f"starts repeat: {', '.join(starts)}")
    return starts


def resolve_refine(refine):
    """The refinement steps as a tuple: ``"default"``, ``"none"`` or a comma list, checked."""
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


def vcycle_count(m, opts=None):
    """Number of V-cycles for a graph of ``m`` edges: ``min(cycles, ⌊(cycle_edges / m)²⌋)``.

    The work of the cycles, ``cycles × m``, then falls like ``1 / m`` once the
    cap is reached: twice the edges, a quarter of the cycles. Integer
    arithmetic, so both engines agree.
    """
    opts = STEP_OPTIONS["vcycle"] if opts is None else opts
    m = max(int(m), 1)
    return min(int(opts["cycles"]), (int(opts["cycle_edges"]) ** 2) // (m * m))


@dataclass(frozen=True)
class Plan:
    """What a run does; build it with :func:`make_plan` (which checks it), never by hand.

    Attributes
    ----------
    k : int
    eps : float
        Allowed imbalance ε (:mod:`partition.balance`).
    seed : int
    affinity, linkage : str
        Edge affinity (:mod:`partition.affinity`) and cluster linkage of the hierarchy.
    hub_cap : int
    starts : tuple of str or "auto"
        ``"auto"`` until :meth:`for_graph` applies the effort rule.
    steps : tuple of str
        Refinement steps in order (names of :data:`REFINEMENTS`).
    engine : {"memory", "spark"}
    mode : {"distributed", "full"}
        The Spark engine's mode (the in-memory engine ignores it).
    collect_edges : int or None
        Spark: coarse hierarchy graphs of at most this many edges finish on the driver.
    """

    k: int
    eps: float = 0.0
    seed: int = 0
    affinity: str = "jaccard"
    linkage: str = "sum"
    hub_cap: int = DEFAULT_HUB_CAP
    starts: object = "auto"
    steps: tuple = DEFAULT_REFINE
    engine: str = "memory"
    mode: str = "distributed"
    collect_edges: object = None

    @property
    def distributed(self):
        """True when the Spark engine runs the plan with the edges in Spark."""
        return self.engine == "spark" and self.mode == "distributed"

    def for_graph(self, n, m, weighted):
        """This plan for a graph of ``n`` nodes and ``m`` edges: ``k`` checked, ``"auto"`` starts resolved.

        Raises
        ------
        ParameterError
            ``k`` larger than ``n``; affinity ``"weights"`` on an unweighted graph.
        """
        check_parts(self.k, n)
        if self.affinity == "weights" and not weighted:
            raise ParameterError("affinity 'weights' needs a weighted graph (--weighted or --weight-column)")
        if self.starts != "auto":
            return self
        starts = ("hierarchy",) if self.distributed else resolve_starts("auto", n, m)
        return replace(self, starts=starts)

    def options(self):
        """The method options as the run report records them."""
        return {"affinity": self.affinity, "linkage": self.linkage, "hub_cap": int(self.hub_cap),
                "starts": list(self.starts) if self.starts != "auto" else "auto", "refine": list(self.steps)}


def make_plan(k, eps=0.0, seed=0, affinity="jaccard", linkage="sum", hub_cap=DEFAULT_HUB_CAP, starts="auto",
              refine="default", engine="memory", mode="distributed", collect_edges=None):
    """Check every choice of a run and return its :class:`Plan`.

    ``refine`` is ``"default"``, ``"none"`` or step names (a comma list or a
    sequence). The Spark engine's distributed mode reads ``"default"`` as its
    unit steps (:data:`UNIT_STEPS`) and takes the starts of
    :data:`DISTRIBUTED_STARTS` only.

    Raises
    ------
    ParameterError
        Naming the first choice that is not valid.
    """
    k = check_parts(k)
    eps = check_imbalance(eps)
    if isinstance(seed, bool) or int(seed) != seed:
        raise ParameterError(f"the seed must be a whole number, got {seed!r}")
    if affinity not in AFFINITIES:
        raise ParameterError(f"unknown affinity {affinity!r}; expected one of {', '.join(AFFINITIES)}")
    if linkage not in LINKAGES:
        raise ParameterError(f"unknown linkage {linkage!r}; expected one of {', '.join(LINKAGES)}")
    if isinstance(hub_cap, bool) or int(hub_cap) != hub_cap or int(hub_cap) < 1:
        raise ParameterError(f"the hub cap must be a whole number >= 1, got {hub_cap!r}")
    if engine not in ENGINES:
        raise ParameterError(f"engine must be one of {', '.join(ENGINES)}, got {engine!r}")
    if mode not in MODES:
        raise ParameterError(f"mode must be one of {', '.join(MODES)}, got {mode!r}")
    distributed = engine == "spark" and mode == "distributed"
    steps = UNIT_STEPS if distributed and refine in (None, "default") else resolve_refine(refine)
    if starts not in (None, "auto"):
        starts = _check_starts(starts)
        if distributed and any(s not in DISTRIBUTED_STARTS for s in starts):
            raise ParameterError(f"the distributed mode takes the starts {', '.join(DISTRIBUTED_STARTS)} "
                                 f"(once each), got {','.join(starts)}; --mode full runs every start on the driver")
    if collect_edges is not None and (int(collect_edges) != collect_edges or int(collect_edges) < 0):
        raise ParameterError(f"collect_edges must be a whole number >= 0, got {collect_edges!r}")
    return Plan(k=k, eps=eps, seed=int(seed), affinity=affinity, linkage=linkage, hub_cap=int(hub_cap),
                starts="auto" if starts in (None, "auto") else starts, steps=tuple(steps), engine=engine,
                mode=mode, collect_edges=None if collect_edges is None else int(collect_edges))
