"""Cut and balance figures of a partition whose edges are in Spark.

:func:`result_figures` is what the run and re-cut reports call ``result``:
the figures of :func:`partition.score.score`, from one aggregation over the
edges in Spark and the O(n) shard array on the driver. The pipeline driver
(:mod:`partition.spark.engine`) and the re-cut (:mod:`partition.spark.recut`)
both use it.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

__all__ = ["result_figures"]


def result_figures(spark, sg, parts, k):
    """Cut and balance figures of a partition, with the names of :func:`partition.score.score`.

    ``cut_edges`` (edges whose ends are on different shards), ``cut_weight``
    and ``total_edge_weight`` (sums of the input weights, 1 per edge when
    unweighted), ``cut_fraction`` (their ratio), ``shard_weights`` and
    ``imbalance`` (heaviest shard over the mean, minus one),
    ``communication_volume``, ``boundary_nodes`` and ``fanout`` (as
    :func:`partition.score.score` defines them). Two aggregations over the
    edges in Spark; the shards are an O(n) driver array.
    """
    from pyspark.sql import functions as F

    from partition.spark.io import node_weight_array

    parts = np.asarray(parts, dtype=np.int64)
    sh = spark.createDataFrame(pd.DataFrame({"node": np.arange(parts.shape[0], dtype=np.int64), "shard": parts}))
    e = (sg.edges.join(sh.withColumnRenamed("node", "u").withColumnRenamed("shard", "su"), "u")
                 .join(sh.withColumnRenamed("node", "v").withColumnRenamed("shard", "sv"), "v"))
    cut = F.col("su") != F.col("sv")
    row = e.agg(F.sum(F.when(cut, 1).otherwise(0)).alias("ce"), F.sum(F.when(cut, F.col("w")).otherwise(0.0)).alias("cw"),
                F.sum("w").alias("tw")).collect()[0]
    nweights = node_weight_array(sg)
    loads = np.bincount(parts, weights=None if nweights is None else nweights, minlength=k).astype(np.int64)
    total_nw = int(loads.sum())
    cw, tw = float(row["cw"] or 0.0), float(row["tw"] or 0.0)
    # communication volume: over nodes, the distinct other shards among the neighbours (partition.score)
    cross = e.filter(cut)
    pairs = cross.select(F.col("u").alias("x"), F.col("sv").alias("s")).union(
        cross.select(F.col("v").alias("x"), F.col("su").alias("s"))).distinct()
    vb = pairs.agg(F.count("*").alias("vol"), F.countDistinct("x").alias("bn")).collect()[0]
    volume = int(vb["vol"] or 0)
    return {"shards": int(k), "nodes": sg.n, "edges": sg.m, "cut_edges": int(row["ce"] or 0), "cut_weight": cw,
            "total_edge_weight": tw, "cut_fraction": cw / tw if tw > 0 else 0.0, "total_node_weight": total_nw,
            "shard_weights": loads.tolist(),
            "imbalance": float(loads.max() / (total_nw / k) - 1.0) if total_nw else 0.0,
            "communication_volume": volume, "boundary_nodes": int(vb["bn"] or 0),
            "fanout": 1.0 + volume / sg.n if sg.n else 0.0}
