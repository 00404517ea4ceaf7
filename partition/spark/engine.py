"""The Spark engine's pipeline driver: read, affinity, hierarchy, order, cut, refine, write.

:func:`run_spark` is what ``shardline run --engine spark`` calls; it returns the
report dict. :func:`partition_spark` runs the pipeline on a
:class:`~partition.spark.io.SparkGraph` and returns the shards, as
:func:`partition.partitioner.partition_graph` does for an in-memory graph, with
the same result for the same input, options and seed. Two modes:

``distributed``
    Hierarchy start only and the unit-based refinement steps
    (``window``, ``fm``, ``swaps``: :data:`partition.spark.refine.UNIT_STEPS`),
    each unit a Spark task; nothing collects the edges. In memory:
    ``partition_graph(..., starts=("hierarchy",), refine=UNIT_STEPS)``.
``full``
    The in-memory default plan, whatever it currently is (more starts —
    spectral, degree —, multilevel V-cycles over several hierarchies, a pick
    step, min-cut repair): Spark reads and normalises the input, the graph is
    collected and :func:`partition.partitioner.partition_graph` runs on the
    driver, so the result is the in-memory one by construction. Those steps
    are not unit based yet; what each would need to run as Spark units is
    listed in the project notes of this package (``multilevel``: the extra
    hierarchies via :func:`partition.spark.hierarchy.build_hierarchy_df` with
    other seeds/affinities, the atom graphs of each level by ``groupBy`` on
    ``(label, shard)``, FM units on them, and the rebalancing pass per shard).

The driver holds O(n) arrays (hierarchy labels, positions, shards); the
edges stay in Spark. GraphFrames is not needed (see
:mod:`partition.spark.hierarchy`). :func:`fits_driver` is the rule for
``--engine auto``.

Reference: K. Aydin, M. Bateni and V. Mirrokni, "Distributed balanced
partitioning via linear embedding", WSDM 2016.
"""

from __future__ import annotations

import json
import os
import tempfile
import time
from pathlib import Path

import numpy as np

from partition import __version__
from partition.affinity import DEFAULT_HUB_CAP, METHODS as AFFINITIES
from partition.atomic import write_text
from partition.balance import balance_rule
from partition.cut import line_cut
from partition.errors import ParameterError, check_imbalance, check_parts
from partition.rules import LINKAGES
from partition.sizing import BYTES_PER_EDGE, fits_driver  # noqa: F401 - the --engine auto rule

__all__ = ["run_spark", "partition_spark", "fits_driver", "MODES", "BYTES_PER_EDGE"]

MODES = ("distributed", "full")


EDGES_PER_SHUFFLE_PARTITION = 4_000_000


_FM_KEYS = ("max_stall", "stall_fraction", "tol", "max_passes", "max_rounds")


def _fm_options(step_options):
    """The in-memory plan's options of the unit steps, as the Spark units take them.

    Raises ``ParameterError`` naming any option the Spark units do not reproduce
    (rather than approximating it).
    """
    for step in ("window", "swaps"):
        if step_options.get(step, {}):
            raise ParameterError(f"the Spark engine does not reproduce {step} options {step_options[step]}")
    fm = dict(step_options.get("fm", {}))
    if fm.pop("schedule", "round_robin") != "matched":
        raise ParameterError("the Spark engine reproduces fm with schedule 'matched' only")
    extra = sorted(set(fm) - set(_FM_KEYS))
    if extra:
        raise ParameterError(f"the Spark engine does not reproduce fm options {extra}")
    return fm


class _Blocks:
    """The refinement's cached edge blocks, built when first needed and shared by the steps.

    ``cut`` and ``fm`` weights (:func:`partition.spark.refine.int_weights`) are
    the same ones on unweighted graphs, so one set of blocks serves both.
    """

    def __init__(self, spark, sg):
        self.spark, self.sg, self.made = spark, sg, {}

    def __call__(self, kind):
        from partition.spark.refine import edge_blocks

        kind = kind if self.sg.weighted else "cut"
        if kind not in self.made:
            self.made[kind] = edge_blocks(self.spark, self.sg, kind)
        return self.made[kind]

    def release(self):
        for b in self.made.values():
            b.release()
        self.made.clear()


DISTRIBUTED_STARTS = ("hierarchy", "spectral")
"""Starts the distributed mode computes: the hierarchy's order in Spark, the spectral order on the driver."""


def partition_spark(spark, sg, k, eps=0.0, seed=0, affinity="jaccard", linkage="sum", hub_cap=DEFAULT_HUB_CAP,
                    mode="distributed", work_dir=None, resume=False, collect_edges=None, progress=None,
                    starts="auto", refine="default"):
    """Partition a :class:`~partition.spark.io.SparkGraph` (see the module docstring).

    Parameters
    ----------
    spark : SparkSession
    sg : partition.spark.io.SparkGraph
    k : int
    eps : float
    seed : int
    affinity : {"jaccard", "ppr", "weights", "unit"}
    linkage : {"sum", "average", "max"}
    hub_cap : int
    mode : {"distributed", "full"}
        See the module docstring.
    work_dir : str or path-like
        Checkpoints (hierarchy rounds, stages).
    resume : bool
    collect_edges : int or None
        Coarse graphs with at most this many edges finish on the driver
        (default :data:`partition.spark.hierarchy.COLLECT_EDGES`).
    progress : callable or None
        Called with one dict per stage and per hierarchy round.

    starts, refine : str or tuple
        As :func:`partition.partitioner.partition_graph`. ``mode="full"``
        runs them on the driver as given; the distributed mode's ``"auto"``
        is the hierarchy start and ``"default"`` the unit steps (window,
        fm, swaps) as Spark tasks; it takes the starts hierarchy and
        spectral, and any refinement steps (those that are not unit based
        run on the driver, as the stage rows say).

    Returns
    -------
    parts : ndarray of int64
    order : ndarray of int64
    report : dict

    Raises
    ------
    ParameterError
        Bad ``k``, ε, options, or a resume with other options.
    """
    from partition.partitioner import STEP_OPTIONS
    from partition.spark.affinity import edge_affinity_df
    from partition.spark.checkpoint import Checkpoints
    from partition.spark.hierarchy import COLLECT_EDGES, build_hierarchy_df
    from partition.spark.io import collect_graph, node_weight_array
    from partition.spark.order import linear_order_df
    from partition.spark.refine import UNIT_STEPS, spark_fm, spark_swaps, spark_window
    from partition.spark.session import describe

    k = check_parts(k, sg.n)
    eps = check_imbalance(eps)
    if mode not in MODES:
        raise ParameterError(f"mode must be one of {', '.join(MODES)}, got {mode!r}")
    if affinity not in AFFINITIES or linkage not in LINKAGES:
        raise ParameterError(f"unknown affinity {affinity!r} or linkage {linkage!r}")
    if affinity == "weights" and not sg.weighted:
        raise ParameterError("affinity 'weights' needs a weighted graph")
    fm_opts = _fm_options(STEP_OPTIONS)
    # a shuffle partition per EDGES_PER_SHUFFLE_PARTITION edges at least (the session's count is the floor):
    # with 4 partitions a 64 M-edge join ran out of execution memory in a 4 GiB local driver
    base = int(spark.conf.get("spark.sql.shuffle.partitions"))
    spark.conf.set("spark.sql.shuffle.partitions", str(max(base, -(-sg.m // EDGES_PER_SHUFFLE_PARTITION))))
    collect_edges = COLLECT_EDGES if collect_edges is None else int(collect_edges)
    if work_dir is None:
        work_dir = tempfile.mkdtemp(prefix="shardline-spark-")
    work_dir = Path(work_dir)
    options = {"k": k, "eps": eps, "seed": int(seed), "affinity": affinity, "linkage": linkage,
               "hub_cap": int(hub_cap), "mode": mode, "n": sg.n, "m": sg.m, "source": sg.source}
    ck = Checkpoints(work_dir, options, resume)
    rows = []

    def stage(name, t, **info):
        row = {"stage": name, "seconds": round(time.perf_counter() - t, 4), **info}
        rows.append(row)
        if progress is not None:
            progress(row)

    starts, steps = _distributed_plan(starts, refine) if mode == "distributed" else (starts, refine)
    nweights = node_weight_array(sg)
    rule = balance_rule(nweights, k, eps, n_nodes=sg.n)
    nw_ones = np.ones(sg.n, dtype=np.int64) if nweights is None else nweights
    driver_graph = []

    def graph():
        if not driver_graph:
            driver_graph.append(collect_graph(sg))
        return driver_graph[0]

    if progress is not None and mode == "distributed":  # the plan, for progress bars
        progress({"plan": ["affinity", "hierarchy", "orders", *steps]})
    if mode == "full":
        return _full_on_driver(graph(), sg, k, eps, seed, affinity, linkage, hub_cap, rule, nw_ones, rows, stage,
                               starts, steps)
    t = time.perf_counter()
    describe(spark, "affinity")
    aff = edge_affinity_df(sg, affinity, hub_cap=hub_cap)
    stage("affinity", t, method=affinity)
    t = time.perf_counter()
    h = build_hierarchy_df(spark, aff, sg.n, seed=seed, linkage=linkage, work=work_dir, resume=resume,
                           collect_edges=collect_edges, progress=progress)
    stage("hierarchy", t, rounds=h.rounds, clusters=[int(x) for x in h.sizes], edges=[int(x) for x in h.edges])

    t = time.perf_counter()
    blocks = _Blocks(spark, sg)
    blocks("cut")
    stage("edge blocks", t)
    best, start_rows = None, []
    for name in starts:
        t = time.perf_counter()
        key = f"{name}-order"
        if ck.has(key):
            order = ck.load(key)[0]["order"]
        elif name == "hierarchy":
            order = linear_order_df(spark, h, sg.edges, blocks=blocks("cut"))
        else:
            from partition.embedding import spectral_order

            order = spectral_order(graph(), seed=seed)
        ck.save(key, {"order": order})
        stage(f"{name}: order", t)
        t = time.perf_counter()
        parts = np.asarray(line_cut(order, nweights, k, eps), dtype=np.int64)
        stage(f"{name}: line cut", t)
        raw = blocks("cut").cut_total(parts)
        for step in steps:
            t = time.perf_counter()
            key = f"{name}-{step}"
            if ck.has(key):
                parts = ck.load(key)[0]["parts"]
            elif step == "window":
                parts = spark_window(spark, sg, order, parts, rule, nweights, progress=progress,
                                     blocks=blocks("cut"))
            elif step == "fm":
                parts = spark_fm(spark, sg, parts, rule, nw_ones, seed=seed, progress=progress, blocks=blocks("fm"),
                                 **fm_opts)
            elif step == "swaps":
                parts = spark_swaps(spark, sg, parts, rule, nweights, progress=progress, blocks=blocks("cut"))
            else:  # not unit based: on the driver with the in-memory step
                from partition.partitioner import refine_step

                parts = refine_step(step, graph(), order, parts, k, rule, h, seed)
            parts = np.asarray(parts, dtype=np.int64)
            ck.save(key, {"parts": parts})
            stage(f"{name}: {step}", t, where="spark" if step in UNIT_STEPS else "driver")
        final = blocks("cut").cut_total(parts)
        start_rows.append({"start": name, "raw_cut": raw, "cut": final})
        if best is None or final < best[0]:
            best = (final, name, parts, order)
    blocks.release()
    final, chosen, parts, order = best
    loads = np.bincount(parts, weights=nw_ones, minlength=k)
    report = {
        "engine": "spark",
        "mode": mode,
        "k": k,
        "imbalance_allowed": eps,
        "seed": int(seed),
        "options": {"affinity": affinity, "linkage": linkage, "hub_cap": int(hub_cap),
                    "starts": list(starts), "refine": list(steps), "collect_edges": collect_edges},
        "graph": {"nodes": sg.n, "edges": sg.m, "source": sg.source},
        "balance": {"cap": int(rule.cap), "floor": int(rule.floor), "exact": bool(rule.exact),
                    "balanced": bool(rule.check(loads)), "max_load": int(loads.max())},
        "hierarchy": {"rounds": h.rounds, "clusters": [int(x) for x in h.sizes], "edges": [int(x) for x in h.edges]},
        "starts": start_rows,
        "chosen_start": chosen,
        "cut": int(final),
        "cut_fraction": round(final / sg.m, 6) if sg.m and not sg.weighted else None,
        "stages": rows,
        "seconds": round(sum(r["seconds"] for r in rows), 4),
    }
    return parts, order, report


def _distributed_plan(starts, refine):
    """Starts and steps of the distributed mode (see :func:`partition_spark`)."""
    from partition.partitioner import resolve_refine
    from partition.spark.refine import UNIT_STEPS

    if starts in (None, "auto"):
        starts = ("hierarchy",)
    elif isinstance(starts, str):
        starts = tuple(s.strip() for s in starts.split(",") if s.strip())
    if not starts or any(s not in DISTRIBUTED_STARTS for s in starts) or len(set(starts)) != len(starts):
        raise ParameterError(f"the distributed mode takes the starts {', '.join(DISTRIBUTED_STARTS)} (once each), "
                             f"got {starts!r}; --mode full runs every start on the driver")
    steps = UNIT_STEPS if refine in (None, "default") else resolve_refine(refine)
    return tuple(starts), tuple(steps)


def _full_on_driver(g, sg, k, eps, seed, affinity, linkage, hub_cap, rule, nw_ones, rows, stage, starts="auto",
                    refine="default"):
    """The full plan on the driver (the graph is collected): :func:`partition_graph` itself."""
    from partition.partitioner import partition_graph

    t = time.perf_counter()
    res = partition_graph(g, k, eps, seed, affinity=affinity, linkage=linkage, hub_cap=hub_cap, starts=starts,
                          refine=refine)
    stage("full plan on the driver", t, where="driver")
    parts = np.asarray(res.parts, dtype=np.int64)
    loads = np.bincount(parts, weights=nw_ones, minlength=k)
    report = dict(res.report)
    report.update({
        "engine": "spark", "mode": "full", "where": "driver",
        "graph": {"nodes": sg.n, "edges": sg.m, "source": sg.source},
        "balance": {"cap": int(rule.cap), "floor": int(rule.floor), "exact": bool(rule.exact),
                    "balanced": bool(rule.check(loads)), "max_load": int(loads.max())},
        "stages": rows + [dict(r, where="driver") for r in res.report.get("stages", [])],
    })
    from partition.refine.gains import cut_total, cut_weights

    report["cut"] = int(cut_total(g.indptr, g.indices, cut_weights(g.edge_weights)[0], parts))
    report["cut_fraction"] = round(report["cut"] / sg.m, 6) if sg.m and not sg.weighted else None
    report["seconds"] = round(sum(r["seconds"] for r in rows) + res.report.get("seconds", 0.0), 4)
    return parts, np.asarray(res.order, dtype=np.int64), report


def run_spark(graph_path, k, eps=0.0, seed=0, affinity="jaccard", linkage="sum", hub_cap=DEFAULT_HUB_CAP,
              mode="distributed", fmt="auto", weighted=False, node_weights=None, allow_isolated=False,
              master=None, output=None, output_format="parquet", report=None, work_dir=None, resume=False,
              collect_edges=None, progress=None, spark=None, source_column=None, target_column=None,
              weight_column=None, header=None, delimiter=None, order_output=None, starts="auto",
              refine="default"):
    """Run the Spark engine end to end on an edge list; returns the report dict.

    Parameters
    ----------
    graph_path : str
        Edge list (text or Parquet; any path Spark reads).
    k, eps, seed, affinity, linkage, hub_cap, mode, starts, refine
        As :func:`partition_spark`.
    fmt, weighted, node_weights, allow_isolated, source_column, target_column, weight_column, header, delimiter
        Input options (:func:`partition.spark.io.read_graph_df`).
    master : str or None
        Spark master URL (default ``local[2]`` unless set by ``spark-submit``).
    output : str or None
        Folder for the ``id, shard`` table (written atomically).
    order_output : str or None
        Folder for the ``node, position`` table of the linear order
        (:func:`partition.spark.tables.write_order`), the input of a later re-cut.
    output_format : {"parquet", "csv"}
    report : str or None
        JSON report path (written atomically).
    work_dir : str or None
        Checkpoints; required for ``resume``.
    resume : bool
        Continue an interrupted run from its checkpoints under ``work_dir``.
    collect_edges : int or None
        See :func:`partition_spark`.
    progress : callable or None
        Called with one dict per stage and hierarchy round.
    spark : SparkSession or None
        Use this session instead of building one.

    Returns
    -------
    dict
        The report.

    Raises
    ------
    InputError
        Malformed input (file and line named).
    ParameterError
        Bad options; ``resume`` without ``work_dir``.
    """
    from partition.placement.export import file_sha256
    from partition.spark.figures import result_figures
    from partition.spark.io import read_graph_df
    from partition.spark.session import describe, spark_session
    from partition.spark.tables import write_assignment, write_order

    if resume and work_dir is None:
        raise ParameterError("resume needs the work directory of the interrupted run")
    work_dir = work_dir or tempfile.mkdtemp(prefix="shardline-spark-")
    spark = spark or spark_session(master=master, work_dir=work_dir)
    t = time.perf_counter()
    describe(spark, "read")
    sg = read_graph_df(spark, graph_path, fmt=fmt, weighted=weighted, node_weights=node_weights,
                       allow_isolated=allow_isolated, source_column=source_column, target_column=target_column,
                       weight_column=weight_column, header=header, delimiter=delimiter)
    read_row = {"stage": "read", "seconds": round(time.perf_counter() - t, 4), "nodes": sg.n, "edges": sg.m}
    if progress is not None:
        progress(read_row)
    parts, order, rep = partition_spark(spark, sg, k, eps, seed, affinity, linkage, hub_cap, mode,
                                        work_dir=work_dir, resume=resume, collect_edges=collect_edges,
                                        progress=progress, starts=starts, refine=refine)
    rep["stages"].insert(0, read_row)
    rep["seconds"] = round(rep["seconds"] + read_row["seconds"], 4)
    describe(spark, "result figures")
    rep["tool"] = f"shardline {__version__}"
    rep["imbalance_allowed"] = rep.get("imbalance_allowed", eps)
    rep["input"] = {"graph": str(graph_path), "nodes": sg.n, "edges": sg.m, "weighted_edges": sg.weighted,
                    "weighted_nodes": sg.node_weights is not None,
                    # a checksum where the driver can read the file (local disk or shared mount)
                    "sha256": file_sha256(graph_path) if os.path.isfile(graph_path) else None}
    rep["result"] = result_figures(spark, sg, parts, k)
    total = rep["result"]["total_edge_weight"] or 1.0
    for row in rep.get("starts") or []:  # the in-memory report's start figures, from the weights
        if "raw_cut_fraction" not in row and "raw_cut" in row:
            row["raw_cut_fraction"], row["cut_fraction"] = row["raw_cut"] / total, row["cut"] / total
    if output is not None:
        describe(spark, "write")
        write_assignment(spark, sg, parts, output, output_format)
        rep["output"] = str(output)
    if order_output is not None:
        describe(spark, "write order")
        write_order(spark, sg, order, order_output)
    rep["outputs"] = {"assignment": None if output is None else str(output), "report": report,
                      "order": None if order_output is None else str(order_output)}
    # checksums of the outputs the driver can read (local disk or a shared mount), as the in-memory run records
    rep["outputs"]["sha256"] = {name: file_sha256(str(path)) if path is not None and os.path.exists(str(path))
                                else None for name, path in (("assignment", output), ("order", order_output))}
    if report is not None:
        write_text(report, json.dumps(rep, indent=2, default=str) + "\n")
    return rep
