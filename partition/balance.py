"""The balance rule every partitioner in Shardline keeps.

With total node weight ``W``, ``k`` shards, allowed imbalance ``ε`` and largest
node weight ``w_max`` (at least 1), a shard may weigh at most

    cap = ⌈(1 + ε) · W / k⌉ + w_max − 1.

For unit weights ``w_max = 1`` and this is the usual ``⌈(1 + ε) · n / k⌉``
(common practice in the balanced-partitioning literature). With ε = 0 and unit
weights Shardline also keeps the floor: every shard has ``⌊n/k⌋`` or ``⌈n/k⌉``
nodes, so at most ``n mod k`` shards hold ``⌈n/k⌉`` (when ``n mod k = 0`` all
hold exactly ``n/k``). The extra ``w_max − 1`` for weighted nodes is what any
contiguous cut of a line can guarantee: a boundary lands inside at most one
node's weight.

Imbalance is reported as ``max shard weight / (W / k) − 1``.
"""

from __future__ import annotations

from dataclasses import dataclass
from fractions import Fraction

import numpy as np

from partition.errors import check_imbalance, check_parts

__all__ = ["BalanceRule", "balance_rule", "imbalance"]


@dataclass(frozen=True)
class BalanceRule:
    """Capacity limits for ``k`` shards.

    Attributes
    ----------
    k : int
    eps : float
    total : int
        Total node weight ``W``.
    cap : int
        Largest weight a shard may hold.
    exact : bool
        True for unit weights with ε = 0: shard sizes must be ``⌊n/k⌋`` or ``⌈n/k⌉``.
    n_full : int
        With ``exact``, how many shards may hold ``⌈n/k⌉`` (``n mod k``, or ``k``
        when ``k`` divides ``n``).
    """

    k: int
    eps: float
    total: int
    cap: int
    exact: bool
    n_full: int
    floor: int

    def check(self, loads) -> bool:
        """True when the shard loads satisfy the rule."""
        loads = np.asarray(loads)
        if loads.max(initial=0) > self.cap:
            return False
        if self.exact:
            return bool(loads.min(initial=self.floor) >= self.floor)
        return True

    def violations(self, loads):
        """Human-readable list of the shards that break the rule."""
        loads = np.asarray(loads)
        out = [f"shard {i} weighs {int(x)} > cap {self.cap}" for i, x in enumerate(loads) if x > self.cap]
        if self.exact:
            out += [f"shard {i} weighs {int(x)} < floor {self.floor}" for i, x in enumerate(loads) if x < self.floor]
        return out


def _ceil_frac(x: Fraction) -> int:
    return -((-x.numerator) // x.denominator)


def balance_rule(node_weights, k, eps=0.0, n_nodes=None) -> BalanceRule:
    """The :class:`BalanceRule` for these node weights (``None`` = unit weights).

    The ceiling is computed in exact rational arithmetic (ε is read as the
    decimal it prints as), so ``ε = 0.03`` and ``W = 100`` give exactly 103/k.
    """
    eps = check_imbalance(eps)
    if node_weights is None:
        if n_nodes is None:
            raise ValueError("n_nodes is needed for unit weights")
        total, wmax, unit = int(n_nodes), 1, True
    else:
        w = np.asarray(node_weights)
        total = int(w.sum())
        wmax = max(int(w.max(initial=1)), 1)
        unit = bool((w == 1).all())
        n_nodes = int(w.shape[0])
    k = check_parts(k, n_nodes)
    frac = (1 + Fraction(repr(eps))) * Fraction(total, k)
    cap = _ceil_frac(frac) + wmax - 1
    exact = unit and eps == 0.0
    floor = total // k if exact else 0
    n_full = (total % k) or k if exact else k
    return BalanceRule(k=k, eps=eps, total=total, cap=cap, exact=exact, n_full=n_full, floor=floor)


def imbalance(loads, total, k) -> float:
    """``max load / (total / k) − 1`` (0 for a perfectly balanced partition)."""
    loads = np.asarray(loads, dtype=np.float64)
    if total <= 0:
        return 0.0
    return float(loads.max(initial=0.0) / (total / k) - 1.0)
