"""Re-cutting a stored linear order on Spark: the bulk path of ``shardline recut``.

A Spark run can keep its linear order (``shardline run --engine spark
--order-output ORDER``: a ``node, position`` Parquet folder or CSV written by
:func:`partition.spark.tables.write_order`). :func:`recut_spark` then cuts
that order into a new number of shards exactly as
:func:`partition.placement.recut.recut` does
without a current placement: the line cut of equal weight
(:func:`partition.cut.line_cut`, on the driver: O(n) arrays), the window DP
over the boundaries and pairwise Fiduccia–Mattheyses rounds with the same
balance band, each unit a Spark task (:mod:`partition.spark.refine`), so the
shards equal the in-memory ones. The edges stay in Spark.

Renaming to a current placement with move costs (``--previous``) runs in
memory only for now: its refinement weighs every move inside the pairwise
rounds, which the Spark units do not reproduce.

References
----------
K. Aydin, M. Bateni and V. Mirrokni, "Distributed balanced partitioning via
linear embedding", WSDM 2016 (cutting and refining a linear embedding).
C. M. Fiduccia and R. M. Mattheyses, "A linear-time heuristic for improving
network partitions", DAC 1982.
"""

from __future__ import annotations

import dataclasses

import numpy as np

from partition.balance import balance_rule
from partition.cut import line_cut
from partition.errors import InputError, ParameterError, check_imbalance, check_parts

__all__ = ["read_order_df", "recut_spark"]


def read_order_df(spark, path, sg):
    """The order of a ``node, position`` table as dense ids: ``order[p]`` = node at position ``p``.

    Reads Parquet (file or folder) or CSV with a header; the ids are matched to
    the graph's ids (as strings when the graph's ids are strings).

    Raises
    ------
    InputError
        Missing columns, ids the graph does not have, nodes missing or listed
        twice, or positions that are not ``0..n−1`` each once.
    """
    from pyspark.sql import functions as F

    from partition.spark.frames import to_numpy
    from partition.spark.io import detect_format

    name = str(path)
    try:
        if detect_format(name) == "parquet":
            df = spark.read.parquet(name)
        else:
            df = spark.read.option("header", True).csv(name)
    except Exception as exc:  # noqa: BLE001 - Spark's analysis errors name no file we can point at
        raise InputError(name, f"cannot be read as an order table ({str(exc).splitlines()[0]})") from None
    cols = df.columns
    if "node" in cols and "position" in cols:
        df = df.select("node", "position")
    elif len(cols) >= 2:
        df = df.select(F.col(cols[0]).alias("node"), F.col(cols[1]).alias("position"))
    else:
        raise InputError(name, f"has {len(cols)} column(s); expected node and position")
    kind = "bigint" if sg.id_kind == "int" else "string"
    df = df.select(F.expr(f"try_cast(node as {kind})").alias("id"),
                   F.expr("try_cast(position as bigint)").alias("position"))
    got = df.join(sg.nodes, "id", "left")
    unknown = got.filter(F.col("node").isNull()).select("id").limit(1).collect()
    if unknown:
        raise InputError(name, f"node {unknown[0]['id']!r} is not a node of the graph")
    arr = to_numpy(got.select("node", "position"), ["node", "position"], sort=["position"])
    nodes, pos = arr["node"].astype(np.int64), arr["position"].astype(np.int64)
    if nodes.shape[0] != sg.n or not np.array_equal(pos, np.arange(sg.n)):
        raise InputError(name, f"is not an order of the graph's {sg.n} nodes: positions must be 0..{sg.n - 1}, "
                               f"each once ({nodes.shape[0]} rows)")
    seen = np.zeros(sg.n, dtype=bool)
    seen[nodes] = True
    if not seen.all():
        raise InputError(name, "lists a node twice (and misses another)")
    return nodes


def recut_spark(spark, sg, order, k, eps=0.0, seed=0, refine=True, window=None, floor="band", progress=None):
    """:func:`partition.placement.recut.recut` without ``previous``, with the edges in Spark.

    Parameters
    ----------
    spark : SparkSession
    sg : partition.spark.io.SparkGraph
    order : ndarray of int64
        ``order[p]`` = dense node at position ``p``.
    k, eps, seed, refine, window, floor
        As :func:`partition.placement.recut.recut`.
    progress : callable or None
        Called with one dict per refinement round.

    Returns
    -------
    parts : ndarray of int64
    stats : dict
        The keys of the in-memory ``recut`` stats: ``k``, ``eps``, ``cut_line``,
        ``cut_window``, ``cut``, ``floor``, ``min_load``, ``max_load``, ``balanced``.
    """
    from partition.cut import check_order
    from partition.placement.recut import band_floor
    from partition.spark.figures import result_figures
    from partition.spark.io import node_weight_array
    from partition.spark.refine import StepBlocks, spark_fm, spark_window

    order = check_order(order)
    if order.shape[0] != sg.n:
        raise ParameterError(f"the order has {order.shape[0]} positions but the graph {sg.n} nodes")
    k = check_parts(k, sg.n)
    eps = check_imbalance(eps)
    if floor not in ("band", "rule"):
        raise ParameterError(f"floor must be 'band' or 'rule', got {floor!r}")
    nweights = node_weight_array(sg)
    rule = balance_rule(nweights, k, eps, n_nodes=sg.n)
    if floor == "band":
        rule = dataclasses.replace(rule, floor=max(rule.floor, band_floor(nweights, k, eps, sg.n)))
    nw_ones = np.ones(sg.n, dtype=np.int64) if nweights is None else nweights

    def cut(p):
        return result_figures(spark, sg, p, k)["cut_weight"]

    parts = np.asarray(line_cut(order, nweights, k, eps), dtype=np.int64)
    stats = {"k": k, "imbalance_allowed": eps, "cut_line": cut(parts), "floor": int(rule.floor)}
    blocks = StepBlocks(spark, sg)
    try:
        if refine and k > 1:
            parts = spark_window(spark, sg, order, parts, rule, nweights, w=window, progress=progress,
                                 blocks=blocks("cut"))
        stats["cut_window"] = cut(parts)
        if refine and k > 1:
            parts = spark_fm(spark, sg, parts, rule, nw_ones, seed=seed, progress=progress, blocks=blocks("fm"))
    finally:
        blocks.release()
    parts = np.asarray(parts, dtype=np.int64)
    loads = np.bincount(parts, weights=nw_ones, minlength=k)
    stats["cut"] = cut(parts)
    stats["balanced"] = bool(rule.check(loads) and loads.min() >= rule.floor)
    stats["min_load"], stats["max_load"] = int(loads.min()), int(loads.max())
    return parts, stats
