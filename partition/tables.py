"""Write small result tables (linear order, hierarchy levels) as CSV, TSV or Parquet.

Columns are written in the user's ids; the format follows the file name
(``.parquet``/``.pq`` → Parquet, ``.tsv`` → TSV, otherwise CSV; ``.gz`` allowed
for text). Writes are atomic.
"""

from __future__ import annotations

import gzip
import io
import os

import numpy as np
import pyarrow as pa
import pyarrow.csv as pacsv
import pyarrow.parquet as pq

from partition.atomic import atomic_path, write_bytes

__all__ = ["write_table", "id_array", "order_table", "hierarchy_table"]


def id_array(graph):
    """The graph's user ids as a pyarrow array (int64 or string)."""
    if graph.ids.dtype.kind in "iu":
        return pa.array(graph.ids, type=pa.int64())
    return pa.array(graph.ids, type=pa.string())


def order_table(graph, order):
    """``node, position`` rows in position order."""
    order = np.asarray(order, dtype=np.int64)
    return pa.table({"node": id_array(graph).take(pa.array(order)),
                     "position": pa.array(np.arange(order.size, dtype=np.int64))})


def hierarchy_table(graph, hierarchy):
    """``node, level, cluster`` rows: the cluster of every node at every level ≥ 1."""
    ids = id_array(graph)
    n = graph.n
    levels = range(1, hierarchy.rounds + 1)
    node_idx = np.tile(np.arange(n, dtype=np.int64), len(levels))
    level = np.repeat(np.arange(1, hierarchy.rounds + 1, dtype=np.int32), n)
    cluster = np.concatenate([hierarchy.labels[r] for r in levels]) if hierarchy.rounds else np.empty(0, np.int64)
    return pa.table({"node": ids.take(pa.array(node_idx)), "level": pa.array(level),
                     "cluster": pa.array(np.asarray(cluster, dtype=np.int64))})


def write_table(path, table):
    """Write a pyarrow table atomically in the format the name asks for."""
    name = os.fspath(path)
    lower = name.lower()
    base = lower[:-3] if lower.endswith(".gz") else lower
    if base.endswith((".parquet", ".pq")):
        with atomic_path(name) as tmp:
            pq.write_table(table, tmp, row_group_size=128 * 1024)
        return
    buf = io.BytesIO()
    delim = "\t" if base.endswith(".tsv") else ","
    buf.write((delim.join(table.column_names) + "\n").encode())
    pacsv.write_csv(table, buf, write_options=pacsv.WriteOptions(
        include_header=False, delimiter=delim, quoting_style="needed"))
    data = buf.getvalue()
    write_bytes(name, gzip.compress(data, mtime=0) if lower.endswith(".gz") else data)
