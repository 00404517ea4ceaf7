"""Tests of partition/refine/rebalance.py: the rule is restored with few, cheap moves (networkx recount)."""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from partition.balance import balance_rule
from partition.graph import build_graph
from partition.refine.rebalance import rebalance, rebalance_kernel
from partition.refine.units import fixed_point_weights

from conftest import nx_cut, nx_graph  # noqa: E402


def _graph(seed, n=120, m=400):
    rng = np.random.default_rng(seed)
    return build_graph(rng.integers(0, n, m), rng.integers(0, n, m), node_ids=np.arange(n),
                       node_weights=np.ones(n, dtype=np.int64))


@settings(max_examples=40, deadline=None)
@given(seed=st.integers(0, 5000), k=st.integers(2, 7), eps=st.sampled_from([0.0, 0.03, 0.2]))
def test_unit_weights_are_rebalanced_with_few_moves(seed, k, eps):
    g = _graph(seed)
    rule = balance_rule(None, k, eps, g.n)
    rng = np.random.default_rng(seed)
    parts = rng.integers(0, k, g.n)
    parts[: g.n // 3] = 0  # shard 0 is over-full
    new, stats = rebalance(g, parts, rule)
    load0 = np.bincount(parts, minlength=k)
    load1 = np.bincount(new, minlength=k)
    assert rule.check(load1) and stats["balanced"]
    # Counting argument (cap and floor from partition/balance.py): with unit
    # weights each phase-1 move lowers the excess over the cap by exactly one
    # and each phase-2 move lowers the deficit below the floor by one, so the
    # moves are the excess plus at most the deficit; without a floor (ε > 0)
    # they are exactly the excess, all out of over-full shards.
    over = int(np.maximum(load0 - rule.cap, 0).sum())
    deficit = int(np.maximum(rule.floor - load0, 0).sum())
    if rule.exact:
        assert over <= stats["moved"] <= over + deficit
    else:
        assert stats["moved"] == over
        assert np.all(load0[parts[new != parts]] > rule.cap)
    assert stats["cut_after"] == pytest.approx(nx_cut(nx_graph(g), new))


def test_balanced_input_is_left_alone():
    g = _graph(1)
    rule = balance_rule(None, 4, 0.0, g.n)
    parts = np.arange(g.n) % 4
    new, stats = rebalance(g, parts, rule)
    np.testing.assert_array_equal(new, parts)
    assert stats["moved"] == 0


def test_cheapest_node_moves_first():
    # Worked example: path 0-1-2-3-4 plus isolated node 5, k = 2, ε = 0 (cap 3).
    # Start: everything in shard 0. Losses of moving to shard 1: node 5 costs 0,
    # the ends 0 and 4 cost 1, inner nodes 2. Moves: 5 (loss 0); then 0 (loss 1;
    # ties go to the smaller node); now node 1 has one neighbour on each side,
    # loss 0, so it goes third. Shard 1 = {0, 1, 5}, cut = 1 (edge 1-2), which
    # is also the best possible cut of a balanced split of this graph.
    g = build_graph(np.array([0, 1, 2, 3]), np.array([1, 2, 3, 4]), node_ids=np.arange(6),
                    node_weights=np.ones(6, dtype=np.int64))
    rule = balance_rule(None, 2, 0.0, 6)
    new, stats = rebalance(g, np.zeros(6, dtype=np.int64), rule)
    assert new.tolist() == [1, 1, 0, 0, 0, 1]
    assert stats["cut_after"] == 1 and stats["moved"] == 3


def test_kernel_only_touches_active_shards():
    g = _graph(3)
    k = 4
    rule = balance_rule(None, k, 0.0, g.n)
    parts = np.random.default_rng(0).integers(0, k, g.n)
    w = fixed_point_weights(g)[0]
    active = np.array([True, True, False, False])
    nodes = np.flatnonzero(active[parts]).astype(np.int64)
    loads = np.bincount(parts, minlength=k).astype(np.int64)
    new, loss = rebalance_kernel(g.indptr, g.indices, w, g.node_weight_array(), parts, nodes, loads, active,
                                 rule.cap, rule.floor)
    assert set(new.tolist()) <= {0, 1}
    out = parts.copy()
    out[nodes] = new
    G = nx_graph(g)
    assert loss == pytest.approx(nx_cut(G, out) - nx_cut(G, parts))
    l2 = np.bincount(out, minlength=k)
    assert l2[0] + l2[1] == loads[0] + loads[1]
    assert max(l2[0], l2[1]) <= max(rule.cap, max(loads[0], loads[1]))
