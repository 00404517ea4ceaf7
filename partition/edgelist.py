"""Read edge lists and node-weight files into a :class:`~partition.graph.Graph`.

Formats
-------
``text`` (default for any name but ``.csv``, ``.tsv``, ``.parquet``, ``.pq``)
    One edge per line, ``u v`` (``u v w`` with ``weighted=True``), fields
    separated by whitespace, tabs or commas; lines whose first non-blank
    character is ``#`` or ``%`` are comments; blank lines are skipped.
``csv`` / ``tsv`` (``.csv``, ``.tsv``)
    A header row names the columns; ``source_column``/``target_column`` pick the
    endpoints (default: the first two columns) and ``weight_column`` the weight
    (default with ``weighted=True``: the third column). ``header=False`` reads a
    headerless file whose columns are then 1, 2, 3, ...
``parquet`` (``.parquet``, ``.pq``)
    Columns chosen as for CSV.

Any of these may be compressed with gzip or bzip2 (recognised by content, not
by name). Node ids are integers when every id in the file is an integer
(int64), otherwise strings. Edge weights must be finite and >= 0. A node-weights
file holds ``id weight`` rows (same text rules, or CSV/Parquet) with
non-negative integer weights; it must list every node of the edge list, and
ids it lists that have no edge are isolated nodes only with
``allow_isolated=True`` (otherwise they are reported as unknown nodes).

Text files are parsed by pyarrow's CSV reader (the fast path); when that fails
the file is read again line by line to name the first bad line, so every error
names the file and the line (``row N`` for Parquet).
"""

from __future__ import annotations

import bz2
import gzip
import io
import os
import re

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.csv as pacsv

from partition.errors import InputError
from partition.graph import build_graph

__all__ = ["read_graph", "read_edges", "read_node_weights", "detect_format"]

_COMMENT_LINE = re.compile(rb"(?m)^[ \t]*[#%][^\n]*(?:\n|$)")
_SPLIT = re.compile(r"[\s,]+")


# ----------------------------------------------------------------------------
# public entry points
# ----------------------------------------------------------------------------
def read_graph(
    path,
    fmt="auto",
    weighted=False,
    source_column=None,
    target_column=None,
    weight_column=None,
    node_weights=None,
    header=None,
    delimiter=None,
    allow_isolated=False,
):
    """Read an edge list (and optionally a node-weights file) into a Graph.

    Parameters
    ----------
    path : str or path-like
        The edge list.
    fmt : {"auto", "text", "csv", "tsv", "parquet"}
        File format; ``auto`` decides by the file name (see module docstring).
    weighted : bool
        Read an edge weight (third field / ``weight_column``); repeated pairs
        have their weights summed. Unweighted: each distinct pair weighs 1.
    source_column, target_column, weight_column : str or None
        Column names for CSV/TSV/Parquet input.
    node_weights : str or path-like or None
        A node-weights file (``id weight`` rows).
    header : bool or None
        CSV/TSV only: whether the first row is a header (default True).
    delimiter : str or None
        Force the field delimiter (default: detected).
    allow_isolated : bool
        Accept ids in the node-weights file that have no edge, as isolated nodes.

    Returns
    -------
    Graph

    Raises
    ------
    InputError
        Malformed line, non-numeric/negative/NaN/infinite weight, empty graph,
        node-weights problems; the message names the file and line.
    """
    if weight_column is not None:
        weighted = True
    src, dst, w = read_edges(
        path, fmt, weighted, source_column, target_column, weight_column, header, delimiter
    )
    nw_ids = nw = None
    if node_weights is not None:
        nw_ids, nw, row_to_line = read_node_weights(node_weights)
        _check_node_weight_ids(src, dst, nw_ids, node_weights, row_to_line, allow_isolated)
    if len(src) == 0 and nw_ids is None:
        raise InputError(path, "the graph is empty: no edges were found")
    return build_graph(src, dst, weights=w, node_ids=nw_ids, node_weights=nw, source=os.fspath(path))


def detect_format(path, fmt="auto"):
    """The format name for ``path`` (``text``, ``csv``, ``tsv`` or ``parquet``)."""
    if fmt not in ("auto", "text", "csv", "tsv", "parquet"):
        raise InputError(path, f"unknown format {fmt!r}; expected text, csv, tsv or parquet")
    if fmt != "auto":
        return fmt
    name = os.fspath(path).lower()
    for suffix in (".gz", ".bz2"):
        if name.endswith(suffix):
            name = name[: -len(suffix)]
    if name.endswith((".parquet", ".pq")):
        return "parquet"
    if name.endswith(".csv"):
        return "csv"
    if name.endswith(".tsv"):
        return "tsv"
    return "text"


def read_edges(
    path,
    fmt="auto",
    weighted=False,
    source_column=None,
    target_column=None,
    weight_column=None,
    header=None,
    delimiter=None,
):
    """Read raw edge columns ``(src, dst, weights_or_None)`` without normalising."""
    kind = detect_format(path, fmt)
    if kind == "parquet":
        cols, names, row_to_line = _read_parquet(path, [source_column, target_column, weight_column], weighted)
    elif kind in ("csv", "tsv"):
        delim = delimiter or ("," if kind == "csv" else "\t")
        cols, names, row_to_line = _read_headed(
            path, [source_column, target_column, weight_column], weighted, delim, header is not False
        )
    else:
        ncols = 3 if weighted else 2
        cols, row_to_line = _read_text(path, ncols, delimiter, ["int_or_str", "int_or_str", "float"][:ncols])
    src, dst = _id_columns(cols[0], cols[1])
    w = None
    if weighted:
        w = _float_weights(cols[2], path, row_to_line, what="edge weight")
    return src, dst, w


def read_node_weights(path, fmt="auto"):
    """Read a node-weights file: returns ``(ids, weights, row_to_line)``.

    Weights are non-negative integers; an id listed twice is an error.
    """
    kind = detect_format(path, fmt)
    if kind == "parquet":
        cols, _, row_to_line = _read_parquet(path, [None, None, None], False, ncols=2)
    elif kind in ("csv", "tsv"):
        cols, _, row_to_line = _read_headed(path, [None, None, None], False, "," if kind == "csv" else "\t", True, ncols=2)
    else:
        cols, row_to_line = _read_text(path, 2, None, ["int_or_str", "int"])
    ids = cols[0]
    if len(ids) == 0:
        raise InputError(path, "the node-weights file lists no nodes")
    weights = _int_weights(cols[1], path, row_to_line)
    ids = _as_ids(ids)
    order = np.argsort(ids, kind="stable")
    sorted_ids = ids[order]
    dup = np.flatnonzero(sorted_ids[1:] == sorted_ids[:-1])
    if dup.size:
        row = int(order[dup[0] + 1])
        raise InputError(path, f"node {ids[row]!s} is listed twice", row_to_line(row))
    return ids, weights, row_to_line


# ----------------------------------------------------------------------------
# text
# ----------------------------------------------------------------------------
def _read_bytes(path):
    try:
        with open(path, "rb") as fh:
            raw = fh.read()
    except FileNotFoundError:
        raise InputError(path, "no such file") from None
    except IsADirectoryError:
        raise InputError(path, "is a directory, not a file") from None
    except OSError as exc:
        raise InputError(path, f"cannot be read: {exc.strerror or exc}") from None
    try:
        if raw[:2] == b"\x1f\x8b":
            raw = gzip.decompress(raw)
        elif raw[:3] == b"BZh":
            raw = bz2.decompress(raw)
    except (OSError, EOFError, ValueError) as exc:
        raise InputError(path, f"is not a valid compressed file: {exc}") from None
    return raw


def _read_text(path, ncols, delimiter, kinds):
    """Parse a headerless text table; returns (pyarrow columns, row_to_line)."""
    raw = _read_bytes(path)
    if b"\r" in raw:
        raw = raw.replace(b"\r\n", b"\n").replace(b"\r", b"\n")
    data = _COMMENT_LINE.sub(b"", raw) if (b"#" in raw or b"%" in raw) else raw
    row_to_line = _RowLines(raw)
    if not data.strip():
        return [pa.array([], pa.int64()) for _ in range(ncols)], row_to_line
    delim = delimiter or _detect_delimiter(data)
    try:
        cols = _fast_text(data, ncols, delim, kinds)
    except (pa.ArrowInvalid, pa.ArrowTypeError, _FallBack):
        cols = _slow_text(raw, ncols, path, kinds)
    return cols, row_to_line


class _FallBack(Exception):
    pass


def _detect_delimiter(data):
    first = data[: data.find(b"\n")] if b"\n" in data else data
    if b"\t" in first:
        return "\t"
    if b"," in first:
        return ","
    return " "


def _fast_text(data, ncols, delim, kinds):
    names = [f"c{i}" for i in range(ncols)]
    types = {}
    for name, kind in zip(names, kinds):
        if kind == "float":
            types[name] = pa.float64()
        elif kind == "int":
            types[name] = pa.int64()
    table = pacsv.read_csv(
        io.BytesIO(data),
        read_options=pacsv.ReadOptions(column_names=names, block_size=1 << 24, use_threads=True),
        parse_options=pacsv.ParseOptions(delimiter=delim, ignore_empty_lines=True, quote_char=False),
        convert_options=pacsv.ConvertOptions(column_types=types, strings_can_be_null=False, quoted_strings_can_be_null=False),
    )
    cols = [table.column(i) for i in range(ncols)]
    for col in cols:
        if col.null_count:
            raise _FallBack()
        if pa.types.is_string(col.type) and pc.any(pc.equal(col, "")).as_py():
            raise _FallBack()
    return cols


def _slow_text(raw, ncols, path, kinds):
    """Line-by-line parser: correct for any whitespace; names the first bad line."""
    out = [[] for _ in range(ncols)]
    text = raw.decode("utf-8", errors="replace")
    for lineno, line in enumerate(text.split("\n"), start=1):
        s = line.strip()
        if not s or s[0] in "#%":
            continue
        fields = [f for f in _SPLIT.split(s) if f]
        if len(fields) != ncols:
            hint = ""
            if ncols == 2 and len(fields) == 3:
                hint = "; pass --weighted to read the third field as an edge weight"
            raise InputError(path, f"expected {ncols} fields, found {len(fields)}: {s[:80]!r}{hint}", lineno)
        for i, (field, kind) in enumerate(zip(fields, kinds)):
            if kind == "float":
                try:
                    field = float(field)
                except ValueError:
                    raise InputError(path, f"weight {field!r} is not a number", lineno) from None
            elif kind == "int":
                try:
                    field = int(field)
                except ValueError:
                    raise InputError(path, f"weight {field!r} is not a whole number", lineno) from None
            out[i].append(field)
    cols = []
    for values, kind in zip(out, kinds):
        if kind == "float":
            cols.append(pa.array(values, pa.float64()))
        elif kind == "int":
            cols.append(pa.array(values, pa.int64()))
        else:
            cols.append(_ids_from_strings(values))
    return cols


def _ids_from_strings(values):
    try:
        return pa.array([int(v) for v in values], pa.int64())
    except (ValueError, OverflowError):
        return pa.array(values, pa.string())


class _RowLines:
    """Maps a data-row index to its 1-based line number in the raw text."""

    def __init__(self, raw):
        self.raw = raw

    def __call__(self, row):
        count = -1
        for lineno, line in enumerate(self.raw.split(b"\n"), start=1):
            s = line.strip()
            if not s or s[:1] in (b"#", b"%"):
                continue
            count += 1
            if count == row:
                return lineno
        return None


# ----------------------------------------------------------------------------
# csv/tsv with header, parquet
# ----------------------------------------------------------------------------
def _pick_columns(path, available, wanted, weighted, ncols):
    chosen = []
    for i, name in enumerate(wanted[:ncols]):
        if i == 2 and not weighted:
            break
        if name is None:
            if i >= len(available):
                raise InputError(path, f"expected at least {i + 1} columns, found {len(available)}")
            chosen.append(available[i])
        elif name not in available:
            raise InputError(path, f"no column named {name!r}; the columns are {', '.join(map(str, available))}")
        else:
            chosen.append(name)
    return chosen


def _read_headed(path, wanted, weighted, delim, header, ncols=3):
    raw = _read_bytes(path)
    if b"\r" in raw:
        raw = raw.replace(b"\r\n", b"\n").replace(b"\r", b"\n")
    data = _COMMENT_LINE.sub(b"", raw) if (b"#" in raw or b"%" in raw) else raw
    if not data.strip():
        raise InputError(path, "the file is empty")
    first = data[: data.find(b"\n")] if b"\n" in data else data
    width = len(first.split(delim.encode()))
    if header:
        names = [s.strip() for s in first.decode("utf-8", "replace").split(delim)]
        body = data[len(first) + 1 :]
    else:
        names = [str(i + 1) for i in range(width)]
        body = data
    chosen = _pick_columns(path, names, wanted, weighted, ncols)
    raw_body_start = 1 if header else 0
    row_to_line = _HeadedRowLines(raw, raw_body_start)
    try:
        table = pacsv.read_csv(
            io.BytesIO(body),
            read_options=pacsv.ReadOptions(column_names=names, block_size=1 << 24),
            parse_options=pacsv.ParseOptions(delimiter=delim, ignore_empty_lines=True),
            convert_options=pacsv.ConvertOptions(include_columns=chosen, strings_can_be_null=False),
        )
    except (pa.ArrowInvalid, pa.ArrowTypeError) as exc:
        line = _first_bad_csv_line(raw, delim, len(names), raw_body_start)
        raise InputError(path, f"malformed row: expected {len(names)} fields ({exc.__class__.__name__})", line) from None
    cols = [table.column(c) for c in chosen]
    for c, col in zip(chosen, cols):
        if col.null_count:
            row = int(np.flatnonzero(col.is_null().to_numpy(zero_copy_only=False))[0])
            raise InputError(path, f"empty value in column {c!r}", row_to_line(row))
    return cols, chosen, row_to_line


class _HeadedRowLines(_RowLines):
    def __init__(self, raw, skip):
        super().__init__(raw)
        self.skip = skip

    def __call__(self, row):
        return super().__call__(row + self.skip)


def _first_bad_csv_line(raw, delim, width, skip):
    seen = -1
    for lineno, line in enumerate(raw.split(b"\n"), start=1):
        s = line.strip()
        if not s or s[:1] in (b"#", b"%"):
            continue
        seen += 1
        if seen < skip:
            continue
        if len(line.split(delim.encode())) != width:
            return lineno
    return None


def _read_parquet(path, wanted, weighted, ncols=3):
    import pyarrow.parquet as pq

    try:
        pf = pq.ParquetFile(path)
    except FileNotFoundError:
        raise InputError(path, "no such file") from None
    except (pa.ArrowInvalid, OSError) as exc:
        raise InputError(path, f"is not a readable Parquet file: {exc}") from None
    names = pf.schema_arrow.names
    chosen = _pick_columns(path, names, wanted, weighted, ncols)
    table = pf.read(columns=chosen)
    cols = [table.column(c) for c in chosen]
    for c, col in zip(chosen, cols):
        if col.null_count:
            row = int(np.flatnonzero(col.is_null().to_numpy(zero_copy_only=False))[0])
            raise InputError(path, f"null value in column {c!r} at row {row + 1}")
    return cols, chosen, _ParquetRows()


class _ParquetRows:
    def __call__(self, row):
        return None


# ----------------------------------------------------------------------------
# column conversion and checks
# ----------------------------------------------------------------------------
def _as_ids(col):
    """A pyarrow column of ids as int64 or an object array of str."""
    if isinstance(col, np.ndarray):
        return col
    t = col.type
    if pa.types.is_integer(t):
        return col.to_numpy().astype(np.int64, copy=False)
    if pa.types.is_string(t) or pa.types.is_large_string(t):
        return np.asarray(col.to_numpy(zero_copy_only=False), dtype=object)
    return np.asarray(col.cast(pa.string()).to_numpy(zero_copy_only=False), dtype=object)


def _id_columns(a, b):
    """Both id columns as int64 when both are integer, else both as strings."""
    ints = pa.types.is_integer(a.type) and pa.types.is_integer(b.type)
    if ints:
        return _as_ids(a), _as_ids(b)
    return (
        np.asarray(a.cast(pa.string()).to_numpy(zero_copy_only=False), dtype=object),
        np.asarray(b.cast(pa.string()).to_numpy(zero_copy_only=False), dtype=object),
    )


def _float_weights(col, path, row_to_line, what):
    if not (pa.types.is_floating(col.type) or pa.types.is_integer(col.type)):
        try:
            col = col.cast(pa.float64())
        except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
            values = col.to_numpy(zero_copy_only=False)
            for row, v in enumerate(values):
                try:
                    float(v)
                except (TypeError, ValueError):
                    raise InputError(path, f"{what} {v!r} is not a number", row_to_line(row)) from None
            raise
    w = col.to_numpy(zero_copy_only=False).astype(np.float64, copy=False)
    bad = ~np.isfinite(w) | (w < 0)
    if bad.any():
        row = int(np.flatnonzero(bad)[0])
        raise InputError(path, f"{what} {float(w[row])!r} is not allowed: weights must be finite and >= 0", row_to_line(row))
    return w


def _int_weights(col, path, row_to_line):
    if not pa.types.is_integer(col.type):
        values = col.to_numpy(zero_copy_only=False)
        for row, v in enumerate(values):
            try:
                if float(v) != int(float(v)):
                    raise ValueError
            except (TypeError, ValueError, OverflowError):
                raise InputError(path, f"node weight {v!r} is not a whole number", row_to_line(row)) from None
        col = col.cast(pa.int64())
    w = col.to_numpy().astype(np.int64, copy=False)
    if (w < 0).any():
        row = int(np.flatnonzero(w < 0)[0])
        raise InputError(path, f"node weight {w[row]} is negative; weights must be >= 0", row_to_line(row))
    return w


def _check_node_weight_ids(src, dst, nw_ids, path, row_to_line, allow_isolated):
    if allow_isolated:
        return
    if nw_ids.dtype.kind in "iu" and src.dtype.kind not in "iu":
        nw_ids = nw_ids.astype(str).astype(object)
    known = np.unique(np.concatenate((src, dst))) if len(src) else src
    if nw_ids.dtype != known.dtype and known.dtype.kind in "iu":
        # string ids in the node-weights file, integer ids in the edge list
        known = known.astype(str).astype(object)
    pos = np.searchsorted(known, nw_ids)
    pos = np.minimum(pos, max(len(known) - 1, 0))
    found = (known[pos] == nw_ids) if len(known) else np.zeros(len(nw_ids), dtype=bool)
    if not found.all():
        row = int(np.flatnonzero(~found)[0])
        raise InputError(
            path,
            f"node {nw_ids[row]!s} does not appear in the edge list; pass --allow-isolated "
            "to add such nodes as isolated nodes",
            row_to_line(row),
        )
