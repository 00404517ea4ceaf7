"""Schedules of disjoint shard pairs for pairwise refinement rounds.

A round is a list of disjoint pairs ``(a, b)`` with ``a < b``; no shard is in two
pairs of one round, so the pairs of a round can be refined independently (one
after another or in parallel) with the same result.

Three schedules:

* :func:`line_pairs` — neighbours on the line: the even round pairs
  ``(0, 1), (2, 3), ...``, the odd round ``(1, 2), (3, 4), ...``. Pieces of a
  cut line touch their line neighbours most.
* :func:`round_robin` — every pair once in ``k − 1`` rounds (``k`` even; one
  shard sits out each round when ``k`` is odd), by the circle method of
  round-robin tournament scheduling (a classical construction; see e.g.
  E. Lucas, *Récréations mathématiques*, 1883, or any combinatorics text).
* :func:`matched_pairs` — a greedy matching of the shard-to-shard cut matrix,
  heaviest pair first (ties by pair index): the pairs with most to gain.
"""

from __future__ import annotations

import numpy as np

__all__ = ["line_pairs", "round_robin", "matched_pairs"]


def line_pairs(k, parity):
    """Pairs of consecutive shards on the line: ``parity`` 0 → (0,1),(2,3)...; 1 → (1,2),..."""
    return [(a, a + 1) for a in range(parity % 2, k - 1, 2)]


def round_robin(k):
    """All ``k(k−1)/2`` pairs in rounds of disjoint pairs (circle method).

    Returns
    -------
    list of list of (int, int)
        ``k − 1`` rounds when ``k`` is even, ``k`` rounds when odd.
    """
    players = list(range(k))
    if k % 2:
        players.append(-1)  # a bye
    size = len(players)
    rounds = []
    for _ in range(size - 1):
        pairs = []
        for i in range(size // 2):
            a, b = players[i], players[size - 1 - i]
            if a >= 0 and b >= 0:
                pairs.append((min(a, b), max(a, b)))
        rounds.append(sorted(pairs))
        players = [players[0]] + [players[-1]] + players[1:-1]
    return rounds


def matched_pairs(cut_matrix, min_weight=0.0):
    """Greedy maximum-weight matching of shards by the weight cut between them.

    Parameters
    ----------
    cut_matrix : ndarray, shape (k, k)
        Symmetric; entry ``(a, b)`` is the edge weight between shards a and b.
    min_weight : float
        Pairs with at most this much cut weight are left out.

    Returns
    -------
    list of (int, int)
        Disjoint pairs, heaviest first; ties broken by ``(a, b)`` ascending.
    """
    c = np.asarray(cut_matrix)
    k = c.shape[0]
    a, b = np.triu_indices(k, 1)
    w = c[a, b]
    keep = w > min_weight
    a, b, w = a[keep], b[keep], w[keep]
    order = np.lexsort((b, a, -w))
    used = np.zeros(k, dtype=bool)
    out = []
    for i in order:
        x, y = int(a[i]), int(b[i])
        if not used[x] and not used[y]:
            used[x] = used[y] = True
            out.append((x, y))
    return out
