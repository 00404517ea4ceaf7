"""Window dynamic programming: move the boundaries of a line cut to lower the cut.

A line cut (:mod:`partition.cut`) is a vector of boundaries ``b_1 ≤ … ≤ b_{k−1}``
on the line, with ``b_0 = 0`` and ``b_k = n``; piece ``j`` is the positions
``[b_j, b_{j+1})``. Each boundary may move inside a window around its current
position ``c_j``:

    W_j = [max(c_j − w, ⌈(c_{j−1} + c_j)/2⌉), min(c_j + w, ⌊(c_j + c_{j+1})/2⌋)],

so windows of neighbouring boundaries overlap in at most one position and
always contain the current position. Default ``w = min(64, ⌊n/(4k)⌋)``, at
least 1 (our choice: a quarter of a piece keeps windows apart, 64 keeps the
tables below small).

What the DP minimises. With every edge ``(u, v)`` written as positions
``p < q``, an edge is *inside* piece ``j`` when ``b_j ≤ p`` and ``q < b_{j+1}``,
and it is cut otherwise. Each uncut edge is inside exactly one piece, so for any
non-decreasing boundaries

    cut(b) = Σ_e w_e − Σ_{j=0}^{k−1} inner(b_j, b_{j+1}),
    inner(x, y) = Σ_{e : x ≤ p_e, q_e < y} w_e.

Fix every boundary except a *chain* of consecutive free boundaries
``b_s … b_t`` (its neighbours ``b_{s−1}``, ``b_{t+1}`` fixed). Only the terms of
pieces ``s−1 … t`` change, and they form a chain ``inner(b_{s−1}, b_s) + … +
inner(b_t, b_{t+1})`` in which each term depends on two consecutive boundaries.
The DP runs over the boundaries of the chain left to right; its state is the
position of the current boundary (one of ``|W_j| ≤ 2w + 1`` values) and its
transition value is ``inner(x, y)`` of the piece between two consecutive
boundaries; transitions are allowed only if ``x ≤ y`` and the piece weighs at
least ``floor`` and at most ``cap`` (``partition.balance``). It therefore
returns, exactly, a boundary vector minimising the cut weight of the whole
graph over all ``(b_s, …, b_t) ∈ W_s × … × W_t`` that keep pieces ``s−1 … t``
within the balance rule. An edge whose endpoints lie in non-adjacent windows
(or that spans a whole window) contributes the same amount to every choice and
is left out of the tables; so is every edge that crosses a fixed boundary.
``inner(x, y)`` for all ``x ∈ W_j, y ∈ W_{j+1}`` is a dominance count: each
relevant edge adds its weight at cell ``(min(p − lo_j, |W_j| − 1),
max(q − lo_{j+1} + 1, 0))`` and suffix sums over the first index and prefix sums
over the second give the table in ``O(edges + |W_j|·|W_{j+1}|)``.

Ties: among optimal vectors the DP takes the one with the least total
displacement ``Σ|b_j − c_j|``, then the smallest ``b_t``, then the smallest
``b_{t−1}``, and so on. So a boundary only moves when that strictly lowers the
cut, and the cut never increases when the starting cut keeps the rule. All sums
are int64 (:func:`partition.refine.gains.cut_weights`).

Rounds. A round frees a set of boundaries; the fixed ones split them into
chains, and each chain reads only its fixed neighbours and the start-of-round
windows, so the chains of a round are independent units: solved together or
one by one (or in parallel Spark tasks, each given the edges with both ends
between its fixed neighbours and the prefix weights there) they give the same
boundaries. :func:`refine_window` alternates the free sets
(:func:`partition.refine.rounds.window_rounds`) so every boundary is
free in one of any two consecutive rounds; ``chain_length=0`` frees all
boundaries at once (one chain: a global pass, run on the driver).
"""

from __future__ import annotations

import numba
import numpy as np

from partition.cut import boundaries_from_parts, check_order, parts_from_boundaries, positions
from partition.errors import ParameterError
from partition.refine.gains import cut_total, cut_weights
from partition.refine.rounds import free_mask, window_rounds

__all__ = ["chain_dp", "window_dp_round", "refine_window", "line_edges", "windows", "default_window", "free_mask"]

_EMPTY_I64 = np.empty(0, dtype=np.int64)


def default_window(n, k):
    """Default half-width of a boundary's window: ``min(64, ⌊n/(4k)⌋)``, at least 1."""
    return max(1, min(64, n // (4 * k)))


@numba.njit(cache=True, nogil=True)
def _chain_dp_kernel(p, q, ew, pw, left, right, lo, hi, cur, cap, floor):
    nfree = lo.shape[0]
    ns = nfree + 2
    slo = np.empty(ns, dtype=np.int64)
    shi = np.empty(ns, dtype=np.int64)
    scur = np.empty(ns, dtype=np.int64)
    slo[0] = left
    shi[0] = left
    scur[0] = left
    slo[ns - 1] = right
    shi[ns - 1] = right
    scur[ns - 1] = right
    for i in range(nfree):
        slo[i + 1] = lo[i]
        shi[i + 1] = hi[i]
        scur[i + 1] = cur[i]
    size = shi - slo + 1
    off = np.zeros(ns + 1, dtype=np.int64)
    for s in range(ns):
        off[s + 1] = off[s] + size[s]
    val = np.full(off[ns], -1, dtype=np.int64)  # -1: unreachable (inner sums are >= 0)
    disp = np.zeros(off[ns], dtype=np.int64)
    back = np.full(off[ns], -1, dtype=np.int64)
    val[0] = 0
    order = np.argsort(p, kind="mergesort")
    ps = p[order]
    qs = q[order]
    unit = ew.shape[0] == 0
    current = 0
    for t in range(ns - 1):
        s0 = size[t]
        s1 = size[t + 1]
        tab = np.zeros((s0, s1), dtype=np.int64)
        first = np.searchsorted(ps, slo[t], side="left")
        last = np.searchsorted(ps, shi[t + 1], side="left")
        for e in range(first, last):
            qq = qs[e]
            if qq >= shi[t + 1]:
                continue
            ai = min(ps[e] - slo[t], s0 - 1)
            ci = max(qq - slo[t + 1] + 1, 0)
            tab[ai, ci] += 1 if unit else ew[order[e]]
        for ai in range(s0 - 2, -1, -1):
            for ci in range(s1):
                tab[ai, ci] += tab[ai + 1, ci]
        for ai in range(s0):
            for ci in range(1, s1):
                tab[ai, ci] += tab[ai, ci - 1]
        current += tab[scur[t] - slo[t], scur[t + 1] - slo[t + 1]]
        for yi in range(s1):
            y = slo[t + 1] + yi
            best = -1
            bd = 0
            bx = -1
            for xi in range(s0):
                x = slo[t] + xi
                if x > y:
                    break
                v0 = val[off[t] + xi]
                if v0 < 0:
                    continue
                piece = pw[y - left] - pw[x - left]
                if piece > cap or piece < floor:
                    continue
                v = v0 + tab[xi, yi]
                d = disp[off[t] + xi]
                if v > best or (v == best and d < bd):
                    best = v
                    bd = d
                    bx = xi
            if bx >= 0:
                val[off[t + 1] + yi] = best
                disp[off[t + 1] + yi] = bd + abs(y - scur[t + 1])
                back[off[t + 1] + yi] = bx
    out = cur.copy()
    end = off[ns - 1]
    if val[end] < 0:
        return out, 0, False
    xi = back[end]
    for s in range(ns - 2, 0, -1):
        out[s - 1] = slo[s] + xi
        xi = back[off[s] + xi]
    return out, val[end] - current, True


def chain_dp(p, q, ew, pw, left, right, lo, hi, cur, cap, floor):
    """Best positions for a chain of consecutive boundaries between two fixed ones.

    Parameters
    ----------
    p, q : ndarray of int64
        Line positions of the edges' endpoints, ``p < q``; only edges with
        ``left ≤ p`` and ``q < right`` matter (others may be passed and are
        ignored where they cannot change).
    ew : ndarray of int64
        Integer edge weights aligned with ``p``; empty means unit weights.
    pw : ndarray of int64, shape (right − left + 1,)
        Prefix node weights: ``pw[x − left]`` = weight of positions ``< x``
        (any constant offset works).
    left, right : int
        Positions of the fixed boundaries around the chain.
    lo, hi, cur : ndarray of int64, shape (L,)
        Window of each free boundary and its current position,
        ``left ≤ lo ≤ cur ≤ hi ≤ right``, windows non-decreasing.
    cap, floor : int
        Every piece between ``left`` and ``right`` must weigh ``floor .. cap``.

    Returns
    -------
    positions : ndarray of int64, shape (L,)
        New boundary positions (``cur`` when no choice keeps the rule).
    gain : int
        Reduction of the cut weight (exact, integer units). It can be negative
        only when ``cur`` itself breaks the rule and the DP repaired it.
    feasible : bool
        False when no choice within the windows keeps the rule.

    References
    ----------
    R. Bellman, *Dynamic Programming*, Princeton University Press, 1957.
    K. Aydin, M. Bateni and V. Mirrokni, "Distributed balanced partitioning via
    linear embedding", WSDM 2016.
    """
    lo = np.asarray(lo, dtype=np.int64)
    hi = np.asarray(hi, dtype=np.int64)
    cur = np.asarray(cur, dtype=np.int64)
    if not (lo.shape == hi.shape == cur.shape) or lo.ndim != 1:
        raise ParameterError("lo, hi and cur must be one-dimensional arrays of one length")
    if lo.size and (lo[0] < left or hi[-1] > right or np.any(lo > cur) or np.any(cur > hi)
                    or np.any(np.diff(lo) < 0) or np.any(np.diff(hi) < 0)):
        raise ParameterError("windows must satisfy left <= lo <= cur <= hi <= right, non-decreasing")
    pw = np.asarray(pw, dtype=np.int64)
    if pw.shape != (right - left + 1,):
        raise ParameterError(f"pw must have {right - left + 1} entries, got {pw.shape}")
    out, gain, ok = _chain_dp_kernel(
        np.asarray(p, dtype=np.int64), np.asarray(q, dtype=np.int64), np.asarray(ew, dtype=np.int64),
        pw, int(left), int(right), lo, hi, cur, int(cap), int(floor),
    )
    return out, int(gain), bool(ok)


def line_edges(graph, order, weights):
    """Every edge once as line positions ``p < q`` (in CSR order of the lower node id).

    Parameters
    ----------
    graph : partition.graph.Graph
    order : ndarray of int, shape (n,)
        ``order[x]`` is the node at position ``x``.
    weights : ndarray of int64, shape (2 m,) or (0,)
        Integer weight per CSR entry (empty: unit).

    Returns
    -------
    p, q : ndarray of int64
    ew : ndarray of int64
        Weights aligned with ``p`` (empty for unit weights).
    """
    pos = positions(order)
    src = np.repeat(np.arange(graph.n, dtype=np.int64), np.diff(graph.indptr))
    keep = src < graph.indices
    pu = pos[src[keep]]
    pv = pos[graph.indices[keep]]
    ew = weights[keep] if weights.shape[0] else _EMPTY_I64
    return np.minimum(pu, pv), np.maximum(pu, pv), ew


def windows(boundaries, n, w):
    """Window ``[lo_j, hi_j]`` of every boundary (module docstring).

    Parameters
    ----------
    boundaries : ndarray of int64, shape (k − 1,)
    n : int
        Number of positions.
    w : int
        Half-width.

    Returns
    -------
    lo, hi : ndarray of int64, shape (k − 1,)
    """
    b = np.concatenate(([0], np.asarray(boundaries, dtype=np.int64), [n]))
    c = b[1:-1]
    lo = np.maximum(c - w, (b[:-2] + c + 1) // 2)
    hi = np.minimum(c + w, (c + b[2:]) // 2)
    return lo, hi


def window_dp_round(p, q, ew, prefix, boundaries, free, w, cap, floor):
    """One round: re-place the free boundaries, chain by chain.

    Parameters
    ----------
    p, q, ew : ndarray of int64
        The edges as line positions (:func:`line_edges`).
    prefix : ndarray of int64, shape (n + 1,)
        Prefix node weights along the line.
    boundaries : ndarray of int64, shape (k − 1,)
        Current boundaries (not modified).
    free : ndarray of bool, shape (k − 1,)
        Which boundaries may move in this round. Maximal runs of consecutive
        free boundaries are chains; each is solved exactly by :func:`chain_dp`
        from the start-of-round state, so the result does not depend on the
        order in which the chains are solved.
    w : int
        Window half-width.
    cap, floor : int
        Balance limits.

    Returns
    -------
    boundaries : ndarray of int64, shape (k − 1,)
    gain : int
        Reduction of the integer cut weight.

    Raises
    ------
    ParameterError
        If the boundaries are not non-decreasing positions in ``[0, n]``, the
        mask has the wrong shape, ``w < 0`` or ``floor > cap``.

    References
    ----------
    K. Aydin, M. Bateni and V. Mirrokni, "Distributed balanced partitioning via
    linear embedding", WSDM 2016.
    """
    b = np.asarray(boundaries, dtype=np.int64)
    free = np.asarray(free, dtype=bool)
    if free.shape != b.shape:
        raise ParameterError(f"free has shape {free.shape}, boundaries {b.shape}")
    n = prefix.shape[0] - 1
    k = b.shape[0] + 1
    if b.size and (b.min() < 0 or b.max() > n or np.any(np.diff(b) < 0)):
        raise ParameterError(f"boundaries must be non-decreasing positions in [0, {n}]")
    if w < 0 or floor > cap:
        raise ParameterError(f"need w >= 0 and floor <= cap, got w = {w}, floor = {floor}, cap = {cap}")
    new = b.copy()
    if not free.any() or w < 1:
        return new, 0
    lo, hi = windows(b, n, w)
    full = np.concatenate(([0], b, [n]))
    fixed = np.concatenate(([0], np.flatnonzero(~free) + 1, [k]))  # indices into full
    fpos = full[fixed]
    # lookup tables over positions 0..n: index of the last fixed boundary at or before x,
    # and how many free windows end at or before x (so the next one is the first with hi > x)
    seg_of = np.cumsum(np.bincount(fpos, minlength=n + 1)) - 1
    flo, fhi = lo[free], hi[free]
    next_win = np.minimum(np.cumsum(np.bincount(fhi, minlength=n + 1)), flo.shape[0] - 1)
    seg_p = seg_of[p]
    widx = next_win[p]
    # An edge matters iff its span (p, q] crosses no fixed boundary, meets a free window
    # and contains none entirely (a boundary always inside the span keeps the edge cut).
    # The first window it can meet is widx; it contains widx when p < lo, else it can
    # only contain the next window.
    fhi_next = np.append(fhi[1:], np.int64(n + 1))
    limit = np.where(p < flo[widx], fhi[widx], fhi_next[widx])
    variable = (seg_p == seg_of[q]) & (fhi[widx] > p) & (flo[widx] <= q) & (q < limit)
    vp, vq, vseg = p[variable], q[variable], seg_p[variable]
    vw = ew[variable] if ew.shape[0] else _EMPTY_I64
    by_seg = np.argsort(vseg, kind="stable")
    vp, vq, vseg = vp[by_seg], vq[by_seg], vseg[by_seg]
    if vw.shape[0]:
        vw = vw[by_seg]
    starts = np.searchsorted(vseg, np.arange(fixed.shape[0] + 1), side="left")
    gain = 0
    for c in range(fixed.shape[0] - 1):
        i0, i1 = fixed[c], fixed[c + 1]
        if i1 - i0 < 2:
            continue
        js = np.arange(i0, i1 - 1)  # boundaries i0+1 .. i1-1 of `full` are b[i0 .. i1-2]
        left, right = int(full[i0]), int(full[i1])
        e0, e1 = starts[c], starts[c + 1]
        out, g, _ = _chain_dp_kernel(
            vp[e0:e1], vq[e0:e1], vw[e0:e1] if vw.shape[0] else _EMPTY_I64,
            prefix[left:right + 1], left, right, lo[js], hi[js], b[js], int(cap), int(floor),
        )
        new[js] = out
        gain += g
    return new, int(gain)


def refine_window(graph, order, cut, k, rule, w=None, chain_length=1, max_rounds=16):
    """Improve a line cut by moving its boundaries within small windows.

    Parameters
    ----------
    graph : partition.graph.Graph
    order : ndarray of int, shape (n,)
        ``order[x]`` is the node at position ``x``.
    cut : ndarray of int
        Either the shards (length ``n``; contiguous pieces of the line in shard
        order) or the ``k − 1`` boundaries.
    k : int
    rule : partition.balance.BalanceRule
    w : int or None
        Window half-width; ``None`` means :func:`default_window`.
    chain_length : int
        Longest chain of boundaries freed together in a round (1: every other
        boundary; ``0``: all boundaries in one global chain, a driver-side
        option).
    max_rounds : int
        Most rounds. Refinement stops earlier once two consecutive rounds (one
        round for ``chain_length=0``) move nothing, since by then every boundary
        has been optimal given its neighbours.

    Returns
    -------
    parts : ndarray of int32, shape (n,)
    stats : dict
        ``cut_before``, ``cut_after`` (graph units), ``rounds``, ``gains`` per
        round, ``boundaries`` (final), ``moved`` (boundaries that changed), ``w``.

    Raises
    ------
    ParameterError
        If the inputs are malformed or ``cut`` is not a line cut.

    References
    ----------
    K. Aydin, M. Bateni and V. Mirrokni, "Distributed balanced partitioning via
    linear embedding", WSDM 2016.
    """
    order = check_order(order)
    n = order.shape[0]
    if order.shape[0] != graph.n:
        raise ParameterError(f"order has {order.shape[0]} positions, the graph {graph.n} nodes")
    if k != rule.k:
        raise ParameterError(f"k = {k} but the balance rule is for k = {rule.k}")
    if chain_length < 0 or max_rounds < 0:
        raise ParameterError("chain_length and max_rounds must be >= 0")
    cut = np.asarray(cut)
    if cut.shape == (n,):
        start = boundaries_from_parts(order, cut, k)
    elif cut.shape == (k - 1,):
        start = cut.astype(np.int64)
        parts_from_boundaries(order, start, k)  # validates
    else:
        raise ParameterError(f"cut must be {n} shards or {k - 1} boundaries, got shape {cut.shape}")
    w = default_window(n, k) if w is None else int(w)
    if w < 0:
        raise ParameterError(f"window half-width must be >= 0, got {w}")
    weights, scale = cut_weights(graph.edge_weights)
    nw = graph.node_weight_array()
    prefix = np.zeros(n + 1, dtype=np.int64)
    np.cumsum(nw[order], out=prefix[1:])
    p, q, ew = line_edges(graph, order, weights)
    before = cut_total(graph.indptr, graph.indices, weights, parts_from_boundaries(order, start, k))
    b, gains = window_rounds(
        start.copy(), k,
        lambda bb, free: window_dp_round(p, q, ew, prefix, bb, free, w, rule.cap, rule.floor),
        chain_length, max_rounds,
    )
    total = sum(gains)
    gains = [g / scale for g in gains]
    parts = parts_from_boundaries(order, b, k)
    stats = {
        "cut_before": before / scale,
        "cut_after": (before - total) / scale,
        "rounds": len(gains),
        "gains": gains,
        "boundaries": b,
        "moved": int(np.count_nonzero(b != start)),
        "w": w,
    }
    return parts, stats
