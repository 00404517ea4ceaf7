"""One-pass streaming partitioners: linear deterministic greedy (LDG) and Fennel.

Nodes arrive one at a time in a chosen order and each is placed for good on
the shard that scores best given the nodes already placed. With ``g_i`` the
edge weight from the arriving node to the nodes already on shard ``i`` and
``L_i`` the weight of shard ``i``:

* LDG (Stanton & Kliot, KDD 2012) scores ``g_i · (1 − L_i / C)`` with ``C``
  the shard capacity (the balance rule's cap);
* Fennel (Tsourakakis, Gkantsidis, Radunovic & Vojnovic, WSDM 2014) scores
  ``g_i − α · γ · L_i^(γ−1)``: the neighbours gained minus the marginal cost
  of the paper's load cost ``c(x) = α · x^γ``, written as its derivative
  ``α γ x^(γ−1)``. Defaults ``γ = 1.5`` and ``α = √k · m / n^1.5`` (the
  paper's ``α = m · k^(γ−1) / n^γ``); for weighted graphs ``m`` is the total
  edge weight and ``n`` the total node weight.

Why the two can coincide: under a random order on a sparse mesh nearly every
arriving node has placed neighbours in at most one or two shards, and while
the loads stay below the cap both scores then pick the shard with the most
placed neighbours, the lighter on ties — LDG's factor ``1 − L/C`` and Fennel's
``α γ √L`` differ between shards by less than one neighbour's worth. On 3elt
(k = 8, ε = 0.03, random order) the two give the same assignment, which an
independent step-by-step implementation of each paper's rule confirms
(``tests/test_baselines.py``); in BFS or DFS order many arrivals see several
shards and the rules part. Hence the default order is breadth-first.

Both only consider shards with room, so every result keeps the balance rule
with no repair: under a cap there is always room, because while a node of
weight ``w ≥ 1`` is unplaced the lightest shard holds at most ``⌈W/k⌉ − 1``;
under the exact rule (unit weights, ε = 0) a shard may grow to ``⌈n/k⌉`` only
while fewer than ``n_full`` shards are there, which leaves exactly enough room
for the rest. Ties go to the lighter shard, then to the lower index.

The pass is a compiled kernel costing O(m + n log k): a shard with no placed
neighbour of the arriving node scores 0 (LDG) or ``−α γ L^(γ−1)`` (Fennel),
so among those the lightest wins, and a tournament tree keeps the lightest
shard at hand; only the shards of the node's neighbours are scored one by one.
"""

from __future__ import annotations

import math

import numba
import numpy as np

from partition.baselines.repair import prepare
from partition.errors import ParameterError

__all__ = ["stream_order", "ldg", "fennel", "fennel_alpha", "ORDERS", "DEFAULT_ORDER"]

ORDERS = ("bfs", "dfs", "random", "given")
"""Stream orders; the first, breadth-first, is the default: the published
evaluations found BFS and DFS orders the strongest for LDG and Fennel and a
random order clearly weaker (Stanton & Kliot, KDD 2012)."""

DEFAULT_ORDER = "bfs"

_LDG, _FENNEL = 0, 1


def stream_order(graph, order=DEFAULT_ORDER, seed=0):
    """The order in which a streaming partitioner sees the nodes.

    Parameters
    ----------
    graph : Graph
    order : {"bfs", "dfs", "random", "given"} or array of int
        ``bfs``: breadth-first from the lowest-id node of each connected
        component, components in order of their lowest id, neighbours in id
        order; ``dfs``: depth-first preorder likewise (the first unvisited
        neighbour in id order is visited next); ``random``: a permutation from
        ``numpy.random.default_rng(seed)``; ``given``: dense id order (sorted user ids); an array: an
        explicit permutation of ``0..n-1``.
    seed : int

    Returns
    -------
    ndarray of int64, shape (n,)

    Raises
    ------
    ParameterError
        An unknown order name, or an array that is not a permutation of the nodes.
    """
    n = graph.n
    if isinstance(order, str):
        if order == "random":
            return np.random.default_rng(seed).permutation(n).astype(np.int64)
        if order == "bfs":
            return _bfs_order(graph.indptr, graph.indices)
        if order == "dfs":
            return _dfs_order(graph.indptr, graph.indices)
        if order == "given":
            return np.arange(n, dtype=np.int64)
        raise ParameterError(f"order must be one of {', '.join(ORDERS)} or a permutation, got {order!r}")
    arr = np.asarray(order)
    if arr.ndim != 1 or arr.shape[0] != n or arr.dtype.kind not in "iu":
        raise ParameterError(f"an explicit order must be an integer array of length {n}")
    arr = arr.astype(np.int64)
    if n and (arr.min() < 0 or arr.max() >= n or np.bincount(arr, minlength=n).max() != 1):
        raise ParameterError("an explicit order must list every node 0..n-1 exactly once")
    return arr


def fennel_alpha(n, m, k, gamma=1.5):
    """Fennel's load-cost weight ``α = m · k^(γ−1) / n^γ``.

    With ``γ = 1.5`` this is ``√k · m / n^1.5``.

    Parameters
    ----------
    n : float
        Number of nodes (total node weight).
    m : float
        Number of edges (total edge weight).
    k : int
    gamma : float
        Exponent of the load cost, > 1.

    Returns
    -------
    float

    Raises
    ------
    ParameterError
        ``n <= 0`` or ``gamma <= 1``.

    References
    ----------
    C. E. Tsourakakis, C. Gkantsidis, B. Radunovic and M. Vojnovic, "FENNEL:
    streaming graph partitioning for massive scale graphs", WSDM 2014.
    """
    if not n > 0:
        raise ParameterError(f"Fennel needs a positive node count, got {n}")
    if not gamma > 1:
        raise ParameterError(f"Fennel's gamma must be > 1, got {gamma}")
    return float(m) * float(k) ** (gamma - 1.0) / float(n) ** gamma


def ldg(graph, k, eps=0.0, seed=0, order=DEFAULT_ORDER):
    """Linear deterministic greedy streaming partition.

    Each node in turn goes to ``argmax_i g_i · (1 − L_i / C)`` over the shards
    with room (``g_i``: edge weight to nodes already on shard ``i``; ``L_i``:
    its weight; ``C``: the cap of the balance rule); ties to the lighter shard,
    then the lower index.

    Parameters
    ----------
    graph : Graph
    k : int
    eps : float
        Allowed imbalance ε.
    seed : int
        Seed of the random order.
    order : {"bfs", "dfs", "random", "given"} or array of int
        See :func:`stream_order` (default breadth-first).

    Returns
    -------
    ndarray of int64, shape (n,)
        Keeps ``balance_rule(graph.node_weights, k, eps, n)``.

    Raises
    ------
    ParameterError
        Bad ``k``, ``eps``, ``seed`` or ``order``.

    References
    ----------
    I. Stanton and G. Kliot, "Streaming graph partitioning for large
    distributed graphs", KDD 2012.
    """
    rule, w, seed = prepare(graph, k, eps, seed)
    seq = stream_order(graph, order, seed)
    return _run(graph, rule, w, seq, _LDG, 0.0, 1.5)


def fennel(graph, k, eps=0.0, seed=0, order=DEFAULT_ORDER, gamma=1.5, alpha=None):
    """Fennel streaming partition with a hard capacity.

    Each node in turn goes to ``argmax_i g_i − α · γ · L_i^(γ−1)`` over the
    shards with room: the marginal-cost form (derivative of the paper's load
    cost ``α · L^γ``), not the exact difference ``α((L+1)^γ − L^γ)``.

    Parameters
    ----------
    graph : Graph
    k : int
    eps : float
        Allowed imbalance ε; the balance rule's cap is a hard limit.
    seed : int
        Seed of the random order.
    order : {"bfs", "dfs", "random", "given"} or array of int
        See :func:`stream_order` (default breadth-first).
    gamma : float
        Exponent of the load cost (the paper's default 1.5).
    alpha : float or None
        Weight of the load cost; ``None``: :func:`fennel_alpha` of the total
        node weight, total edge weight and ``k``.

    Returns
    -------
    ndarray of int64, shape (n,)
        Keeps ``balance_rule(graph.node_weights, k, eps, n)``.

    Raises
    ------
    ParameterError
        Bad ``k``, ``eps``, ``seed``, ``order``, ``gamma`` or ``alpha``.

    References
    ----------
    C. E. Tsourakakis, C. Gkantsidis, B. Radunovic and M. Vojnovic, "FENNEL:
    streaming graph partitioning for massive scale graphs", WSDM 2014.
    """
    rule, w, seed = prepare(graph, k, eps, seed)
    if alpha is None:
        alpha = fennel_alpha(max(rule.total, 1), graph.total_edge_weight(), rule.k, gamma)
    elif not (math.isfinite(alpha) and alpha >= 0):
        raise ParameterError(f"Fennel's alpha must be a finite number >= 0, got {alpha!r}")
    if not gamma > 1:
        raise ParameterError(f"Fennel's gamma must be > 1, got {gamma}")
    seq = stream_order(graph, order, seed)
    return _run(graph, rule, w, seq, _FENNEL, float(alpha), float(gamma))


def _run(graph, rule, w, seq, method, alpha, gamma):
    ew = graph.edge_weights
    weighted = ew is not None
    if ew is None:
        ew = np.empty(0, dtype=np.float64)
    ceil = rule.cap
    # the exact rule's "at most n_full shards at the ceiling" only bites when
    # the ceiling is above the floor
    limit_full = rule.exact and ceil > rule.floor
    return _stream(
        graph.indptr, graph.indices, ew, weighted, w, seq, rule.k, rule.cap,
        limit_full, rule.n_full, method, alpha, gamma,
    )


@numba.njit(cache=True, nogil=True)
def _stream(indptr, indices, ew, weighted, nw, seq, k, cap, limit_full, n_full, method, alpha, gamma):
    n = indptr.shape[0] - 1
    parts = np.full(n, -1, dtype=np.int64)
    loads = np.zeros(k, dtype=np.int64)
    gain = np.zeros(k, dtype=np.float64)
    pen = np.zeros(k, dtype=np.float64)  # Fennel's marginal load cost per shard
    touched = np.empty(k, dtype=np.int64)
    mark = np.zeros(k, dtype=np.bool_)
    tree = _tree_new(k)
    at_ceiling = 0
    capf = float(cap) if cap > 0 else 1.0
    cost = alpha * gamma
    for t in range(seq.shape[0]):
        v = seq[t]
        nt = 0
        for e in range(indptr[v], indptr[v + 1]):
            p = parts[indices[e]]
            if p >= 0:
                gain[p] += ew[e] if weighted else 1.0
                if not mark[p]:
                    mark[p] = True
                    touched[nt] = p
                    nt += 1
        wv = nw[v]
        # A shard without placed neighbours scores 0 (LDG) or -pen (Fennel,
        # increasing in the load), so the best of them is the lightest one,
        # lowest index on ties; the lightest shard overall always has room.
        # Hence only the touched shards and the lightest shard need a score.
        best = tree[1]
        li = loads[best]
        best_load = li
        if method == 0:
            best_score = gain[best] * (1.0 - li / capf)
        else:
            best_score = gain[best] - pen[best]
        for j in range(nt):
            i = touched[j]
            li = loads[i]
            if li + wv > cap:
                continue
            if limit_full and li + wv == cap and at_ceiling >= n_full:
                continue
            if method == 0:
                s = gain[i] * (1.0 - li / capf)
            else:
                s = gain[i] - pen[i]
            if s > best_score or (s == best_score and (li < best_load or (li == best_load and i < best))):
                best = i
                best_score = s
                best_load = li
        parts[v] = best
        loads[best] += wv
        if method == 1:
            pen[best] = cost * float(loads[best]) ** (gamma - 1.0)
        _tree_update(tree, loads, best)
        if limit_full and loads[best] == cap:
            at_ceiling += 1
        for j in range(nt):
            gain[touched[j]] = 0.0
            mark[touched[j]] = False
    return parts


@numba.njit(cache=True, nogil=True)
def _tree_new(k):
    """Tournament tree over k shards of load 0: node 1 holds the lightest (lowest index)."""
    size = 1
    while size < k:
        size *= 2
    tree = np.empty(2 * size, dtype=np.int64)
    for i in range(size):
        tree[size + i] = i if i < k else -1
    for node in range(size - 1, 0, -1):
        a = tree[2 * node]
        tree[node] = a if a >= 0 else tree[2 * node + 1]
    return tree


@numba.njit(cache=True, nogil=True)
def _tree_update(tree, loads, shard):
    """Restore the tournament after ``loads[shard]`` changed (O(log k))."""
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
            tree[node] = b if loads[b] < loads[a] else a
        node //= 2


@numba.njit(cache=True, nogil=True)
def _bfs_order(indptr, indices):
    n = indptr.shape[0] - 1
    seen = np.zeros(n, dtype=np.bool_)
    out = np.empty(n, dtype=np.int64)
    head = 0
    tail = 0
    for s in range(n):
        if seen[s]:
            continue
        seen[s] = True
        out[tail] = s
        tail += 1
        while head < tail:
            v = out[head]
            head += 1
            for e in range(indptr[v], indptr[v + 1]):
                u = indices[e]
                if not seen[u]:
                    seen[u] = True
                    out[tail] = u
                    tail += 1
    return out


@numba.njit(cache=True, nogil=True)
def _dfs_order(indptr, indices):
    n = indptr.shape[0] - 1
    seen = np.zeros(n, dtype=np.bool_)
    out = np.empty(n, dtype=np.int64)
    stack = np.empty(n, dtype=np.int64)
    pos = indptr[:-1].copy()  # next edge to look at, per node on the stack
    tail = 0
    for s in range(n):
        if seen[s]:
            continue
        seen[s] = True
        out[tail] = s
        tail += 1
        top = 0
        stack[0] = s
        while top >= 0:
            v = stack[top]
            if pos[v] == indptr[v + 1]:
                top -= 1
                continue
            u = indices[pos[v]]
            pos[v] += 1
            if not seen[u]:
                seen[u] = True
                out[tail] = u
                tail += 1
                top += 1
                stack[top] = u
    return out
