"""Size-constrained label propagation: rounds of balanced moves towards the neighbours' shard.

In the spirit of Ugander & Backstrom (WSDM 2013): start from a balanced
assignment (LDG by default) and repeat rounds. In a round every node looks at
the assignment as it stood at the start of the round and *wants* the shard
holding most of its neighbour weight (ties: stay, else the lowest index); its
gain is that weight minus the weight it has on its own shard. Only moves with
positive gain are candidates. How many of them move is decided so that
every shard keeps the balance rule:

* unit node weights — the paper's linear program: for each ordered shard
  pair ``(a, b)`` the gain of moving the best ``x`` candidates ``a → b`` is a
  concave piecewise-linear function of ``x`` (a few pieces of equal length,
  each worth its mean gain); maximise the total over all pairs subject to each
  shard's new size lying in ``[⌊n/k⌋, ⌈n/k⌉]`` (ε = 0) or ``[0, cap]``. The
  constraints form a node–arc incidence matrix, so the simplex optimum
  (``scipy.optimize.linprog``, HiGHS dual simplex) is integral. Moves may
  form cycles ``a → b → c → a``, which pairwise swaps alone cannot;
* weighted nodes — a compiled greedy in order of decreasing gain: a one-way
  move when the target stays within the cap, else a swap with the best
  unmoved candidate going the other way when both shards stay within it.

Ties in gain are broken by a seeded random key.

Moves decided in parallel can undo each other's gains, so the cut is measured
after each round and the best assignment seen is returned (never worse than
the start). The rounds stop after ``max_rounds``, when no candidate can move,
or after ``patience`` rounds without a better cut. Each round costs O(m) in
vectorised numpy/scipy plus a linear program with at most ``segments · k(k−1)``
variables (or the greedy, O(candidates)).
"""

from __future__ import annotations

import numba
import numpy as np
import scipy.sparse as sp
from scipy.optimize import linprog

from partition.baselines.repair import prepare, shard_loads
from partition.baselines.simple import range_partition
from partition.baselines.streaming import ldg
from partition.errors import ParameterError

__all__ = ["label_propagation", "desired_moves", "cut_weight"]


def cut_weight(graph, parts, rows=None):
    """Total weight of the edges whose endpoints are on different shards.

    ``rows`` may pass ``graph.rows()`` when the caller already has it.
    """
    src = graph.rows() if rows is None else rows
    crossing = parts[src] != parts[graph.indices]
    if graph.edge_weights is None:
        return float(np.count_nonzero(crossing) // 2)
    return float(graph.edge_weights[crossing].sum() / 2.0)


def desired_moves(graph, parts, k, rows=None):
    """Each node's preferred shard and the gain of moving there.

    Parameters
    ----------
    graph : Graph
    parts : ndarray of int64, shape (n,)
    k : int
    rows : ndarray or None
        ``graph.rows()`` when the caller already has it.

    Returns
    -------
    nodes : ndarray of int64
        Nodes with a positive gain.
    target : ndarray of int64
        The shard each wants: most neighbour weight, lowest index on ties.
    gain : ndarray of float64
        Neighbour weight on ``target`` minus neighbour weight on the own shard.
    """
    n = graph.n
    if rows is None:
        rows = graph.rows()
    # copy=True: sum_duplicates works in place, and the data and indptr arrays are the graph's own
    conn = sp.csr_matrix(
        (graph.edge_weight_array(), parts[graph.indices], graph.indptr), shape=(n, k), copy=True
    )
    conn.sum_duplicates()  # also sorts the shard numbers within each row
    ptr, cols, vals = conn.indptr, conn.indices, conn.data
    nnz_rows = np.repeat(np.arange(n, dtype=np.int64), np.diff(ptr))
    if vals.shape[0] == 0:
        empty = np.empty(0, dtype=np.int64)
        return empty, empty, np.empty(0, dtype=np.float64)
    nonempty = np.flatnonzero(np.diff(ptr) > 0)
    best = np.zeros(n, dtype=np.float64)
    best[nonempty] = np.maximum.reduceat(vals, ptr[nonempty])
    own = np.zeros(n, dtype=np.float64)
    mine = cols == parts[nnz_rows]
    own[nnz_rows[mine]] = vals[mine]
    wants = best > own
    # lowest shard among those holding the maximum
    top = np.flatnonzero((vals == best[nnz_rows]) & wants[nnz_rows])
    nodes, first = np.unique(nnz_rows[top], return_index=True)
    target = cols[top[first]].astype(np.int64)
    return nodes, target, best[nodes] - own[nodes]


def label_propagation(graph, k, eps=0.0, seed=0, order="bfs", start="ldg", max_rounds=10, patience=2,
                      segments=8, progress=None):
    """Balanced label propagation from a balanced start.

    Parameters
    ----------
    graph : Graph
    k : int
    eps : float
        Allowed imbalance ε.
    seed : int
        Seed of the start (LDG's random order) and of the tie-breaking keys.
    order : {"bfs", "dfs", "random", "given"} or array of int
        Order of the LDG start.
    start : {"ldg", "range"} or ndarray
        The balanced start; an array must already keep the balance rule.
    max_rounds : int
        At most this many rounds.
    patience : int
        Stop after this many rounds in a row without a better cut.
    segments : int
        Pieces of the piecewise-linear gain of each shard pair in the linear
        program (unit weights).
    progress : callable or None
        Called after every round with ``{"stage": "labelprop", "round": r,
        "moved": nodes, "cut": weight}`` (the engines' round rows, see
        :mod:`partition.progress`).

    Returns
    -------
    ndarray of int64, shape (n,)
        The assignment with the smallest cut seen; keeps
        ``balance_rule(graph.node_weights, k, eps, n)``.

    Raises
    ------
    ParameterError
        Bad ``k``, ``eps``, ``seed``, ``order``, ``max_rounds``, or a start
        array that is not a valid balanced assignment.

    References
    ----------
    J. Ugander and L. Backstrom, "Balanced label propagation for partitioning
    massive graphs", WSDM 2013.
    """
    rule, w, seed = prepare(graph, k, eps, seed)
    k = rule.k
    if int(max_rounds) != max_rounds or max_rounds < 0:
        raise ParameterError(f"max_rounds must be a whole number >= 0, got {max_rounds!r}")
    if int(segments) != segments or segments < 1:
        raise ParameterError(f"segments must be a whole number >= 1, got {segments!r}")
    if int(patience) != patience or patience < 1:
        raise ParameterError(f"patience must be a whole number >= 1, got {patience!r}")
    if isinstance(start, str):
        if start == "ldg":
            parts = ldg(graph, k, eps, seed, order)
        elif start == "range":
            parts = range_partition(graph, k, eps, seed)
        else:
            raise ParameterError(f"start must be 'ldg', 'range' or an array, got {start!r}")
    else:
        parts = np.asarray(start)
        if parts.shape != (graph.n,) or parts.dtype.kind not in "iu" or parts.min() < 0 or parts.max() >= k:
            raise ParameterError(f"a start assignment must be {graph.n} shard numbers in [0, {k})")
        parts = parts.astype(np.int64)
        if not rule.check(shard_loads(parts, w, k)):
            raise ParameterError("the start assignment does not keep the balance rule")

    rng = np.random.default_rng(seed)
    tiebreak = rng.random(graph.n)
    rows = graph.rows()
    unit = bool(np.all(w == 1))
    lo = np.full(k, rule.floor if rule.exact else 0, dtype=np.int64)
    hi = np.full(k, rule.cap, dtype=np.int64)
    best_parts, best_cut = parts.copy(), cut_weight(graph, parts, rows)
    stale = 0
    for round_no in range(1, int(max_rounds) + 1):
        nodes, target, gain = desired_moves(graph, parts, k, rows)
        if nodes.shape[0] == 0:
            break
        src = parts[nodes]
        loads = shard_loads(parts, w, k)
        if unit:
            moved = _grant_lp(src, target, gain, tiebreak[nodes], loads, lo, hi, k, segments)
        else:
            moved = _grant_greedy(src, target, gain, tiebreak[nodes], w[nodes], loads, k, rule)
        if moved is None or not moved.any():
            break
        parts = parts.copy()
        parts[nodes[moved]] = target[moved]
        cut = cut_weight(graph, parts, rows)
        if progress is not None:
            progress({"stage": "labelprop", "round": round_no, "moved": int(moved.sum()), "cut": float(cut)})
        if cut < best_cut:
            best_parts, best_cut, stale = parts, cut, 0
        else:
            stale += 1
            if stale >= patience:
                break
    return best_parts


def _grant_lp(src, dst, gain, tiebreak, loads, lo, hi, k, segments):
    """Unit weights: how many nodes move on each shard pair, by the linear program.

    Per ordered pair ``(a, b)`` the candidates, best gain first, are cut into at
    most ``segments`` runs; run ``j`` is a variable ``0 <= x_j <= len(run)``
    worth the run's mean gain per node (a concave piecewise-linear gain per
    pair, as in the paper). Maximise the total gain subject to every shard's
    new size staying within ``[lo, hi]``. The constraint matrix is a
    node–arc incidence matrix with integer bounds, so a simplex vertex is
    integral; the best ``x_j`` candidates of each run move.
    """
    nc = src.shape[0]
    pair = src * k + dst
    order = np.lexsort((tiebreak, -gain, pair))
    pair_sorted = pair[order]
    first = np.flatnonzero(np.concatenate(([True], pair_sorted[1:] != pair_sorted[:-1])))
    size = np.diff(np.append(first, nc))
    pos = np.arange(nc) - np.repeat(first, size)  # rank within the pair
    nseg = np.minimum(size, segments)
    # run index of each candidate: equal-count runs within its pair
    run_in_pair = (pos * np.repeat(nseg, size)) // np.repeat(size, size)
    run_offset = np.concatenate(([0], np.cumsum(nseg)[:-1]))
    run = np.repeat(run_offset, size) + run_in_pair
    nrun = int(nseg.sum())
    run_len = np.bincount(run, minlength=nrun)
    run_gain = np.bincount(run, weights=gain[order], minlength=nrun) / run_len
    run_src = np.zeros(nrun, dtype=np.int64)
    run_dst = np.zeros(nrun, dtype=np.int64)
    run_src[run] = src[order]
    run_dst[run] = dst[order]
    cols = np.arange(nrun)
    inc = sp.csr_matrix(
        (np.concatenate((np.ones(nrun), -np.ones(nrun))),
         (np.concatenate((run_dst, run_src)), np.concatenate((cols, cols)))),
        shape=(k, nrun),
    )
    a_ub = sp.vstack([inc, -inc]).tocsr()
    b_ub = np.concatenate((hi - loads, loads - lo)).astype(np.float64)
    res = linprog(-run_gain, A_ub=a_ub, b_ub=b_ub, bounds=np.column_stack((np.zeros(nrun), run_len)),
                  method="highs-ds")
    if res.status != 0:
        return None
    x = np.rint(res.x).astype(np.int64)
    if np.abs(res.x - x).max(initial=0.0) > 1e-6:
        return None  # not a vertex; take no moves rather than risk the balance
    run_start = np.concatenate(([0], np.cumsum(run_len)[:-1]))
    take = (np.arange(nc) - run_start[run]) < x[run]
    moved = np.zeros(nc, dtype=bool)
    moved[order[take]] = True
    new = loads + np.bincount(dst[moved], minlength=k) - np.bincount(src[moved], minlength=k)
    if np.any(new < lo) or np.any(new > hi):
        return None
    return moved


def _grant_greedy(src, dst, gain, tiebreak, wt, loads, k, rule):
    """Weighted nodes: one-way moves under the cap, else swaps, best gain first."""
    pick = np.lexsort((tiebreak, -gain))
    src, dst, wt = src[pick], dst[pick], wt[pick]
    pair = src * k + dst
    by_pair = np.argsort(pair, kind="stable")
    upair, gstart = np.unique(pair[by_pair], return_index=True)
    gend = np.append(gstart[1:], by_pair.shape[0])
    group = np.empty(src.shape[0], dtype=np.int64)
    group[by_pair] = np.repeat(np.arange(upair.shape[0]), gend - gstart)
    rev_key = (upair % k) * k + upair // k
    pos = np.minimum(np.searchsorted(upair, rev_key), upair.shape[0] - 1)
    rev = np.where(upair[pos] == rev_key, pos, -1)
    granted = _grant(src, dst, wt, by_pair, group, gstart, gend, rev, loads.copy(), rule.cap)
    moved = np.zeros(src.shape[0], dtype=bool)
    moved[pick[granted]] = True
    return moved


@numba.njit(cache=True, nogil=True)
def _grant(src, dst, wt, members, group, gstart, gend, rev, loads, cap):
    """Greedy move grants in candidate order: one-way within the cap, else swaps."""
    nc = src.shape[0]
    moved = np.zeros(nc, dtype=np.bool_)
    head = gstart.copy()
    for t in range(nc):
        if moved[t]:
            continue
        a = src[t]
        b = dst[t]
        w = wt[t]
        if loads[b] + w <= cap:
            loads[a] -= w
            loads[b] += w
            moved[t] = True
            continue
        g = rev[group[t]]
        if g < 0:
            continue
        while head[g] < gend[g] and moved[members[head[g]]]:
            head[g] += 1
        if head[g] == gend[g]:
            continue
        u = members[head[g]]
        wu = wt[u]
        if loads[a] - w + wu <= cap and loads[b] - wu + w <= cap:
            loads[a] += wu - w
            loads[b] += w - wu
            moved[t] = True
            moved[u] = True
            head[g] += 1
    return moved
