"""Tests of partition.workload.coaccess: the normalised clique expansion of a request log."""

import itertools

import networkx as nx
import numpy as np
import pytest

from partition.errors import ParameterError
from partition.workload.coaccess import WEIGHT_UNIT, coaccess_graph, coaccess_pairs
from partition.workload.log import log_from_lists


def _random_log(seed, n=200, keys=60, max_size=9):
    rng = np.random.default_rng(seed)
    return log_from_lists([rng.choice(keys, size=rng.integers(1, max_size + 1), replace=False).tolist()
                           for _ in range(n)])


def test_weights_equal_a_networkx_clique_expansion():
    log = _random_log(1)
    ref = nx.Graph()  # reference: every pair of a request of s keys adds round(UNIT / (s - 1)), built by networkx
    for r in range(log.n_requests):
        ks = log.members[log.indptr[r]:log.indptr[r + 1]].tolist()
        s = len(ks)
        for a, b in itertools.combinations(sorted(ks), 2):
            w = round(WEIGHT_UNIT / (s - 1))
            ref.add_edge(a, b, weight=ref.get_edge_data(a, b, {"weight": 0})["weight"] + w)
    u, v, w, rep = coaccess_pairs(log, max_keys=100)
    got = {(int(a), int(b)): int(x) for a, b, x in zip(u, v, w)}
    want = {(min(a, b), max(a, b)): d["weight"] for a, b, d in ref.edges(data=True)}
    assert got == want
    assert rep["edges"] == ref.number_of_edges()


def test_total_weight_and_cut_of_one_request():
    # Normalised clique expansion (Lengauer 1990, §6.1): a request of s keys adds s/2 in total, and a
    # split into a and s-a keys cuts a(s-a)/(s-1) of it.
    log = log_from_lists([[0, 1, 2, 3, 4]])
    co = coaccess_graph(log)
    g = co.graph
    assert g.total_edge_weight() / WEIGHT_UNIT == pytest.approx(5 / 2)
    u, v, w = g.edges()
    side = np.array([0, 0, 1, 1, 1])
    cut = w[side[u] != side[v]].sum() / WEIGHT_UNIT
    assert cut == pytest.approx(2 * 3 / 4)


def test_node_weights_are_access_counts_and_unseen_keys_dropped():
    log = log_from_lists([[1, 2], [2, 3], [2], [4, 5]])
    train, _ = log.split(train_fraction=0.75)
    g = coaccess_graph(train).graph
    assert g.ids.tolist() == [1, 2, 3]  # key 4 and 5 come only in the held-out part
    assert g.node_weights.tolist() == [1, 3, 1]


def test_large_requests_skipped_or_sampled():
    log = log_from_lists([list(range(10)), [20, 21]])
    _, _, _, rep = coaccess_pairs(log, max_keys=4, large="skip")
    assert rep["large_requests"] == 1 and rep["edges"] == 1
    u, v, w, rep = coaccess_pairs(log, max_keys=4, large="sample", seed=3)
    assert rep["edges"] == 6 + 1  # a 4-key sample: C(4,2) pairs, plus the small request's pair
    assert rep["pairs_emitted"] == 7
    again = coaccess_pairs(log, max_keys=4, large="sample", seed=3)
    assert np.array_equal(u, again[0]) and np.array_equal(v, again[1])  # same seed, same sample
    with pytest.raises(ParameterError):
        coaccess_pairs(log, max_keys=1)


def test_recency_weighted_loads():
    log = log_from_lists([[1], [1], [2]])
    g = coaccess_graph(log, half_life=1.0).graph
    # ages 2, 1, 0 requests with a half-life of 1: key 1 = 0.25 + 0.5, key 2 = 1 (×1000)
    assert g.node_weights.tolist() == [750, 1000]
