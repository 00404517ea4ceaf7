"""Read node→shard tables: the one reader behind ``score``, ``diff``, ``export``, ``place`` and ``--previous``.

Where the table may be
    A text file (CSV, TSV or blank-separated; gzip recognised by its first
    bytes, RFC 1952), a Parquet file or dataset folder (the Spark engine
    writes folders), a JSON Lines file (``{"node": ..., "shard": ...}``), or a
    placement folder made by ``shardline export`` (its ``manifest.json`` names
    the ``assignment.*`` table, which is read).

Which columns
    A first data line is a header when one of its fields is a known column
    name (below) or its shard field is not an integer; otherwise the file has
    no header and its first two columns are node and shard. With a header the
    columns are found by name: ``--node-column``/``--shard-column`` when given,
    else the first of :data:`NODE_NAMES` and of :data:`SHARD_NAMES` present
    (case-insensitive), else — for a two-column table — by position. Typed
    tables (Parquet, JSON Lines) use the same names.

Ids and shards
    Node ids follow :mod:`partition.ids` (integers only when every id is a
    canonical int64, else strings kept exactly as written after RFC 4180
    unquoting); shards are integers in ``[0, 2^31)`` (blanks around them
    allowed). A node listed twice, an empty id, a malformed row or bytes that
    are not UTF-8 are errors naming the file and the line (Parquet: the row).

Blank lines are skipped, and so are lines whose first non-blank character is
``#`` or ``%`` — in CSV/TSV tables only above the first row (below it such a
line is a row, since an id may start with either), as in the edge-list reader. Text cannot hold ids with line breaks;
such tables round-trip through Parquet only. Text is parsed column-wise by
``pyarrow.csv``; the line of each row is known from a vectorised scan of the
line breaks.
"""

from __future__ import annotations

import csv
import gzip
import json
import os
import zlib
from dataclasses import dataclass

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.csv as pacsv
import pyarrow.parquet as pq

from partition.errors import InputError
from partition.ids import id_column

__all__ = ["NodeShards", "read_node_shards", "open_node_shards", "NODE_NAMES", "SHARD_NAMES"]

NODE_NAMES = ("node", "id", "key", "vertex", "item", "node_id")
"""Header names taken for the node column, in order of preference."""
SHARD_NAMES = ("shard", "part", "partition", "block", "shard_id", "cluster")
"""Header names taken for the shard column, in order of preference."""

_NL, _HASH, _PERCENT, _SPACE, _TAB, _CR = 10, 35, 37, 32, 9, 13


@dataclass
class NodeShards:
    """A node→shard table as read.

    Attributes
    ----------
    name : str
        The file (or folder) read, for messages.
    ids : ndarray
        Node ids in file order: int64, or object array of ``str``.
    text : pyarrow.Array
        The node ids exactly as written (strings), for matching against a graph.
    shards : ndarray of int64
    columns : tuple of str
        The names of the node and shard columns read (``("1", "2")`` without a header).
    where : callable
        Maps a 0-based row to ``(line or None, message prefix)``.
    """

    name: str
    ids: np.ndarray
    text: pa.Array
    shards: np.ndarray
    columns: tuple
    where: object

    def fail(self, row, message):
        """An :class:`InputError` naming the file and the line (or row) of ``row``."""
        line, prefix = self.where(int(row))
        return InputError(self.name, prefix + message, line)


def read_node_shards(path, node_column=None, shard_column=None, repeats=True, shard_names=SHARD_NAMES):
    """Read a node→shard table without a graph.

    Parameters
    ----------
    path : str or os.PathLike
        See the module docstring for what may be read.
    node_column, shard_column : str or None
        Column names to use instead of the usual ones.
    repeats : bool
        Refuse a node listed twice (default); ``False`` leaves that check to the caller.
    shard_names : tuple of str
        Header names of the second column (``("position",)`` for linear orders).

    Returns
    -------
    NodeShards

    Raises
    ------
    InputError
        Missing or unreadable input, no node/shard columns, a malformed row,
        an empty id, a shard that is not an integer in ``[0, 2^31)``, a node
        listed twice; the message names the file and the line (or row).
    """
    name, table, raw = open_node_shards(path)
    if table is not None:
        nodes, shards, cols, where = _table_columns(name, table, node_column, shard_column, shard_names)
    else:
        nodes, shards, cols, where = _text_columns(name, raw, node_column, shard_column, shard_names)
    if len(nodes) == 0:
        raise InputError(name, "holds no node,shard rows")
    text = pc.cast(nodes, pa.string())
    text = text.combine_chunks() if isinstance(text, pa.ChunkedArray) else text
    out = NodeShards(name, None, text, None, cols, where)
    empty = np.flatnonzero(pc.utf8_length(text).to_numpy(zero_copy_only=False) == 0)
    if empty.size and raw is not None and b'""' not in raw:  # the empty id "" must be quoted in text
        raise out.fail(empty[0], "the node id is empty (write an empty id as \"\")")
    out.ids = id_column(nodes, name, cols[0])
    out.shards = _shard_ints(shards, out)
    if repeats:
        _refuse_repeats(out)
    return out


def open_node_shards(path):
    """The contents of a node,shard input before its columns are read: ``(name, table, raw)``.

    A Parquet file or folder, a JSON Lines file or a placement folder gives a
    ``pyarrow.Table`` and ``raw = None``; a text file gives ``table = None``
    and its bytes, decompressed when they start with the gzip signature. A
    file named ``.parquet``/``.pq`` without the Parquet signature ``PAR1`` is
    an error rather than text.
    """
    name = os.fspath(path)
    if os.path.isdir(name):
        manifest = os.path.join(name, "manifest.json")
        if os.path.isfile(manifest):
            return _placement_table(name, manifest)
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
    lower = name.lower().removesuffix(".gz")
    if lower.endswith((".parquet", ".pq")):
        raise InputError(name, "is not a Parquet file (it lacks the PAR1 signature)")
    if lower.endswith((".jsonl", ".ndjson")):
        return name, _jsonl_table(name, raw), None
    return name, None, raw


def _placement_table(folder, manifest):
    """The node→shard table of a placement folder, as its manifest names it."""
    try:
        with open(manifest, encoding="utf-8") as fh:
            files = [f["path"] for f in json.load(fh).get("files", [])]
    except (OSError, ValueError, TypeError, KeyError) as exc:
        raise InputError(manifest, f"is not a readable placement manifest ({exc})") from None
    tables = sorted({f.split("/")[0] for f in files if f.split("/")[0].startswith("assignment.")})
    if len(tables) != 1:
        raise InputError(manifest, "names no assignment table (is this a placement folder?)")
    _, table, raw = open_node_shards(os.path.join(folder, tables[0]))
    if table is None:  # a CSV placement: parse it here, as text
        return os.path.join(folder, tables[0]), None, raw
    return os.path.join(folder, tables[0]), table, None


def _jsonl_table(name, raw):
    import pyarrow.json as pajson

    try:
        return pajson.read_json(pa.BufferReader(raw))
    except pa.ArrowInvalid as exc:
        raise InputError(name, f"is not valid JSON Lines ({exc})") from None


# --- choosing the columns ------------------------------------------------------


def _choose(name, names, node_column, shard_column, shard_names, line=None):
    """Indices of the node and shard columns among ``names`` (a header or a typed table's columns)."""
    lower = [str(n).strip().lower() for n in names]

    def find(given, usual, what):
        if given is not None:
            if given in names:
                return names.index(given)
            if given.lower() in lower:
                return lower.index(given.lower())
            raise InputError(name, f"no column named {given!r} for the {what}; the columns are "
                                   f"{', '.join(map(str, names))}", line)
        for u in usual:
            if u in lower:
                return lower.index(u)
        return None

    node = find(node_column, NODE_NAMES, "node")
    shard = find(shard_column, shard_names, shard_names[0])
    if node is None and shard is None and len(names) == 2:
        return 0, 1
    if node is None or shard is None or node == shard:
        raise InputError(name, f"cannot tell the node and {shard_names[0]} columns among {', '.join(map(str, names))}: "
                               f"pass --node-column and --{shard_names[0]}-column", line)
    return node, shard


def _table_columns(name, table, node_column, shard_column, shard_names):
    names = table.column_names
    if len(names) < 2:
        raise InputError(name, f"has {len(names)} column(s); expected node and shard columns")
    i, j = _choose(name, names, node_column, shard_column, shard_names)
    nodes, shards = table.column(i), table.column(j)
    for label, col in (("node", nodes), ("shard", shards)):
        t = col.type
        if not (pa.types.is_integer(t) or pa.types.is_string(t) or pa.types.is_large_string(t)):
            raise InputError(name, f"the {label} column has type {t}; expected integers or strings")
        if col.null_count:
            row = int(np.flatnonzero(col.is_null().to_numpy(zero_copy_only=False))[0])
            raise InputError(name, f"row {row + 1}: the {label} is missing (null)")
    nodes = nodes.combine_chunks() if isinstance(nodes, pa.ChunkedArray) else nodes
    return nodes, shards, (names[i], names[j]), lambda row: (None, f"row {row + 1}: ")


def _text_columns(name, raw, node_column, shard_column, shard_names):
    """Parse a text table: node and shard string columns, their names and a row → line map."""
    buf = np.frombuffer(raw, dtype=np.uint8)
    starts, ends, data = _scan_lines(buf)
    data_lines = np.flatnonzero(data)
    if data_lines.size == 0:
        raise InputError(name, "holds no node-to-shard rows")
    first_no = int(data_lines[0])
    try:
        first = raw[starts[first_no] : ends[first_no]].decode("utf-8").rstrip("\r")
    except UnicodeDecodeError:
        raise InputError(name, "is not valid UTF-8 text", first_no + 1) from None
    mode = _mode(name, raw, starts, ends, data_lines)
    if mode != "space":  # CSV-like: comments only above the first row; '#x' below it is an id
        below = np.arange(data.size) > first_no
        data |= below & (ends > starts) & _nonblank(buf, starts, ends)
        data_lines = np.flatnonzero(data)
    fields = _split(first, mode)
    lower = [f.strip().lower() for f in fields]
    named = node_column is not None or shard_column is not None
    is_header = named or any(f in NODE_NAMES + tuple(shard_names) for f in lower) or (
        len(fields) >= 2 and not fields[1].strip().lstrip("+-").isdigit())
    if is_header:
        names = [f.strip() for f in fields]
        i, j = _choose(name, names, node_column, shard_column, shard_names, first_no + 1)
        data[first_no] = False
        data_lines = data_lines[1:]
        if data_lines.size == 0:
            raise InputError(name, "holds a header but no node,shard rows")
    else:
        names = [str(c + 1) for c in range(len(fields))]
        i, j = 0, 1
        if len(fields) < 2:
            raise InputError(name, f"expected at least 2 fields (node, shard), found {len(fields)}: {first[:80]!r}",
                             first_no + 1)
    width = len(fields)
    line_no = data_lines + 1
    body = _keep_lines(buf, starts, ends, data, mode == "space")
    cols = [f"c{c}" for c in range(width)]
    convert = pacsv.ConvertOptions(column_types={cols[i]: pa.string(), cols[j]: pa.string()},
                                   include_columns=[cols[i], cols[j]],
                                   strings_can_be_null=False, quoted_strings_can_be_null=False)
    delim = {"csv": ",", "semicolon": ";"}.get(mode, "\t")
    try:
        table = pacsv.read_csv(pa.py_buffer(body), read_options=pacsv.ReadOptions(column_names=cols),
                               parse_options=pacsv.ParseOptions(delimiter=delim, newlines_in_values=mode != "space",
                                                                quote_char='"' if mode != "space" else False),
                               convert_options=convert)
    except pa.ArrowInvalid as exc:
        raise _locate_parse_error(name, raw, starts, ends, data_lines, mode, width, exc) from None
    if table.num_rows != data_lines.size:  # quoted line breaks: find where each record starts
        line_no = _record_lines(name, body, delim, data_lines, table.num_rows)
    return (table.column(cols[i]).combine_chunks(), table.column(cols[j]), (names[i], names[j]),
            lambda r: (int(line_no[r]), ""))


def _record_lines(name, body, delim, data_lines, rows):
    """1-based line of each record's first line when quoted fields hold line breaks (csv module, RFC 4180)."""
    reader = csv.reader(body.decode("utf-8", "replace").split("\n"), delimiter=delim)
    firsts, prev = [], 0
    for record in reader:
        if record:
            firsts.append(prev)
        prev = reader.line_num
    if len(firsts) != rows:
        raise InputError(name, "line breaks are ambiguous (bare carriage returns or quoted line breaks?)")
    return data_lines[np.asarray(firsts, dtype=np.int64)] + 1


def _mode(name, raw, starts, ends, data_lines):
    """How fields are separated: ``csv`` (comma), ``semicolon``, ``tab`` or ``space`` (runs of blanks).

    The first separator that every one of the first five data lines holds,
    trying the one the file name suggests (``.csv``: comma, ``.tsv``/``.tab``:
    tab) first; failing all, the name's separator, else runs of blanks.
    """
    lower = name.lower().removesuffix(".gz")
    order = [("csv", b","), ("tab", b"\t"), ("semicolon", b";")]
    fallback = "space"
    if lower.endswith((".tsv", ".tab")):
        order.insert(0, order.pop(1))
        fallback = "tab"
    elif lower.endswith(".csv"):
        fallback = "csv"
    sample = [raw[starts[i] : ends[i]] for i in data_lines[:5]]
    for mode, byte in order:
        if all(byte in line for line in sample):
            return mode
    return fallback


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


def _nonblank(buf, starts, ends):
    """Whether each line holds a byte other than blanks, tabs and carriage returns."""
    blank = (buf == _SPACE) | (buf == _TAB) | (buf == _CR) | (buf == _NL)
    count = np.concatenate(([0], np.cumsum(~blank, dtype=np.int64)))
    return count[ends] - count[starts] > 0


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
    if mode in ("csv", "semicolon"):
        try:
            return next(csv.reader([line], delimiter="," if mode == "csv" else ";"), [])
        except csv.Error:
            return [line]
    if mode == "tab":
        return line.split("\t")
    return line.split()


def _locate_parse_error(name, raw, starts, ends, data_lines, mode, width, exc):
    """Slow pass: find the first data line the parser would reject."""
    for i in data_lines:
        try:
            text = raw[starts[i] : ends[i]].decode("utf-8")
        except UnicodeDecodeError as err:
            return InputError(name, f"is not valid UTF-8 text (byte {err.start + 1} of the line)", int(i) + 1)
        fields = _split(text, mode)
        if len(fields) != width:
            found = f"found {len(fields)}: {text.strip()[:80]!r}"
            return InputError(name, f"expected {width} fields like the first row, {found}", int(i) + 1)
    return InputError(name, f"cannot be parsed ({exc})")


# --- values ------------------------------------------------------------------


def _shard_ints(col, table):
    """Shard column as int64 in ``[0, 2**31)``; the first bad row raises."""
    if pa.types.is_integer(col.type):
        vals = col.to_numpy() if not isinstance(col, pa.ChunkedArray) else col.combine_chunks().to_numpy()
    else:
        col = pc.utf8_trim_whitespace(col)
        ok = pc.match_substring_regex(col, r"^\+?[0-9]{1,12}$").to_numpy(zero_copy_only=False)
        if not ok.all():
            row = int(np.flatnonzero(~ok)[0])
            value = col[row].as_py()
            if pc.match_substring_regex(pa.array([value]), r"^[+-]?[0-9]+$")[0].as_py():
                why = "is negative: out of range" if value.startswith("-") else "is out of range"
                raise table.fail(row, f"shard {value} {why}; shard ids run from 0 to 2**31 - 1")
            raise table.fail(row, f"shard {value!r} is not an integer")
        vals = pc.cast(pc.replace_substring_regex(col, r"^\+", ""), pa.int64()).to_numpy()
    bad = np.flatnonzero((vals < 0) | (vals >= 2**31))
    if bad.size:
        row = int(bad[0])
        why = "is negative: out of range" if vals[row] < 0 else "is out of range"
        raise table.fail(row, f"shard {vals[row]} {why}; shard ids run from 0 to 2**31 - 1")
    return vals.astype(np.int64, copy=False)


def _refuse_repeats(table):
    """A node listed twice: the line of its second row, naming the first."""
    codes = table.text.dictionary_encode().indices.to_numpy()
    order = np.argsort(codes, kind="stable")
    sorted_codes = codes[order]
    again = np.flatnonzero(sorted_codes[1:] == sorted_codes[:-1])
    if not again.size:
        return
    second = order[again + 1]
    row = int(second.min())  # the earliest repeat in file order
    first = int(np.flatnonzero(codes == codes[row])[0])
    line = table.where(first)[0]
    earlier = f"line {line}" if line is not None else f"row {first + 1}"
    shown = table.ids[row]
    shown = repr(shown) if isinstance(shown, str) else str(int(shown))
    raise table.fail(row, f"node {shown} is listed twice (first on {earlier})")
