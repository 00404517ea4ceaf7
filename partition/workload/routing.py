"""Routing tables: key → shard for sharded data, request → replica for replicated data.

Sharded data: every key lives on one shard; a request touches the distinct
shards of its keys (its fan-out). Two key tables are compared: ``hash``
(``hash(key) mod k``, the placement any consistent key routing already gives;
the hash is :func:`partition.placement.bounded_hash.key_hashes`) and
``partition`` (the workload partition). Keys a partition has never seen are
placed online, at their first request, on the shard that holds most of that
request's placed keys (ties as below); when none of its keys is placed, on the
key-hash shard of its key with the smallest key hash. Then they stay there.

Replicated data: every replica holds all keys and one replica serves each
request. Policies:

``random``
    a seeded uniform replica per request;
``request-hash``
    a hash of the request's key set (identical requests meet on one replica);
``key-hash``
    the shard holding most of the request's keys under the hash table;
``partition``
    the same rule over the partition's table.

Tie rule (both majority policies): among the shards holding the most of the
request's keys, the one holding the request key with the smallest key hash.
Routing every request to the shard holding most of its keys is the locality
rule of cache-affinity routing (Pai et al., "Locality-aware request
distribution in cluster-based network servers", ASPLOS 1998).
"""

from __future__ import annotations

import numba
import numpy as np

from partition.errors import ParameterError
from partition.placement.bounded_hash import key_hashes
from partition.rules import mix64

__all__ = ["POLICIES", "hash_table", "hash_rank", "place_unseen", "route", "fanouts"]

POLICIES = ("random", "request-hash", "key-hash", "partition")


def hash_table(keys, k, seed=0):
    """``hash(key) mod k`` for every key (int64)."""
    return (key_hashes(keys, seed=seed) % np.uint64(k)).astype(np.int64)


def hash_rank(keys, seed=0):
    """Rank of every key in key-hash order (the tie rule's order)."""
    h = key_hashes(keys, seed=seed)
    rank = np.empty(h.size, dtype=np.int64)
    rank[np.argsort(h, kind="stable")] = np.arange(h.size)
    return rank


@numba.njit(cache=True, nogil=True)
def _majority(a, b, members, table, rank, k, count):  # pragma: no cover - compiled
    """Majority shard of members[a:b] under table (entries < 0 ignored); -1 when none placed."""
    for s in range(k):
        count[s] = 0
    best = 0
    for p in range(a, b):
        s = table[members[p]]
        if s >= 0:
            count[s] += 1
            if count[s] > best:
                best = count[s]
    if best == 0:
        return -1
    pick, pick_rank = -1, np.int64(1) << 62
    for p in range(a, b):
        key = members[p]
        s = table[key]
        if s >= 0 and count[s] == best and rank[key] < pick_rank:
            pick, pick_rank = s, rank[key]
    return pick


@numba.njit(cache=True, nogil=True)
def _place_unseen(indptr, members, table, fallback, rank, k):  # pragma: no cover - compiled
    count = np.zeros(k, dtype=np.int64)
    placed = 0
    for r in range(indptr.shape[0] - 1):
        a, b = indptr[r], indptr[r + 1]
        missing = False
        for p in range(a, b):
            if table[members[p]] < 0:
                missing = True
                break
        if not missing:
            continue
        s = _majority(a, b, members, table, rank, k, count)
        if s < 0:  # nothing placed yet: the request's key of the smallest key hash decides by its hash
            first, first_rank = -1, np.int64(1) << 62
            for p in range(a, b):
                if rank[members[p]] < first_rank:
                    first, first_rank = members[p], rank[members[p]]
            s = fallback[first]
        for p in range(a, b):
            key = members[p]
            if table[key] < 0:
                table[key] = s
                placed += 1
    return placed


def place_unseen(log, table, k, seed=0):
    """Place the keys of ``log`` missing from ``table`` (entries −1) online (module docstring).

    Returns the completed table (a copy) and the number of keys placed.
    """
    table = np.array(table, dtype=np.int64)
    placed = _place_unseen(log.indptr, log.members, table, hash_table(log.keys, k, seed), hash_rank(log.keys, seed),
                           int(k))
    return table, int(placed)


@numba.njit(cache=True, nogil=True)
def _route_majority(indptr, members, table, rank, k):  # pragma: no cover - compiled
    n = indptr.shape[0] - 1
    out = np.empty(n, dtype=np.int64)
    count = np.zeros(k, dtype=np.int64)
    for r in range(n):
        out[r] = _majority(indptr[r], indptr[r + 1], members, table, rank, k, count)
    return out


@numba.njit(cache=True, nogil=True)
def _content_hash(indptr, members, key_hash):  # pragma: no cover - compiled
    n = indptr.shape[0] - 1
    out = np.empty(n, dtype=np.uint64)
    for r in range(n):
        h = np.uint64(0)
        for p in range(indptr[r], indptr[r + 1]):
            h += key_hash[members[p]]  # order-free: a sum of mixed key hashes
        out[r] = h
    return out


def route(log, policy, k, table=None, seed=0):
    """The replica serving each request of ``log`` under ``policy``.

    Parameters
    ----------
    log : partition.workload.log.RequestLog
    policy : {"random", "request-hash", "key-hash", "partition"}
    k : int
        Number of replicas (= shards of the table).
    table : ndarray of int64 or None
        ``partition``: the key → shard table over ``log.keys`` (complete).
    seed : int

    Returns
    -------
    ndarray of int64, one replica per request
    """
    if policy not in POLICIES:
        raise ParameterError(f"unknown routing policy {policy!r}; expected one of {', '.join(POLICIES)}")
    if policy == "random":
        return np.random.default_rng(seed).integers(0, k, size=log.n_requests).astype(np.int64)
    if policy == "request-hash":
        h = _content_hash(log.indptr, log.members, mix64(key_hashes(log.keys, seed=seed)))
        return (mix64(h) % np.uint64(k)).astype(np.int64)
    if policy == "key-hash":
        table = hash_table(log.keys, k, seed)
    elif table is None:
        raise ParameterError("the partition policy needs a key → shard table")
    if np.any(np.asarray(table) < 0):
        raise ParameterError("the key → shard table must place every key of the log")
    return _route_majority(log.indptr, log.members, np.asarray(table, np.int64), hash_rank(log.keys, seed), int(k))


@numba.njit(cache=True, nogil=True)
def _fanouts(indptr, members, table, k):  # pragma: no cover - compiled
    n = indptr.shape[0] - 1
    out = np.empty(n, dtype=np.int64)
    mark = np.full(k, -1, dtype=np.int64)
    for r in range(n):
        c = 0
        for p in range(indptr[r], indptr[r + 1]):
            s = table[members[p]]
            if mark[s] != r:
                mark[s] = r
                c += 1
        out[r] = c
    return out


def fanouts(log, table, k):
    """Distinct shards touched by each request of ``log`` under a complete key table."""
    return _fanouts(log.indptr, log.members, np.asarray(table, np.int64), int(k))
