"""Online placement: put arriving nodes on shards at once, never above a shard's capacity.

A placement exists (every current node has a shard). New nodes arrive one at a
time, each with its edges to nodes already placed (current nodes or earlier
arrivals), and must be placed immediately and for good. Shard ``s`` has a
capacity ``C_s`` (by default the balance rule's cap for the final node count,
:func:`final_capacity`) and load ``L_s``; an arriving node of weight ``w`` may
only go to a shard with ``L_s + w ≤ C_s``. Its *affinity* to shard ``s``,
``a_s``, is the weight of its edges into ``s``; ``f_s = L_s / C_s`` is the
fill fraction. Rules:

* ``"discount"`` — ``argmax a_s · ψ(f_s)`` with ``ψ(f) = 1 − e^(f − 1)``, the
  trade-off function of Mehta, Saberi, Vazirani & Vazirani ("AdWords and
  generalized online matching", JACM 2007), which gives ratio ``1 − 1/e`` in
  their budgeted setting (bids small against budgets, spend equal to the bid).
  Here the "spend" is the node's weight, not its affinity, so that guarantee
  does not carry over as such; the rule keeps its shape: a shard's pull fades
  smoothly to 0 as it fills.
* ``"ldg"`` — ``argmax a_s · (1 − f_s)``, linear deterministic greedy
  (Stanton & Kliot, KDD 2012), the linear discount.
* ``"greedy"`` — ``argmax a_s``: no discount.
* ``"hash"`` — ignore the edges: bounded-load consistent hashing, the node
  goes to the first shard clockwise from its ring position (the hashes of
  :mod:`partition.placement.bounded_hash`, one point per shard) that has room
  (Mirrokni, Thorup & Zadimoghaddam, SODA 2018, insertion rule).

Forecast blend (parameter ``μ`` in ``[0, 1]``, the rules but ``"hash"``). The
score used is ``(1 − μ) · base_s + μ · a_s · max(0, 1 − f̂_s)``, where
``base_s`` is the rule's score and ``f̂_s = (L_s + π_s · R) / C_s`` is the
*projected* fill: ``π`` is a forecast of the arrival mix (the share of future
arrival weight that will want each shard; default the current load shares)
and ``R`` the arrival weight still expected (default: all room left at the
start, ``Σ C_s − Σ L_s``, minus what has arrived). So the second term scores
shards against the capacity they will have left once the forecast demand is
served — the stochastic view — while ``μ = 0`` is the purely adversarial
discount. This blend is our own construction, inspired by the hybrid of
adversarial and stochastic budgeted allocation in Mirrokni, Oveis Gharan &
Zadimoghaddam ("Simultaneous approximations for adversarial and stochastic
online budgeted allocation", SODA 2012); it is not the algorithm of that paper
and carries none of its guarantees.

Ties and fall-backs (deterministic): larger score, then larger affinity, then
smaller fill, then smaller shard index. Only shards with room and positive
affinity compete; a node with no such shard (no placed neighbours, or all
their shards full) goes to the least-filled shard with room, ties by index —
we chose least-filled over hashing for these nodes because it keeps the loads
even. A node that fits nowhere is rejected (shard ``-1``) and counted; with
``C_s`` at least the final average load this cannot happen for unit weights:
while a node is unplaced the placed weight is at most ``W − 1 < k · C``, so
some shard holds at most ``C − 1``. (With node weights the same argument needs
``C ≥ ⌈W/k⌉ + w_max − 1``, which is what the balance rule's cap gives.)

Scores are float64; the loop over arrivals is one compiled kernel
(O(degree + log k) per node, a tournament tree keeps the least-filled shard).
"""

from __future__ import annotations

import math

import numba
import numpy as np

from partition.balance import balance_rule
from partition.errors import ParameterError, check_parts
from partition.graph import Graph, IdIndex
from partition.placement.bounded_hash import key_hashes, shard_points

__all__ = ["OnlinePlacer", "discount", "final_capacity", "RULES", "OK", "SELF", "LATER", "UNKNOWN"]

RULES = ("discount", "greedy", "ldg", "hash")
_RULE_CODE = {"discount": 0, "greedy": 1, "ldg": 2, "hash": 3}
OK, SELF, LATER, UNKNOWN = 0, 1, 2, 3  # status of a neighbour entry (see OnlinePlacer.resolve)


def discount(fill):
    """The trade-off function ``ψ(f) = 1 − e^(f − 1)`` of the discount rule.

    Parameters
    ----------
    fill : float or array_like of float
        Fill fractions, normally in ``[0, 1]``.

    Returns
    -------
    float or ndarray
        ``ψ(0) = 1 − 1/e ≈ 0.632``, ``ψ(1) = 0``.

    References
    ----------
    A. Mehta, A. Saberi, U. Vazirani and V. Vazirani, "AdWords and generalized
    online matching", Journal of the ACM 54(5), 2007.
    """
    return 1.0 - np.exp(np.asarray(fill, dtype=np.float64) - 1.0)


def final_capacity(k, eps=0.0, final_nodes=None, final_weights=None):
    """The balance rule's cap for the node set after all arrivals.

    Parameters
    ----------
    k : int
    eps : float
        Allowed imbalance ε.
    final_nodes : int, optional
        Node count after the arrivals (unit weights).
    final_weights : array_like of int, optional
        Every node weight after the arrivals (instead of ``final_nodes``).

    Returns
    -------
    int
        ``⌈(1 + ε)·W/k⌉ + w_max − 1`` (:func:`partition.balance.balance_rule`).

    Raises
    ------
    ParameterError
        Neither count nor weights given, or ``k``/ε out of range.
    """
    if final_weights is not None:
        return int(balance_rule(np.asarray(final_weights, dtype=np.int64), k, eps).cap)
    if final_nodes is None:
        raise ParameterError("give the final node count or the final node weights")
    return int(balance_rule(None, k, eps, n_nodes=int(final_nodes)).cap)


# --- compiled kernel ---------------------------------------------------------


@numba.njit(cache=True, nogil=True, inline="always")
def _fill(loads, cap, s):
    return loads[s] / cap[s] if cap[s] > 0 else 1.0


@numba.njit(cache=True, nogil=True, inline="always")
def _lighter(loads, cap, a, b):
    """True when shard ``a`` is less filled than ``b`` (ties: smaller index)."""
    fa = _fill(loads, cap, a)
    fb = _fill(loads, cap, b)
    return fa < fb or (fa == fb and a < b)


@numba.njit(cache=True, nogil=True)
def _tree_build(loads, cap):
    k = loads.shape[0]
    size = 1
    while size < k:
        size *= 2
    tree = np.full(2 * size, -1, dtype=np.int64)
    for i in range(k):
        tree[size + i] = i
    for node in range(size - 1, 0, -1):
        a = tree[2 * node]
        b = tree[2 * node + 1]
        if a < 0:
            tree[node] = b
        elif b < 0:
            tree[node] = a
        else:
            tree[node] = a if _lighter(loads, cap, a, b) else b
    return tree


@numba.njit(cache=True, nogil=True)
def _tree_update(tree, loads, cap, shard):
    size = tree.shape[0] // 2
    node = (size + shard) // 2
    while node >= 1:
        a = tree[2 * node]
        b = tree[2 * node + 1]
        if a < 0:
            tree[node] = b
        elif b < 0:
            tree[node] = a
        else:
            tree[node] = a if _lighter(loads, cap, a, b) else b
        node //= 2


@numba.njit(cache=True, nogil=True)
def _place_kernel(ptr, nbr, ew, nw, shard_of, base, loads, cap, tree, rule, mu, forecast, expected,
                  arrived, ring_start, ring_shard, out):
    """Place arrivals ``0..len(ptr)−2`` in order; returns (arrived weight, rejected count)."""
    k = loads.shape[0]
    aff = np.zeros(k, dtype=np.float64)
    mark = np.zeros(k, dtype=np.bool_)
    touched = np.empty(k, dtype=np.int64)
    weighted = ew.shape[0] > 0
    rejected = 0
    n_points = ring_shard.shape[0]
    for i in range(ptr.shape[0] - 1):
        w = nw[i]
        best = -1
        if rule == 3:  # bounded-load hashing: first shard clockwise with room
            for j in range(n_points):
                s = ring_shard[(ring_start[i] + j) % n_points]
                if loads[s] + w <= cap[s]:
                    best = s
                    break
        else:
            nt = 0
            for e in range(ptr[i], ptr[i + 1]):
                c = nbr[e]
                if c < 0:
                    continue
                p = shard_of[c]
                if p < 0:
                    continue
                aff[p] += ew[e] if weighted else 1.0
                if not mark[p]:
                    mark[p] = True
                    touched[nt] = p
                    nt += 1
            remaining = expected - arrived
            if remaining < 0.0:
                remaining = 0.0
            best_score = 0.0
            best_aff = 0.0
            best_fill = 0.0
            for j in range(nt):
                s = touched[j]
                a = aff[s]
                aff[s] = 0.0
                mark[s] = False
                if a <= 0.0 or loads[s] + w > cap[s]:
                    continue
                f = _fill(loads, cap, s)
                if rule == 0:
                    score = a * (1.0 - math.exp(f - 1.0))
                elif rule == 2:
                    score = a * (1.0 - f)
                else:
                    score = a
                if mu > 0.0:
                    fh = (loads[s] + forecast[s] * remaining) / cap[s] if cap[s] > 0 else 1.0
                    score = (1.0 - mu) * score + mu * a * max(0.0, 1.0 - fh)
                if best < 0 or score > best_score or (score == best_score and (
                        a > best_aff or (a == best_aff and (f < best_fill or (f == best_fill and s < best))))):
                    best = s
                    best_score = score
                    best_aff = a
                    best_fill = f
            if best < 0:  # no placed neighbour with room: least-filled shard with room
                s = tree[1]
                if loads[s] + w <= cap[s]:
                    best = s
                else:  # a heavy node may fit a fuller shard with more absolute room
                    for s in range(k):
                        if loads[s] + w <= cap[s] and (best < 0 or _lighter(loads, cap, s, best)):
                            best = s
        if best < 0:
            out[i] = -1
            rejected += 1
            continue
        out[i] = best
        shard_of[base + i] = best
        loads[best] += w
        arrived += w
        _tree_update(tree, loads, cap, best)
    return arrived, rejected


# --- the placer --------------------------------------------------------------


def _id_kind(arr):
    return "int" if arr.dtype.kind in "iu" else "str"


def _as_ids(values, what):
    """Ids as int64, or as an object array of str; mixed or other types are an error."""
    if isinstance(values, np.ndarray) and values.dtype.kind in "iu":
        return values.astype(np.int64, copy=False).reshape(-1)
    arr = np.asarray(values, dtype=object).reshape(-1) if not isinstance(values, np.ndarray) else values.reshape(-1)
    if arr.size == 0:
        return np.empty(0, dtype=np.int64)
    if arr.dtype.kind in "iu":
        return arr.astype(np.int64)
    kinds = {type(x) for x in arr.tolist()}
    if kinds <= {str}:
        return arr.astype(object)
    if all(issubclass(t, (int, np.integer)) and not issubclass(t, (bool, np.bool_)) for t in kinds):
        return arr.astype(np.int64)
    raise ParameterError(f"{what} must be all integers or all strings")


class OnlinePlacer:
    """Place arriving nodes on ``k`` shards under a capacity (see the module docstring).

    Parameters
    ----------
    graph : Graph or array_like
        The nodes already placed: a :class:`~partition.graph.Graph` (its ids
        and node weights; its edges are not needed) or an array of distinct
        ids (int64 or str; unit weights unless ``node_weights``).
    parts : array_like of int
        Shard of each placed node (aligned with ``graph.ids`` or the id array),
        values in ``[0, k)``.
    k : int
    capacity : int or array_like of int
        Largest load of every shard (one value, or one per shard), ``>= 0``.
        :func:`final_capacity` gives the balance rule's cap for the final
        node count. A shard already above it takes no new node.
    rule : {"discount", "greedy", "ldg", "hash"}
    mu : float
        Forecast blend ``μ`` in ``[0, 1]`` (ignored by ``"hash"``).
    seed : int
        Seed of the ring hashes (``"hash"``); the other rules use no randomness.
    forecast : array_like of float, shape (k,), optional
        Expected share of future arrival weight per shard (normalised here);
        default the current load shares.
    expected : float, optional
        Arrival weight expected in total; default the room left at the start.
    node_weights : array_like of int, optional
        Weights of the placed nodes when ``graph`` is an id array.

    Raises
    ------
    ParameterError
        Unknown rule, ``μ`` outside ``[0, 1]``, malformed parts, capacity,
        forecast or ids.

    References
    ----------
    A. Mehta, A. Saberi, U. Vazirani and V. Vazirani, "AdWords and generalized
    online matching", JACM 54(5), 2007.
    V. Mirrokni, S. Oveis Gharan and M. Zadimoghaddam, "Simultaneous
    approximations for adversarial and stochastic online budgeted allocation",
    SODA 2012.
    I. Stanton and G. Kliot, "Streaming graph partitioning for large
    distributed graphs", KDD 2012.
    V. Mirrokni, M. Thorup and M. Zadimoghaddam, "Consistent hashing with
    bounded loads", SODA 2018.
    """

    def __init__(self, graph, parts, k, capacity, rule="discount", mu=0.0, seed=0, forecast=None,
                 expected=None, node_weights=None):
        if rule not in RULES:
            raise ParameterError(f"unknown rule {rule!r}; expected one of {', '.join(RULES)}")
        mu = float(mu)
        if not 0.0 <= mu <= 1.0:
            raise ParameterError(f"mu must lie in [0, 1], got {mu}")
        if isinstance(seed, (bool, np.bool_)) or not isinstance(seed, (int, np.integer)) or seed < 0:
            raise ParameterError(f"seed must be a whole number >= 0, got {seed!r}")
        k = check_parts(k)
        if isinstance(graph, Graph):
            ids, nw = graph.ids, graph.node_weight_array().astype(np.int64)
            order = None
        else:
            ids = _as_ids(graph, "placed ids")
            nw = np.ones(ids.shape[0], dtype=np.int64) if node_weights is None else \
                np.asarray(node_weights, dtype=np.int64).reshape(-1)
            if nw.shape != ids.shape or (nw.size and nw.min() < 0):
                raise ParameterError("node_weights must hold one whole number >= 0 per placed id")
            order = np.argsort(ids, kind="stable")
            ids, nw = ids[order], nw[order]
            if ids.size > 1 and np.any(ids[1:] == ids[:-1]):
                raise ParameterError(f"placed id {ids[np.flatnonzero(ids[1:] == ids[:-1])[0]]} is listed twice")
        parts = np.asarray(parts)
        if parts.ndim != 1 or parts.shape[0] != ids.shape[0] or parts.dtype.kind not in "iu":
            raise ParameterError(f"parts must hold one integer shard per placed node ({ids.shape[0]})")
        parts = parts.astype(np.int64)
        if order is not None:
            parts = parts[order]
        if parts.size and (parts.min() < 0 or parts.max() >= k):
            raise ParameterError(f"placed shards must lie in [0, {k})")
        cap = np.asarray(capacity)
        if cap.dtype.kind not in "iu" or cap.ndim > 1 or (cap.ndim == 1 and cap.shape[0] != k):
            raise ParameterError(f"capacity must be a whole number or {k} whole numbers")
        self._cap = np.broadcast_to(cap.astype(np.int64), (k,)).copy()
        if self._cap.min() < 0:
            raise ParameterError("capacity must be >= 0")
        self.k, self.rule, self.mu, self.seed = k, rule, mu, int(seed)
        self._ids, self._index, self._kind = ids, IdIndex(ids), _id_kind(ids)
        self._n = ids.shape[0]
        self._shard_of = np.concatenate((parts, np.full(max(16, self._n // 8), -1, dtype=np.int64)))
        self._count = 0
        self._new = {}
        self._new_ids = []
        self._loads = np.bincount(parts, weights=nw, minlength=k).astype(np.int64)
        self.over_capacity_at_start = [int(s) for s in np.flatnonzero(self._loads > self._cap)]
        if forecast is None:
            total = float(self._loads.sum())
            share = self._loads / total if total > 0 else np.full(k, 1.0 / k)
        else:
            share = np.asarray(forecast, dtype=np.float64).reshape(-1)
            if share.shape != (k,) or not np.isfinite(share).all() or share.min() < 0 or share.sum() <= 0:
                raise ParameterError(f"forecast must hold {k} finite shares >= 0 with a positive sum")
            share = share / share.sum()
        self._forecast = share
        room = float(np.maximum(self._cap - self._loads, 0).sum())
        self._expected = room if expected is None else float(expected)
        if not (math.isfinite(self._expected) and self._expected >= 0):
            raise ParameterError(f"expected arrival weight must be a finite number >= 0, got {expected!r}")
        self._arrived = 0.0
        self.rejected = 0
        self._tree = _tree_build(self._loads, self._cap)
        pts = shard_points(np.arange(k, dtype=np.int64), 1, self.seed)
        by_pos = np.lexsort((np.arange(k), pts))
        self._ring_pos, self._ring_shard = pts[by_pos], by_pos.astype(np.int64)

    # --- state -----------------------------------------------------------------
    @property
    def loads(self):
        """Current load of every shard (int64 copy)."""
        return self._loads.copy()

    @property
    def capacity(self):
        """Capacity of every shard (int64 copy)."""
        return self._cap.copy()

    @property
    def placed_new(self):
        """Number of arrivals handled so far (placed or rejected)."""
        return self._count

    def shard_of(self, node_id):
        """Shard of a placed node or an arrival (``-1`` for a rejected arrival).

        Raises
        ------
        ParameterError
            The id is unknown.
        """
        code = self._lookup(_as_ids([node_id], "node id"))[0]
        if code < 0:
            raise ParameterError(f"node {node_id!r} is neither placed nor an arrival")
        return int(self._shard_of[code])

    def new_nodes(self):
        """Ids of the arrivals in arrival order and their shards (``-1``: rejected)."""
        ids = np.asarray(self._new_ids, dtype=np.int64 if self._kind == "int" else object)
        return ids, self._shard_of[self._n:self._n + self._count].copy()

    # --- resolving ids ---------------------------------------------------------
    def _check_kind(self, arr, what):
        if arr.size and _id_kind(arr) != self._kind:
            raise ParameterError(f"{what} are {_id_kind(arr)}s but the placed ids are {self._kind}s")

    def _lookup(self, keys):
        """Code of each key among the placed nodes and earlier arrivals (-1 if unknown)."""
        if keys.size == 0:
            return np.empty(0, dtype=np.int64)
        codes = self._index.lookup(keys) if self._n else np.full(keys.shape[0], -1, dtype=np.int64)
        miss = np.flatnonzero(codes < 0)
        if miss.size and self._new:
            get = self._new.get
            codes[miss] = [get(x, -1) for x in keys[miss].tolist()]
        return codes

    def resolve(self, node_ids, ptr, neighbour_ids):
        """Codes of the arrivals' neighbours and the status of each entry.

        Parameters
        ----------
        node_ids : array_like
            Ids of the arrivals, in arrival order.
        ptr : array_like of int, shape (len(node_ids) + 1,)
            Arrival ``i``'s neighbours are ``neighbour_ids[ptr[i]:ptr[i + 1]]``.
        neighbour_ids : array_like

        Returns
        -------
        node_ids : ndarray
            The arrival ids (int64 or str).
        codes : ndarray of int64
            Internal code of each neighbour entry (``-1`` unless ``OK``).
        status : ndarray of int8
            ``OK``; ``SELF`` (the arrival itself: no edge); ``LATER`` (an
            arrival of this batch that comes at the same time or later, so not
            placed yet); ``UNKNOWN`` (neither placed nor an arrival).

        Raises
        ------
        ParameterError
            Malformed ``ptr``, wrong id types, an arrival listed twice or
            already placed (the message names it).
        """
        ids = _as_ids(node_ids, "arrival ids")
        nbr = _as_ids(neighbour_ids, "neighbour ids")
        self._check_kind(ids, "arrival ids")
        self._check_kind(nbr, "neighbour ids")
        ptr = np.asarray(ptr, dtype=np.int64).reshape(-1)
        if ptr.shape[0] != ids.shape[0] + 1 or ptr[0] != 0 or ptr[-1] != nbr.shape[0] or np.any(np.diff(ptr) < 0):
            raise ParameterError("ptr must rise from 0 to the number of neighbour entries, one step per arrival")
        order = np.argsort(ids, kind="stable")
        s = ids[order]
        again = np.flatnonzero(s[1:] == s[:-1]) if s.size > 1 else np.empty(0, dtype=np.int64)
        if again.size:
            raise ParameterError(f"arrival {s[again[0]]!r} is listed twice")
        known = self._lookup(ids)
        if np.any(known >= 0):
            raise ParameterError(f"arrival {ids[np.flatnonzero(known >= 0)[0]]!r} is already placed")
        codes = self._lookup(nbr)
        status = np.where(codes >= 0, OK, UNKNOWN).astype(np.int8)
        owner = np.repeat(np.arange(ids.shape[0], dtype=np.int64), np.diff(ptr))
        miss = np.flatnonzero(codes < 0)
        if miss.size and ids.size:
            pos = np.minimum(np.searchsorted(s, nbr[miss]), s.shape[0] - 1)
            hit = s[pos] == nbr[miss]
            j = order[pos[hit]]
            rows = miss[hit]
            status[rows] = np.where(j == owner[rows], SELF, np.where(j > owner[rows], LATER, OK))
            codes[rows] = np.where(j < owner[rows], self._n + self._count + j, -1)
        return ids, codes, status

    # --- placing -----------------------------------------------------------------
    def place_many(self, node_ids, ptr, neighbour_ids, weights=None, node_weights=None, unplaced="error"):
        """Place a sequence of arrivals, in order.

        Parameters
        ----------
        node_ids : array_like
            Arrival ids (distinct, not placed yet).
        ptr : array_like of int
            Arrival ``i``'s neighbours are ``neighbour_ids[ptr[i]:ptr[i + 1]]``.
        neighbour_ids : array_like
            Ids of placed nodes or earlier arrivals; the arrival's own id
            means "no edge" (an arrival without neighbours).
        weights : array_like of float, optional
            Edge weight of each neighbour entry (finite, ``>= 0``; default 1).
        node_weights : array_like of int, optional
            Weight of each arrival (default 1).
        unplaced : {"error", "ignore"}
            What to do with a neighbour that is not placed yet (unknown, or
            an arrival of this batch that comes later): raise, or drop the edge.

        Returns
        -------
        ndarray of int64
            The shard of each arrival, ``-1`` for a rejected one.

        Raises
        ------
        ParameterError
            See :meth:`resolve`; bad weights; with ``unplaced="error"``, a
            neighbour that is not placed yet.
        """
        if unplaced not in ("error", "ignore"):
            raise ParameterError(f"unplaced must be 'error' or 'ignore', got {unplaced!r}")
        ids, codes, status = self.resolve(node_ids, ptr, neighbour_ids)
        ptr = np.asarray(ptr, dtype=np.int64).reshape(-1)
        if unplaced == "error":
            bad = np.flatnonzero((status == LATER) | (status == UNKNOWN))
            if bad.size:
                e = int(bad[0])
                i = int(np.searchsorted(ptr, e, side="right") - 1)
                nb = _as_ids(neighbour_ids, "neighbour ids")[e]
                raise ParameterError(f"arrival {ids[i]!r}: neighbour {nb!r} is not placed yet")
        n_new = ids.shape[0]
        ew = np.empty(0, dtype=np.float64)
        if weights is not None:
            ew = np.asarray(weights, dtype=np.float64).reshape(-1)
            if ew.shape != codes.shape or not np.isfinite(ew).all() or (ew.size and ew.min() < 0):
                raise ParameterError("weights must hold one finite number >= 0 per neighbour entry")
        nw = np.ones(n_new, dtype=np.int64)
        if node_weights is not None:
            nw = np.asarray(node_weights).reshape(-1)
            if nw.shape != (n_new,) or nw.dtype.kind not in "iu" or (nw.size and nw.min() < 0):
                raise ParameterError("node_weights must hold one whole number >= 0 per arrival")
            nw = nw.astype(np.int64)
        need = self._n + self._count + n_new
        if need > self._shard_of.shape[0]:
            grow = max(need, 2 * self._shard_of.shape[0]) - self._shard_of.shape[0]
            self._shard_of = np.concatenate((self._shard_of, np.full(grow, -1, dtype=np.int64)))
        ring_start = np.zeros(n_new, dtype=np.int64)
        if self.rule == "hash" and n_new:
            h = key_hashes(ids if self._kind == "int" else ids.tolist(), self.seed)
            ring_start = np.searchsorted(self._ring_pos, h, side="left").astype(np.int64) % self.k
        out = np.empty(n_new, dtype=np.int64)
        base = self._n + self._count
        self._arrived, rejected = _place_kernel(
            ptr, codes, ew, nw, self._shard_of, base, self._loads, self._cap, self._tree,
            _RULE_CODE[self.rule], self.mu, self._forecast, self._expected, self._arrived,
            ring_start, self._ring_shard, out)
        self.rejected += int(rejected)
        self._new.update(zip(ids.tolist(), range(base, base + n_new)))
        self._new_ids.extend(ids.tolist())
        self._count += n_new
        return out

    def place(self, node_id, neighbour_ids, weights=None, node_weight=1):
        """Place one arriving node; returns its shard (``-1`` when no shard has room).

        Parameters
        ----------
        node_id : int or str
            A new id.
        neighbour_ids : sequence
            Ids of placed nodes or earlier arrivals it has edges to.
        weights : sequence of float, optional
            Edge weights (default 1 each).
        node_weight : int
            Its weight (default 1).

        Returns
        -------
        int

        Raises
        ------
        ParameterError
            The id is already placed, a neighbour is unknown, or bad weights.
        """
        nbr = list(neighbour_ids)
        return int(self.place_many([node_id], [0, len(nbr)], nbr if nbr else np.empty(0, np.int64),
                                   weights=weights, node_weights=np.array([node_weight]))[0])
