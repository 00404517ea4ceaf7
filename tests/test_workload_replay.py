"""Tests of partition.workload.replay and routing: LRU caches (Che approximation), fan-out, routing rules."""

from collections import OrderedDict

import numpy as np
import pytest

from partition.workload.log import log_from_lists
from partition.workload.replay import che_hit_rate, fanout_figures, lru_hit_rate, replay
from partition.workload.routing import hash_rank, hash_table, place_unseen, route


def _reference_lru(log, replica, n_replicas, capacity):
    # a plain LRU per replica on Python's OrderedDict (standard library) as the outside reference
    caches = [OrderedDict() for _ in range(n_replicas)]
    hits = total = 0
    for r in range(log.n_requests):
        c = caches[replica[r]]
        for key in log.members[log.indptr[r]:log.indptr[r + 1]].tolist():
            total += 1
            if key in c:
                hits += 1
                c.move_to_end(key)
            else:
                c[key] = True
                if len(c) > capacity:
                    c.popitem(last=False)
    return hits / total


def test_lru_matches_an_ordered_dict_cache():
    rng = np.random.default_rng(0)
    log = log_from_lists([rng.choice(300, size=rng.integers(1, 6), replace=False).tolist() for _ in range(3000)])
    replica = rng.integers(0, 3, log.n_requests)
    for cap in (0, 1, 7, 40):
        assert lru_hit_rate(log, replica, 3, cap) == pytest.approx(_reference_lru(log, replica, 3, cap), abs=0)


def test_lru_agrees_with_the_che_approximation_on_zipf_requests():
    """Che, Tung & Wang, IEEE JSAC 2002: hit rate of key i is 1 − exp(−λᵢ T_C), Σ(1 − exp(−λᵢ T_C)) = C.

    Independent single-key requests with Zipf(0.8) popularity over 2,000 keys; caches of 1 % to 10 % of the
    keys; agreement within 0.01 absolute.
    """
    n, alpha = 2000, 0.8
    p = 1.0 / np.arange(1, n + 1) ** alpha
    p /= p.sum()
    rng = np.random.default_rng(42)
    stream = rng.choice(n, size=400_000, p=p)
    log = log_from_lists([[int(x)] for x in range(n)] + [[int(x)] for x in stream])
    warm = log.take(n, log.n_requests)  # the key table holds all n keys
    for cap in (20, 50, 100, 200):
        sim = lru_hit_rate(warm, np.zeros(warm.n_requests, dtype=np.int64), 1, cap)
        che = che_hit_rate(p[np.searchsorted(np.arange(n), np.arange(n))], cap)
        assert abs(sim - che) <= 0.01, (cap, sim, che)


def test_fanout_figures_against_numpy():
    log = log_from_lists([[0, 1, 2], [0, 1], [3], [0, 3, 4, 5]])
    table = np.array([0, 0, 1, 1, 2, 2])
    f = fanout_figures(log, table, 3)
    assert f["mean"] == pytest.approx((2 + 1 + 1 + 3) / 4) and f["single_shard"] == 0.5
    assert f["p50"] == np.percentile([2, 1, 1, 3], 50)


def test_majority_routing_and_its_tie_rule():
    log = log_from_lists([[0, 1, 2], [2, 3]])
    table = np.array([0, 0, 1, 2])
    rep = route(log, "partition", 3, table=table)
    assert rep[0] == 0  # two of three keys on shard 0
    rank = hash_rank(log.keys)
    assert rep[1] == (table[2] if rank[2] < rank[3] else table[3])  # tie: the key of the smaller key hash


def test_unseen_keys_join_their_requests_shard():
    log = log_from_lists([[0, 1], [1, 2], [5, 6]])
    table = np.array([3, 3, -1, -1, -1])  # keys 0,1,2,5,6 → codes 0..4; 2, 5, 6 unseen
    full, placed = place_unseen(log, table, 4)
    assert placed == 3 and full[2] == 3  # key 2 joins the shard of key 1
    hashed, rank = hash_table(log.keys, 4), hash_rank(log.keys)
    first = 3 if rank[3] < rank[4] else 4
    assert full[3] == hashed[first]  # a request with no placed key: its key of the smallest hash decides
    assert full[4] == full[3]  # and the rest of that request follows it


def test_replay_report_is_deterministic_and_shaped():
    rng = np.random.default_rng(7)
    log = log_from_lists([rng.choice(100, size=4, replace=False).tolist() for _ in range(500)])
    train, test = log.split(train_fraction=0.6)
    table = np.where(np.arange(log.n_keys) < 80, np.arange(log.n_keys) % 4, -1)
    a = replay(train, test, table, 4, cache_fractions=(0.05, 0.1))
    b = replay(train, test, table, 4, cache_fractions=(0.05, 0.1))
    assert a == b
    assert set(a["replicated"]) == {"random", "request-hash", "key-hash", "partition"}
    in_test = np.zeros(log.n_keys, bool)
    in_test[test.members] = True
    assert a["drift"]["placed_online"] == int(np.sum(in_test & (table < 0)))
    assert a["cache_sizes"] == {"0.05": 5, "0.1": 10}
