"""The round drivers of the unit-based refinement steps, written once for both engines.

A unit-based step (pairwise Fiduccia–Mattheyses moves, min-cut repair,
boundary swaps, window DP) is a loop over rounds; each round is a set of
independent units (disjoint shard pairs, or disjoint chains of line
boundaries) whose results do not depend on the order they run in. The loop —
which units a round takes, which are set aside, when to stop — is the same
whichever engine runs the units, so it lives here, and an engine supplies only
the bulk operations:

``cut_matrix(parts)``
    The ``k × k`` integer matrix of edge weight between every two shards
    (zero diagonal), for the schedule and the stopping rules.
``run_round(state, units)``
    One round of units from the start-of-round state.

The in-memory engine runs the units over the CSR arrays
(:mod:`partition.refine.fm`, :mod:`partition.refine.flow`,
:mod:`partition.refine.swaps`, :mod:`partition.refine.window_dp`); the Spark
engine runs each unit in a Spark task over the edge blocks
(:mod:`partition.spark.refine`). Same rounds, same kernels, same integers:
the same result.

References
----------
C. M. Fiduccia and R. M. Mattheyses, "A linear-time heuristic for improving
network partitions", DAC 1982 (the pair units); B. W. Kernighan and S. Lin,
Bell System Technical Journal 49(2), 1970 (swaps); K. Aydin, M. Bateni and
V. Mirrokni, "Distributed balanced partitioning via linear embedding", WSDM
2016 (window rounds over the line).
"""

from __future__ import annotations

import numpy as np

from partition.errors import ParameterError

__all__ = ["PAIR_SCHEDULES", "SWAP_SCHEDULES", "settle", "pair_rounds", "swap_rounds", "window_rounds", "free_mask"]

PAIR_SCHEDULES = ("round_robin", "line", "matched")
SWAP_SCHEDULES = ("line", "matched", "round_robin")


def settle(settled, pairs, changed):
    """Mark unchanged pairs settled, then reopen every pair touching a shard that changed (in place)."""
    for (a, b), ch in zip(pairs, changed):
        if not ch:
            settled[a, b] = settled[b, a] = True
    for (a, b), ch in zip(pairs, changed):
        if ch:
            settled[[a, b], :] = False
            settled[:, [a, b]] = False


def pair_rounds(parts, k, cut_matrix, run_round, schedule="round_robin", max_rounds=None, seed=0, tol=0.0,
                on_round=None):
    """Drive rounds of disjoint shard pairs, skipping pairs known to gain nothing.

    Each round takes its pairs from ``schedule`` (:mod:`partition.refine.schedule`):
    a seeded order of the round-robin rounds, line neighbours (alternating
    parity), or a greedy matching of the start-of-round cut matrix. A pair is
    *settled* once a unit on it changed nothing; it stays settled until a unit
    changes one of its two shards. A unit's result depends only on the nodes of
    its two shards (see :mod:`partition.refine.fm`), so skipping a settled pair
    changes no result; the matching is taken over unsettled pairs only, so the
    matched schedule moves on to other pairs. Pairs with no cut edge are
    skipped. The cut matrix is asked for again only after a round changed a
    shard.

    Parameters
    ----------
    parts : ndarray of int64, shape (n,)
    k : int
    cut_matrix : callable
        ``cut_matrix(parts) -> k × k`` integer array (the unit weights).
    run_round : callable
        ``run_round(parts, pairs) -> (parts, gains, changed)`` with one gain and
        one changed flag per pair.
    schedule : {"round_robin", "line", "matched"}
    max_rounds : int, optional
        Default: one round-robin tour (``k − 1`` or ``k`` rounds) for
        ``round_robin``, ``k`` for ``matched``, 4 for ``line``.
    seed : int
        Orders the round-robin rounds (``numpy.random.default_rng(seed)``).
    tol : float, default 0
        Stop after two rounds in a row whose gain was at most ``tol`` times the
        cut at the start of the round (integer comparison of the gain with
        ``tol · cut``; 0 turns the rule off: only rounds that change nothing
        count then).
    on_round : callable or None
        Called after each round with ``{"round", "pairs", "changed", "gain"}``.

    Returns
    -------
    parts : ndarray of int64
    rounds : list of dict
        ``pairs`` run and summed ``gain`` of each round.

    Raises
    ------
    ParameterError
        For an unknown schedule.
    """
    from partition.refine.schedule import line_pairs, matched_pairs, round_robin

    if schedule not in PAIR_SCHEDULES:
        raise ParameterError(f"unknown schedule {schedule!r}; choose one of {', '.join(PAIR_SCHEDULES)}")
    tour = round_robin(k)
    perm = np.random.default_rng(seed).permutation(len(tour))
    if max_rounds is None:
        max_rounds = {"round_robin": len(tour), "matched": k, "line": 4}[schedule]
    settled = np.zeros((k, k), dtype=bool)
    rounds, idle, low, cm = [], 0, 0, None
    for r in range(int(max_rounds)):
        if cm is None:
            cm = cut_matrix(parts)
        cut_now = int(cm.sum()) // 2
        live = (cm > 0) & ~settled
        if not live.any():
            break
        if schedule == "round_robin":
            pairs = tour[perm[r % len(tour)]]
        elif schedule == "line":
            pairs = line_pairs(k, r)
        else:
            pairs = matched_pairs(np.where(live, cm, 0))
        pairs = [(a, b) for a, b in pairs if live[a, b]]
        parts, gains, changed = run_round(parts, pairs)
        settle(settled, pairs, changed)
        if any(changed):
            cm = None
        rounds.append({"pairs": len(pairs), "gain": sum(gains)})
        if on_round is not None:
            on_round({"round": r + 1, "pairs": len(pairs), "changed": int(sum(changed)), "gain": int(sum(gains))})
        idle = idle + 1 if not any(changed) else 0
        if schedule == "line" and idle >= 2:
            break
        low = low + 1 if tol > 0 and sum(gains) <= tol * cut_now else 0
        if low >= 2:
            break
    return parts, rounds


def _sweep(kind, k):
    """The rounds of one sweep of a fixed swap schedule."""
    from partition.refine import schedule as _schedule

    if kind == "line":
        return [_schedule.line_pairs(k, 0), _schedule.line_pairs(k, 1)]
    return _schedule.round_robin(k)


def swap_rounds(parts, k, cut, cut_matrix, run_round, schedule="matched", max_rounds=20, tol=1e-3, on_round=None):
    """Drive rounds of boundary-swap units (:mod:`partition.refine.swaps`).

    ``"line"`` and ``"round_robin"``: after each sweep (the two parities;
    every pair once) the rounds stop when the sweep removed at most ``tol``
    times the cut it started from. ``"matched"``: each round matches the
    shard-to-shard cut greedily (heaviest first) over the pairs not set aside;
    a pair whose unit removed at most ``tol`` times the cut between its two
    shards is set aside until a unit moves nodes of one of its shards; the
    rounds stop when no pair with cut edges is left. The cut matrix is asked
    for again only after a round moved nodes.

    Parameters
    ----------
    parts : ndarray of int, shape (n,)
    k : int
    cut : int or None
        Integer cut of ``parts`` (the unit weights); ``None``: half the sum of
        ``cut_matrix(parts)``, which the first round then reuses.
    cut_matrix : callable
        ``cut_matrix(parts) -> k × k`` integer array (``"matched"`` only).
    run_round : callable
        ``run_round(parts, pairs) -> (parts, gains, moved)``: the new shards,
        and per pair the integer cut reduction and the number of nodes moved.
    schedule : {"line", "matched", "round_robin"}
    max_rounds : int
    tol : float
    on_round : callable or None
        Called after each round with ``{"round", "pairs", "moved", "gain"}``.

    Returns
    -------
    parts : ndarray
    stats : dict
        ``rounds``, ``moved`` (node moves summed over rounds), ``gains`` (integer
        cut reduction of each round), ``cut`` (integer cut at the end).
    """
    stats = {"rounds": 0, "moved": 0, "gains": []}
    stale = np.zeros((k, k), dtype=bool)
    mat = None
    if cut is None:
        mat = cut_matrix(parts)
        cut = int(mat.sum()) // 2
    while stats["rounds"] < max_rounds and cut > 0 and k > 1:
        start = cut
        if schedule == "matched":
            if mat is None:
                mat = cut_matrix(parts)
            sweep = [_matched(mat, stale)]
            if not sweep[0]:
                break
        else:
            sweep = _sweep(schedule, k)
        for pairs in sweep:
            if stats["rounds"] >= max_rounds:
                break
            if not pairs:
                continue
            parts, gains, moved = run_round(parts, pairs)
            cut -= sum(gains)
            stats["rounds"] += 1
            stats["moved"] += sum(moved)
            stats["gains"].append(sum(gains))
            if on_round is not None:
                on_round({"round": stats["rounds"], "pairs": len(pairs), "moved": int(sum(moved)),
                          "gain": int(sum(gains))})
            if schedule == "matched":
                for (a, b), mv in zip(pairs, moved):
                    if mv:  # a changed shard may pair well again with anyone
                        stale[[a, b], :] = False
                        stale[:, [a, b]] = False
                for (a, b), g in zip(pairs, gains):
                    if g <= tol * mat[a, b]:
                        stale[a, b] = stale[b, a] = True
                if any(moved):
                    mat = None
        if schedule != "matched" and (start - cut <= tol * start or start == cut):
            break
    stats["cut"] = cut
    return parts, stats


def _matched(mat, stale):
    from partition.refine.schedule import matched_pairs

    return matched_pairs(np.where(stale, 0, mat))


def free_mask(k, round_index, chain_length):
    """Which of the ``k - 1`` boundaries a window-DP round may move, as a boolean array.

    All but every (L+1)-th boundary (L = ``chain_length``), the fixed ones
    shifted each round so that every boundary moves in some round; all are
    free when ``chain_length`` is 0.
    """
    j = np.arange(1, k, dtype=np.int64)
    if chain_length == 0:
        return np.ones(k - 1, dtype=bool)
    period = chain_length + 1
    shift = max(1, period // 2)
    return (j + round_index * shift) % period != 0


def window_rounds(boundaries, k, run_round, chain_length=1, max_rounds=16, on_round=None):
    """Drive the window-DP rounds over the ``k − 1`` boundaries of a line cut.

    Round ``r`` frees the boundaries of :func:`free_mask` ``(k, r,
    chain_length)``; ``run_round(boundaries, free) -> (boundaries, gain)``
    solves every chain of free boundaries. The rounds stop after
    ``max_rounds``, or once two consecutive rounds (one for
    ``chain_length=0``, a single global chain) move nothing: by then every
    boundary has been optimal given its neighbours.

    Returns
    -------
    boundaries : ndarray of int64
    gains : list of int
        Integer cut reduction of each round.
    """
    b = np.asarray(boundaries, dtype=np.int64)
    gains, idle = [], 0
    for r in range(max_rounds if k > 1 else 0):
        nb, g = run_round(b, free_mask(k, r, chain_length))
        idle = idle + 1 if np.array_equal(nb, b) else 0
        if on_round is not None:
            on_round({"round": r + 1, "moved": int(np.count_nonzero(nb != b)), "gain": int(g)})
        b = nb
        gains.append(int(g))
        if idle >= (1 if chain_length == 0 else 2):
            break
    return b, gains
