"""Node-to-shard files: read and write the ``node, shard`` table of a partition.

Reading is :func:`partition.node_shards.read_node_shards` (every format and
column rule is there) followed by matching each node id to the graph's ids:
as written, so ``007`` never matches the node ``7``. Writing puts a header
``node<d>shard`` and the user's ids exactly as read.
"""

from __future__ import annotations


import numpy as np
import pyarrow as pa
import pyarrow.compute as pc

from partition.errors import InputError, ParameterError, check_parts
from partition.ids import canonical_ints
from partition.node_shards import SHARD_NAMES, open_node_shards, read_node_shards
from partition.tables import write_table

__all__ = ["read_assignment", "write_assignment", "open_node_shards", "OUTPUT_EXTENSIONS"]

OUTPUT_EXTENSIONS = (".csv", ".tsv", ".parquet", ".pq", ".csv.gz", ".tsv.gz")
"""File names a node→shard output may end with (the format follows the name)."""


def read_assignment(path, graph, k=None, node_column=None, shard_column=None, shard_names=SHARD_NAMES) -> np.ndarray:
    """Read a node-to-shard file and align it with the graph's nodes.

    Parameters
    ----------
    path : str or os.PathLike
        Any node→shard input of :func:`partition.node_shards.read_node_shards`
        (text, Parquet, JSON Lines, a placement folder).
    graph : partition.graph.Graph
        The graph whose nodes are being placed; every node must appear once.
    k : int or None
        Number of shards; every shard id must lie in ``[0, k)``. ``None``: the
        largest shard id plus one (at most the number of nodes).
    node_column, shard_column : str or None
        Column names to use instead of the usual ones.

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
    table = read_node_shards(path, node_column, shard_column, repeats=False, shard_names=shard_names)
    return _align(table, graph, k)


def _align(table, graph, k):
    """Validate a read table against the graph; return the shard of each dense node."""
    name, shard, fail = table.name, table.shards, table.fail
    codes = _lookup(graph, table.text)
    bad = np.flatnonzero(codes < 0)
    if bad.size:
        message = f"node {_show(table.ids[int(bad[0])])} is not a node of the graph"
        if (_lookup(graph, pc.cast(pa.array(shard), pa.string())) >= 0).all():
            message += (f"; the columns look swapped (column {table.columns[1]!r} holds node ids): name them with "
                        "--node-column and --shard-column")
        raise fail(bad[0], message)
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
        line = table.where(first)[0]
        earlier = f"line {line}" if line is not None else f"row {first + 1}"
        raise fail(row, f"node {_show(table.ids[row])} is listed twice (first on {earlier})")
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
    parts = _check_parts(graph, parts)
    integer_ids = graph.ids.dtype.kind in "iu"
    node_arr = pa.array(graph.ids, type=pa.int64() if integer_ids else pa.string())
    write_table(path, pa.table({"node": node_arr, "shard": pa.array(parts, type=pa.int64())}), fmt=fmt)


# --- matching ids -------------------------------------------------------------


def _lookup(graph, keys):
    """Dense index of each key (-1 when unknown); ``keys`` are the ids as written (pyarrow strings).

    A key matches a node when it is written exactly as the node's id is (an
    integer id's canonical decimal text). Integer keys against integer ids
    spanning a range at most four times the node count use a direct table,
    other integer ids the graph's sorted-id search; anything else a hash
    lookup of the text (pyarrow ``index_in``).
    """
    ids = graph.ids
    if ids.dtype.kind in "iu":
        ints = canonical_ints(keys)
        if ints is None:  # some keys are not canonical integers: match the text
            found = pc.index_in(keys, value_set=pc.cast(pa.array(ids, type=pa.int64()), pa.string()))
            return found.fill_null(-1).to_numpy(zero_copy_only=False).astype(np.int64)
        lo, hi = int(ids[0]), int(ids[-1])
        if hi - lo < 4 * ids.shape[0] + 1024:
            table = np.full(hi - lo + 1, -1, dtype=np.int64)
            table[ids - lo] = np.arange(ids.shape[0])
            inside = (ints >= lo) & (ints <= hi)
            codes = np.full(ints.shape[0], -1, dtype=np.int64)
            codes[inside] = table[ints[inside] - lo]
            return codes
        return graph.id_index().lookup(ints)
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


def _show(x):
    x = x.as_py() if isinstance(x, pa.Scalar) else x
    return repr(x) if isinstance(x, str) else str(int(x))
