"""Tests of partition/refine/units.py: the heap against sorted(), weights against rule 1, cuts against networkx."""

import networkx as nx
import numpy as np
import pytest

from partition.errors import ParameterError
from partition.graph import build_graph
from partition.refine.units import (
    check_partition,
    edge_cut,
    fixed_point_weights,
    heap_pop,
    heap_push,
    shard_cut_matrix,
    shard_index,
)

from conftest import nx_cut, nx_graph  # noqa: E402


def test_heap_pops_larger_key_then_smaller_node():
    # Reference: Python's sorted() on (-key, node) gives the documented order.
    rng = np.random.default_rng(0)
    keys = rng.integers(-5, 5, 300)
    nodes = rng.permutation(300)
    hk = np.empty(300, dtype=np.int64)
    hn = np.empty(300, dtype=np.int64)
    size = 0
    for key, node in zip(keys, nodes):
        size = heap_push(hk, hn, size, key, node)
    out = []
    while size:
        out.append((int(hk[0]), int(hn[0])))
        size = heap_pop(hk, hn, size)
    assert out == sorted(zip(keys.tolist(), nodes.tolist()), key=lambda t: (-t[0], t[1]))


def test_fixed_point_weights_follow_rule_one():
    # Rule 1 of partition/rules.py: non-integral weights become
    # round_half_even(w · 2**20); unit and integral weights stay as they are.
    g = build_graph(np.array([0, 1, 2]), np.array([1, 2, 0]))
    w, scale = fixed_point_weights(g)
    assert scale == 1 and w.tolist() == [1] * 6
    g = build_graph(np.array([0, 1]), np.array([1, 2]), np.array([3.0, 5.0]))
    w, scale = fixed_point_weights(g)
    assert scale == 1 and sorted(w.tolist()) == [3, 3, 5, 5]
    g = build_graph(np.array([0, 1]), np.array([1, 2]), np.array([0.5, 1 / 3]))
    w, scale = fixed_point_weights(g)
    assert scale == 2**20
    assert sorted(set(w.tolist())) == [round(2**20 / 3), 2**19]
    g = build_graph(np.array([0, 1]), np.array([1, 2]), np.array([-1.0, 2.0]))
    with pytest.raises(ParameterError, match="finite and >= 0"):
        fixed_point_weights(g)


def test_cut_counts_match_networkx():
    # Reference: networkx.cut_size between every two shards, and of each shard.
    rng = np.random.default_rng(2)
    g = build_graph(rng.integers(0, 60, 300), rng.integers(0, 60, 300), rng.integers(1, 5, 300).astype(float))
    k = 5
    parts = rng.integers(0, k, g.n)
    G = nx_graph(g)
    sets = [set(np.flatnonzero(parts == s).tolist()) for s in range(k)]
    assert edge_cut(g, parts) == pytest.approx(nx_cut(G, parts, k))
    cm = shard_cut_matrix(g, parts, k)
    for a in range(k):
        assert cm[a, a] == 0
        for b in range(a + 1, k):
            assert cm[a, b] == cm[b, a] == pytest.approx(nx.cut_size(G, sets[a], sets[b], weight="weight"))


def test_shard_index_groups_nodes_in_order():
    parts = np.array([2, 0, 2, 1, 0, 2])
    order, bounds = shard_index(parts, 4)
    for s in range(4):
        np.testing.assert_array_equal(order[bounds[s]:bounds[s + 1]], np.flatnonzero(parts == s))


def test_check_partition_errors():
    g = build_graph(np.array([0, 1]), np.array([1, 2]))
    assert check_partition(g, np.array([0, 1, 1], dtype=np.int32), 2).dtype == np.int64
    with pytest.raises(ParameterError, match="one entry per node"):
        check_partition(g, np.array([0, 1]), 2)
    with pytest.raises(ParameterError, match="integer"):
        check_partition(g, np.array([0.0, 1.0, 1.0]), 2)
    with pytest.raises(ParameterError, match=r"\[0, 2\)"):
        check_partition(g, np.array([0, 1, 2]), 2)


def test_pair_rounds_settles_pairs_that_change_nothing():
    from partition.refine.rounds import pair_rounds
    from partition.refine.units import shard_cut_matrix

    rng = np.random.default_rng(6)
    g = build_graph(rng.integers(0, 80, 400), rng.integers(0, 80, 400))
    parts = np.arange(g.n) % 6
    ones = np.ones(g.indices.shape[0], dtype=np.int64)
    seen = []

    def cut_matrix(p):
        return shard_cut_matrix(g, p, 6, ones)

    def idle_round(current, pairs):
        seen.extend(pairs)
        return current, [0] * len(pairs), [False] * len(pairs)

    for schedule in ("round_robin", "matched", "line"):
        seen.clear()
        _, rounds = pair_rounds(parts, 6, cut_matrix, idle_round, schedule=schedule, max_rounds=50)
        assert len(seen) == len(set(seen))  # no pair is run twice while nothing changes
        if schedule != "line":
            assert len(seen) == 15  # all 6 · 5 / 2 pairs touch (random graph), each once
    with pytest.raises(ParameterError, match="schedule"):
        pair_rounds(parts, 6, cut_matrix, idle_round, schedule="spiral")
