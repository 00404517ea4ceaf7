"""Linear order and line cut for the Spark engine.

The leaf order of the hierarchy (:func:`partition.embedding.linear_order`
without the graph: walks of the picked-edge trees, anchors, rule 7 and 8) needs
only the hierarchy's per-level arrays, which the driver holds after
:func:`partition.spark.hierarchy.build_hierarchy_df` (O(n) per level). The
orientation of rule 10 needs the edges: per level, from the level below the
top down to level 1, every cluster's score is a ``groupBy`` sum over the edges
leaving it, computed by Spark on a table of node positions, exactly as
:func:`partition.embedding.orient_clusters` computes it (integer sums). The cut
is :func:`partition.cut.line_cut` on the driver.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from partition.embedding import linear_order, positions
from partition.spark.frames import to_numpy
from partition.spark.session import describe

__all__ = ["linear_order_df", "directed_edges"]


def directed_edges(edges):
    """Both directions of every edge: ``x, y`` (and ``w``)."""
    from pyspark.sql import functions as F

    return edges.select(F.col("u").alias("x"), F.col("v").alias("y"), "w").unionByName(
        edges.select(F.col("v").alias("x"), F.col("u").alias("y"), "w"))


def linear_order_df(spark, hierarchy, edges, orient=True):
    """The node order of :func:`partition.embedding.linear_order` (with the graph), edges in Spark.

    Parameters
    ----------
    spark : pyspark.sql.SparkSession
    hierarchy : partition.hierarchy.Hierarchy
    edges : DataFrame
        ``u < v`` each edge once (the graph of the hierarchy).
    orient : bool
        Apply rule 10 (as the in-memory engine does when given the graph).

    Returns
    -------
    ndarray of int64
        ``order[p]`` = node at position ``p``.

    References
    ----------
    K. Aydin, M. Bateni and V. Mirrokni, "Distributed balanced partitioning
    via linear embedding", WSDM 2016.
    """
    from pyspark.sql import functions as F

    n = hierarchy.n
    pos = positions(linear_order(hierarchy, None))
    if orient and hierarchy.rounds > 1:
        both = directed_edges(edges).select("x", "y").localCheckpoint()
        for r in range(hierarchy.rounds - 1, 0, -1):
            describe(spark, f"order: orientation level {r}")
            lab, c = hierarchy.labels[r], hierarchy.sizes[r]
            start = np.full(c, n, dtype=np.int64)
            np.minimum.at(start, lab, pos)
            size = np.bincount(lab, minlength=c).astype(np.int64)
            nodes = spark.createDataFrame(pd.DataFrame({
                "node": np.arange(n, dtype=np.int64), "lab": lab, "pos": pos,
                "st": start[lab], "sz": size[lab]}))
            xu = nodes.select(F.col("node").alias("x"), F.col("lab").alias("lu"), F.col("pos").alias("pu"), "st", "sz")
            yv = nodes.select(F.col("node").alias("y"), F.col("lab").alias("lv"), F.col("pos").alias("pv"))
            j = both.join(xu, "x").join(yv, "y").filter(F.col("lu") != F.col("lv"))
            t = F.lit(2) * (F.col("pu") - F.col("st")) - (F.col("sz") - 1)
            score = j.groupBy("lu").agg(F.sum(F.when(F.col("pv") < F.col("st"), t).otherwise(-t)).alias("score"))
            got = to_numpy(score, ["lu", "score"])
            sc = np.zeros(c, dtype=np.int64)
            sc[got["lu"].astype(np.int64)] = got["score"].astype(np.int64)
            turn = (sc > 0)[lab]
            pos = np.where(turn, 2 * start[lab] + size[lab] - 1 - pos, pos)
    order = np.empty(n, dtype=np.int64)
    order[pos] = np.arange(n, dtype=np.int64)
    return order
