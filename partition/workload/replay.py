"""Held-out replay: fan-out, load and per-replica LRU cache hits of routing policies.

A key table is built on the first part of a log and the rest is replayed
against it. Sharded data: the fan-out of each request (distinct shards it
touches: mean, p50, p99, share of single-shard requests) and the load of each
shard (key accesses; max/mean). Replicated data: each policy of
:mod:`partition.workload.routing` sends each request to one replica, and each
replica keeps a least-recently-used cache of ``C`` keys, cold at the start of
the replay; the hit rate is hits / key accesses over all replicas.

The cache simulator is checked against the Che approximation (H. Che, Y. Tung
and Z. Wang, "Hierarchical Web caching systems: modeling, design and
experimental results", IEEE JSAC 20(7), 2002): for independent requests with
rates ``λᵢ``, an LRU cache of ``C`` keys hits key ``i`` with probability
``1 − exp(−λᵢ·T_C)``, where the characteristic time ``T_C`` solves
``Σᵢ (1 − exp(−λᵢ·T_C)) = C`` (:func:`che_hit_rate`).
"""

from __future__ import annotations

import numba
import numpy as np

from partition.errors import ParameterError
from partition.workload.routing import POLICIES, fanouts, hash_table, place_unseen, route

__all__ = ["lru_hit_rate", "che_hit_rate", "fanout_figures", "load_ratio", "replay"]


@numba.njit(cache=True, nogil=True)
def _lru(indptr, members, replica, n_keys, n_replicas, capacity):  # pragma: no cover - compiled
    # one doubly linked list per replica over slots replica * n_keys + key; head = most recent
    size = n_replicas * n_keys
    prev = np.full(size, -1, dtype=np.int64)
    nxt = np.full(size, -1, dtype=np.int64)
    cached = np.zeros(size, dtype=np.bool_)
    head = np.full(n_replicas, -1, dtype=np.int64)
    tail = np.full(n_replicas, -1, dtype=np.int64)
    used = np.zeros(n_replicas, dtype=np.int64)
    hits = 0
    total = 0
    for r in range(indptr.shape[0] - 1):
        c = replica[r]
        base = c * n_keys
        for p in range(indptr[r], indptr[r + 1]):
            x = base + members[p]
            total += 1
            if cached[x]:
                hits += 1
                if head[c] == x:
                    continue
                # unlink
                a, b = prev[x], nxt[x]
                if a >= 0:
                    nxt[a] = b
                if b >= 0:
                    prev[b] = a
                if tail[c] == x:
                    tail[c] = a
            else:
                if capacity == 0:
                    continue
                if used[c] == capacity:  # evict the least recent
                    t = tail[c]
                    cached[t] = False
                    tail[c] = prev[t]
                    if tail[c] >= 0:
                        nxt[tail[c]] = -1
                    else:
                        head[c] = -1
                    prev[t] = -1
                    used[c] -= 1
                cached[x] = True
                used[c] += 1
            prev[x] = -1
            nxt[x] = head[c]
            if head[c] >= 0:
                prev[head[c]] = x
            head[c] = x
            if tail[c] < 0:
                tail[c] = x
    return hits, total


def lru_hit_rate(log, replica, n_replicas, capacity):
    """Hit rate of per-replica LRU caches of ``capacity`` keys, replaying ``log`` in order.

    Parameters
    ----------
    log : partition.workload.log.RequestLog
    replica : ndarray of int64
        Replica serving each request.
    n_replicas, capacity : int

    Returns
    -------
    float
        Hits / key accesses (caches start empty).
    """
    if capacity < 0:
        raise ParameterError(f"the cache size must be >= 0, got {capacity}")
    hits, total = _lru(log.indptr, log.members, np.asarray(replica, np.int64), np.int64(log.n_keys),
                       np.int64(n_replicas), np.int64(capacity))
    return hits / max(total, 1)


def che_hit_rate(rates, capacity):
    """LRU hit rate of the Che approximation (module docstring) for key rates ``rates``.

    Parameters
    ----------
    rates : array_like of float
        Request rate (or probability) of each key, > 0.
    capacity : int
        Cache size ``C``, ``0 < C < len(rates)``.

    Returns
    -------
    float
        ``Σ λᵢ (1 − exp(−λᵢ T_C)) / Σ λᵢ``.
    """
    from scipy.optimize import brentq

    lam = np.asarray(rates, dtype=np.float64)
    if not 0 < capacity < lam.size:
        raise ParameterError("the Che approximation needs 0 < C < number of keys")

    def excess(t):
        return float(np.sum(-np.expm1(-lam * t)) - capacity)

    hi = 1.0 / lam.max()
    while excess(hi) < 0:
        hi *= 2.0
    t_c = brentq(excess, 0.0, hi, xtol=1e-12 * hi, rtol=1e-14)
    return float(np.sum(lam * -np.expm1(-lam * t_c)) / lam.sum())


def fanout_figures(log, table, k):
    """Mean, p50, p99 fan-out and the single-shard share of ``log`` under a complete key table."""
    f = fanouts(log, table, k)
    return {"mean": float(f.mean()), "p50": float(np.percentile(f, 50)), "p99": float(np.percentile(f, 99)),
            "single_shard": float(np.mean(f == 1))}


def load_ratio(loads):
    """max/mean of per-shard loads."""
    loads = np.asarray(loads, dtype=np.float64)
    return float(loads.max() / loads.mean()) if loads.sum() > 0 else 1.0


def replay(train, test, table, k, cache_fractions=(0.005, 0.01, 0.02, 0.05), seed=0, progress=None):
    """Replay the held-out requests against the hash table and a partition's table.

    Parameters
    ----------
    train, test : partition.workload.log.RequestLog
        The two parts of one log (same key table).
    table : ndarray of int64
        Shard of every key of the log's key table, −1 for keys the partition
        has not placed (placed online during the replay, see
        :mod:`partition.workload.routing`).
    k : int
    cache_fractions : sequence of float
        Cache sizes per replica as fractions of the log's distinct keys.
    seed : int
    progress : callable or None

    Returns
    -------
    dict
        ``sharded`` (fan-out and load per table), ``replicated`` (load and hit
        rate per policy and cache size), ``drift`` (unseen keys).
    """
    seen = np.zeros(test.n_keys, dtype=bool)
    seen[train.members] = True
    touched = np.zeros(test.n_keys, dtype=bool)
    touched[test.members] = True
    unseen = touched & ~seen
    table = np.asarray(table, np.int64)
    before_online = table.copy()
    full, placed = place_unseen(test, table, k, seed)
    hashed = hash_table(test.keys, k, seed)
    new_keys = np.flatnonzero(unseen & (before_online < 0))
    accesses_unseen = unseen[test.members]
    drift = {"held_out_keys": int(touched.sum()), "unseen_keys": int(unseen.sum()),
             "unseen_access_share": float(accesses_unseen.mean()),
             "requests_with_unseen_keys": float(np.mean(np.add.reduceat(accesses_unseen.astype(np.int64),
                                                                        test.indptr[:-1]) > 0))
             if test.n_requests else 0.0,
             "placed_online": int(placed),
             "placed_on_hash_shard": int(np.sum(full[new_keys] == hashed[new_keys])),
             "rule": "at its first request: the shard holding most of that request's placed keys "
                     "(ties: the shard of the request key with the smallest key hash); when none is placed, the key-hash "
                     "shard of the request's key with the smallest key hash"}
    sharded = {}
    for name, tab in (("hash", hashed), ("partition", full)):
        sharded[name] = fanout_figures(test, tab, k)
        sharded[name]["load_max_over_mean"] = load_ratio(np.bincount(tab[test.members], minlength=k))
        sharded[name]["train_load_max_over_mean"] = load_ratio(np.bincount(tab[train.members], minlength=k))
    if progress is not None:
        progress({"stage": "replay: fan-out", "seconds": 0.0})
    capacities = [max(1, int(round(f * test.n_keys))) for f in cache_fractions]
    replicated = {}
    for policy in POLICIES:
        rep = route(test, policy, k, table=full, seed=seed)
        row = {"request_load_max_over_mean": load_ratio(np.bincount(rep, minlength=k)),
               "access_load_max_over_mean": load_ratio(np.bincount(rep, weights=test.sizes(), minlength=k)),
               "hit_rate": {}}
        for frac, cap in zip(cache_fractions, capacities):
            row["hit_rate"][str(frac)] = lru_hit_rate(test, rep, k, cap)
        replicated[policy] = row
        if progress is not None:
            progress({"stage": f"replay: caches ({policy})", "seconds": 0.0})
    return {"k": int(k), "train_requests": train.n_requests, "held_out_requests": test.n_requests,
            "distinct_keys": int(test.n_keys), "cache_sizes": dict(zip(map(str, cache_fractions), capacities)),
            "sharded": sharded, "replicated": replicated, "drift": drift}
