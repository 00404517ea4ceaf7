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

from partition.embedding import linear_order, positions
from partition.spark.session import describe

__all__ = ["linear_order_df", "directed_edges"]


def _scores(u, v, w, a, acc):
    # rule 10 score of every cluster: each edge leaving it, from both ends
    lab, pos, start, size = a["lab"], a["pos"], a["start"], a["size"]
    for x, y in ((u, v), (v, u)):
        lx = lab[x]
        m = lx != lab[y]
        lx = lx[m]
        st = start[lx]
        t = 2 * (pos[x[m]] - st) - (size[lx] - 1)
        np.add.at(acc, lx, np.where(pos[y[m]] < st, t, -t))


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
        try:
            for r in range(hierarchy.rounds - 1, 0, -1):
                describe(spark, f"order: orientation level {r}")
                lab, c = hierarchy.labels[r], hierarchy.sizes[r]
                start = np.full(c, n, dtype=np.int64)
                np.minimum.at(start, lab, pos)
                size = np.bincount(lab, minlength=c).astype(np.int64)
                sc = blocks.sum_over(_scores, c, lab=np.asarray(lab, dtype=np.int64), pos=pos, start=start, size=size)
                turn = (sc > 0)[lab]
                pos = np.where(turn, 2 * start[lab] + size[lab] - 1 - pos, pos)
        finally:
            if own:
                blocks.release()
    order = np.empty(n, dtype=np.int64)
    order[pos] = np.arange(n, dtype=np.int64)
    return order
