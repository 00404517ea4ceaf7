"""The pipeline, written once: a :class:`~partition.plan.Plan` carried out over an engine's backend.

:func:`run_plan` is the whole partitioner above the bulk operations: the edge
affinities, the Borůvka-style hierarchy (Bateni et al., NIPS 2017), one linear
order per start (Aydin, Bateni & Mirrokni, WSDM 2016), the line cut of each
order into ``k`` pieces of equal weight (:func:`partition.cut.line_cut`), the
refinement steps in the plan's order with its ``prune`` and ``pick`` rules,
the balance check and the report. Both engines run it; each supplies a
backend with these operations (all results are plain numpy arrays and
integers, so the rules above them are the same for both):

``n``, ``m``, ``node_weights``, ``total_weight``
    The graph's size, node weights (``None``: units) and total integer edge
    weight (:func:`partition.refine.gains.cut_weights`).
``affinity()``
    The edge affinities of the plan (:mod:`partition.affinity`).
``hierarchy(affinity, seed)``
    A hierarchy with ``rounds``, ``sizes`` and ``edges``.
``order(start, hierarchy)``
    The linear order of one start (``order[p]`` = node at position ``p``).
``cut(parts)``
    The integer cut of an assignment.
``refine(step, start, order, parts, rule, hierarchy, affinity)``
    One refinement step; returns the new shards and where it ran.

The in-memory backend is :class:`partition.partitioner.MemoryBackend`; the
Spark one is in :mod:`partition.spark.engine`.
"""

from __future__ import annotations

import time

import numpy as np

from partition.balance import balance_rule
from partition.cut import line_cut
from partition.plan import STEP_OPTIONS

__all__ = ["run_plan", "Clock"]


class Clock:
    """Stage rows of a run: name, seconds and figures; each one also goes to ``progress``."""

    def __init__(self, progress, rows=None):
        self.rows = [] if rows is None else rows
        self.progress = progress

    def stage(self, name, seconds, **info):
        row = {"stage": name, "seconds": round(seconds, 4), **info}
        self.rows.append(row)
        if self.progress is not None:
            self.progress(row)
        return row


def _frac(cut, total):
    return round(cut / total, 6) if total else 0.0


def _hier_info(h):
    return {"rounds": h.rounds, "clusters": [int(x) for x in h.sizes], "edges": [int(x) for x in h.edges]}


def run_plan(plan, backend, progress=None, clock=None):
    """Carry out ``plan`` (already :meth:`~partition.plan.Plan.for_graph`) over ``backend``.

    Parameters
    ----------
    plan : partition.plan.Plan
    backend : object
        The operations of the module docstring.
    progress : callable or None
        Called with the plan's stage names first, then one dict per finished stage.
    clock : Clock or None
        Stage rows already begun (the Spark engine's read stage); a new one by default.

    Returns
    -------
    parts : ndarray of int64
    order : ndarray of int64
        The chosen start's linear order.
    hierarchy : object
        The chosen start's hierarchy.
    report : dict
        ``engine``, ``k``, ``imbalance_allowed``, ``seed``, ``options``,
        ``balance``, ``hierarchy``, ``starts`` (raw and final cut of each),
        ``chosen_start``, ``cut``, ``cut_fraction``, ``stages``, ``seconds``.

    Raises
    ------
    AssertionError
        When a step raised the cut or the result breaks the balance rule
        (a bug, never an input error).
    """
    k, seed, starts, steps = plan.k, plan.seed, tuple(plan.starts), tuple(plan.steps)
    clock = Clock(progress) if clock is None else clock
    rule = balance_rule(backend.node_weights, k, plan.eps, n_nodes=backend.n)
    total = backend.total_weight
    if progress is not None:  # the plan, for progress bars: stage entries in the order they finish
        progress({"plan": ["affinity", "hierarchy", "orders"] + [s for s in steps if s not in ("pick", "prune")]})

    t = time.perf_counter()
    aff = backend.affinity()
    clock.stage("affinity", time.perf_counter() - t, method=plan.affinity)
    t = time.perf_counter()
    hierarchies = {0: backend.hierarchy(aff, seed)}
    clock.stage("hierarchy", time.perf_counter() - t, **_hier_info(hierarchies[0]))

    states = []  # one state per start: [name, order, parts, hierarchy, cut of parts]
    raw = {}
    for name in starts:
        t = time.perf_counter()
        offset = int(name.partition(":")[2] or 0)
        if offset not in hierarchies:
            hierarchies[offset] = backend.hierarchy(aff, seed + offset)
        order = np.asarray(backend.order(name, hierarchies[offset]), dtype=np.int64)
        clock.stage(f"{name}: order", time.perf_counter() - t)
        t = time.perf_counter()
        parts = np.asarray(line_cut(order, backend.node_weights, k, plan.eps), dtype=np.int64)
        raw[name] = backend.cut(parts)
        clock.stage(f"{name}: line cut", time.perf_counter() - t, cut_after=_frac(raw[name], total))
        states.append([name, order, parts, hierarchies[offset], raw[name]])

    finals = {}
    for step in steps + (() if "pick" in steps else ("pick",)):
        if step in ("pick", "prune"):
            cuts = [st[4] for st in states]
            finals.update({st[0]: c for st, c in zip(states, cuts)})
            if step == "pick":
                states = [states[int(np.argmin(cuts))]]  # argmin: the earlier start on ties
            else:
                limit = min(cuts) + int(STEP_OPTIONS["prune"]["within"] * min(cuts))
                states = [st for st, c in zip(states, cuts) if c <= limit]
            continue
        for st in states:
            name, order, parts, hier, before = st
            t = time.perf_counter()
            parts, where = backend.refine(step, name, order, parts, rule, hier, aff)
            parts = np.asarray(parts, dtype=np.int64)
            after = backend.cut(parts)
            if after > before:  # a step never makes the cut worse
                raise AssertionError(f"refinement step {step} increased the cut ({before} -> {after})")
            info = {"cut_before": _frac(before, total), "cut_after": _frac(after, total)}
            clock.stage(f"{name}: {step}", time.perf_counter() - t, **info, **({"where": where} if where else {}))
            st[2], st[4] = parts, after

    chosen, order, parts, hierarchy, final = states[0]
    finals[chosen] = final
    weights = np.ones(backend.n) if backend.node_weights is None else backend.node_weights
    loads = np.bincount(parts, weights=weights, minlength=k)
    if not rule.check(loads):
        raise AssertionError(f"start {chosen} broke the balance rule: {rule.violations(loads)[:3]}")
    start_rows = [{"start": name, "raw_cut": int(raw[name]), "cut": int(finals[name]),
                   "raw_cut_fraction": _frac(raw[name], total), "cut_fraction": _frac(finals[name], total)}
                  for name in starts]
    report = {
        "engine": plan.engine,
        "k": k,
        "imbalance_allowed": plan.eps,
        "seed": seed,
        "options": plan.options(),
        "balance": {"cap": int(rule.cap), "floor": int(rule.floor), "exact": bool(rule.exact),
                    "balanced": bool(rule.check(loads)), "max_load": int(loads.max()) if k else 0},
        "hierarchy": _hier_info(hierarchy),
        "starts": start_rows,
        "chosen_start": chosen,
        "cut": int(final),
        "cut_fraction": _frac(final, total),
        "stages": clock.rows,
        "seconds": round(sum(r["seconds"] for r in clock.rows), 4),
    }
    return parts, order, hierarchy, report
