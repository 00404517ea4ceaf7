"""The key rule of request logs: integers only when every key is a canonical int64.

A column of keys becomes int64 when every value is the canonical decimal form
of an int64 (``0``, ``-12``, ``907``; not ``007``, ``+5``, ``-0``, ``1e3`` or
``1.0``); otherwise every key is kept as a string, byte for byte. Keys are never
floats. This is the same rule the edge-list readers follow.
"""

from __future__ import annotations

import pyarrow as pa

from partition.ids import id_column

__all__ = ["keys_from_strings", "keys_from_column"]


def keys_from_strings(values):
    """Apply the key rule (:func:`partition.ids.id_column`) to a pyarrow string (or binary) array.

    Returns
    -------
    ndarray
        int64 when every value is a canonical int64, else an object array of str.
    """
    if isinstance(values, pa.ChunkedArray):
        values = values.combine_chunks()
    if pa.types.is_binary(values.type) or pa.types.is_large_binary(values.type):
        values = values.cast(pa.large_string())
    return id_column(values, label="key")


def keys_from_column(col):
    """Apply the key rule to a typed column (Parquet/JSON): integers stay int64, others become strings.

    Floating-point columns are refused by the caller; strings follow
    :func:`keys_from_strings`.
    """
    if isinstance(col, pa.ChunkedArray):
        col = col.combine_chunks()
    if pa.types.is_integer(col.type):
        return id_column(col, label="key")
    return keys_from_strings(col.cast(pa.large_string()))
