"""Key → shard tables and request → replica tables on disk, in the assignment file layout.

A key table is written by :func:`partition.assignment.write_assignment` (a
``node,shard`` table in the user's own keys; CSV/TSV, gzip or Parquet), so the
placement tools read it like any other assignment. A routing table is a
``request,shard`` table; requests are numbered from 0 in time order (for a
basket file, the order of its non-blank lines).
"""

from __future__ import annotations

import io

import numpy as np
import pyarrow as pa

from partition.assignment import open_node_shards, write_assignment
from partition.errors import InputError
from partition.graph import Graph
from partition.tables import write_table
from partition.workload.keys import keys_from_column, keys_from_strings

__all__ = ["write_key_table", "read_key_table", "write_routes"]


def _stub(ids):
    n = len(ids)
    return Graph(np.zeros(n + 1, dtype=np.int64), np.empty(0, dtype=np.int32), ids=ids)


def write_key_table(path, keys, table):
    """Write the placed keys (``table >= 0``) as ``node,shard`` rows, atomically."""
    table = np.asarray(table, dtype=np.int64)
    placed = np.flatnonzero(table >= 0)
    write_assignment(path, _stub(keys[placed]), table[placed])


def read_key_table(path, log, k=None):
    """Read a key → shard table over ``log``'s key table.

    Returns an int64 array with the shard of every key of ``log.keys`` and −1
    for keys the file does not list.

    Raises
    ------
    InputError
        Unreadable file, a key the log does not hold, a key listed twice, a
        shard that is negative, not whole or ``≥ k``; names the file and line.
    """
    import pyarrow.csv as pacsv

    name, tab, raw = open_node_shards(path)
    if tab is None:
        base = name.lower()[:-3] if name.lower().endswith(".gz") else name.lower()
        delim = "\t" if base.endswith(".tsv") else ","
        header = [h.strip().strip('"') for h in raw.split(b"\n", 1)[0].decode("utf-8", "replace").split(delim)]
        try:
            tab = pacsv.read_csv(io.BytesIO(raw), parse_options=pacsv.ParseOptions(delimiter=delim),
                                 convert_options=pacsv.ConvertOptions(
                                     column_types={h: pa.large_string() for h in header},
                                     strings_can_be_null=False))
        except (pa.ArrowInvalid, pa.ArrowTypeError) as exc:
            raise InputError(name, f"is not a node,shard table: {str(exc).splitlines()[0][:160]}") from None

        def line(row):
            return row + 2
    else:
        def line(row):
            return None
    if tab.num_columns < 2:
        raise InputError(name, "expected two columns: node (key) and shard")
    nodes, shards = tab.column(0), tab.column(1)
    keys = keys_from_strings(nodes) if pa.types.is_string(nodes.type) or pa.types.is_large_string(nodes.type) \
        else keys_from_column(nodes)
    try:
        shard = shards.cast(pa.int64()).to_numpy()
    except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
        values = shards.to_pylist()
        row = next(i for i, v in enumerate(values) if not str(v).lstrip("-").isdigit())
        raise InputError(name, f"shard {values[row]!r} is not a whole number", line(row)) from None
    if log.keys.dtype.kind in "iu" and keys.dtype.kind not in "iu":
        known = log.keys.astype(str).astype(object)
    elif log.keys.dtype.kind not in "iu" and keys.dtype.kind in "iu":
        known, keys = log.keys, keys.astype(str).astype(object)
    else:
        known = log.keys
    pos = np.minimum(np.searchsorted(known, keys), max(len(known) - 1, 0))
    found = known[pos] == keys
    if not found.all():
        row = int(np.flatnonzero(~found)[0])
        raise InputError(name, f"key {keys[row]!s} does not appear in the log", line(row))
    bad = np.flatnonzero((shard < 0) | ((shard >= k) if k is not None else False))
    if bad.size:
        row = int(bad[0])
        raise InputError(name, f"shard {shard[row]} is out of range (0 to {'k - 1' if k is None else k - 1})",
                         line(row))
    out = np.full(log.n_keys, -1, dtype=np.int64)
    count = np.bincount(pos, minlength=log.n_keys)
    if count.max(initial=0) > 1:
        row = int(np.flatnonzero(count[pos] > 1)[1])
        raise InputError(name, f"key {keys[row]!s} is listed twice", line(row))
    out[pos] = shard
    return out


def write_routes(path, replica):
    """Write ``request,shard`` rows (requests numbered in time order), atomically."""
    replica = np.asarray(replica, dtype=np.int64)
    write_table(path, pa.table({"request": pa.array(np.arange(replica.size, dtype=np.int64)),
                                "shard": pa.array(replica)}))
