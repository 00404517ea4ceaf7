"""Node-to-shard files: read and write the ``node, shard`` table of a partition.

A text file has one ``node<delimiter>shard`` row per line: comma-separated
(``.csv``, or a first row holding a comma), tab-separated (``.tsv``/``.tab``,
or a first row holding a tab) or separated by runs of spaces. Blank lines and
lines whose first non-blank character is ``#`` or ``%`` are skipped (as in the
edge-list reader); the first remaining line is a header when its shard field
is not an integer (a header ``shard, node`` swaps the columns). Gzip-compressed
files are recognised by their first bytes. A Parquet file uses its ``node`` and ``shard`` columns, or
its first two columns. Node ids are matched to the graph's ids: as integers
when the graph's ids are integers, as strings (exactly as written, after
RFC 4180 unquoting) otherwise. Text files cannot hold ids with line breaks;
such graphs round-trip through Parquet only.

Text files are parsed column-wise by ``pyarrow.csv``; the line of a bad row is
known from a vectorised scan of the line breaks, and only a row the parser
rejects sends the reader through a slow line-by-line pass to find its line.
"""

from __future__ import annotations

import csv
import gzip
import os
import re
import zlib

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.csv as pacsv
import pyarrow.parquet as pq

from partition.atomic import atomic_path, write_bytes
from partition.errors import InputError, ParameterError, check_parts

__all__ = ["read_assignment", "write_assignment", "open_node_shards"]

_INT_PATTERN = r"^[+-]?[0-9]+$"
_NL, _HASH, _PERCENT, _SPACE, _TAB, _CR = 10, 35, 37, 32, 9, 13


def read_assignment(path, graph, k=None) -> np.ndarray:
    """Read a node-to-shard file and align it with the graph's nodes.

    Parameters
    ----------
    path : str or os.PathLike
        A text (CSV, TSV, whitespace; optionally gzip-compressed) or Parquet file.
    graph : partition.graph.Graph
        The graph whose nodes are being placed; every node must appear once.
    k : int or None
        Number of shards; every shard id must lie in ``[0, k)``. ``None``: the
        largest shard id plus one (at most the number of nodes).

    Returns
    -------
    ndarray of int64, shape (graph.n,)
        The shard of each dense node.

    Raises
    ------
    InputError
        The file is missing or unreadable, or a row is malformed, has a
        non-integer, negative or too large shard, names a node the graph does
        not have or a node already listed, or some graph nodes are not listed.
        The error names the file and, for a bad row, its line (Parquet: row).
    ParameterError
        ``k`` is not a whole number in ``[1, graph.n]``.
    """
    if k is not None:
        k = check_parts(k, graph.n)
    name, table, raw = open_node_shards(path)
    if table is not None:
        nodes, shards, where = _table_columns(name, table)
    else:
        nodes, shards, where = _text_columns(name, raw)
    return _align(name, graph, nodes, shards, k, where)


def open_node_shards(path):
    """The contents of a node,shard file, before its columns are read: ``(name, table, raw)``.

    A Parquet file or dataset folder (the Spark engine writes folders) gives a
    ``pyarrow.Table`` and ``raw = None``; a text file gives ``table = None``
    and its bytes, decompressed when they start with the gzip signature
    (RFC 1952). A file named ``.parquet``/``.pq`` without the Parquet
    signature ``PAR1`` is an error rather than text.

    Raises
    ------
    InputError
        Missing or unreadable file or folder, broken gzip or Parquet data.
    """
    name = os.fspath(path)
    if os.path.isdir(name):
        try:
            return name, pq.read_table(name), None
        except (pa.ArrowException, OSError) as exc:
            raise InputError(name, f"is not a readable Parquet folder ({exc})") from None
    try:
        with open(name, "rb") as fh:
            raw = fh.read()
    except FileNotFoundError:
        raise InputError(name, "no such file") from None
    except OSError as exc:
        raise InputError(name, f"cannot be read ({exc.strerror or exc})") from None
    if raw[:2] == b"\x1f\x8b":
        try:
            raw = gzip.decompress(raw)
        except (OSError, EOFError, zlib.error) as exc:
            raise InputError(name, f"is not a valid gzip file ({exc})") from None
    if raw[:4] == b"PAR1":
        try:
            return name, pq.read_table(pa.BufferReader(raw)), None
        except (pa.ArrowException, OSError) as exc:
            raise InputError(name, f"is not a readable Parquet file ({exc})") from None
    if name.lower().endswith((".parquet", ".pq")):
        raise InputError(name, "is not a Parquet file (it lacks the PAR1 signature)")
    return name, None, raw


def _align(name, graph, nodes, shards, k, where):
    """Validate ``node, shard`` columns against the graph; return the shard of each node.

    ``nodes`` and ``shards`` are pyarrow columns without nulls (integers or
    strings); ``where`` maps a 0-based row to ``(line, prefix)`` for messages.
    """
    where = where or (lambda i: (None, f"row {i + 1}: "))

    def fail(row, message):
        line, prefix = where(int(row))
        return InputError(name, prefix + message, line)

    shard = _to_int64(shards, fail, "shard")
    keys = _node_keys(nodes, graph, fail)
    codes = _lookup(graph, keys)
    bad = np.flatnonzero(codes < 0)
    if bad.size:
        raise fail(bad[0], f"node {_show(keys[int(bad[0])])} is not a node of the graph")
    bad = np.flatnonzero(shard < 0)
    if bad.size:
        raise fail(bad[0], f"shard {shard[bad[0]]} is negative; shard ids run from 0 to k - 1")
    bad = np.flatnonzero(shard >= (graph.n if k is None else k))
    if bad.size:
        why = f"with k = {k} shard ids run from 0 to {k - 1}" if k is not None else (
            f"a graph of {graph.n} nodes has at most {graph.n} shards (0 to {graph.n - 1})")
        raise fail(bad[0], f"shard {shard[bad[0]]} is out of range: {why}")
    count = np.bincount(codes, minlength=graph.n)
    if count.max(initial=0) > 1:  # report the earliest repeat, and where the node first came
        _, first_rows = np.unique(codes, return_index=True)
        repeat = np.ones(codes.shape[0], dtype=bool)
        repeat[first_rows] = False
        row = int(np.flatnonzero(repeat)[0])
        first = int(np.flatnonzero(codes == codes[row])[0])
        line = where(first)[0]
        earlier = f"line {line}" if line is not None else f"row {first + 1}"
        raise fail(row, f"node {_show(keys[row])} is listed twice (first on {earlier})")
    if codes.shape[0] != graph.n:
        missing = np.flatnonzero(count == 0)
        shown = ", ".join(_show(x) for x in graph.ids[missing[:5]])
        message = f"{missing.size} node(s) of the graph have no shard in the file (first: {shown})"
        raise InputError(name, message)
    parts = np.empty(graph.n, dtype=np.int64)
    parts[codes] = shard
    return parts


def write_assignment(path, graph, parts, fmt=None) -> None:
    """Write a partition as a ``node, shard`` table, one row per node in dense order.

    Parameters
    ----------
    path : str or os.PathLike
        Output file; written atomically (a failed write leaves no file).
        A name ending in ``.gz`` is gzip-compressed (text formats only).
    graph : partition.graph.Graph
    parts : array_like of int, shape (graph.n,)
        The shard of each dense node (non-negative).
    fmt : {"csv", "tsv", "parquet"} or None
        ``None``: from the name (``.parquet``/``.pq`` → Parquet, ``.tsv`` → TSV,
        anything else → CSV).

    Raises
    ------
    ParameterError
        ``parts`` does not hold one non-negative integer per node, or ``fmt``
        is unknown.

    Notes
    -----
    The bytes depend only on the graph's ids and ``parts``: a header
    ``node<d>shard``, user ids, no quoting unless an id holds the delimiter, a
    quote, a line break, leading/trailing blanks or a leading ``#``/``%``
    (RFC 4180 quoting); gzip output carries no time stamp.
    """
    name = os.fspath(path)
    parts = _check_parts(graph, parts)
    lower = name.lower()
    base = lower[:-3] if lower.endswith(".gz") else lower
    if fmt is None:
        fmt = "parquet" if base.endswith((".parquet", ".pq")) else "tsv" if base.endswith(".tsv") else "csv"
    if fmt not in ("csv", "tsv", "parquet"):
        raise ParameterError(f"unknown assignment format {fmt!r}; expected csv, tsv or parquet")
    if fmt == "parquet" and lower.endswith(".gz"):
        raise ParameterError("Parquet output is compressed internally; drop the .gz suffix")
    integer_ids = graph.ids.dtype.kind in "iu"
    node_arr = pa.array(graph.ids, type=pa.int64() if integer_ids else pa.string())
    shard_arr = pa.array(parts, type=pa.int64())
    if fmt == "parquet":
        with atomic_path(name) as tmp:
            pq.write_table(pa.table({"node": node_arr, "shard": shard_arr}), tmp)
        return
    delim = "," if fmt == "csv" else "\t"
    text = pc.cast(node_arr, pa.string()) if integer_ids else _quote(node_arr, delim)
    rows = pc.binary_join_element_wise(text, pc.cast(shard_arr, pa.string()), delim)
    rows = pc.cast(pc.binary_join_element_wise(rows, "", "\n"), pa.large_string())
    data = f"node{delim}shard\n".encode() + _string_bytes(rows)
    write_bytes(name, gzip.compress(data, compresslevel=6, mtime=0) if lower.endswith(".gz") else data)


# --- text input --------------------------------------------------------------


def _text_columns(name, raw):
    """Parse a text file into string columns plus a row → line map."""
    buf = np.frombuffer(raw, dtype=np.uint8)
    starts, ends, data = _scan_lines(buf)
    data_lines = np.flatnonzero(data)
    if data_lines.size == 0:
        raise InputError(name, "holds no node-to-shard rows")
    first = raw[starts[data_lines[0]] : ends[data_lines[0]]]
    lower = name.lower().removesuffix(".gz")
    if lower.endswith(".csv") or (not lower.endswith((".tsv", ".tab")) and b"," in first):
        mode = "csv"
    elif lower.endswith((".tsv", ".tab")) or b"\t" in first:
        mode = "tab"
    else:
        mode = "space"
    fields = _split(first.decode("utf-8", "replace"), mode)
    swap = False
    if len(fields) >= 2 and not re.fullmatch(_INT_PATTERN[1:-1], fields[1].strip()):
        if len(fields) != 2:
            message = f"header has {len(fields)} fields; expected 2 (node, shard)"
            raise InputError(name, message, int(data_lines[0]) + 1)
        swap = [f.strip().lower() for f in fields] == ["shard", "node"]
        data[data_lines[0]] = False
        data_lines = data_lines[1:]
        if data_lines.size == 0:
            raise InputError(name, "holds a header but no node-to-shard rows")
    line_no = data_lines + 1
    body = _keep_lines(buf, starts, ends, data, mode == "space")
    convert = pacsv.ConvertOptions(column_types={"c0": pa.string(), "c1": pa.string()},
                                   strings_can_be_null=False, quoted_strings_can_be_null=False)
    try:
        table = pacsv.read_csv(pa.py_buffer(body), read_options=pacsv.ReadOptions(column_names=["c0", "c1"]),
                               parse_options=pacsv.ParseOptions(delimiter="," if mode == "csv" else "\t"),
                               convert_options=convert)
    except pa.ArrowInvalid as exc:
        raise _locate_parse_error(name, raw, starts, ends, data_lines, mode, exc) from None
    if table.num_rows != data_lines.size:
        raise InputError(name, "line breaks are ambiguous (bare carriage returns or quoted line breaks?)")
    nodes, shards = table.column(1 if swap else 0), table.column(0 if swap else 1)
    return nodes, shards, lambda i: (int(line_no[i]), "")


def _scan_lines(buf):
    """Start and end (exclusive, before ``\\n``) of each line, and which hold data.

    A line holds data unless it is blank or its first non-blank byte is ``#`` or ``%``.
    """
    nl = np.flatnonzero(buf == _NL)
    starts = np.concatenate(([0], nl + 1))
    ends = np.concatenate((nl, [buf.size]))
    if starts[-1] == buf.size:  # the file ends with a line break
        starts, ends = starts[:-1], ends[:-1]
    first = starts.copy()
    todo = np.flatnonzero(first < ends)
    while todo.size:  # step over leading blanks, one byte per round, on the lines that have them
        b = buf[first[todo]]
        todo = todo[(b == _SPACE) | (b == _TAB) | (b == _CR)]
        first[todo] += 1
        todo = todo[first[todo] < ends[todo]]
    has = first < ends
    data = np.zeros(starts.size, dtype=bool)
    lead = buf[first[has]]
    data[has] = (lead != _HASH) & (lead != _PERCENT)
    return starts, ends, data


def _keep_lines(buf, starts, ends, data, squeeze):
    """The bytes of the data lines only; with ``squeeze``, blank runs inside a line become one tab."""
    if data.all() and not squeeze:
        return buf.tobytes()
    keep = np.ones(buf.size + 1, dtype=np.int8)
    drop = np.flatnonzero(~data)
    if drop.size:  # mark each dropped line with its line break: +1 .. -1 over [start, end]
        edge = np.zeros(buf.size + 2, dtype=np.int8)
        np.add.at(edge, starts[drop], 1)
        np.add.at(edge, ends[drop] + 1, -1)
        keep -= np.cumsum(edge, dtype=np.int8)[: buf.size + 1]
    keep = keep[: buf.size].astype(bool)
    if squeeze:
        blank = (buf == _SPACE) | (buf == _TAB) | (buf == _CR)
        run_start = np.flatnonzero(blank & ~np.concatenate(([False], blank[:-1])))
        run_end = np.flatnonzero(blank & ~np.concatenate((blank[1:], [False])))
        leading = (run_start == 0) | (buf[np.maximum(run_start - 1, 0)] == _NL)
        trailing = (run_end == buf.size - 1) | (buf[np.minimum(run_end + 1, buf.size - 1)] == _NL)
        inner = run_start[~leading & ~trailing]
        inner = inner[keep[inner]]
        keep &= ~blank
        keep[inner] = True
        buf = buf.copy()
        buf[inner] = _TAB
    return buf[keep].tobytes()


def _split(line, mode):
    """Fields of one line as the parser would see them."""
    line = line.rstrip("\r\n")
    if mode == "csv":
        try:
            return next(csv.reader([line]), [])
        except csv.Error:
            return [line]
    if mode == "tab":
        return line.split("\t")
    return line.split()


def _locate_parse_error(name, raw, starts, ends, data_lines, mode, exc):
    """Slow pass: find the first data line the parser would reject."""
    for i in data_lines:
        try:
            text = raw[starts[i] : ends[i]].decode("utf-8")
        except UnicodeDecodeError:
            return InputError(name, "is not valid UTF-8 text", int(i) + 1)
        fields = _split(text, mode)
        if len(fields) != 2:
            found = f"found {len(fields)}: {text.strip()[:80]!r}"
            return InputError(name, f"expected 2 fields (node, shard), {found}", int(i) + 1)
    return InputError(name, f"cannot be parsed ({exc})")


# --- Parquet input -----------------------------------------------------------


def _table_columns(name, table):
    cols = table.column_names
    if "node" in cols and "shard" in cols:
        nodes, shards = table.column("node"), table.column("shard")
    elif len(cols) >= 2:
        nodes, shards = table.column(0), table.column(1)
    else:
        raise InputError(name, f"has {len(cols)} column(s); expected node and shard columns")
    for label, col in (("node", nodes), ("shard", shards)):
        t = col.type
        if not (pa.types.is_integer(t) or pa.types.is_string(t) or pa.types.is_large_string(t)):
            raise InputError(name, f"the {label} column has type {t}; expected integers or strings")
        if col.null_count:
            row = int(np.flatnonzero(col.is_null().to_numpy(zero_copy_only=False))[0])
            raise InputError(name, f"row {row + 1}: the {label} is missing (null)")
    return nodes, shards, None


# --- shared helpers ----------------------------------------------------------


def _to_int64(col, fail, label):
    """Integer column as int64; strings must be integers (locate the first one that is not)."""
    for attempt in range(2):
        try:
            return pc.cast(col, pa.int64()).to_numpy()
        except pa.ArrowInvalid:
            if pa.types.is_integer(col.type) or attempt:
                break  # an unsigned value above 2^63 - 1, or one of the cases below
            # blanks around the number and a leading plus sign are allowed
            col = pc.replace_substring_regex(pc.utf8_trim_whitespace(col), r"^\+", "")
    if not pa.types.is_integer(col.type):
        ok = pc.match_substring_regex(col, _INT_PATTERN).to_numpy(zero_copy_only=False)
        if not ok.all():
            row = int(np.argmin(ok))
            raise fail(row, f"{label} {col[row].as_py()!r} is not an integer")
    values = col.to_pylist()  # only on the error path: find the value outside int64
    row = next(i for i, v in enumerate(values) if not -(2**63) <= int(v) < 2**63)
    raise fail(row, f"{label} {values[row]} is out of range")


def _node_keys(col, graph, fail):
    """Node ids in the graph's id type: int64 ndarray, or a pyarrow string array."""
    if graph.ids.dtype.kind in "iu":
        if not pa.types.is_integer(col.type):
            col = pc.utf8_trim_whitespace(col)
            ok = pc.match_substring_regex(col, _INT_PATTERN).to_numpy(zero_copy_only=False)
            if not ok.all():
                row = int(np.argmin(ok))
                why = "is not a node of the graph (its ids are integers)"
                raise fail(row, f"node {col[row].as_py()!r} {why}")
        return _to_int64(col, fail, "node")
    col = pc.cast(col, pa.string())  # string ids are taken as written: blanks belong to the id
    return col.combine_chunks() if isinstance(col, pa.ChunkedArray) else col


def _lookup(graph, keys):
    """Dense index of each key (-1 when unknown).

    Integer ids spanning a range at most four times the node count use a direct
    table; other integer ids use the graph's sorted-id search; string ids use
    a hash lookup (pyarrow ``index_in``), which gives the same answer as
    the sorted search on equal strings at a fraction of its cost.
    """
    ids = graph.ids
    if ids.dtype.kind in "iu":
        lo, hi = int(ids[0]), int(ids[-1])
        if hi - lo < 4 * ids.shape[0] + 1024:
            table = np.full(hi - lo + 1, -1, dtype=np.int64)
            table[ids - lo] = np.arange(ids.shape[0])
            inside = (keys >= lo) & (keys <= hi)
            codes = np.full(keys.shape[0], -1, dtype=np.int64)
            codes[inside] = table[keys[inside] - lo]
            return codes
        return graph.id_index().lookup(keys)
    found = pc.index_in(keys, value_set=pa.array(ids, type=pa.string()))
    return found.fill_null(-1).to_numpy(zero_copy_only=False).astype(np.int64)


def _check_parts(graph, parts):
    parts = np.asarray(parts)
    if parts.ndim != 1 or parts.shape[0] != graph.n:
        raise ParameterError(f"parts must hold one shard per node ({graph.n}), got shape {parts.shape}")
    if parts.dtype.kind not in "iu":
        raise ParameterError(f"parts must be integers, got dtype {parts.dtype}")
    if parts.size and parts.min() < 0:
        raise ParameterError(f"parts must be non-negative, found {int(parts.min())}")
    return parts.astype(np.int64, copy=False)


def _quote(text, delim):
    """RFC 4180 quoting of the ids that need it (vectorised)."""
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


def _show(x):
    x = x.as_py() if isinstance(x, pa.Scalar) else x
    return repr(x) if isinstance(x, str) else str(int(x))
