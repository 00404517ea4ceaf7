"""The balanced line cut: k contiguous pieces of equal node weight.

The linear embedding puts every node at a position on a line (``order[p]`` is
the node at position ``p``); cutting that line into ``k`` contiguous pieces of
(nearly) equal weight gives the first partition, which refinement then improves
(Aydin, Bateni & Mirrokni, "Distributed balanced partitioning via linear
embedding", WSDM 2016).

A cut is the vector of its ``k − 1`` boundaries ``b_1 ≤ … ≤ b_{k−1}`` (positions
on the line); with ``b_0 = 0`` and ``b_k = n``, piece ``j`` is the positions
``b_j .. b_{j+1} − 1``. :func:`boundaries_from_parts` and
:func:`parts_from_boundaries` convert between the two forms.

The rule. With prefix weights ``P(p)`` (weight of positions ``< p``), total
``W`` and targets ``T_j = ⌈j·W/k⌉``, boundary ``b_j`` (``0 < j < k``) is the
first position where the prefix weight reaches the target: the smallest ``p``
with ``P(p) ≥ T_j``.

*Unit weights.* ``P(p) = p``, so ``b_j = ⌈j·n/k⌉`` and piece ``j`` has
``⌈(j+1)n/k⌉ − ⌈jn/k⌉`` nodes, which is ``⌊n/k⌋`` or ``⌈n/k⌉`` (since
``⌈x⌉ + ⌊y⌋ ≤ ⌈x + y⌉ ≤ ⌈x⌉ + ⌈y⌉``); exactly ``n mod k`` pieces get the
ceiling, spread evenly along the line (Bresenham-style), not bunched at the
start as in ``numpy.array_split``.

*The bound.* Every piece weighs at most ``⌈W/k⌉ + w_max − 1`` (the ε = 0 cap of
:mod:`partition.balance`). Proof: targets are non-decreasing, so the boundaries
are too and the pieces are well defined. For ``j < k − 1``, if ``b_{j+1} = 0``
the piece is empty; otherwise minimality of ``b_{j+1}`` gives
``P(b_{j+1} − 1) ≤ T_{j+1} − 1`` (integers), and adding the one node at
position ``b_{j+1} − 1`` gives ``P(b_{j+1}) ≤ T_{j+1} − 1 + w_max``. Also
``P(b_j) ≥ T_j`` (for ``j = 0``, ``P(0) = 0 = T_0``). So the piece weighs
``P(b_{j+1}) − P(b_j) ≤ T_{j+1} − T_j + w_max − 1 ≤ ⌈W/k⌉ + w_max − 1``, using
``⌈(j+1)W/k⌉ ≤ ⌈jW/k⌉ + ⌈W/k⌉``. The last piece weighs
``W − P(b_{k−1}) ≤ T_k − T_{k−1} ≤ ⌈W/k⌉``. ∎ Pieces may be empty when weights
are zero or very uneven; their weights still obey the bound.
"""

from __future__ import annotations

import numpy as np

from partition.balance import balance_rule
from partition.errors import ParameterError, check_imbalance, check_parts

__all__ = [
    "line_cut",
    "cut_boundaries",
    "boundaries_from_parts",
    "parts_from_boundaries",
    "positions",
    "check_order",
]


def check_order(order):
    """Validate a line order: a permutation of ``0..n−1``.

    Parameters
    ----------
    order : array_like of int, shape (n,)

    Returns
    -------
    ndarray of int64

    Raises
    ------
    ParameterError
        If ``order`` is empty, not one-dimensional integers, or not a permutation.
    """
    order = np.asarray(order)
    if order.ndim != 1 or order.dtype.kind not in "iu":
        raise ParameterError("order must be a one-dimensional integer array")
    n = order.shape[0]
    if n == 0:
        raise ParameterError("order is empty")
    seen = np.zeros(n, dtype=bool)
    if order.min() < 0 or order.max() >= n:
        raise ParameterError(f"order must be a permutation of 0..{n - 1}")
    seen[order] = True
    if not seen.all():
        raise ParameterError(f"order must be a permutation of 0..{n - 1} (some nodes repeat)")
    return order.astype(np.int64, copy=False)


def _check_weights(node_weights, n):
    if node_weights is None:
        return None
    w = np.asarray(node_weights)
    if w.shape != (n,):
        raise ParameterError(f"node_weights has shape {w.shape}, expected ({n},)")
    if w.dtype.kind not in "iu":
        if w.dtype.kind == "f" and np.all(np.isfinite(w)) and np.all(w == np.floor(w)):
            w = w.astype(np.int64)
        else:
            raise ParameterError("node weights must be integers")
    if w.size and w.min() < 0:
        raise ParameterError("node weights must be >= 0")
    return w.astype(np.int64, copy=False)


def positions(order):
    """Inverse of a line order: ``positions(order)[order[p]] = p``.

    Parameters
    ----------
    order : ndarray of int, shape (n,)
        A permutation of ``0..n−1``.

    Returns
    -------
    ndarray of int64, shape (n,)
    """
    order = np.asarray(order)
    pos = np.empty(order.shape[0], dtype=np.int64)
    pos[order] = np.arange(order.shape[0], dtype=np.int64)
    return pos


def cut_boundaries(line_weights, k):
    """Boundaries of the equal-weight cut of a line with these weights.

    Parameters
    ----------
    line_weights : ndarray of int64, shape (n,)
        Weight of the node at each position (non-negative).
    k : int
        Number of pieces, ``1 ≤ k``.

    Returns
    -------
    ndarray of int64, shape (k − 1,)
        ``b_j`` = the smallest ``p`` with ``P(p) ≥ ⌈j·W/k⌉`` (module docstring).
    """
    prefix = np.zeros(line_weights.shape[0] + 1, dtype=np.int64)
    np.cumsum(line_weights, out=prefix[1:])
    total = int(prefix[-1])
    q, r = divmod(total, k)
    j = np.arange(1, k, dtype=np.int64)
    # ⌈j·W/k⌉ = j·q + ⌈j·r/k⌉ without forming j·W (no overflow: j·r < k²)
    targets = j * q + -((-j * r) // k)
    return np.searchsorted(prefix, targets, side="left").astype(np.int64)


def line_cut(order, node_weights, k, eps=0.0):
    """Cut the line into ``k`` contiguous pieces of equal node weight.

    Parameters
    ----------
    order : ndarray of int, shape (n,)
        ``order[p]`` is the node at position ``p`` (a permutation of ``0..n−1``).
    node_weights : ndarray of int, shape (n,), or None
        Non-negative integer weight of each node (indexed by node, not by
        position); ``None`` means unit weights.
    k : int
        Number of shards, ``1 ≤ k ≤ n``.
    eps : float
        Allowed imbalance. The cut always aims at equal weight; ``eps`` is only
        validated (the equal cut meets the cap of every ``eps ≥ 0``).

    Returns
    -------
    parts : ndarray of int32, shape (n,)
        Shard of every node; shard ``j`` is piece ``j`` of the line.

    Raises
    ------
    ParameterError
        If ``order`` is not a permutation, weights are negative or not
        integers, ``k`` is out of range or ``eps`` is invalid.

    Notes
    -----
    Unit weights give pieces of ``⌊n/k⌋`` or ``⌈n/k⌉`` nodes (piece ``j`` has
    ``⌈(j+1)n/k⌉ − ⌈jn/k⌉``); weighted pieces weigh at most
    ``⌈W/k⌉ + w_max − 1``. Proofs in the module docstring.

    References
    ----------
    K. Aydin, M. Bateni and V. Mirrokni, "Distributed balanced partitioning via
    linear embedding", WSDM 2016.
    """
    order = check_order(order)
    n = order.shape[0]
    k = check_parts(k, n)
    check_imbalance(eps)
    w = _check_weights(node_weights, n)
    line_weights = np.ones(n, dtype=np.int64) if w is None else w[order]
    bounds = cut_boundaries(line_weights, k)
    parts = parts_from_boundaries(order, bounds, k)
    rule = balance_rule(w, k, 0.0, n_nodes=n)
    loads = np.bincount(parts, weights=None if w is None else w, minlength=k)
    if not rule.check(loads):  # the module docstring proves this cannot happen
        raise AssertionError("line cut broke the balance bound: " + "; ".join(rule.violations(loads)))
    return parts


def parts_from_boundaries(order, boundaries, k):
    """Partition of the nodes given by the boundaries of a line cut.

    Parameters
    ----------
    order : ndarray of int, shape (n,)
        ``order[p]`` is the node at position ``p``.
    boundaries : ndarray of int, shape (k − 1,)
        Non-decreasing positions in ``[0, n]``; piece ``j`` is
        ``boundaries[j−1] .. boundaries[j] − 1`` (with 0 and ``n`` at the ends).
    k : int

    Returns
    -------
    ndarray of int32, shape (n,)

    Raises
    ------
    ParameterError
        If the boundaries have the wrong length, decrease, or leave ``[0, n]``.
    """
    order = np.asarray(order)
    n = order.shape[0]
    b = np.asarray(boundaries, dtype=np.int64)
    if b.shape != (k - 1,):
        raise ParameterError(f"expected {k - 1} boundaries for k = {k}, got shape {b.shape}")
    if b.size and (b.min() < 0 or b.max() > n or np.any(np.diff(b) < 0)):
        raise ParameterError(f"boundaries must be non-decreasing positions in [0, {n}]")
    piece = np.zeros(n, dtype=np.int32)
    if b.size:
        marks = np.bincount(b, minlength=n + 1)[:n].astype(np.int32)
        np.cumsum(marks, out=piece)
    parts = np.empty(n, dtype=np.int32)
    parts[order] = piece
    return parts


def boundaries_from_parts(order, parts, k):
    """Boundaries of a partition whose shards are contiguous pieces of the line.

    Parameters
    ----------
    order : ndarray of int, shape (n,)
        ``order[p]`` is the node at position ``p``.
    parts : ndarray of int, shape (n,)
        Shard of every node; along the line the shard numbers must be
        non-decreasing (piece ``j`` is shard ``j``).
    k : int

    Returns
    -------
    ndarray of int64, shape (k − 1,)
        ``b_j`` = the first position whose shard is ``≥ j``.

    Raises
    ------
    ParameterError
        If a shard is out of range or the shards are not contiguous pieces in
        increasing order along the line.
    """
    order = np.asarray(order)
    parts = np.asarray(parts)
    if parts.shape != order.shape:
        raise ParameterError(f"parts has shape {parts.shape}, order has shape {order.shape}")
    line = parts[order]
    if line.size and (line.min() < 0 or line.max() >= k):
        raise ParameterError(f"shards must be in [0, {k})")
    if np.any(np.diff(line) < 0):
        p = int(np.flatnonzero(np.diff(line) < 0)[0])
        raise ParameterError(
            f"the shards are not contiguous pieces of the line: position {p} is in shard "
            f"{int(line[p])}, position {p + 1} in shard {int(line[p + 1])}"
        )
    return np.searchsorted(line, np.arange(1, k), side="left").astype(np.int64)
