"""Shard relabelling: rename a new partition's shards so as few nodes as possible move.

A partitioner names its shards arbitrarily, so two runs over slowly changing
data can produce nearly the same shards under permuted names. Renaming the new
shards to maximise the node weight that stays on its old shard is an
assignment problem on the ``k_new × k_old`` overlap matrix (weight of the nodes
in new shard ``j`` and old shard ``i``), solved exactly by
``scipy.optimize.linear_sum_assignment`` (Kuhn 1955; scipy uses the
shortest-augmenting-path method of Crouse 2016). When the overlaps are whole
numbers, ties between optimal renamings go to the one that keeps the most
shards under their own name. New shards left without a partner
(``k_new > k_old``) take the unused names ``k_old, k_old + 1, ...`` in order
of their own id.
"""

from __future__ import annotations

import numpy as np
from scipy.optimize import linear_sum_assignment

from partition.errors import ParameterError, check_parts

__all__ = ["relabel_to_match", "overlap_matrix", "moved_fraction", "MAX_CELLS"]

MAX_CELLS = 1 << 24  # largest k_new · k_old for the dense assignment (128 MiB of float64)


def overlap_matrix(old_parts, new_parts, k_old, k_new, weights=None):
    """Weight of the nodes in each (new shard, old shard) pair.

    Parameters
    ----------
    old_parts, new_parts : array_like of int, shape (n,)
        Two partitions of the same nodes, values in ``[0, k_old)`` and ``[0, k_new)``.
    k_old, k_new : int
        Shard counts of the two partitions.
    weights : array_like of float, shape (n,), optional
        Non-negative finite node weights (default: every node weighs 1).

    Returns
    -------
    ndarray of float64, shape (k_new, k_old)

    Raises
    ------
    ParameterError
        Shapes differ, shard ids are out of range, or weights are negative or
        not finite.
    """
    old, new, w, k_old, k_new = _check(old_parts, new_parts, k_old, k_new, weights)
    if k_new * k_old > MAX_CELLS:
        raise ParameterError(
            f"k_new · k_old = {k_new * k_old} overlap cells is more than the dense assignment handles ({MAX_CELLS})"
        )
    cells = new * k_old + old
    return np.bincount(cells, weights=w, minlength=k_new * k_old).reshape(k_new, k_old)


def relabel_to_match(old_parts, new_parts, k_old, k_new, weights=None):
    """Rename the shards of ``new_parts`` to keep as much node weight in place as possible.

    Parameters
    ----------
    old_parts, new_parts : array_like of int, shape (n,)
        The current placement and a new partition of the same nodes (values in
        ``[0, k_old)`` and ``[0, k_new)``).
    k_old, k_new : int
        Shard counts (``k_old · k_new`` at most :data:`MAX_CELLS`).
    weights : array_like of float, shape (n,), optional
        Non-negative finite node weights (default: 1 each).

    Returns
    -------
    mapping : ndarray of int64, shape (k_new,)
        The new name of each new shard; a permutation of ``range(k_new)`` when
        ``k_new == k_old``. With ``k_new < k_old`` the names are ``k_new``
        distinct old names (the old shards left out are the ones to drain);
        with ``k_new > k_old`` every old name is used and the rest are
        ``k_old .. k_new − 1``.
    relabelled_parts : ndarray of int64, shape (n,)
        ``mapping[new_parts]``.

    Raises
    ------
    ParameterError
        As for :func:`overlap_matrix`.

    References
    ----------
    H. W. Kuhn, "The Hungarian method for the assignment problem", Naval
    Research Logistics Quarterly 2(1–2):83–97, 1955.
    D. F. Crouse, "On implementing 2D rectangular assignment algorithms",
    IEEE Transactions on Aerospace and Electronic Systems 52(4):1679–1696, 2016.
    """
    old, new, w, k_old, k_new = _check(old_parts, new_parts, k_old, k_new, weights)
    overlap = overlap_matrix(old, new, k_old, k_new, w)
    score = overlap
    if np.array_equal(overlap, np.rint(overlap)) and overlap.sum() * (min(k_old, k_new) + 1) < 2.0**52:
        # Prefer keeping names among equally good renamings: with whole-number overlaps,
        # overlap·(s+1) + [same name] ranks every strictly better overlap first (s ≥ #kept).
        score = overlap * float(min(k_old, k_new) + 1)
        d = np.arange(min(k_old, k_new))
        score[d, d] += 1.0
    rows, cols = linear_sum_assignment(score, maximize=True)
    mapping = np.full(k_new, -1, dtype=np.int64)
    mapping[rows] = cols
    spare = np.flatnonzero(mapping < 0)  # ascending new shard id
    mapping[spare] = np.arange(k_old, k_old + spare.size)
    return mapping, mapping[new]


def moved_fraction(old_parts, new_parts, weights=None):
    """Share of the node weight whose shard differs between two partitions.

    Parameters
    ----------
    old_parts, new_parts : array_like of int, shape (n,)
    weights : array_like of float, shape (n,), optional
        Non-negative finite node weights (default: 1 each).

    Returns
    -------
    float
        ``Σ w[old ≠ new] / Σ w``; 0.0 when the total weight is 0.

    Raises
    ------
    ParameterError
        Shapes differ or weights are negative or not finite.
    """
    old = _labels(old_parts, "old_parts")
    new = _labels(new_parts, "new_parts")
    if old.shape != new.shape:
        raise ParameterError(f"old_parts has {old.shape[0]} nodes but new_parts has {new.shape[0]}")
    w = _weights(weights, old.shape[0])
    moved = old != new
    if w is None:
        return float(moved.sum() / moved.size) if moved.size else 0.0
    total = float(w.sum())
    return float(w[moved].sum() / total) if total > 0 else 0.0


def _labels(parts, name):
    arr = np.asarray(parts)
    if arr.ndim != 1 or arr.dtype.kind not in "iu":
        raise ParameterError(f"{name} must be a one-dimensional integer array, got {arr.dtype} {arr.shape}")
    return arr.astype(np.int64, copy=False)


def _weights(weights, n):
    if weights is None:
        return None
    w = np.asarray(weights, dtype=np.float64)
    if w.shape != (n,):
        raise ParameterError(f"weights must hold one value per node ({n}), got shape {w.shape}")
    if not np.isfinite(w).all() or (w < 0).any():
        raise ParameterError("weights must be finite and non-negative")
    return w


def _check(old_parts, new_parts, k_old, k_new, weights):
    old = _labels(old_parts, "old_parts")
    new = _labels(new_parts, "new_parts")
    if old.shape != new.shape:
        raise ParameterError(f"old_parts has {old.shape[0]} nodes but new_parts has {new.shape[0]}")
    k_old, k_new = check_parts(k_old), check_parts(k_new)
    for arr, k, name in ((old, k_old, "old_parts"), (new, k_new, "new_parts")):
        if arr.size and (arr.min() < 0 or arr.max() >= k):
            bad = int(arr[(arr < 0) | (arr >= k)][0])
            raise ParameterError(f"{name} holds shard {bad}, outside 0..{k - 1}")
    return old, new, _weights(weights, old.shape[0]), k_old, k_new
