"""Refinement on Spark: the units of the in-memory steps, each in a Spark task.

The loops over rounds are :mod:`partition.refine.rounds`, the same drivers the
in-memory steps run; this module supplies their two bulk operations over the
edge blocks (:class:`~partition.spark.blocks.EdgeBlocks`: the edges packed
once into cached numpy blocks, the shard array broadcast each round) and feeds
the same numba kernels the same arrays, so the result is identical:

``window`` (:func:`partition.refine.window_dp.refine_window`, ``chain_length=1``)
    Each chain of free boundaries is a unit: a task gets the line edges with
    both ends between the chain's fixed neighbours (one shuffle of the edge
    blocks) and runs :func:`~partition.refine.window_dp.window_dp_round` on
    that stretch of the line, shifted to start at 0 (windows and tables shift
    with it).
``fm`` (:func:`partition.refine.fm.refine_fm`, schedule ``matched``)
    and ``swaps`` (:func:`partition.refine.swaps.refine_swaps`, ``matched``).
    The start-of-round shard cut matrix is one job over the blocks; each shard
    pair is a unit: one shuffle brings every directed edge leaving the pair's
    nodes to the unit's task, which renumbers the nodes it sees in increasing
    id order (a monotone map, so every "smaller node first" tie rule is kept)
    and calls :func:`~partition.refine.fm.fm_pair` or
    :func:`~partition.refine.swaps.swap_pair`.

The driver holds O(n) arrays (positions, shards); the edges stay in Spark.
A weighted graph's integer weights depend on whole-graph tests (integrality,
totals) that the engine reproduces by aggregates (:func:`int_weights`).
"""

from __future__ import annotations

import numba
import numpy as np

from partition.cut import boundaries_from_parts, parts_from_boundaries
from partition.errors import ParameterError
from partition.refine.fm import fm_pair
from partition.refine.rounds import pair_rounds, swap_rounds, window_rounds
from partition.refine.swaps import swap_pair
from partition.refine.window_dp import default_window, window_dp_round
from partition.rules import AFFINITY_SCALE, weights_kept
from partition.spark.blocks import group_chunks
from partition.spark.session import describe

__all__ = ["int_weights", "edge_blocks", "StepBlocks", "spark_window", "spark_fm", "spark_swaps"]

_EMPTY = np.empty(0, dtype=np.int64)


def int_weights(spark, sg, kind):
    """Integer edge weights as the in-memory step computes them; column ``wi`` of the edges.

    ``kind="fm"`` follows :func:`partition.refine.units.fixed_point_weights`,
    ``kind="cut"`` :func:`partition.refine.gains.cut_weights`. Returns the edges
    DataFrame with ``wi`` and whether the weights are units (``cut`` then
    passes empty weight arrays to the kernels, as the in-memory code does).
    """
    from pyspark.sql import functions as F

    if not sg.weighted:
        return sg.edges.withColumn("wi", F.lit(1).cast("long")), True
    st = sg.edges.agg(F.sum("w").alias("t"), F.max("w").alias("mx"),
                      F.sum(F.when(F.col("w") != F.floor("w"), 1).otherwise(0)).alias("frac")).collect()[0]
    total, top, frac = float(2 * (st["t"] or 0.0)), float(st["mx"] or 0.0), int(st["frac"] or 0)
    exact = weights_kept(kind, frac > 0, top, total)
    if exact:
        return sg.edges.withColumn("wi", F.col("w").cast("long")), False
    # quantise: round half to even of w * 2**20 (rule 1)
    return sg.edges.withColumn("wi", F.bround(F.col("w") * float(AFFINITY_SCALE), 0).cast("long")), False


def _local(gn, ex, ey, w, shard, nw, n=None):
    """Local CSR over a unit's nodes ``gn`` and their neighbours, ids in increasing global order.

    ``ex → ey`` are the directed edges leaving ``gn`` (int32 or int64), ``w``
    their weights (an empty array: all ones), ``shard`` and ``nw`` the
    whole-graph shard and node-weight arrays. Returns ``ids`` (global id of
    each local node), ``indptr``, ``indices`` (int32, each row's neighbours in
    increasing order), the weights in CSR order (int64), and the shard and
    weight of every local node. About 16 bytes per directed edge besides the
    inputs.
    """
    if ex.shape[0] >= 2**31:
        raise ValueError(f"a refinement unit with {ex.shape[0]} directed edges is too large (limit 2**31 - 1)")
    n = int(max(gn.max(initial=-1), ey.max(initial=-1)) + 1) if n is None else int(n)
    ids, indptr, indices, wl = _local_csr(n, gn, ex, ey, w)
    return ids, indptr, indices, wl, shard[ids], nw[ids]


@numba.njit(cache=True, nogil=True)
def _local_csr(n, gn, ex, ey, w):
    # global → local ids by one scan over the marked ids (increasing order), then
    # two stable counting sorts (by neighbour, then by row): rows in increasing
    # local id, each row's neighbours increasing — lexsort((ly, lx)) order
    lid = np.full(n, -1, dtype=np.int64)
    for i in range(gn.shape[0]):
        lid[gn[i]] = 0
    for i in range(ey.shape[0]):
        lid[ey[i]] = 0
    size = 0
    for g in range(n):
        if lid[g] == 0:
            lid[g] = size
            size += 1
        else:
            lid[g] = -1
    ids = np.empty(size, dtype=np.int64)
    size = 0
    for g in range(n):
        if lid[g] >= 0:
            ids[size] = g
            size += 1
    m = ex.shape[0]
    start = np.zeros(size + 1, dtype=np.int64)
    for i in range(m):
        start[lid[ey[i]] + 1] += 1
    for j in range(size):
        start[j + 1] += start[j]
    by_y = np.empty(m, dtype=np.int32)  # m < 2**31 (checked by _local)
    for i in range(m):
        y = lid[ey[i]]
        by_y[start[y]] = i
        start[y] += 1
    indptr = np.zeros(size + 1, dtype=np.int64)
    for i in range(m):
        indptr[lid[ex[i]] + 1] += 1
    for j in range(size):
        indptr[j + 1] += indptr[j]
    fill = indptr[:-1].copy()
    indices = np.empty(m, dtype=np.int32)
    wl = np.ones(m, dtype=np.int64)
    unit = w.shape[0] == 0
    for t in range(m):
        i = by_y[t]
        x = lid[ex[i]]
        q = fill[x]
        fill[x] += 1
        indices[q] = lid[ey[i]]
        if not unit:
            wl[q] = w[i]
    return ids, indptr, indices, wl


def _sides(a, b, gn, ex, ey, w, shard, nw):
    """:func:`_local` plus the local ids of the unit's nodes in shard ``a`` and in shard ``b``."""
    ids, indptr, indices, lw, lp, lnw = _local(gn, ex, ey, w, shard, nw)
    loc = np.searchsorted(ids, gn)
    return ids, indptr, indices, lw, lp, lnw, loc[lp[loc] == a], loc[lp[loc] == b]


def _line_split(u, v, w, a):
    # every edge with both ends inside one free chain's stretch of the line goes to that chain
    pos, fpos, is_chain = a["pos"], a["fpos"], a["is_chain"]
    pu, pv = pos[u], pos[v]
    p, q = np.minimum(pu, pv), np.maximum(pu, pv)
    seg = np.searchsorted(fpos, p, side="right") - 1
    segq = np.searchsorted(fpos, q, side="right") - 1
    key = np.where((seg == segq) & is_chain[seg], seg, -1)
    yield from group_chunks(key, p, q, w)


def _pair_units(spark, blocks, nw, solve, step):
    """One round of shard-pair units for the drivers of :mod:`partition.refine.rounds`, each pair a Spark task.

    ``solve(a, b, *sides)`` gets the unit's local graph (:func:`_sides`) and
    returns the global ids it placed, their shards and the gain. The returned
    ``run_round(parts, pairs)`` gives the new shards, the gains, and per pair
    whether a node changed shard and how many nodes the unit placed.
    """
    pairs_now = []

    def kernel(unit, gn, ex, ey, w, shard, weight):
        a, b = pairs_now[unit]
        if gn.shape[0] == 0:
            return _EMPTY, _EMPTY, 0
        return solve(a, b, *_sides(a, b, gn, ex, ey, w, shard, weight))

    def run_round(current, pairs):
        describe(spark, f"refine {step}: a round of shard pairs")
        pairs_now[:] = pairs
        res = blocks.unit_round(current, nw, pairs, kernel)
        units = np.concatenate([np.full(r[1].shape[0], r[0], dtype=np.int64) for r in res] or [_EMPTY])
        nodes = np.concatenate([r[1] for r in res] or [_EMPTY])
        new = np.concatenate([r[2] for r in res] or [_EMPTY])
        changed = np.zeros(len(pairs), dtype=bool)
        changed[np.unique(units[current[nodes] != new])] = True
        current = current.copy()
        current[nodes] = new
        return current, [r[3] for r in res], changed.tolist(), np.bincount(units, minlength=len(pairs)).tolist()

    return run_round


def edge_blocks(spark, sg, kind):
    """:class:`~partition.spark.blocks.EdgeBlocks` of the graph with :func:`int_weights` of ``kind``."""
    from partition.spark.blocks import EdgeBlocks

    wedges, unit_w = int_weights(spark, sg, kind)
    return EdgeBlocks(spark, wedges, sg.n, unit_w)


class StepBlocks:
    """The refinement's cached edge blocks, built when a step first needs them and shared by the steps.

    ``blocks(kind)`` gives the :func:`edge_blocks` of ``kind`` (``"cut"`` or
    ``"fm"``); on unweighted graphs the two kinds are the same weights, so one
    set of blocks serves both. :meth:`release` drops them all.
    """

    def __init__(self, spark, sg):
        self.spark, self.sg, self.made = spark, sg, {}

    def __call__(self, kind):
        kind = kind if self.sg.weighted else "cut"
        if kind not in self.made:
            self.made[kind] = edge_blocks(self.spark, self.sg, kind)
        return self.made[kind]

    def release(self):
        for b in self.made.values():
            b.release()
        self.made.clear()


def spark_fm(spark, sg, parts, rule, nw, seed=0, max_passes=8, max_stall=256, stall_fraction=0.0, tol=0.0,
             max_rounds=None, progress=None, *, blocks):
    """:func:`partition.refine.fm.refine_fm` with ``schedule="matched"``, units in Spark tasks.

    Parameters
    ----------
    spark : SparkSession
    sg : partition.spark.io.SparkGraph
    parts : ndarray of int64
    rule : partition.balance.BalanceRule
    nw : ndarray of int64
        Node weights (ones when unweighted).
    seed, max_passes, max_stall, stall_fraction, tol, max_rounds
        As :func:`partition.refine.fm.refine_fm`: a unit of ``L`` nodes ends a
        pass after ``max(max_stall, ⌊stall_fraction · L⌋)`` moves without a new
        best; the rounds stop after two in a row that each gain at most
        ``tol`` times the start-of-round cut (``tol = 0``: rule off).
    progress : callable or None
    blocks : partition.spark.blocks.EdgeBlocks
        The edges with :func:`int_weights` ``"fm"`` (:func:`edge_blocks`).

    Returns
    -------
    ndarray of int64

    References
    ----------
    C. M. Fiduccia and R. M. Mattheyses, "A linear-time heuristic for improving
    network partitions", DAC 1982.
    """
    k = rule.k
    cap, floor = int(rule.cap), int(rule.floor)
    parts = np.asarray(parts, dtype=np.int64).copy()
    nw = np.asarray(nw, dtype=np.int64)

    def solve(a, b, ids, indptr, indices, lw, lp, lnw, la, lb):
        mov = np.concatenate((la, lb))
        stall = max_stall if max_stall < 0 else max(int(max_stall), int(stall_fraction * mov.shape[0]))
        new, g = fm_pair(indptr, indices, lw, lnw, lp, a, b, mov, cap, cap, floor, floor, max_passes, stall)
        return ids[mov], new, g

    units = _pair_units(spark, blocks, nw, solve, "fm")

    def run_round(current, pairs):
        current, gains, changed, _ = units(current, pairs)
        return current, gains, changed

    parts, _ = pair_rounds(parts, k, lambda p: blocks.cut_matrix(p, k), run_round, "matched", max_rounds,
                           seed, tol, on_round=_report(progress, "fm"))
    return parts


def spark_swaps(spark, sg, parts, rule, node_weights, max_rounds=20, tol=1e-3, iterations=4, progress=None, *,
                blocks):
    """:func:`partition.refine.swaps.refine_swaps` with ``schedule="matched"``, units in Spark tasks.

    Parameters
    ----------
    spark : SparkSession
    sg : partition.spark.io.SparkGraph
    parts : ndarray of int64
    rule : partition.balance.BalanceRule
    node_weights : ndarray of int64 or None
        ``None`` for unit node weights (the kernel then gets an empty array).
    max_rounds, tol, iterations
        As :func:`partition.refine.swaps.refine_swaps`.
    progress : callable or None
    blocks : partition.spark.blocks.EdgeBlocks
        The edges with :func:`int_weights` ``"cut"`` (:func:`edge_blocks`).

    Returns
    -------
    ndarray of int64

    References
    ----------
    B. W. Kernighan and S. Lin, "An efficient heuristic procedure for
    partitioning graphs", Bell System Technical Journal 49(2), 1970.
    """
    k = rule.k
    cap, floor = int(rule.cap), int(rule.floor)
    unit_w = blocks.unit_w
    parts = np.asarray(parts, dtype=np.int64).copy()
    nw = np.ones(parts.shape[0], dtype=np.int64) if node_weights is None else np.asarray(node_weights, np.int64)

    def solve(a, b, ids, indptr, indices, lw, lp, lnw, la, lb):
        rank = np.zeros(ids.shape[0], dtype=np.int64)
        rank[la] = np.arange(la.shape[0])
        rank[lb] = np.arange(lb.shape[0])
        moved, target, g = swap_pair(indptr, indices, _EMPTY if unit_w else lw, lp.astype(np.int32), rank,
                                     _EMPTY if node_weights is None else lnw, a, b, la, lb, cap, floor, iterations)
        return ids[moved], target, g

    units = _pair_units(spark, blocks, nw, solve, "swaps")

    def run_round(current, pairs):
        current, gains, _, moved = units(current, pairs)
        return current, gains, moved

    parts, _ = swap_rounds(parts, k, None, lambda p: blocks.cut_matrix(p, k), run_round, "matched", max_rounds,
                           tol, on_round=_report(progress, "swaps"))
    return parts


def spark_window(spark, sg, order, parts, rule, node_weights, w=None, max_rounds=16, progress=None, *, blocks):
    """:func:`partition.refine.window_dp.refine_window` (``chain_length=1``), chains in Spark tasks.

    Parameters
    ----------
    spark : SparkSession
    sg : partition.spark.io.SparkGraph
    order : ndarray of int64
    parts : ndarray of int64
        A line cut of ``order`` (otherwise returned unchanged, as in memory).
    rule : partition.balance.BalanceRule
    node_weights : ndarray of int64 or None
    w : int or None
        Window half-width (default :func:`~partition.refine.window_dp.default_window`).
    max_rounds : int
    progress : callable or None
    blocks : partition.spark.blocks.EdgeBlocks
        The edges with :func:`int_weights` ``"cut"`` (:func:`edge_blocks`).

    Returns
    -------
    ndarray of int64

    References
    ----------
    K. Aydin, M. Bateni and V. Mirrokni, "Distributed balanced partitioning via
    linear embedding", WSDM 2016.
    """
    k = rule.k
    n = order.shape[0]
    try:
        b = boundaries_from_parts(order, parts, k)
    except ParameterError:
        return parts
    w = default_window(n, k) if w is None else int(w)
    cap, floor = int(rule.cap), int(rule.floor)
    nwv = np.ones(n, dtype=np.int64) if node_weights is None else node_weights
    prefix = np.zeros(n + 1, dtype=np.int64)
    np.cumsum(nwv[order], out=prefix[1:])
    pos = np.empty(n, dtype=np.int64)
    pos[order] = np.arange(n, dtype=np.int64)
    unit_w = blocks.unit_w

    def solve(c, p, q, ew, full, fixed, bb):
        i0, i1 = int(fixed[c]), int(fixed[c + 1])
        js = np.arange(i0, i1 - 1)
        left, right = int(full[i0]), int(full[i1])
        o = np.lexsort((q, p))
        out, g = window_dp_round(p[o] - left, q[o] - left, _EMPTY if unit_w else ew[o],
                                 prefix[left:right + 1], bb[js] - left, np.ones(js.shape[0], dtype=bool),
                                 w, cap, floor)
        return js, out + left, g

    def run(c, chunks, a):
        p = np.concatenate([x[0] for x in chunks]).astype(np.int64)
        q = np.concatenate([x[1] for x in chunks]).astype(np.int64)
        ew = _EMPTY if unit_w else np.concatenate([x[2] for x in chunks]).astype(np.int64)
        return solve(c, p, q, ew, a["full"], a["fixed"], a["b"])

    def run_round(b, free):
        describe(spark, "refine window: a round of boundary chains")
        full = np.concatenate(([0], b, [n]))
        fixed = np.concatenate(([0], np.flatnonzero(~free) + 1, [k]))
        fpos = full[fixed]
        is_chain = np.append(np.diff(fixed) >= 2, False)
        res = blocks.route(_line_split, run, fpos.shape[0], pos=pos, fpos=fpos, is_chain=is_chain,
                           full=full, fixed=fixed, b=b)
        nb, gain = b.copy(), 0
        for c in np.flatnonzero(is_chain[:-1]):  # chains without any edge: solved on the driver
            js, out, g = res[int(c)] if int(c) in res else solve(int(c), _EMPTY, _EMPTY, _EMPTY, full, fixed, b)
            nb[js] = out
            gain += g
        return nb, gain

    b, _ = window_rounds(b, k, run_round, 1, max_rounds, on_round=_report(progress, "window"))
    return np.asarray(parts_from_boundaries(order, b, k), dtype=np.int64)


def _report(progress, step):
    """The drivers' per-round dict as a progress row of the step (``None`` when nobody listens)."""
    if progress is None:
        return None
    return lambda row: progress({"stage": f"{step} round {row['round']}",
                                 **{k: v for k, v in row.items() if k != "round"}})
