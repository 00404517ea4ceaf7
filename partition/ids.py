"""The one id rule: when a column of user ids is read as integers, and when as strings.

Every reader of user ids (edge lists, node-weight files, node→shard files, key
files; the in-memory and the Spark engine alike) applies this rule to each
file:

* a column of text ids is read as 64-bit integers only if **every** value is the
  canonical decimal form of an int64 — ``0``, or an optional ``-`` followed by
  a digit 1–9 and more digits, within ``[-2^63, 2^63 - 1]``. ``007``, ``+5``,
  ``-0``, `` 7`` and ``18446744073709551616`` are not canonical, so a file
  holding any of them has string ids, each kept byte for byte;
* a typed column (Parquet) of signed integers stays integer; unsigned integers
  stay integer when they all fit int64 and otherwise become their decimal text;
  strings follow the text rule above; floating-point ids are refused (a float
  cannot name a key exactly);
* ids are never converted to floats, and two distinct input ids are never one
  node: the canonical form of an integer is unique, so reading an integer file
  as integers loses nothing, and writing an integer id back prints exactly the
  text it was read from.

The same test in Spark SQL is :data:`CANONICAL_INT_SQL`, so both engines decide
alike (``tests/test_ids.py`` checks both against Python's ``int``/``str``).
"""

from __future__ import annotations

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc

from partition.errors import InputError

__all__ = ["CANONICAL_INT_PATTERN", "CANONICAL_INT_SQL", "canonical_ints", "id_column", "id_columns",
           "first_invalid_utf8"]

CANONICAL_INT_PATTERN = r"^(0|-?[1-9][0-9]{0,18})$"
"""Canonical decimal integers of at most 19 digits (the range check follows the cast)."""

_ZERO, _MINUS = ord("0"), ord("-")


def CANONICAL_INT_SQL(col):  # noqa: N802 - a SQL fragment named like a constant
    """A Spark SQL boolean expression: ``col`` (a string column name) is a canonical int64."""
    return f"({col} rlike '{CANONICAL_INT_PATTERN}' and try_cast({col} as bigint) is not null)"


def canonical_ints(col):
    """``col`` (pyarrow strings) as an int64 numpy array if every value is a canonical int64, else ``None``.

    Arrow's cast from text to int64 accepts exactly an optional ``-`` and
    decimal digits within range; of those, the non-canonical ones have a
    leading zero (``007``, ``00``, ``-0``, ``-07``), which the first one or
    two bytes of each value show without a regular expression.
    """
    col = col.combine_chunks() if isinstance(col, pa.ChunkedArray) else col
    if len(col) == 0:
        return np.empty(0, dtype=np.int64)
    try:
        values = pc.cast(col, pa.int64()).to_numpy()
    except pa.ArrowInvalid:
        return None
    offsets = np.frombuffer(col.buffers()[1], dtype=np.int64 if pa.types.is_large_string(col.type) else np.int32)
    offsets = offsets[col.offset : col.offset + len(col) + 1]
    data = np.frombuffer(col.buffers()[2], dtype=np.uint8)
    start = offsets[:-1]
    first = data[start]
    if ((first == _ZERO) & (np.diff(offsets) > 1)).any():
        return None
    minus = np.flatnonzero(first == _MINUS)
    if minus.size and (data[start[minus] + 1] == _ZERO).any():
        return None
    return values


def _typed(col, path, label):
    """A non-text pyarrow column of ids as int64, or as its decimal text; refuse other types."""
    t = col.type
    if pa.types.is_integer(t):
        if pa.types.is_unsigned_integer(t) and len(col) and pc.max(col).as_py() >= 2**63:
            return pc.cast(col, pa.string())
        return col.to_numpy().astype(np.int64, copy=False)
    if pa.types.is_dictionary(t):
        return _typed(col.cast(t.value_type), path, label)
    if pa.types.is_string(t) or pa.types.is_large_string(t):
        return None
    what = "floating-point numbers" if pa.types.is_floating(t) else f"values of type {t}"
    raise InputError(path, f"the {label} column holds {what}; ids must be integers or text")


def id_column(col, path=None, label="id"):
    """One column of ids by the rule: int64 ndarray, or an object ndarray of ``str``."""
    return id_columns([col], path, [label])[0]


def id_columns(cols, path=None, labels=None):
    """Several id columns of one file by the rule, all int64 or all strings (object ndarrays).

    Parameters
    ----------
    cols : list of pyarrow arrays or chunked arrays
        Text columns, or typed columns from Parquet.
    path : str or None
        The file, named in errors.
    labels : list of str or None
        Column names for errors.

    Returns
    -------
    list of ndarray
        int64 arrays when every column is integer by the rule, otherwise object
        arrays of the ids' exact text (integers of typed columns as decimal text).
    """
    labels = labels or ["id"] * len(cols)
    cols = [c.combine_chunks() if isinstance(c, pa.ChunkedArray) else c for c in cols]
    ints = []
    for col, label in zip(cols, labels):
        typed = _typed(col, path, label)
        if typed is None:
            typed = canonical_ints(col)
        elif isinstance(typed, (pa.Array, pa.ChunkedArray)):
            typed = None
        ints.append(typed)
    if all(i is not None for i in ints):
        return ints
    return [np.asarray(pc.cast(c, pa.string()).to_numpy(zero_copy_only=False), dtype=object) for c in cols]


def first_invalid_utf8(raw):
    """Byte offset of the first invalid UTF-8 sequence in ``raw``, or ``None`` when it is valid."""
    try:
        raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        return exc.start
    return None
