"""Read request logs (which keys each request touched) into a :class:`~partition.workload.log.RequestLog`.

Formats
-------
``basket`` (any name but the ones below)
    One request per line, its keys separated by blanks (spaces or tabs); line
    order is time order; blank lines are skipped. This is the market-basket
    layout of the FIMI repository files (Goethals & Zaki, "FIMI'03: Workshop on
    Frequent Itemset Mining Implementations", 2003).
``long`` (``.csv``, ``.tsv``)
    A header row, then one ``request, key[, time]`` row per access; columns are
    picked by ``request_column``/``key_column``/``time_column`` (default: the
    first two columns, and a column named ``time`` when present).
``parquet`` (``.parquet``, ``.pq``)
    Long rows as above, or one row per request with a list column of keys.
``jsonl`` (``.jsonl``, ``.json``, ``.ndjson``)
    One JSON value per line: a list of keys, or an object with a list of keys
    (``keys``, or ``key_column``) and optionally ``request`` and ``time``.

Any of them may be gzip- or bzip2-compressed (recognised by content). Requests
are put in time order (a time column, numeric or ISO-8601, sorted stably;
otherwise the order of the file). A key repeated within one request counts
once. Keys follow :mod:`partition.workload.keys` (integers only when every key
is a canonical int64, otherwise strings byte for byte, never floats). Bad input
raises :class:`~partition.errors.InputError` naming the file and line.
"""

from __future__ import annotations

import io
import json
import os

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc

from partition.edgelist import read_bytes
from partition.errors import InputError, ParameterError
from partition.workload.keys import keys_from_column, keys_from_strings
from partition.workload.log import assemble_log

__all__ = ["read_log", "detect_log_format"]


def detect_log_format(path, fmt="auto"):
    """The log format for ``path``: ``basket``, ``long``, ``parquet`` or ``jsonl``."""
    kinds = ("basket", "long", "parquet", "jsonl")
    if fmt != "auto":
        if fmt not in kinds:
            raise ParameterError(f"unknown log format {fmt!r}; expected one of {', '.join(kinds)}")
        return fmt
    name = os.fspath(path).lower()
    for suffix in (".gz", ".bz2"):
        name = name[: -len(suffix)] if name.endswith(suffix) else name
    if name.endswith((".parquet", ".pq")):
        return "parquet"
    if name.endswith((".csv", ".tsv")):
        return "long"
    if name.endswith((".jsonl", ".json", ".ndjson")):
        return "jsonl"
    return "basket"


def read_log(path, fmt="auto", request_column=None, key_column=None, time_column=None, delimiter=None):
    """Read a request log.

    Parameters
    ----------
    path : str or path-like
    fmt : {"auto", "basket", "long", "parquet", "jsonl"}
    request_column, key_column, time_column : str or None
        Column names (long and list formats); ``key_column`` names the list
        column in list formats.
    delimiter : str or None
        Long format: the field delimiter (default: tab for ``.tsv``, else comma).

    Returns
    -------
    RequestLog

    Raises
    ------
    InputError
        Unreadable file, malformed line, empty key, float or null key, bad time,
        no requests; the message names the file and line.
    """
    kind = detect_log_format(path, fmt)
    if kind == "basket":
        return _read_basket(path)
    if kind == "jsonl":
        return _read_jsonl(path, key_column)
    if kind == "parquet":
        return _read_parquet(path, request_column, key_column, time_column)
    name = os.fspath(path).lower()
    name = name[:-3] if name.endswith(".gz") else name[:-4] if name.endswith(".bz2") else name
    delim = delimiter or ("\t" if name.endswith(".tsv") else ",")
    return _read_long_text(path, request_column, key_column, time_column, delim)


def _utf8_tokens(tokens, line_of_token, path):
    arr = pa.array(tokens, pa.large_binary())
    try:
        return arr.cast(pa.large_string())
    except pa.ArrowInvalid:
        for i, t in enumerate(tokens):
            try:
                t.decode("utf-8")
            except UnicodeDecodeError:
                raise InputError(path, f"key {t[:40]!r} is not valid UTF-8", int(line_of_token(i))) from None
        raise


# --------------------------------------------------------------------------- basket
def _read_basket(path):
    raw = read_bytes(path)
    lines = raw.split(b"\n")
    sizes = np.fromiter((len(x.split()) for x in lines), dtype=np.int64, count=len(lines))
    keep = np.flatnonzero(sizes > 0)
    if keep.size == 0:
        raise InputError(path, "the log holds no requests with keys")
    tokens = raw.split()
    line_numbers = keep + 1
    sizes = sizes[keep]
    ends = np.cumsum(sizes)
    values = keys_from_strings(_utf8_tokens(tokens, lambda i: line_numbers[np.searchsorted(ends, i, "right")], path))
    return assemble_log(values, sizes, None, path, line_numbers, path)


# --------------------------------------------------------------------------- long rows
def _pick(path, names, wanted, default_index, what):
    if wanted is not None:
        if wanted not in names:
            raise InputError(path, f"no column named {wanted!r} for the {what}; the columns are {', '.join(names)}")
        return wanted
    if default_index is None:
        return None
    if default_index >= len(names):
        raise InputError(path, f"expected at least {default_index + 1} columns, found {len(names)}")
    return names[default_index]


def _read_long_text(path, request_column, key_column, time_column, delim):
    import pyarrow.csv as pacsv

    raw = read_bytes(path)
    first = raw.split(b"\n", 1)[0]
    names = [s.strip() for s in first.decode("utf-8", "replace").split(delim)]
    if not raw.strip():
        raise InputError(path, "the file is empty")
    rq = _pick(path, names, request_column, 0, "request")
    ky = _pick(path, names, key_column, 1, "key")
    tm = _pick(path, names, time_column, None, "time") if time_column else ("time" if "time" in names else None)
    chosen = [c for c in (rq, ky, tm) if c is not None]
    line_of_row = _LineOfRow(raw)
    try:
        table = pacsv.read_csv(
            io.BytesIO(raw),
            read_options=pacsv.ReadOptions(block_size=1 << 24),
            parse_options=pacsv.ParseOptions(delimiter=delim, ignore_empty_lines=True),
            convert_options=pacsv.ConvertOptions(include_columns=chosen, strings_can_be_null=False,
                                                 column_types={c: pa.large_string() for c in chosen}),
        )
    except (pa.ArrowInvalid, pa.ArrowTypeError) as exc:
        raise InputError(path, f"malformed row: {str(exc).splitlines()[0][:160]}") from None
    for c in chosen:
        col = table.column(c)
        empty = pc.equal(pc.utf8_length(col), 0)
        if col.null_count or pc.any(empty).as_py():
            row = int(np.flatnonzero(empty.to_numpy(zero_copy_only=False) | col.is_null().to_numpy(zero_copy_only=False))[0])
            raise InputError(path, f"empty value in column {c!r}", line_of_row(row))
    times = None if tm is None else _times(table.column(tm), path, line_of_row)
    return _long_rows(keys_from_strings(table.column(ky)), table.column(rq), times, path, line_of_row)


def _long_rows(values, requests, row_times, path, line_of_row):
    """Group long rows (one access each) into requests, in order of first appearance or time."""
    import pandas as pd

    req_codes, uniques = pd.factorize(np.asarray(requests.to_numpy(zero_copy_only=False)), sort=False)
    n_req = len(uniques)
    order = np.argsort(req_codes, kind="stable")
    sizes = np.bincount(req_codes, minlength=n_req).astype(np.int64)
    times = None
    if row_times is not None:
        times = np.full(n_req, np.inf)
        np.minimum.at(times, req_codes, row_times)
    lines = None
    if line_of_row is not None:
        firsts = np.full(n_req, np.iinfo(np.int64).max)
        np.minimum.at(firsts, req_codes, np.arange(len(req_codes)))
        lines = _Lazy(line_of_row, firsts)
    return assemble_log(values[order], sizes, times, path, lines, path)


class _Lazy:
    """Line numbers computed only when an error needs one."""

    def __init__(self, fn, rows):
        self.fn, self.rows = fn, rows

    def __getitem__(self, i):
        return self.fn(int(self.rows[i]))


def _times(col, path, line_of_row):
    try:
        return pc.cast(col, pa.float64()).to_numpy(zero_copy_only=False)
    except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
        pass
    try:
        ts = pc.cast(col, pa.timestamp("us"))
        return ts.cast(pa.int64()).to_numpy(zero_copy_only=False).astype(np.float64) / 1e6
    except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
        pass
    values = col.to_pylist()
    for row, v in enumerate(values):
        try:
            float(v)
        except (TypeError, ValueError):
            raise InputError(path, f"time {v!r} is neither a number nor an ISO-8601 time",
                             None if line_of_row is None else line_of_row(row)) from None
    raise InputError(path, "the time column could not be read")


class _LineOfRow:
    """1-based line of data row ``row`` of a headed text file (blank lines skipped)."""

    def __init__(self, raw):
        self.raw = raw

    def __call__(self, row):
        seen = -2
        for lineno, line in enumerate(self.raw.split(b"\n"), start=1):
            if line.strip():
                seen += 1
                if seen == row:
                    return lineno
        return None


# --------------------------------------------------------------------------- list formats
def _list_keys(col, path, where):
    """Flatten a list column into (key values, sizes)."""
    col = col.combine_chunks() if isinstance(col, pa.ChunkedArray) else col
    if col.null_count:
        row = int(np.flatnonzero(col.is_null().to_numpy(zero_copy_only=False))[0])
        raise InputError(path, "a request has no key list (null)", where(row))
    flat = pc.list_flatten(col)
    sizes = pc.list_value_length(col).to_numpy(zero_copy_only=False).astype(np.int64)
    if flat.null_count:
        row = int(np.searchsorted(np.cumsum(sizes), int(np.flatnonzero(flat.is_null().to_numpy(zero_copy_only=False))[0]), "right"))
        raise InputError(path, "a key is null", where(row))
    if pa.types.is_floating(flat.type) or pa.types.is_boolean(flat.type):
        raise InputError(path, f"keys must be integers or strings, not {flat.type}", where(0))
    return keys_from_column(flat), sizes


def _read_parquet(path, request_column, key_column, time_column):
    import pyarrow.parquet as pq

    try:
        table = pq.read_table(path)
    except FileNotFoundError:
        raise InputError(path, "no such file") from None
    except (pa.ArrowInvalid, OSError) as exc:
        raise InputError(path, f"is not a readable Parquet file: {exc}") from None
    names = table.column_names
    list_cols = [c for c in names if pa.types.is_list(table.schema.field(c).type)
                 or pa.types.is_large_list(table.schema.field(c).type)]
    tm = _pick(path, names, time_column, None, "time") if time_column else ("time" if "time" in names else None)

    def where(row):
        return None

    times = None
    if tm is not None:
        tcol = table.column(tm)
        if tcol.null_count:
            raise InputError(path, f"null value in column {tm!r}")
        if pa.types.is_timestamp(tcol.type):
            times = tcol.cast(pa.timestamp("us")).cast(pa.int64()).to_numpy().astype(np.float64) / 1e6
        elif pa.types.is_integer(tcol.type) or pa.types.is_floating(tcol.type):
            times = tcol.cast(pa.float64()).to_numpy()
        else:
            times = _times(tcol.cast(pa.large_string()), path, None)
    if key_column in list_cols or (key_column is None and list_cols):
        ky = key_column or list_cols[0]
        values, sizes = _list_keys(table.column(ky), path, where)
        keep = sizes > 0
        return assemble_log(values, sizes[keep], None if times is None else times[keep], path)
    rq = _pick(path, names, request_column, 0, "request")
    ky = _pick(path, names, key_column, 1, "key")
    for c in (rq, ky):
        if table.column(c).null_count:
            raise InputError(path, f"null value in column {c!r}")
    kcol = table.column(ky)
    if pa.types.is_floating(kcol.type):
        raise InputError(path, f"column {ky!r} holds floats; keys must be integers or strings")
    return _long_rows(keys_from_column(kcol), table.column(rq), times, path, None)


def _read_jsonl(path, key_column):
    raw = read_bytes(path)
    field = key_column or "keys"
    key_lists, times, lines = [], [], []
    for lineno, line in enumerate(raw.split(b"\n"), start=1):
        if not line.strip():
            continue
        try:
            obj = json.loads(line)
        except (ValueError, UnicodeDecodeError) as exc:
            raise InputError(path, f"not valid JSON: {exc}", lineno) from None
        t = None
        if isinstance(obj, dict):
            if field not in obj:
                raise InputError(path, f"the object has no {field!r} list", lineno)
            t = obj.get("time")
            obj = obj[field]
        if not isinstance(obj, list):
            raise InputError(path, f"expected a list of keys, found {type(obj).__name__}", lineno)
        for k in obj:
            if isinstance(k, bool) or not isinstance(k, (int, str)):
                raise InputError(path, f"key {k!r} is not an integer or a string", lineno)
            if isinstance(k, str) and not k:
                raise InputError(path, "a key is empty", lineno)
        if obj:
            key_lists.append(obj)
            lines.append(lineno)
            times.append(t)
    if not key_lists:
        raise InputError(path, "the log holds no requests with keys")
    has_time = [t is not None for t in times]
    tarr = None
    if any(has_time):
        if not all(has_time):
            raise InputError(path, "some requests have a time and others do not", lines[has_time.index(False)])
        tarr = _times(pa.array([str(t) for t in times], pa.large_string()), path, lambda r: lines[r])
    sizes = np.fromiter((len(x) for x in key_lists), dtype=np.int64, count=len(key_lists))
    flat = [k for x in key_lists for k in x]
    if all(isinstance(k, int) for k in flat) and all(-2**63 <= k < 2**63 for k in flat):
        values = np.asarray(flat, dtype=np.int64)
    else:
        values = keys_from_strings(pa.array([str(k) for k in flat], pa.large_string()))
    return assemble_log(values, sizes, tarr, path, np.asarray(lines), path)
