"""Linear order and line cut for the Spark engine.

The leaf order of the hierarchy (:func:`partition.embedding.linear_order`
without the graph: walks of the picked-edge trees, anchors, rule 7 and 8) needs
only the hierarchy's per-level arrays, which the driver holds after
:func:`partition.spark.hierarchy.build_hierarchy_df` (O(n) per level). The
orientation of rule 10 needs the edges: per level, from the level below the
top down to level 1, every cluster's score is a sum over the edges leaving
it, one Spark job over the cached edge blocks with the labels and positions
broadcast (:class:`partition.spark.blocks.EdgeBlocks`), exactly as
:func:`partition.embedding.orient_clusters` computes it (integer sums). The cut
is :func:`partition.cut.line_cut` on the driver.
"""

from __future__ import annotations

import numpy as np

from partition.embedding import linear_order, orient_levels, orientation_scores, positions
from partition.spark.session import describe

__all__ = ["linear_order_df", "directed_edges"]


def _scores(u, v, w, a, acc):
    # rule 10 score of every cluster: each edge leaving it, from both ends
    for x, y in ((u, v), (v, u)):
        orientation_scores(a["lab"], a["pos"], a["start"], a["size"], x, y, acc)


def directed_edges(edges):
    """Both directions of every edge: ``x, y`` (and ``w``)."""
    from pyspark.sql import functions as F

    return edges.select(F.col("u").alias("x"), F.col("v").alias("y"), "w").unionByName(
        edges.select(F.col("v").alias("x"), F.col("u").alias("y"), "w"))


def linear_order_df(spark, hierarchy, edges, orient=True, blocks=None):
    """The node order of :func:`partition.embedding.linear_order` (with the graph), edges in Spark.

    Parameters
    ----------
    spark : pyspark.sql.SparkSession
    hierarchy : partition.hierarchy.Hierarchy
    edges : DataFrame
        ``u < v`` each edge once (the graph of the hierarchy).
    orient : bool
        Apply rule 10 (as the in-memory engine does when given the graph).
    blocks : partition.spark.blocks.EdgeBlocks or None
        The edges as cached blocks (built and dropped here when ``None``).

    Returns
    -------
    ndarray of int64
        ``order[p]`` = node at position ``p``.

    References
    ----------
    K. Aydin, M. Bateni and V. Mirrokni, "Distributed balanced partitioning
    via linear embedding", WSDM 2016.
    """
    n = hierarchy.n
    pos = positions(linear_order(hierarchy, None))
    if orient and hierarchy.rounds > 1:
        own = blocks is None
        if own:
            from pyspark.sql import functions as F

            from partition.spark.blocks import EdgeBlocks

            blocks = EdgeBlocks(spark, edges.select("u", "v", F.lit(1).cast("long").alias("wi")), n, True)
        def level_scores(r, lab, c, pos, start, size):
            describe(spark, f"order: orientation level {r}")
            return blocks.sum_over(_scores, c, lab=np.asarray(lab, dtype=np.int64), pos=pos, start=start, size=size)

        try:
            pos = orient_levels(hierarchy, pos, level_scores)
        finally:
            if own:
                blocks.release()
    order = np.empty(n, dtype=np.int64)
    order[pos] = np.arange(n, dtype=np.int64)
    return order
