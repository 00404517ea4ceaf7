"""The tables a Spark run writes: node→shard and node→position folders, written atomically.

:func:`write_assignment` writes a run's ``node, shard`` table and
:func:`write_order` its linear order as ``node, position`` (the input of a
later re-cut, :mod:`partition.spark.recut`), both in the user's ids; each goes
through :func:`write_folder`, which builds the folder as a hidden temporary
sibling and renames it into place. The pipeline driver
(:mod:`partition.spark.engine`) and the Spark path of ``shardline recut``
(:mod:`partition.commands.recut`) write through this module.
"""

from __future__ import annotations

import os
import shutil
from pathlib import Path

import numpy as np
import pandas as pd

from partition.errors import ParameterError

__all__ = ["write_folder", "write_assignment", "write_order"]


def write_folder(table, output, fmt="parquet"):
    """Write a DataFrame to the folder ``output`` atomically: a hidden temporary sibling, then a rename.

    ``fmt`` is ``"parquet"`` (part files as Spark writes them) or ``"csv"`` (one
    part with a header row). An existing folder is moved aside, the new one
    renamed in, then the old one removed.
    """
    out = Path(output)
    out.parent.mkdir(parents=True, exist_ok=True)
    tmp = out.with_name(f".{out.name}.tmp-{os.getpid()}")
    if tmp.exists():
        shutil.rmtree(tmp)
    if fmt == "parquet":
        table.write.parquet(str(tmp))
    else:
        table.coalesce(1).write.option("header", True).csv(str(tmp))
    old = None
    if out.exists():
        old = out.with_name(f".{out.name}.old-{os.getpid()}")
        out.rename(old)
    tmp.rename(out)
    if old is not None:
        shutil.rmtree(old, ignore_errors=True)


def write_assignment(spark, sg, parts, output, fmt="parquet"):
    """Write ``node, shard`` rows (user ids) to ``output`` (a folder) atomically: temporary folder, then rename.

    Parameters
    ----------
    spark : SparkSession
    sg : partition.spark.io.SparkGraph
    parts : ndarray of int64
    output : str or path-like
    fmt : {"parquet", "csv"}

    Raises
    ------
    ParameterError
        For an unknown format.
    """
    if fmt not in ("parquet", "csv"):
        raise ParameterError(f"output format must be parquet or csv, got {fmt!r}")
    sh = spark.createDataFrame(pd.DataFrame({"node": np.arange(len(parts), dtype=np.int64),
                                             "shard": np.asarray(parts, dtype=np.int64)}))
    # the dense index is internal; the file speaks the user's ids, in the column
    # names every node→shard file of Shardline uses
    write_folder(sg.nodes.join(sh, "node").orderBy("node").selectExpr("id as node", "shard"), output, fmt)


def write_order(spark, sg, order, output):
    """Write ``node, position`` rows (user ids, position order) to ``output`` atomically.

    Parquet folder unless the name ends in ``.csv`` (then a folder of CSV
    parts with a header), written to a hidden temporary sibling and renamed.
    """
    order = np.asarray(order, dtype=np.int64)
    pos = spark.createDataFrame(pd.DataFrame({"node": order, "position": np.arange(order.size, dtype=np.int64)}))
    table = sg.nodes.join(pos, "node").orderBy("position").selectExpr("id as node", "position")
    write_folder(table, output, "csv" if str(output).lower().endswith(".csv") else "parquet")
