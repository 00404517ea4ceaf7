"""The key rule of request logs: integers only when every key is a canonical int64.

A column of keys becomes int64 when every value is the canonical decimal form
of an int64 (``0``, ``-12``, ``907``; not ``007``, ``+5``, ``-0``, ``1e3`` or
``1.0``); otherwise every key is kept as a string, byte for byte. Keys are never
floats. This is the same rule the edge-list readers follow.
"""

from __future__ import annotations

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc

__all__ = ["keys_from_strings", "keys_from_column"]

_CANONICAL = r"^-?(0|[1-9][0-9]{0,18})$"


def keys_from_strings(values):
    """Apply the key rule to a pyarrow string (or binary) array.

    Parameters
    ----------
    values : pyarrow.Array or ChunkedArray of string

    Returns
    -------
    ndarray
        int64 when every value is a canonical int64, else an object array of str.
    """
    if isinstance(values, pa.ChunkedArray):
        values = values.combine_chunks()
    if pa.types.is_binary(values.type) or pa.types.is_large_binary(values.type):
        values = values.cast(pa.large_string())
    if len(values) and pc.all(pc.match_substring_regex(values, _CANONICAL)).as_py():
        try:
            as_int = pc.cast(values, pa.int64())
        except (pa.ArrowInvalid, OverflowError):
            as_int = None
        if as_int is not None:
            return as_int.to_numpy(zero_copy_only=False).astype(np.int64, copy=False)
    return np.asarray(values.to_numpy(zero_copy_only=False), dtype=object)


def keys_from_column(col):
    """Apply the key rule to a typed column (Parquet/JSON): integers stay int64, others become strings.

    Floating-point columns are refused by the caller; strings follow
    :func:`keys_from_strings`.
    """
    if isinstance(col, pa.ChunkedArray):
        col = col.combine_chunks()
    if pa.types.is_integer(col.type):
        if pa.types.is_uint64(col.type) and len(col) and pc.max(col).as_py() > np.iinfo(np.int64).max:
            return np.asarray(pc.cast(col, pa.string()).to_numpy(zero_copy_only=False), dtype=object)
        return col.to_numpy(zero_copy_only=False).astype(np.int64, copy=False)
    return keys_from_strings(col.cast(pa.large_string()))
