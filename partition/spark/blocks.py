"""The edges as numpy blocks in a cached RDD, for the rounds of pairwise refinement.

Every round of the ``fm`` and ``swaps`` steps reads the same edges under new
shard labels. As DataFrame rows that costs two joins with the shard table, a
shuffle of every edge row and an Arrow conversion per round (about ten Spark
jobs). Here the edges are packed once into numpy blocks (``u``, ``v`` and the
integer weights, a few million edges per block) kept in Spark's block manager,
and each round broadcasts the shard array (the driver holds it anyway):

* the shard cut matrix is one job without a shuffle — every task sums its
  blocks' cut edges into a ``k × k`` array, the driver adds the arrays;
* a round of shard-pair units is one job with one shuffle — every map task
  splits its blocks by the unit of the source node's shard (both directions
  of each edge) and sends one block per unit, so the shuffle moves whole
  arrays instead of rows; the unit's task concatenates them and runs the kernel.

The kernels see exactly the arrays the row-based path gave them (nodes of the
unit's two shards in increasing id order, every directed edge leaving them with
the neighbour's shard and weight), so results do not change.
"""

from __future__ import annotations

import numpy as np

__all__ = ["EdgeBlocks", "BLOCK_EDGES"]

BLOCK_EDGES = 1 << 22  # edges per block (int32 ends: 32 MB per block)
_EMPTY = np.empty(0, dtype=np.int64)


def _pack(block, unit_w, idtype):
    def pack(batches):
        import pandas as pd

        us, vs, ws, size = [], [], [], 0

        def flush():
            u = np.concatenate(us).astype(idtype)
            v = np.concatenate(vs).astype(idtype)
            w = b"" if unit_w else np.concatenate(ws).astype(np.int64).tobytes()
            return pd.DataFrame({"u": [u.tobytes()], "v": [v.tobytes()], "w": [w]})

        for pdf in batches:
            us.append(pdf["u"].to_numpy())
            vs.append(pdf["v"].to_numpy())
            if not unit_w:
                ws.append(pdf["wi"].to_numpy())
            size += len(pdf)
            if size >= block:
                yield flush()
                us, vs, ws, size = [], [], [], 0
        if size:
            yield flush()

    return pack


class EdgeBlocks:
    """Undirected edges with integer weights as cached numpy blocks.

    Parameters
    ----------
    spark : SparkSession
    wedges : DataFrame
        Columns ``u``, ``v``, ``wi`` (integer weights), each edge once.
    n : int
        Number of nodes (ids ``0 .. n-1``).
    unit_w : bool
        All weights are 1: blocks keep no weight array (``w`` is ``None`` in
        :meth:`sum_over` and :meth:`route`, an empty array in :meth:`unit_round`).
    block : int
        Edges per block.
    """

    def __init__(self, spark, wedges, n, unit_w, block=BLOCK_EDGES):
        from pyspark import StorageLevel

        self.spark = spark
        self.sc = spark.sparkContext
        self.n = int(n)
        self.unit_w = bool(unit_w)
        idtype = np.int32 if self.n < 2**31 else np.int64
        packed = wedges.select("u", "v", "wi").mapInPandas(
            _pack(int(block), self.unit_w, idtype), "u binary, v binary, w binary")
        unit = self.unit_w

        def unpack(row):
            w = None if unit else np.frombuffer(row["w"], dtype=np.int64)
            return np.frombuffer(row["u"], dtype=idtype), np.frombuffer(row["v"], dtype=idtype), w

        self.rdd = packed.rdd.map(unpack).persist(StorageLevel.MEMORY_AND_DISK)
        self.blocks = self.rdd.count()

    def release(self):
        """Drop the cached blocks."""
        self.rdd.unpersist()

    def sum_over(self, fn, length, /, **arrays):
        """``Σ`` over the blocks of ``fn(u, v, w, arrays, acc)``, which adds into ``acc`` (int64, ``length``).

        ``arrays`` are broadcast once for the job; ``w`` is ``None`` for unit
        weights. One Spark job without a shuffle; the driver adds the tasks' arrays.
        """
        size = int(length)
        bc = self.sc.broadcast(arrays)

        def task(it):
            a = bc.value
            acc = np.zeros(size, dtype=np.int64)
            for u, v, w in it:
                fn(u, v, w, a, acc)
            yield acc

        try:
            got = self.rdd.mapPartitions(task).collect()
        finally:
            bc.unpersist()
        return np.sum(got, axis=0, dtype=np.int64) if got else np.zeros(size, dtype=np.int64)

    def cut_matrix(self, parts, k):
        """``k × k`` integer cut matrix (symmetric, zero diagonal) of ``parts``.

        Parameters
        ----------
        parts : ndarray of int64, shape (n,)
        k : int

        Returns
        -------
        ndarray of int64, shape (k, k)
        """
        k = int(k)
        cm = self.sum_over(_cut_cells, k * k, parts=np.asarray(parts, dtype=np.int64), k=k).reshape(k, k)
        return cm + cm.T

    def cut_total(self, parts):
        """Total weight of the cut edges of ``parts``."""
        parts = np.asarray(parts, dtype=np.int64)
        k = int(parts.max()) + 1 if parts.shape[0] else 1
        return int(self.cut_matrix(parts, k).sum()) // 2

    def route(self, split, run, n_units, /, **arrays):
        """One job with one shuffle: ``split`` sends edge chunks to units, ``run`` solves each unit.

        Parameters
        ----------
        split : callable
            ``split(u, v, w, arrays)`` yields ``(unit, chunk)`` for one block.
        run : callable
            ``run(unit, chunks, arrays)`` returns the unit's result.
        n_units : int
        **arrays
            Broadcast once for the job.

        Returns
        -------
        dict
            unit → result, for the units that received at least one chunk.
        """
        if n_units <= 0:
            return {}
        bc = self.sc.broadcast(arrays)

        def send(it):
            a = bc.value
            for u, v, w in it:
                yield from split(u, v, w, a)

        def solve(it):
            a = bc.value
            got = {}
            for unit, chunk in it:
                got.setdefault(unit, []).append(chunk)
            for unit in sorted(got):
                yield unit, run(unit, got.pop(unit), a)  # run may free the chunks once it has joined them

        try:
            res = (self.rdd.mapPartitions(send).partitionBy(int(n_units), lambda unit: unit)
                   .mapPartitions(solve).collect())
        finally:
            bc.unpersist()
        return dict(res)

    def unit_round(self, parts, node_weights, pairs, kernel):
        """Run ``kernel`` on every shard pair of ``pairs`` in Spark tasks.

        Parameters
        ----------
        parts : ndarray of int64, shape (n,)
        node_weights : ndarray of int64, shape (n,)
        pairs : list of (int, int)
            Disjoint shard pairs; pair ``i`` is unit ``i``.
        kernel : callable
            ``kernel(unit, nodes, x, y, w, parts, node_weights)`` with
            ``nodes`` the ids of the pair's shards in increasing order, ``x →
            y`` every directed edge leaving them (the blocks' id type), ``w``
            their weights (an empty array for unit weights) and the whole
            shard and node-weight arrays; returns ``(nodes, shards, gain)``.

        Returns
        -------
        list of (unit, nodes, shards, gain)
            One entry per pair (pairs without edges run on the driver).
        """
        if not pairs:
            return []
        pairs = [(int(a), int(b)) for a, b in pairs]
        k = max(max(max(a, b) for a, b in pairs), int(parts.max())) + 1
        unit_of = np.full(k, -1, dtype=np.int64)
        for i, (a, b) in enumerate(pairs):
            unit_of[a] = unit_of[b] = i
        p = np.asarray(parts, dtype=np.int64)
        nw = np.asarray(node_weights, dtype=np.int64)

        def run(unit, chunks, arr):
            return _call(kernel, unit, pairs[unit], arr["parts"], arr["nw"], chunks)

        res = self.route(_pair_split, run, len(pairs), parts=p, nw=nw, unit_of=unit_of)
        for unit in range(len(pairs)):
            if unit not in res:
                res[unit] = _call(kernel, unit, pairs[unit], p, nw, [])
        return [(unit, *res[unit]) for unit in range(len(pairs))]


def group_chunks(key, x, y, w):
    """``(unit, (x, y, w))`` for every unit in ``key`` (``-1``: dropped), rows kept in block order."""
    keep = np.flatnonzero(key >= 0)
    if keep.shape[0] == 0:
        return
    o = keep[np.argsort(key[keep], kind="stable")]
    ko = key[o]
    starts = np.flatnonzero(np.r_[True, ko[1:] != ko[:-1]])
    ends = np.r_[starts[1:], ko.shape[0]]
    for s, e in zip(starts, ends):
        sel = o[s:e]
        yield int(ko[s]), (x[sel], y[sel], None if w is None else w[sel])


def _pair_split(u, v, w, a):
    p, unit_of = a["parts"], a["unit_of"]
    for x, y in ((u, v), (v, u)):
        yield from group_chunks(unit_of[p[x]], x, y, w)


def _cut_cells(u, v, w, a, acc):
    p, k = a["parts"], a["k"]
    su, sv = p[u], p[v]
    m = su != sv
    idx = su[m] * k + sv[m]
    if w is None:
        acc += np.bincount(idx, minlength=acc.shape[0])
    else:
        np.add.at(acc, idx, w[m])


def _call(kernel, unit, pair, p, nw, chunks):
    a, b = pair
    nodes = np.flatnonzero((p == a) | (p == b)).astype(np.int64)
    if chunks:
        x = np.concatenate([c[0] for c in chunks])
        y = np.concatenate([c[1] for c in chunks])
        w = _EMPTY if chunks[0][2] is None else np.concatenate([c[2] for c in chunks]).astype(np.int64)
        chunks.clear()  # the joined arrays replace them (a unit can hold tens of millions of edges)
    else:
        x = y = w = _EMPTY
    out_nodes, out_shards, gain = kernel(unit, nodes, x, y, w, p, nw)
    return np.asarray(out_nodes, dtype=np.int64), np.asarray(out_shards, dtype=np.int64), int(gain)
