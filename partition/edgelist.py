"""Read edge lists and node-weight files into a :class:`~partition.graph.Graph`.

Formats
-------
``text`` (default for any name but ``.csv``, ``.tsv``, ``.parquet``, ``.pq``)
    One edge per line, ``u v`` (``u v w`` with ``weighted=True``), fields
    separated by blanks, tabs, commas or semicolons; lines whose first
    non-blank character is ``#`` or ``%`` are comments; blank lines are skipped.
``csv`` / ``tsv`` (``.csv``, ``.tsv``)
    A header row names the columns; ``source_column``/``target_column`` pick the
    endpoints (default: the first two columns) and ``weight_column`` the weight
    (default with ``weighted=True``: the third column). ``header=False`` reads a
    headerless file whose columns are then 1, 2, 3, ... The delimiter, when not
    given, is the first of comma, tab, semicolon and blank (tab first for
    ``.tsv``) that splits the first lines into the same number (≥ 2) of fields.
``parquet`` (``.parquet``, ``.pq``)
    Columns chosen as for CSV.

Any of these may be compressed with gzip or bzip2 (recognised by content, not
by name).

Ids follow the one rule of :mod:`partition.ids`: integers only when every id
of the file is the canonical decimal form of an int64, otherwise strings kept
byte for byte; never floats. Text must be UTF-8; a line that is not is an
error naming it.

The header rule: a CSV/TSV file has a header unless ``header=False``; when
``header`` is not given and its first row is all numbers, that row looks like
data and the reader stops (pass ``header=True`` or ``False``). A text file has
no header unless ``header=True``; when ``header`` is not given and the first
line holds non-numeric fields where every later line is numeric (``src dst``
above integer ids), the reader stops and asks for ``header=True`` (skip it) or
``header=False`` (read it as an edge).

Edge weights must be finite and >= 0. A node-weights file holds ``id weight``
rows (same text rules, or CSV/Parquet) with non-negative integer weights; it
must list every node of the edge list, and ids it lists that have no edge are
isolated nodes only with ``allow_isolated=True`` (otherwise they are reported
as unknown nodes).

Text files are parsed by pyarrow's CSV reader into string columns (the fast
path); when that fails the file is read again line by line to name the first
bad line, so every error names the file and the line (``row N`` for Parquet).
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

from partition.errors import InputError, ParameterError
from partition.graph import build_graph
from partition.ids import canonical_ints, id_column, id_columns

__all__ = ["read_graph", "read_edges", "read_node_weights", "detect_format", "decode_delimiter", "sniff_delimiter",
           "pick_columns", "SNIFFED"]

_COMMENT_LINE = re.compile(rb"(?m)^[ \t]*[#%][^\n]*(?:\n|$)")
_SPLIT = re.compile(r"[\s,;]+")


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
        Whether the first data line is a header; ``None``: the header rule of
        the module docstring.
    delimiter : str or None
        Force the field delimiter (default: detected); escapes such as ``\\t``
        and the names ``tab``, ``comma``, ``semicolon``, ``space`` are accepted.
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
    """Read raw edge columns ``(src, dst, weights_or_None)`` without normalising.

    Ids follow :mod:`partition.ids`; ``header`` is ``None`` (the rule of the
    module docstring), ``True`` (the first data line names the columns) or
    ``False`` (it is data).
    """
    kind = detect_format(path, fmt)
    wanted = [source_column, target_column, weight_column]
    cols, names, row_to_line = _columns(path, kind, wanted, weighted, header, delimiter, 3 if weighted else 2,
                                       ("source", "target", "weight"))
    src, dst = id_columns(cols[:2], path, names[:2])
    if kind == "text" and header is None and src.dtype == object:
        _header_check(path, cols[:2], row_to_line)
    w = None
    if weighted:
        w = _float_weights(cols[2], path, row_to_line, what="edge weight", header_rule=kind == "text" and header is None)
    return src, dst, w


def read_node_weights(path, fmt="auto", header=None, delimiter=None):
    """Read a node-weights file: returns ``(ids, weights, row_to_line)``.

    Weights are non-negative integers; an id listed twice is an error. Ids and
    the header follow the rules of :func:`read_edges`.
    """
    kind = detect_format(path, fmt)
    cols, names, row_to_line = _columns(path, kind, [None, None, None], False, header, delimiter, 2, ("node", "weight"))
    if len(cols[0]) == 0:
        raise InputError(path, "the node-weights file lists no nodes")
    ids = id_column(cols[0], path, names[0])
    if kind == "text" and header is None and ids.dtype == object:
        _header_check(path, cols[:1], row_to_line)
    weights = _int_weights(cols[1], path, row_to_line, header_rule=kind == "text" and header is None)
    order = np.argsort(ids, kind="stable")
    sorted_ids = ids[order]
    dup = np.flatnonzero(sorted_ids[1:] == sorted_ids[:-1])
    if dup.size:
        row = int(order[dup[0] + 1])
        raise InputError(path, f"node {ids[row]!s} is listed twice", row_to_line(row))
    return ids, weights, row_to_line


def decode_delimiter(text):
    """The one-character delimiter a user typed: ``\\t``, ``tab``, ``comma``, ``semicolon``, ``space``, ``\\xHH``.

    Raises
    ------
    ParameterError
        Anything that is not one character once decoded.
    """
    if text is None:
        return None
    named = {"tab": "\t", "comma": ",", "semicolon": ";", "space": " ", "pipe": "|"}
    value = named.get(text.lower(), text)
    if len(value) > 1 and value.startswith("\\"):
        try:
            value = value.encode("ascii").decode("unicode_escape")
        except (UnicodeDecodeError, UnicodeEncodeError):
            pass
    if len(value) != 1 or value in "\n\r\"":
        raise ParameterError(f"--delimiter must be one character (or \\t, tab, comma, semicolon, space), got {text!r}")
    return value


SNIFFED = (",", "\t", ";", " ")
"""Delimiters tried, in order, when a CSV/TSV file's delimiter is not given (TSV tries tab first)."""


def sniff_delimiter(lines, kind):
    """The delimiter of a CSV/TSV file from its first data lines (decoded text).

    The first of :data:`SNIFFED` (tab first for ``tsv``) that splits every
    given line into the same number (at least two) of fields; the format's own
    delimiter when none does, so the error that follows names it.
    """
    import csv

    default = "\t" if kind == "tsv" else ","
    order = [default] + [d for d in SNIFFED if d != default]
    for delim in order:
        widths = {len(next(csv.reader([line], delimiter=delim), [])) for line in lines}
        if len(widths) == 1 and widths.pop() >= 2:
            return delim
    return default


def _columns(path, kind, wanted, weighted, header, delimiter, ncols, labels):
    """The chosen columns of any format as pyarrow columns (text: strings), their names and a row → line map."""
    delimiter = decode_delimiter(delimiter)
    if kind == "parquet":
        return _read_parquet(path, wanted, weighted, ncols)
    if kind in ("csv", "tsv"):
        return _read_headed(path, wanted, weighted, delimiter, kind, header, ncols)
    cols, row_to_line = _read_text(path, ncols, delimiter, header)
    return cols, list(labels), row_to_line


def _header_check(path, id_cols, row_to_line):
    """Refuse a first line of text ids above lines of integer ids: it looks like a header (issue of the rule)."""
    if len(id_cols[0]) < 2:
        return
    if all(canonical_ints(c.slice(1)) is not None for c in id_cols) and any(
            canonical_ints(c.slice(0, 1)) is None for c in id_cols):
        _refuse_header(path, [c[0].as_py() for c in id_cols], row_to_line(0))


def _refuse_header(path, fields, line):
    shown = " ".join(map(str, fields))
    raise InputError(path, f"the first line {shown!r} looks like a header (every later line is numeric): pass "
                           "--header to skip it, or --no-header to read it as data", line)


# ----------------------------------------------------------------------------
# text
# ----------------------------------------------------------------------------
def read_bytes(path):
    """The bytes of a text input: gzip or bzip2 decompressed by content, line ends made ``\\n``.

    Raises
    ------
    InputError
        The file is missing, a folder, unreadable or a broken compressed file.
    """
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
    if b"\r" in raw:
        raw = raw.replace(b"\r\n", b"\n").replace(b"\r", b"\n")
    return raw


def _read_text(path, ncols, delimiter, header):
    """Parse a text table into ``ncols`` string columns; returns (columns, row_to_line)."""
    raw = read_bytes(path)
    data = _COMMENT_LINE.sub(b"", raw) if (b"#" in raw or b"%" in raw) else raw
    row_to_line = _RowLines(raw)
    if not data.strip():
        return [pa.array([], pa.string()) for _ in range(ncols)], row_to_line
    delim = delimiter or _detect_delimiter(data)
    try:
        cols = _fast_text(data, ncols, delim)
    except (pa.ArrowInvalid, pa.ArrowTypeError, _FallBack):
        cols = _slow_text(raw, ncols, path, delimiter)
    if header:
        cols = [c.slice(1) for c in cols]
        row_to_line = _HeadedRowLines(raw, 1)
    return cols, row_to_line


class _FallBack(Exception):
    pass


def _detect_delimiter(data):
    first = data[: data.find(b"\n")] if b"\n" in data else data
    for delim in (b"\t", b",", b";"):
        if delim in first:
            return delim.decode()
    return " "


def _fast_text(data, ncols, delim):
    names = [f"c{i}" for i in range(ncols)]
    table = pacsv.read_csv(
        io.BytesIO(data),
        read_options=pacsv.ReadOptions(column_names=names, block_size=1 << 24, use_threads=True),
        parse_options=pacsv.ParseOptions(delimiter=delim, ignore_empty_lines=True, quote_char=False),
        convert_options=pacsv.ConvertOptions(column_types={name: pa.string() for name in names},
                                             strings_can_be_null=False, quoted_strings_can_be_null=False),
    )
    cols = [table.column(i).combine_chunks() for i in range(ncols)]
    for col in cols:
        if col.null_count or pc.any(pc.equal(col, "")).as_py():
            raise _FallBack()
    return cols


def _slow_text(raw, ncols, path, delimiter=None):
    """Line-by-line parser: correct for any run of separators; names the first bad line."""
    out = [[] for _ in range(ncols)]
    split = _SPLIT if delimiter is None else re.compile(rf"\s*{re.escape(delimiter)}\s*" if delimiter.strip() else r"\s+")
    for lineno, chunk in enumerate(raw.split(b"\n"), start=1):
        s = chunk.strip()
        if not s or s[:1] in (b"#", b"%"):
            continue
        try:
            s = s.decode("utf-8")
        except UnicodeDecodeError as exc:
            raise InputError(path, f"is not valid UTF-8 text (byte 0x{s[exc.start]:02x} at column "
                                   f"{exc.start + 1}); ids must be UTF-8 text", lineno) from None
        fields = [f for f in split.split(s) if f]
        if len(fields) != ncols:
            hint = ""
            if ncols == 2 and len(fields) == 3:
                hint = "; pass --weighted to read the third field as an edge weight"
            raise InputError(path, f"expected {ncols} fields, found {len(fields)}: {s[:80]!r}{hint}", lineno)
        for i, field in enumerate(fields):
            out[i].append(field)
    return [pa.array(values, pa.string()) for values in out]


class _RowLines:
    """Maps a data-row index to its 1-based line number in the raw text.

    With ``leading_comments`` (CSV/TSV) only the comment lines above the
    first data line are comments; below it a line starting with ``#`` or
    ``%`` is a row (an id may start with either).
    """

    def __init__(self, raw, leading_comments=False):
        self.raw = raw
        self.leading = leading_comments

    def __call__(self, row):
        count = -1
        for lineno, line in enumerate(self.raw.split(b"\n"), start=1):
            s = line.strip()
            if not s or (s[:1] in (b"#", b"%") and not (self.leading and count >= 0)):
                continue
            count += 1
            if count == row:
                return lineno
        return None


class _HeadedRowLines(_RowLines):
    def __init__(self, raw, skip):
        super().__init__(raw, leading_comments=True)
        self.skip = skip

    def __call__(self, row):
        return super().__call__(row + self.skip)


# ----------------------------------------------------------------------------
# csv/tsv with header, parquet
# ----------------------------------------------------------------------------
def pick_columns(path, available, wanted, weighted, ncols, delimiter=None):
    """The names of the chosen columns: by name when given, else by position (source, target, weight)."""
    chosen = []
    for i, name in enumerate(wanted[:ncols]):
        if i == 2 and not weighted:
            break
        if name is None:
            if i >= len(available):
                hint = ""
                if delimiter is not None:
                    hint = (f" with the delimiter {delimiter!r}; pass --delimiter to name another "
                            "(for example --delimiter ';' or --delimiter '\\t')")
                raise InputError(path, f"expected at least {i + 1} columns, found {len(available)}{hint}")
            chosen.append(available[i])
        elif name not in available:
            raise InputError(path, f"no column named {name!r}; the columns are {', '.join(map(str, available))}")
        else:
            chosen.append(name)
    return chosen


def _first_lines(data, count=5):
    """The first ``count`` data lines of ``data`` (comments already removed), decoded."""
    out = []
    for chunk in data.split(b"\n", 64)[:64]:
        if chunk.strip():
            out.append(chunk.decode("utf-8", "replace"))
            if len(out) == count:
                break
    return out


def _read_headed(path, wanted, weighted, delim, kind, header, ncols=3):
    raw = read_bytes(path)
    data = raw[_leading_comments_end(raw):]  # comments only above the header: below it, '#x' may be an id
    if not data.strip():
        raise InputError(path, "the file is empty")
    delim = delim or sniff_delimiter(_first_lines(data), kind)
    first = data[: data.find(b"\n")] if b"\n" in data else data
    first_line = _first_data_line(raw)
    try:
        first_text = first.decode("utf-8")
    except UnicodeDecodeError:
        raise InputError(path, "is not valid UTF-8 text", first_line) from None
    import csv

    head = next(csv.reader([first_text], delimiter=delim), [])
    width = len(head)
    if header is None and width and all(is_number(f) for f in head):
        raise InputError(path, f"the first row {first_text.strip()[:80]!r} looks like data, not a header: pass "
                               "--no-header to read it as data (or --header if it names the columns)", first_line)
    if header is not False:
        names = [s.strip() for s in head]
        body = data[len(first) + 1 :]
    else:
        names = [str(i + 1) for i in range(width)]
        body = data
    chosen = pick_columns(path, names, wanted, weighted, ncols, delim)
    raw_body_start = 0 if header is False else 1
    row_to_line = _HeadedRowLines(raw, raw_body_start)
    try:
        table = pacsv.read_csv(
            io.BytesIO(body),
            read_options=pacsv.ReadOptions(column_names=names, block_size=1 << 24),
            parse_options=pacsv.ParseOptions(delimiter=delim, ignore_empty_lines=True),
            convert_options=pacsv.ConvertOptions(include_columns=chosen, column_types={c: pa.string() for c in chosen},
                                                 strings_can_be_null=False),
        )
    except (pa.ArrowInvalid, pa.ArrowTypeError) as exc:
        line, why = _first_bad_csv_line(raw, delim, len(names), raw_body_start)
        raise InputError(path, why or f"malformed row: expected {len(names)} fields ({exc.__class__.__name__})",
                         line) from None
    cols = [table.column(c).combine_chunks() for c in chosen]
    for c, col in zip(chosen, cols):
        empty = pc.equal(pc.utf8_length(col), 0) if len(col) else None
        if empty is not None and pc.any(empty).as_py():
            row = int(np.flatnonzero(empty.to_numpy(zero_copy_only=False))[0])
            raise InputError(path, f"empty value in column {c!r}", row_to_line(row))
    return cols, chosen, row_to_line


def is_number(text):
    """Whether ``text`` reads as a number (the header rule's test of a first line)."""
    try:
        float(text)
    except ValueError:
        return False
    return True


def _first_data_line(raw):
    for lineno, line in enumerate(raw.split(b"\n"), start=1):
        s = line.strip()
        if s and s[:1] not in (b"#", b"%"):
            return lineno
    return None


def _leading_comments_end(raw):
    """Byte offset of the first line of ``raw`` that is neither blank nor a ``#``/``%`` comment."""
    pos = 0
    while pos < len(raw):
        end = raw.find(b"\n", pos)
        end = len(raw) if end < 0 else end + 1
        s = raw[pos:end].strip()
        if s and s[:1] not in (b"#", b"%"):
            return pos
        pos = end
    return pos


def _first_bad_csv_line(raw, delim, width, skip):
    """``(line, message)`` of the first data line the CSV parser rejects (bad UTF-8 or a wrong field count)."""
    import csv

    seen = -1
    for lineno, line in enumerate(raw.split(b"\n"), start=1):
        s = line.strip()
        if not s or (s[:1] in (b"#", b"%") and seen < 0):
            continue
        seen += 1
        if seen < skip:
            continue
        try:
            text = line.decode("utf-8")
        except UnicodeDecodeError as exc:
            return lineno, (f"is not valid UTF-8 text (byte 0x{line[exc.start]:02x} at column {exc.start + 1}); "
                            "ids must be UTF-8 text")
        if '"' not in text and len(text.split(delim)) != width:
            return lineno, f"malformed row: expected {width} fields, found {len(text.split(delim))}"
        if '"' in text and len(next(csv.reader([text], delimiter=delim), [])) != width:
            return lineno, f"malformed row: expected {width} fields"
    return None, None


def _read_parquet(path, wanted, weighted, ncols=3):
    import pyarrow.parquet as pq

    try:
        pf = pq.ParquetFile(path)
    except FileNotFoundError:
        raise InputError(path, "no such file") from None
    except (pa.ArrowInvalid, OSError) as exc:
        raise InputError(path, f"is not a readable Parquet file: {exc}") from None
    names = pf.schema_arrow.names
    chosen = pick_columns(path, names, wanted, weighted, ncols)
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
def _bad_first_row(path, col, row_to_line, header_rule, cast):
    """With the header rule on, a column whose only bad value is row 0 means the first line is a header."""
    if header_rule and len(col) > 1:
        try:
            cast(col.slice(1))
        except (pa.ArrowInvalid, pa.ArrowNotImplementedError, ValueError):
            return
        _refuse_header(path, [col[0].as_py()], row_to_line(0))


def _float_weights(col, path, row_to_line, what, header_rule=False):
    if not (pa.types.is_floating(col.type) or pa.types.is_integer(col.type)):
        try:
            col = col.cast(pa.float64())
        except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
            _bad_first_row(path, col, row_to_line, header_rule, lambda c: c.cast(pa.float64()))
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


def _whole(col):
    """A text column of whole numbers (``3``, ``3.0``) as int64; ValueError otherwise."""
    f = col.cast(pa.float64()).to_numpy(zero_copy_only=False)
    if not np.all(np.isfinite(f) & (f == np.floor(f))):
        raise ValueError("not whole")
    return f.astype(np.int64)


def _int_weights(col, path, row_to_line, header_rule=False):
    if not pa.types.is_integer(col.type):
        try:
            col = pa.array(_whole(col))
        except (pa.ArrowInvalid, pa.ArrowNotImplementedError, ValueError):
            _bad_first_row(path, col, row_to_line, header_rule, _whole)
            values = col.to_numpy(zero_copy_only=False)
            for row, v in enumerate(values):
                try:
                    if float(v) != int(float(v)):
                        raise ValueError
                except (TypeError, ValueError, OverflowError):
                    raise InputError(path, f"node weight {v!r} is not a whole number", row_to_line(row)) from None
            raise
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
