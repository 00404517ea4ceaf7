"""Tests of partition/refine/kway.py: bounds kept at every state, exact gains (networkx recount)."""

import numpy as np
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from partition.balance import balance_rule
from partition.graph import build_graph
from partition.refine.kway import fm_kway
from partition.refine.units import fixed_point_weights

from conftest import nx_cut, nx_graph  # noqa: E402


@settings(max_examples=30, deadline=None)
@given(seed=st.integers(0, 5000), k=st.integers(2, 8), eps=st.sampled_from([0.03, 0.1, 0.5]),
       rescan=st.sampled_from([0, 3, 64]))
def test_kway_keeps_bounds_and_gain_is_exact(seed, k, eps, rescan):
    rng = np.random.default_rng(seed)
    n = 80
    g = build_graph(rng.integers(0, n, 300), rng.integers(0, n, 300), rng.integers(1, 4, 300).astype(float),
                    node_ids=np.arange(n), node_weights=rng.integers(1, 3, n))
    rule = balance_rule(g.node_weights, k, eps, g.n)
    parts = np.arange(g.n) % k
    assume(rule.check(np.bincount(parts, weights=g.node_weights, minlength=k)))
    w, _ = fixed_point_weights(g)
    new, gain = fm_kway(g.indptr, g.indices, w, g.node_weights, parts, k, rule.cap, rule.floor, 6, 1000, rescan)
    assert gain >= 0
    G = nx_graph(g)
    assert gain == pytest.approx(nx_cut(G, parts) - nx_cut(G, new))  # networkx recount
    assert rule.check(np.bincount(new, weights=g.node_weights, minlength=k))


def test_kway_moves_a_misplaced_node_home():
    # Worked example: two triangles {0,1,2} and {3,4,5} joined by the edge 2-3,
    # with node 2 placed in shard 1 ({2,3,4,5}) and cap 4 (k = 2, ε = 1/3 of 3).
    # Moving node 2 to shard 0 gains 2 - 1 = 1: the cut drops from 2 to 1.
    g = build_graph(np.array([0, 0, 1, 3, 3, 4, 2]), np.array([1, 2, 2, 4, 5, 5, 3]))
    parts = np.array([0, 0, 1, 1, 1, 1])
    w, _ = fixed_point_weights(g)
    new, gain = fm_kway(g.indptr, g.indices, w, np.ones(6, dtype=np.int64), parts, 2, 4, 0, 4, -1, 64)
    assert new.tolist() == [0, 0, 0, 1, 1, 1]
    assert gain == 1
