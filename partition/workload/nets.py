"""Refine a key partition for the shards each request touches: k-way FM on request nets.

Each request is a net over its keys; a partition of the keys into ``k``
shards touches ``λ(e)`` shards for net ``e``, and the connectivity − 1 metric
``Σ_e (λ(e) − 1)`` is the total fan-out minus the number of requests, so
lowering it lowers the mean fan-out exactly (Çatalyürek & Aykanat,
"Hypergraph-partitioning-based decomposition for parallel sparse-matrix vector
multiplication", IEEE TPDS 1999). The clique expansion the partitioner sees
only approximates it (it over-weights large requests); this step works on the
nets themselves.

The moves are Fiduccia–Mattheyses passes (Fiduccia & Mattheyses, "A
linear-time heuristic for improving network partitions", DAC 1982) in their
k-way form with a gain table (Sanchis, IEEE Trans. Computers 1989): with
``φ(e, s)`` the pins of net ``e`` in shard ``s``, moving key ``v`` from ``a`` to
``b`` gains ``Σ_{e∋v} [φ(e,a) = 1] − [φ(e,b) = 0]``. The table ``G[v, b]`` is
updated in place when a move takes a pin count through 0, 1 or 2. A pass moves
each key at most once, best gain first (a max-heap with lazy re-checks), may
go downhill, and rolls back to its best prefix; it ends after ``max_stall``
moves without a new best. Passes repeat while they gain.

Balance is on load: no shard may carry more than ``cap`` = ⌈(1+ε)·W/k⌉ of the
load ``W`` (and at least the heaviest key's load), a stricter bound than the
graph partitioner's rule, which allows ``w_max − 1`` more and, with keys as hot
as one in two requests, lets a shard carry half a shard's load extra. A first
step moves keys out of shards above the cap, least fan-out lost first.
"""

from __future__ import annotations

import numba
import numpy as np

from partition.errors import ParameterError

__all__ = ["RequestNets", "request_nets", "load_cap", "connectivity", "refine_nets"]


class RequestNets:
    """Requests as nets over dense node codes, with the node → nets transpose.

    Attributes
    ----------
    indptr, pins : ndarray of int64 / int32
        Net ``e`` holds ``pins[indptr[e]:indptr[e + 1]]``.
    node_ptr, node_nets : ndarray of int64 / int32
        Node ``v`` is a pin of ``node_nets[node_ptr[v]:node_ptr[v + 1]]``.
    n : int
        Number of nodes.
    """

    def __init__(self, indptr, pins, n):
        self.indptr = np.ascontiguousarray(indptr, dtype=np.int64)
        self.pins = np.ascontiguousarray(pins, dtype=np.int32)
        self.n = int(n)
        net_of_pin = np.repeat(np.arange(self.indptr.size - 1, dtype=np.int32), np.diff(self.indptr))
        order = np.argsort(self.pins, kind="stable")
        self.node_nets = net_of_pin[order]
        counts = np.bincount(self.pins, minlength=self.n)
        self.node_ptr = np.zeros(self.n + 1, dtype=np.int64)
        np.cumsum(counts, out=self.node_ptr[1:])


def request_nets(log, graph):
    """The requests of ``log`` with at least two keys as nets over ``graph``'s nodes.

    Keys of the log that are not nodes of the graph are left out of their nets.
    """
    node = graph.id_index().lookup(log.keys)
    pins = node[log.members]
    req = np.repeat(np.arange(log.n_requests), log.sizes())
    ok = pins >= 0
    pins, req = pins[ok], req[ok]
    sizes = np.bincount(req, minlength=log.n_requests)
    keep = sizes >= 2
    sel = keep[req]
    sizes = sizes[keep]
    indptr = np.zeros(sizes.size + 1, dtype=np.int64)
    np.cumsum(sizes, out=indptr[1:])
    return RequestNets(indptr, pins[sel], graph.n)


def load_cap(loads, k, eps):
    """⌈(1+ε)·W/k⌉, and at least the largest load (module docstring)."""
    total = int(np.sum(loads))
    cap = -(-int(round((1.0 + float(eps)) * total * 1_000_000)) // (k * 1_000_000))
    return max(cap, int(np.max(loads, initial=0)))


@numba.njit(cache=True, nogil=True)
def _pin_counts(indptr, pins, parts, k):  # pragma: no cover - compiled
    n_nets = indptr.shape[0] - 1
    phi = np.zeros((n_nets, k), dtype=np.int32)
    for e in range(n_nets):
        for p in range(indptr[e], indptr[e + 1]):
            phi[e, parts[pins[p]]] += 1
    return phi


@numba.njit(cache=True, nogil=True)
def _connectivity(phi):  # pragma: no cover - compiled
    total = 0
    for e in range(phi.shape[0]):
        lam = 0
        for s in range(phi.shape[1]):
            if phi[e, s] > 0:
                lam += 1
        total += lam - 1 if lam > 0 else 0
    return total


def connectivity(nets, parts, k):
    """``Σ_e (λ(e) − 1)`` of ``parts`` over ``nets``."""
    return int(_connectivity(_pin_counts(nets.indptr, nets.pins, np.asarray(parts, np.int64), k)))


@numba.njit(cache=True, nogil=True)
def _gain_table(node_ptr, node_nets, phi, parts, k):  # pragma: no cover - compiled
    n = node_ptr.shape[0] - 1
    gain = np.zeros((n, k), dtype=np.int64)
    for v in range(n):
        a = parts[v]
        for q in range(node_ptr[v], node_ptr[v + 1]):
            e = node_nets[q]
            leave = 1 if phi[e, a] == 1 else 0
            for b in range(k):
                if b != a:
                    gain[v, b] += leave - (1 if phi[e, b] == 0 else 0)
    return gain


@numba.njit(cache=True, nogil=True)
def _move(v, b, indptr, pins, node_ptr, node_nets, phi, parts, gain, loads, w, k):  # pragma: no cover
    """Move v to b, keeping phi, the gain table and the loads exact."""
    a = parts[v]
    for q in range(node_ptr[v], node_ptr[v + 1]):
        e = node_nets[q]
        pa_, pb = phi[e, a], phi[e, b]
        phi[e, a] = pa_ - 1
        phi[e, b] = pb + 1
        for p in range(indptr[e], indptr[e + 1]):
            u = pins[p]
            if u == v:
                continue
            c = parts[u]
            if pa_ - 1 == 0:
                gain[u, a] -= 1
            elif pa_ - 1 == 1 and c == a:
                for t in range(k):
                    if t != a:
                        gain[u, t] += 1
            if pb == 0:
                gain[u, b] += 1
            elif pb == 1 and c == b:
                for t in range(k):
                    if t != b:
                        gain[u, t] -= 1
    parts[v] = b
    loads[a] -= w[v]
    loads[b] += w[v]
    # v's own row: recomputed from phi (its part changed)
    for t in range(k):
        gain[v, t] = 0
    for q in range(node_ptr[v], node_ptr[v + 1]):
        e = node_nets[q]
        leave = 1 if phi[e, b] == 1 else 0
        for t in range(k):
            if t != b:
                gain[v, t] += leave - (1 if phi[e, t] == 0 else 0)


@numba.njit(cache=True, nogil=True)
def _best(v, parts, gain, loads, w, cap, k, tie):  # pragma: no cover - compiled
    a = parts[v]
    best_t, best_g = -1, np.int64(-(1 << 62))
    for j in range(k):
        t = (j + tie) % k
        if t == a or loads[t] + w[v] > cap:
            continue
        if gain[v, t] > best_g:
            best_g, best_t = gain[v, t], t
    return best_t, best_g


@numba.njit(cache=True, nogil=True)
def _heap_push(hg, hv, size, g, v):  # pragma: no cover - compiled
    i = size
    hg[i], hv[i] = g, v
    while i > 0:
        p = (i - 1) // 2
        if hg[p] > hg[i] or (hg[p] == hg[i] and hv[p] <= hv[i]):
            break
        hg[p], hg[i] = hg[i], hg[p]
        hv[p], hv[i] = hv[i], hv[p]
        i = p
    return size + 1


@numba.njit(cache=True, nogil=True)
def _heap_pop(hg, hv, size):  # pragma: no cover - compiled
    g, v = hg[0], hv[0]
    size -= 1
    hg[0], hv[0] = hg[size], hv[size]
    i = 0
    while True:
        l, r, m = 2 * i + 1, 2 * i + 2, i
        if l < size and (hg[l] > hg[m] or (hg[l] == hg[m] and hv[l] < hv[m])):
            m = l
        if r < size and (hg[r] > hg[m] or (hg[r] == hg[m] and hv[r] < hv[m])):
            m = r
        if m == i:
            break
        hg[m], hg[i] = hg[i], hg[m]
        hv[m], hv[i] = hv[i], hv[m]
        i = m
    return g, v, size


@numba.njit(cache=True, nogil=True)
def _fm_pass(indptr, pins, node_ptr, node_nets, phi, parts, gain, loads, w, cap, k, max_stall, seed):  # pragma: no cover
    n = parts.shape[0]
    locked = np.zeros(n, dtype=np.bool_)
    cap_heap = 4 * n + 16
    hg = np.empty(cap_heap, dtype=np.int64)
    hv = np.empty(cap_heap, dtype=np.int64)
    size = 0
    for v in range(n):
        t, g = _best(v, parts, gain, loads, w, cap, k, (v + seed) % k)
        if t >= 0:
            size = _heap_push(hg, hv, size, g, v)
    moved_v = np.empty(n, dtype=np.int64)
    moved_from = np.empty(n, dtype=np.int64)
    n_moves, total, best_total, best_at, stall = 0, 0, 0, 0, 0
    while size > 0 and stall < max_stall:
        g, v, size = _heap_pop(hg, hv, size)
        if locked[v]:
            continue
        t, g_now = _best(v, parts, gain, loads, w, cap, k, (v + seed) % k)
        if t < 0:
            continue
        if g_now < g:
            if size >= cap_heap:
                break
            size = _heap_push(hg, hv, size, g_now, v)
            continue
        a = parts[v]
        _move(v, t, indptr, pins, node_ptr, node_nets, phi, parts, gain, loads, w, k)
        locked[v] = True
        moved_v[n_moves], moved_from[n_moves] = v, a
        n_moves += 1
        total += g_now
        if total > best_total:
            best_total, best_at, stall = total, n_moves, 0
        else:
            stall += 1
        # neighbours whose gains rose get a fresh heap entry (lazy: stale ones are re-checked at pop)
        for q in range(node_ptr[v], node_ptr[v + 1]):
            e = node_nets[q]
            if phi[e, t] <= 2 or phi[e, a] <= 1:
                for p in range(indptr[e], indptr[e + 1]):
                    u = pins[p]
                    if not locked[u] and size < cap_heap:
                        tu, gu = _best(u, parts, gain, loads, w, cap, k, (u + seed) % k)
                        if tu >= 0:
                            size = _heap_push(hg, hv, size, gu, u)
        if size >= cap_heap - n:  # compact: one entry per unlocked node
            size = 0
            for u in range(n):
                if not locked[u]:
                    tu, gu = _best(u, parts, gain, loads, w, cap, k, (u + seed) % k)
                    if tu >= 0:
                        size = _heap_push(hg, hv, size, gu, u)
    for i in range(n_moves - 1, best_at - 1, -1):  # roll back to the best prefix
        _move(moved_v[i], moved_from[i], indptr, pins, node_ptr, node_nets, phi, parts, gain, loads, w, k)
    return best_total, best_at


@numba.njit(cache=True, nogil=True)
def _rebalance(indptr, pins, node_ptr, node_nets, phi, parts, gain, loads, w, cap, k):  # pragma: no cover
    moves = 0
    n = parts.shape[0]
    while True:
        over = -1
        for s in range(k):
            if loads[s] > cap and (over < 0 or loads[s] > loads[over]):
                over = s
        if over < 0:
            return moves
        # the move that loses the least fan-out per unit of load taken off the shard
        excess = loads[over] - cap
        best_v, best_t, best_r = -1, -1, -np.inf
        for v in range(n):
            if parts[v] != over or w[v] == 0:
                continue
            for t in range(k):
                if t != over and loads[t] + w[v] <= cap:
                    r = gain[v, t] / min(w[v], excess)
                    if r > best_r:
                        best_v, best_t, best_r = v, t, r
        if best_v < 0:
            return -1
        _move(best_v, best_t, indptr, pins, node_ptr, node_nets, phi, parts, gain, loads, w, k)
        moves += 1


def refine_nets(nets, parts, loads, k, eps, max_passes=20, max_stall=2000, tighten_steps=8, seed=0, progress=None):
    """Lower ``Σ (λ − 1)`` of a key partition under the load cap (module docstring).

    Parameters
    ----------
    nets : RequestNets
    parts : array_like of int, shape (n,)
        Starting shard of every node (not changed).
    loads : array_like of int, shape (n,)
        Load of every node.
    k : int
    eps : float
        Allowed load imbalance ε ≥ 0.
    max_passes, max_stall : int
        At most this many passes per cap step; a pass ends this many moves after its best.
    tighten_steps : int
        When the start is above the cap, the cap is lowered to it in this many steps.
    seed : int
        Rotates the order in which equal-gain targets are tried.
    progress : callable or None
        Called with one dict per pass.

    Returns
    -------
    parts : ndarray of int64
    report : dict
        Connectivity before and after, rebalancing moves, passes, the cap.

    Raises
    ------
    ParameterError
        When no assignment of the keys fits the cap (cannot happen for ε ≥ 0
        unless the start is unusable).
    """
    parts = np.array(parts, dtype=np.int64)
    w = np.ascontiguousarray(loads, dtype=np.int64)
    cap = load_cap(w, k, eps)
    shard_loads = np.bincount(parts, weights=w, minlength=k).astype(np.int64)
    phi = _pin_counts(nets.indptr, nets.pins, parts, k)
    before = int(_connectivity(phi))
    gain = _gain_table(nets.node_ptr, nets.node_nets, phi, parts, k)
    args = (nets.indptr, nets.pins, nets.node_ptr, nets.node_nets, phi, parts, gain, shard_loads, w)
    start_max = int(shard_loads.max())
    passes, moved = [], 0
    # the cap is tightened in steps from the start's largest load to the target, with FM passes
    # after each step, so that the fan-out lost to rebalancing is won back gradually
    steps = max(1, int(tighten_steps)) if start_max > cap else 1
    for step in range(steps):
        step_cap = cap + (start_max - cap) * (steps - 1 - step) // steps
        m = _rebalance(*args, np.int64(step_cap), k)
        if m < 0:
            raise ParameterError(f"no key move brings every shard under the load cap {step_cap}")
        moved += m
        for i in range(int(max_passes)):
            gained, moves = _fm_pass(*args, np.int64(step_cap), k, int(max_stall), int(seed) + i)
            passes.append({"cap": int(step_cap), "pass": i + 1, "gain": int(gained), "moves": int(moves)})
            if gained <= 0:
                break
        if progress is not None:
            progress({"stage": "nets: cap step", "cap": int(step_cap), "rebalance_moves": int(m),
                      "passes": len([p for p in passes if p["cap"] == step_cap]),
                      "connectivity": int(_connectivity(phi))})
    after = int(_connectivity(phi))
    report = {"cap": int(cap), "connectivity_before": before, "connectivity_after": after, "rebalance_moves": int(moved), "passes": passes,
              "max_load": int(shard_loads.max()), "nets": int(nets.indptr.size - 1)}
    return parts, report
