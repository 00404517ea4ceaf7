"""Small DataFrame tools the Spark stages share: dense ranks, materialising, collecting arrays.

A dense rank of a sortable column is computed without a global window: the
rows are range-partitioned and sorted, each partition numbers its rows with a
window *partitioned by* the partition id, and the per-partition counts give
the offsets (two-phase prefix sums). Materialising writes a DataFrame to
Parquet and reads it back, which cuts its plan (and the inherited size
statistics that stall the planner on iterative self-joins).
"""

from __future__ import annotations

import shutil
from pathlib import Path

import numpy as np

__all__ = ["dense_rank", "materialise", "to_numpy", "ROW_GROUP"]

ROW_GROUP = 131072  # rows per Parquet row group (one task per group on read)


def dense_rank(df, col, out="rank"):
    """Add ``out`` = 0-based rank of ``col`` (distinct values) in ascending order.

    Parameters
    ----------
    df : pyspark.sql.DataFrame
        ``col`` must hold distinct values.
    col : str
    out : str

    Returns
    -------
    pyspark.sql.DataFrame
    """
    from pyspark.sql import Window
    from pyspark.sql import functions as F

    spark = df.sparkSession
    parts = int(spark.conf.get("spark.sql.shuffle.partitions"))
    ranged = df.repartitionByRange(parts, col).withColumn("_pid", F.spark_partition_id())
    ranged = ranged.localCheckpoint()
    counts = dict(ranged.groupBy("_pid").count().collect())
    offsets, acc = {}, 0
    for pid in sorted(counts):
        offsets[pid] = acc
        acc += counts[pid]
    off = spark.createDataFrame([(int(p), int(o)) for p, o in offsets.items()] or [(0, 0)],
                                "_pid int, _off long")
    win = Window.partitionBy("_pid").orderBy(col)
    ranked = ranged.join(F.broadcast(off), "_pid").withColumn(
        out, (F.row_number().over(win) - 1 + F.col("_off")).cast("long"))
    return ranked.drop("_pid", "_off")


def materialise(df, path):
    """Write ``df`` to Parquet at ``path`` (replacing it) and read it back.

    Parameters
    ----------
    df : pyspark.sql.DataFrame
    path : str or path-like

    Returns
    -------
    pyspark.sql.DataFrame
        A fresh DataFrame over the files (no lineage, no inherited statistics).
    """
    path = Path(path)
    tmp = path.with_name(path.name + ".writing")
    if tmp.exists():
        shutil.rmtree(tmp)
    df.write.option("parquet.block.size", 16 << 20).parquet(str(tmp))
    if path.exists():
        shutil.rmtree(path)
    tmp.rename(path)
    return df.sparkSession.read.parquet(str(path))


def to_numpy(df, cols, sort=None, dtypes=None):
    """Collect columns of ``df`` to numpy arrays (through Arrow), optionally sorted.

    Parameters
    ----------
    df : pyspark.sql.DataFrame
    cols : list of str
    sort : list of str or None
        Sort keys applied on the driver (stable lexicographic order).
    dtypes : dict or None
        Column name → numpy dtype.

    Returns
    -------
    dict of ndarray
    """
    pdf = df.select(*cols).toPandas()
    out = {c: pdf[c].to_numpy() for c in cols}
    dtypes = dtypes or {}
    for c in cols:
        if c in dtypes:
            out[c] = out[c].astype(dtypes[c])
    if sort and len(pdf):
        idx = np.lexsort(tuple(out[c] for c in reversed(sort)))
        out = {c: v[idx] for c, v in out.items()}
    return out
