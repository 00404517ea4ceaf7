"""The Spark engine: the pipeline of :mod:`partition.pipeline` over a graph held in Spark.

:func:`run_spark` is what ``shardline run --engine spark`` (and
``spark-submit jobs/spark_partition.py``) calls; it returns the report dict.
:func:`partition_spark` runs a :class:`~partition.plan.Plan` on a
:class:`~partition.spark.io.SparkGraph` and returns the shards, as
:func:`partition.partitioner.run_memory` does for an in-memory graph, with the
same result for the same input, plan and seed: the loop over starts and steps
is :func:`partition.pipeline.run_plan` for both, and :class:`SparkBackend`
supplies its operations. Two modes:

``distributed``
    The edges stay in Spark. Starts ``hierarchy`` (Spark) and ``spectral``
    (driver); the unit steps (``window``, ``fm``, ``swaps``:
    :data:`partition.plan.UNIT_STEPS`) run each unit as a Spark task, by
    default those three; other steps run on the driver over the collected
    graph. In memory: ``partition_graph(..., starts=("hierarchy",),
    refine=UNIT_STEPS)``.
``full``
    The in-memory default plan, whatever it currently is: Spark reads and
    normalises the input, the graph is collected and the in-memory engine
    runs on the driver, so the result is the in-memory one by construction.

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
from dataclasses import replace
from pathlib import Path

import numpy as np

from partition import __version__
from partition.atomic import write_text
from partition.errors import ParameterError
from partition.plan import MODES, STEP_OPTIONS, UNIT_STEPS
from partition.spark.refine import StepBlocks
from partition.sizing import BYTES_PER_EDGE, fits_driver  # noqa: F401 - the --engine auto rule

__all__ = ["run_spark", "partition_spark", "SparkBackend", "fits_driver", "MODES", "BYTES_PER_EDGE"]


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


class SparkBackend:
    """The bulk operations of :func:`partition.pipeline.run_plan` over a graph held in Spark.

    Affinities, the hierarchy and the hierarchy's order are Spark jobs; cuts
    are jobs over the cached edge blocks; the unit steps (:data:`UNIT_STEPS`)
    run their units as Spark tasks and the other steps run on the driver over
    the collected graph (the stage rows say where). Orders and step results are
    checkpointed under ``work_dir`` so an interrupted run resumes.
    """

    def __init__(self, spark, sg, plan, work_dir, resume, progress, fm_opts):
        from partition.spark.checkpoint import Checkpoints
        from partition.spark.io import node_weight_array

        self.spark, self.sg, self.plan, self.progress = spark, sg, plan, progress
        self.work_dir, self.resume, self.fm_opts = work_dir, resume, fm_opts
        self.n, self.m = sg.n, sg.m
        self.node_weights = node_weight_array(sg)
        self.ones = np.ones(sg.n, dtype=np.int64) if self.node_weights is None else self.node_weights
        options = {"k": plan.k, "eps": plan.eps, "seed": plan.seed, "affinity": plan.affinity,
                   "linkage": plan.linkage, "hub_cap": plan.hub_cap, "mode": plan.mode, "n": sg.n, "m": sg.m,
                   "source": sg.source}
        self.ck = Checkpoints(work_dir, options, resume)
        self.blocks = StepBlocks(spark, sg)
        self._graph = None
        self.total_weight = sg.m if not sg.weighted else self._total()

    def _total(self):
        from pyspark.sql import functions as F

        from partition.spark.refine import int_weights

        wedges, _ = int_weights(self.spark, self.sg, "cut")
        return int(wedges.agg(F.sum("wi")).collect()[0][0] or 0)

    def graph(self):
        """The graph collected to the driver, for the steps that are not unit based."""
        if self._graph is None:
            from partition.spark.io import collect_graph

            self._graph = collect_graph(self.sg)
        return self._graph

    def affinity(self):
        from partition.spark.affinity import edge_affinity_df
        from partition.spark.session import describe

        describe(self.spark, "affinity")
        return edge_affinity_df(self.sg, self.plan.affinity, hub_cap=self.plan.hub_cap)

    def hierarchy(self, affinity, seed):
        from partition.spark.hierarchy import COLLECT_EDGES, build_hierarchy_df

        collect = COLLECT_EDGES if self.plan.collect_edges is None else self.plan.collect_edges
        return build_hierarchy_df(self.spark, affinity, self.sg.n, seed=seed, linkage=self.plan.linkage,
                                  work=self.work_dir, resume=self.resume, collect_edges=collect,
                                  progress=self.progress)

    def order(self, name, hierarchy):
        key = f"{name}-order"
        if self.ck.has(key):
            return self.ck.load(key)[0]["order"]
        if name == "hierarchy":
            from partition.spark.order import linear_order_df

            order = linear_order_df(self.spark, hierarchy, self.sg.edges, blocks=self.blocks("cut"))
        else:
            from partition.embedding import spectral_order

            order = spectral_order(self.graph(), seed=self.plan.seed)
        self.ck.save(key, {"order": order})
        return order

    def cut(self, parts):
        return self.blocks("cut").cut_total(parts)

    def refine(self, step, start, order, parts, rule, hierarchy, affinity):
        from partition.spark.refine import spark_fm, spark_swaps, spark_window

        key = f"{start}-{step}"
        where = "spark" if step in UNIT_STEPS else "driver"
        if self.ck.has(key):
            return self.ck.load(key)[0]["parts"], where
        spark, sg, progress = self.spark, self.sg, self.progress
        if step == "window":
            parts = spark_window(spark, sg, order, parts, rule, self.node_weights, progress=progress,
                                 blocks=self.blocks("cut"))
        elif step == "fm":
            parts = spark_fm(spark, sg, parts, rule, self.ones, seed=self.plan.seed, progress=progress,
                             blocks=self.blocks("fm"), **self.fm_opts)
        elif step == "swaps":
            parts = spark_swaps(spark, sg, parts, rule, self.node_weights, progress=progress,
                                blocks=self.blocks("cut"))
        else:  # not unit based: on the driver with the in-memory step
            from partition.partitioner import refine_step

            parts = refine_step(step, self.graph(), order, parts, self.plan.k, rule, hierarchy, self.plan.seed)
        parts = np.asarray(parts, dtype=np.int64)
        self.ck.save(key, {"parts": parts})
        return parts, where


def partition_spark(spark, sg, plan, work_dir=None, resume=False, progress=None):
    """Partition a :class:`~partition.spark.io.SparkGraph` by ``plan`` (see the module docstring).

    Parameters
    ----------
    spark : SparkSession
    sg : partition.spark.io.SparkGraph
    plan : partition.plan.Plan
        Built by :func:`partition.plan.make_plan` with ``engine="spark"``;
        ``plan.mode`` picks the mode.
    work_dir : str or path-like
        Checkpoints (hierarchy rounds, stages).
    resume : bool
    progress : callable or None
        Called with one dict per stage and per hierarchy round.

    Returns
    -------
    parts : ndarray of int64
    order : ndarray of int64
    report : dict

    Raises
    ------
    ParameterError
        Bad ``k`` for this graph, options the Spark units do not reproduce, or
        a resume with other options.
    """
    from partition.pipeline import Clock, run_plan

    plan = plan.for_graph(sg.n, sg.m, sg.weighted)
    if plan.mode == "full":
        return _full_on_driver(sg, plan, progress)
    fm_opts = _fm_options(STEP_OPTIONS)
    # a shuffle partition per EDGES_PER_SHUFFLE_PARTITION edges at least (the session's count is the floor):
    # with 4 partitions a 64 M-edge join ran out of execution memory in a 4 GiB local driver
    base = int(spark.conf.get("spark.sql.shuffle.partitions"))
    spark.conf.set("spark.sql.shuffle.partitions", str(max(base, -(-sg.m // EDGES_PER_SHUFFLE_PARTITION))))
    work_dir = Path(tempfile.mkdtemp(prefix="shardline-spark-") if work_dir is None else work_dir)
    backend = SparkBackend(spark, sg, plan, work_dir, resume, progress, fm_opts)
    clock = Clock(progress)
    t = time.perf_counter()
    backend.blocks("cut")
    clock.stage("edge blocks", time.perf_counter() - t)
    try:
        parts, order, _, report = run_plan(plan, backend, progress, clock)
    finally:
        backend.blocks.release()
    report.update({"mode": plan.mode, "graph": {"nodes": sg.n, "edges": sg.m, "source": sg.source}})
    report["options"]["collect_edges"] = plan.collect_edges
    return parts, order, report


def _full_on_driver(sg, plan, progress):
    """The full plan on the driver (the graph is collected): the in-memory engine itself."""
    from partition.partitioner import run_memory
    from partition.spark.io import collect_graph

    t = time.perf_counter()
    g = collect_graph(sg)
    collect = {"stage": "collect graph", "seconds": round(time.perf_counter() - t, 4), "where": "driver"}
    res = run_memory(g, replace(plan, engine="memory"), progress)
    report = dict(res.report)
    report.update({
        "engine": "spark", "mode": "full", "where": "driver",
        "graph": {"nodes": sg.n, "edges": sg.m, "source": sg.source},
        "stages": [collect] + [dict(r, where="driver") for r in res.report.get("stages", [])],
    })
    report["seconds"] = round(report["seconds"] + collect["seconds"], 4)
    return res.parts, res.order, report


def run_spark(graph_path, plan, read=None, *, output=None, output_format="parquet", order_output=None, report=None,
              work_dir=None, resume=False, master=None, spark=None, progress=None):
    """Run the Spark engine end to end on an edge list; returns the report dict.

    Parameters
    ----------
    graph_path : str
        Edge list (text or Parquet; any path Spark reads).
    plan : partition.plan.Plan
        What to do (:func:`partition.plan.make_plan`, ``engine="spark"``).
    read : dict or None
        Input options of :func:`partition.spark.io.read_graph_df` (``fmt``,
        ``weighted``, ``node_weights``, ``allow_isolated``, ``source_column``,
        ``target_column``, ``weight_column``, ``header``, ``delimiter``).
    output : str or None
        Folder for the ``id, shard`` table (written atomically).
    output_format : {"parquet", "csv"}
    order_output : str or None
        Folder for the ``node, position`` table of the linear order
        (:func:`partition.spark.tables.write_order`), the input of a later re-cut.
    report : str or None
        JSON report path (written atomically).
    work_dir : str or None
        Checkpoints; required for ``resume``.
    resume : bool
        Continue an interrupted run from its checkpoints under ``work_dir``.
    master : str or None
        Spark master URL (default ``local[2]`` unless set by ``spark-submit``).
    spark : SparkSession or None
        Use this session instead of building one.
    progress : callable or None
        Called with one dict per stage and hierarchy round.

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
    sg = read_graph_df(spark, graph_path, **(read or {}))
    read_row = {"stage": "read", "seconds": round(time.perf_counter() - t, 4), "nodes": sg.n, "edges": sg.m}
    if progress is not None:
        progress(read_row)
    parts, order, rep = partition_spark(spark, sg, plan, work_dir=work_dir, resume=resume, progress=progress)
    rep["stages"].insert(0, read_row)
    rep["seconds"] = round(rep["seconds"] + read_row["seconds"], 4)
    describe(spark, "result figures")
    rep["tool"] = f"shardline {__version__}"
    rep["input"] = {"graph": str(graph_path), "nodes": sg.n, "edges": sg.m, "weighted_edges": sg.weighted,
                    "weighted_nodes": sg.node_weights is not None,
                    # a checksum where the driver can read the file (local disk or shared mount)
                    "sha256": file_sha256(graph_path) if os.path.isfile(graph_path) else None}
    rep["result"] = result_figures(spark, sg, parts, plan.k)
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
