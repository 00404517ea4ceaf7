"""Edge affinity on Spark: the fixed-point integers of :mod:`partition.affinity`, bit for bit.

Common neighbours come from triangle listing in colour-triple subproblems
(:mod:`partition.spark.triangles`): each task lists the triangles of its
subgraph once each, from the lowest ``(degree, id)`` vertex (Chiba &
Nishizeki, SIAM J. Comput. 1985), and each triangle credits every one of its
edges with the opposite vertex, unless that vertex's degree exceeds
``hub_cap`` — the same cap as the in-memory pass. The counts and the integer wedge sums
(``Σ floor(2**32 / d_w)``, rule 11 of :mod:`partition.rules`) are exact
integers, and the final fixed-point value is computed inside ``mapInPandas``
by the same :mod:`partition.rules` / numpy expressions as the in-memory code,
so the bits match.
"""

from __future__ import annotations

import numpy as np

from partition.affinity import DEFAULT_HUB_CAP, check_affinity_options, jaccard_value, ppr_value, weight_value
from partition.rules import AFFINITY_SCALE
from partition.spark.triangles import TASK_EDGES, colour_count, triangle_credits_df

__all__ = ["degrees", "common_neighbours_df", "edge_affinity_df"]


def degrees(edges):
    """``node``, ``deg`` for every node with an edge (edges once each, ``u < v``)."""
    from pyspark.sql import functions as F

    ends = edges.select(F.col("u").alias("node")).unionByName(edges.select(F.col("v").alias("node")))
    return ends.groupBy("node").agg(F.count(F.lit(1)).alias("deg"))


def common_neighbours_df(edges, hub_cap=DEFAULT_HUB_CAP, m=None, task_edges=TASK_EDGES):
    """Per edge ``(u, v)``: hub-capped common-neighbour count ``c`` and wedge sum ``s``, plus degrees.

    Parameters
    ----------
    edges : DataFrame
        ``u < v`` (long), each undirected edge once.
    hub_cap : int
    m : int or None
        Number of edges (counted when ``None``).
    task_edges : int
        Edges one triangle-listing task may hold (:func:`partition.spark.triangles.colour_count`).

    Returns
    -------
    DataFrame
        ``u, v, du, dv, c, s`` (long).

    References
    ----------
    N. Chiba and T. Nishizeki, "Arboricity and subgraph listing algorithms",
    SIAM J. Comput. 14(1), 1985.
    """
    from pyspark.sql import functions as F

    deg = degrees(edges)
    e = (edges.select("u", "v")
         .join(deg.select(F.col("node").alias("u"), F.col("deg").alias("du")), "u")
         .join(deg.select(F.col("node").alias("v"), F.col("deg").alias("dv")), "v")).localCheckpoint()
    agg = triangle_credits_df(e, int(hub_cap), colour_count(m if m is not None else e.count(), task_edges))
    out = e.join(agg, ["u", "v"], "left").select(
        "u", "v", F.col("du").cast("long"), F.col("dv").cast("long"),
        F.coalesce("c", F.lit(0)).cast("long").alias("c"), F.coalesce("s", F.lit(0)).cast("long").alias("s"))
    return out


def _value_fn(method, alpha):
    def fn(batches):
        for pdf in batches:
            du = pdf["du"].to_numpy(np.int64)
            dv = pdf["dv"].to_numpy(np.int64)
            if method == "jaccard":
                aff = jaccard_value(pdf["c"].to_numpy(np.int64), du, dv)
            else:
                aff = ppr_value(pdf["s"].to_numpy(np.int64), du, dv, alpha)
            yield pdf[["u", "v"]].assign(aff=aff)

    return fn


def edge_affinity_df(sg, method="jaccard", alpha=0.15, steps=2, hub_cap=DEFAULT_HUB_CAP, task_edges=TASK_EDGES):
    """Fixed-point affinity of every edge, as :func:`partition.affinity.edge_affinity` computes it.

    Parameters
    ----------
    sg : partition.spark.io.SparkGraph
    method : {"jaccard", "ppr", "weights", "unit"}
    alpha : float
        PageRank restart probability (``ppr``).
    steps : int
        1 or 2 (``ppr``).
    hub_cap : int
    task_edges : int
        Edges one triangle-listing task may hold (:mod:`partition.spark.triangles`).

    Returns
    -------
    DataFrame
        ``u < v``, ``aff`` (long).

    Raises
    ------
    ParameterError
        As :func:`partition.affinity.edge_affinity`.

    References
    ----------
    P. Jaccard, "Étude comparative de la distribution florale dans une portion
    des Alpes et du Jura", Bull. Soc. Vaudoise Sci. Nat. 37, 1901.
    R. Andersen, F. Chung and K. Lang, "Local graph partitioning using PageRank
    vectors", FOCS 2006.
    """
    from pyspark.sql import functions as F

    hub_cap = check_affinity_options(method, alpha, steps, hub_cap)
    edges = sg.edges
    if method == "unit":
        return edges.select("u", "v", F.lit(AFFINITY_SCALE).cast("long").alias("aff"))
    if method == "weights":
        top = float(edges.agg(F.max("w")).collect()[0][0] or 0.0)

        def scale(batches):
            for pdf in batches:
                yield pdf[["u", "v"]].assign(aff=weight_value(pdf["w"].to_numpy(np.float64), top))

        return edges.select("u", "v", "w").mapInPandas(scale, "u long, v long, aff long")
    cn = common_neighbours_df(edges, int(hub_cap), m=sg.m, task_edges=int(task_edges))
    if method == "ppr" and steps == 1:
        cn = cn.withColumn("s", F.lit(0).cast("long"))
    return cn.mapInPandas(_value_fn(method, float(alpha)), "u long, v long, aff long")
