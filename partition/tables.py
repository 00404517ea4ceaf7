"""Write small result tables (linear order, hierarchy levels) as CSV, TSV or Parquet.

Columns are written in the user's ids; the format follows the file name
(``.parquet``/``.pq`` → Parquet, ``.tsv`` → TSV, otherwise CSV; ``.gz`` allowed
for text). Writes are atomic.
"""

from __future__ import annotations

import gzip
import os

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.parquet as pq

from partition.atomic import atomic_path, write_bytes
from partition.errors import ParameterError

__all__ = ["write_table", "csv_bytes", "quote_text", "id_array", "order_table", "hierarchy_table"]


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


def write_table(path, table, fmt=None):
    """Write a pyarrow table atomically in the format the name (or ``fmt``) asks for.

    Parameters
    ----------
    path : str or os.PathLike
    table : pyarrow.Table
    fmt : {"csv", "tsv", "parquet"} or None
        ``None``: from the name (``.parquet``/``.pq`` → Parquet, ``.tsv`` →
        TSV, anything else → CSV; ``.gz`` compresses text).

    Notes
    -----
    Text output is the one CSV dialect of every Shardline table
    (:func:`csv_bytes`): a header row, user ids as written, RFC 4180 quotes
    only where a value needs them, ``\n`` line ends, gzip without a time
    stamp — so the bytes depend only on the table.
    """
    name = os.fspath(path)
    lower = name.lower()
    base = lower[:-3] if lower.endswith(".gz") else lower
    if fmt is None:
        fmt = "parquet" if base.endswith((".parquet", ".pq")) else "tsv" if base.endswith(".tsv") else "csv"
    if fmt not in ("csv", "tsv", "parquet"):
        raise ParameterError(f"unknown table format {fmt!r}; expected csv, tsv or parquet")
    if fmt == "parquet":
        if lower.endswith(".gz"):
            raise ParameterError("Parquet output is compressed internally; drop the .gz suffix")
        with atomic_path(name) as tmp:
            pq.write_table(table, tmp, row_group_size=128 * 1024)
        return
    data = csv_bytes(table, "\t" if fmt == "tsv" else ",")
    write_bytes(name, gzip.compress(data, compresslevel=6, mtime=0) if lower.endswith(".gz") else data)


def csv_bytes(table, delim=","):
    """The table as CSV/TSV bytes: header, values joined by ``delim``, quotes only where needed.

    A text value is quoted (RFC 4180: inner quotes doubled) when it holds the
    delimiter, a quote or a line break, starts or ends with a blank, starts
    with ``#`` or ``%`` (a comment to the readers) or is empty; a missing
    value is an empty field. Numbers are written in their shortest decimal
    form.
    """
    names = pa.array(table.column_names, pa.string())
    head = _string_bytes(pc.cast(pc.binary_join_element_wise(
        *[quote_text(names.slice(i, 1), delim) for i in range(len(names))], delim), pa.large_string()))
    if table.num_rows == 0:
        return head + b"\n"
    cols = []
    for col in table.columns:
        col = col.combine_chunks() if isinstance(col, pa.ChunkedArray) else col
        if pa.types.is_string(col.type) or pa.types.is_large_string(col.type):
            cols.append(pc.if_else(pc.is_null(col), pa.scalar("", col.type), quote_text(col, delim)))
        else:
            cols.append(pc.fill_null(pc.cast(col, pa.string()), ""))
    big = lambda text: pa.scalar(text, pa.large_string())  # noqa: E731 - one type for every join operand
    rows = pc.binary_join_element_wise(*[pc.cast(c, pa.large_string()) for c in cols], big(delim)) \
        if len(cols) > 1 else pc.cast(cols[0], pa.large_string())
    rows = pc.binary_join_element_wise(rows, big(""), big("\n"))
    return head + b"\n" + _string_bytes(rows)


def quote_text(text, delim):
    """RFC 4180 quoting of the values of a pyarrow string array that need it (vectorised; see :func:`csv_bytes`)."""
    pattern = r'["\n\r' + ("," if delim == "," else "\t") + r"]|^\s|\s$|^[#%]|^$"
    need = pc.match_substring_regex(text, pattern)
    quoted = pc.binary_join_element_wise('"', pc.replace_substring(text, '"', '""'), '"', "")
    return pc.if_else(need, quoted, text)


def _string_bytes(arr):
    """The concatenated UTF-8 bytes of a large_string array without nulls."""
    arr = arr.combine_chunks() if isinstance(arr, pa.ChunkedArray) else arr
    if len(arr) == 0:
        return b""
    offsets = np.frombuffer(arr.buffers()[1], dtype=np.int64)[arr.offset : arr.offset + len(arr) + 1]
    return arr.buffers()[2].to_pybytes()[offsets[0] : offsets[-1]]
