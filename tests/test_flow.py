"""Tests of partition/refine/flow.py: min cuts against networkx.minimum_cut, regions against BFS distances."""

import networkx as nx
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from partition.balance import balance_rule
from partition.errors import ParameterError
from partition.graph import build_graph
from partition.refine.flow import boundary_region, pair_min_cut, refine_flow
from partition.refine.units import fixed_point_weights

from conftest import nx_cut, nx_graph  # noqa: E402


@settings(max_examples=40, deadline=None)
@given(seed=st.integers(0, 10_000), fixed=st.integers(1, 4))
def test_region_min_cut_equals_networkx_minimum_cut(seed, fixed):
    # Reference: networkx.minimum_cut between a super-source joined (infinite
    # capacity) to the fixed nodes of shard a and a super-sink joined to the
    # fixed nodes of shard b; edges between fixed a and fixed b nodes are cut
    # whatever the region does, so they are added to our value.
    rng = np.random.default_rng(seed)
    n = 40
    g = build_graph(rng.integers(0, n, 150), rng.integers(0, n, 150), rng.integers(1, 9, 150).astype(float),
                    node_ids=np.arange(n), node_weights=np.ones(n, dtype=np.int64))
    parts = rng.integers(0, 2, n) * 3 + 2  # shards 2 and 5 of a larger k: labels need not be 0/1
    fixed_a = np.flatnonzero(parts == 2)[:fixed]
    fixed_b = np.flatnonzero(parts == 5)[:fixed]
    region = np.setdiff1d(np.arange(n), np.concatenate((fixed_a, fixed_b)))
    sides, value, scale = pair_min_cut(g, parts, 2, 5, region)
    assert scale == 1.0
    G = nx_graph(g)
    H = G.copy()
    for v in fixed_a:
        H.add_edge("S", int(v), weight=float("inf"))
    for v in fixed_b:
        H.add_edge(int(v), "T", weight=float("inf"))
    expect, _ = nx.minimum_cut(H, "S", "T", capacity="weight")
    between = sum(d["weight"] for u, v, d in G.edges(data=True)
                  if {u, v} <= set(fixed_a.tolist()) | set(fixed_b.tolist()) and (u in fixed_a) != (v in fixed_a))
    assert value + between == pytest.approx(expect)
    for to_b in sides:  # both extreme minimum cuts realise the value (networkx cut_size recount)
        new = parts.copy()
        new[region] = np.where(to_b, 5, 2)
        assert nx_cut(G, new) == pytest.approx(expect)


def test_region_follows_bfs_layers_and_budget():
    # Reference: networkx.multi_source_dijkstra_path_length (unit lengths) from
    # the boundary nodes inside each shard's induced subgraph.
    rng = np.random.default_rng(4)
    n = 300
    g = build_graph(rng.integers(0, n, 700), rng.integers(0, n, 700), node_ids=np.arange(n),
                    node_weights=np.ones(n, dtype=np.int64))
    parts = (np.arange(n) >= n // 2).astype(np.int64)
    nodes = np.arange(n, dtype=np.int64)
    G = nx_graph(g)
    for layers in (1, 2, 3):
        region = boundary_region(g.indptr, g.indices, g.node_weight_array(), parts, 0, 1, nodes, layers, n, n)
        expect = set()
        for s, other in ((0, 1), (1, 0)):
            members = set(np.flatnonzero(parts == s).tolist())
            border = {v for v in members if any(parts[u] == other for u in G[v])}
            dist = nx.multi_source_dijkstra_path_length(G.subgraph(members), border)
            expect |= {v for v, d in dist.items() if d <= layers - 1}
        assert set(region.tolist()) == expect
    region = boundary_region(g.indptr, g.indices, g.node_weight_array(), parts, 0, 1, nodes, 5, 20, 30)
    assert (parts[region] == 0).sum() <= 20 and (parts[region] == 1).sum() <= 30


def test_flow_straightens_a_jagged_grid_boundary():
    # An 8 x 16 grid (networkx.grid_2d_graph); its minimum balanced bisection is
    # the straight cut across the short side, 8 edges (grid bisection width,
    # from memory: min(rows, cols) for an even number of columns). Start: the
    # left 8 columns, with rows alternately shifted by one column (cut 8 + 15).
    G = nx.grid_2d_graph(8, 16)
    idx = {v: i for i, v in enumerate(sorted(G.nodes))}
    src = np.array([idx[u] for u, v in G.edges])
    dst = np.array([idx[v] for u, v in G.edges])
    g = build_graph(src, dst)
    parts = np.array([int(c >= 8 + (r % 2)) for r, c in sorted(G.nodes)])
    parts[[idx[(r, 8)] for r in range(1, 8, 2)]] = 0
    parts[[idx[(r, 7)] for r in range(0, 8, 2)]] = 1
    rule = balance_rule(None, 2, 0.0, g.n)
    assert np.bincount(parts).tolist() == [64, 64]
    new, stats = refine_flow(g, parts, rule, layers=4, region=0.5)
    assert stats["cut_before"] > 8
    assert stats["cut_after"] == 8 and stats["balanced"]


@settings(max_examples=20, deadline=None)
@given(seed=st.integers(0, 5000), k=st.integers(2, 6), eps=st.sampled_from([0.0, 0.03, 0.2]),
       sched=st.sampled_from(["round_robin", "line", "matched"]))
def test_refine_flow_never_increases_cut_and_keeps_rule(seed, k, eps, sched):
    rng = np.random.default_rng(seed)
    n = 150
    g = build_graph(rng.integers(0, n, 500), rng.integers(0, n, 500), node_ids=np.arange(n),
                    node_weights=np.ones(n, dtype=np.int64))
    rule = balance_rule(None, k, eps, n)
    parts = rng.permutation(np.arange(n) % k)
    new, stats = refine_flow(g, parts, rule, schedule=sched)
    G = nx_graph(g)
    assert nx_cut(G, new) <= nx_cut(G, parts)
    assert stats["cut_after"] == pytest.approx(nx_cut(G, new))
    assert rule.check(np.bincount(new, minlength=k)) and stats["balanced"]
    again, _ = refine_flow(g, parts, rule, schedule=sched)
    np.testing.assert_array_equal(new, again)


def test_scaled_capacities_for_large_weights():
    # Weights too large for int32 capacities are scaled down; the proposal is
    # still checked with exact integer cuts, so the cut never grows.
    rng = np.random.default_rng(8)
    n = 60
    w = rng.integers(1, 1000, 200).astype(float) * 2.0**30
    g = build_graph(rng.integers(0, n, 200), rng.integers(0, n, 200), w)
    parts = rng.permutation(np.arange(g.n) % 2)
    region = np.flatnonzero(parts >= 0)[2:-2]
    _, _, scale = pair_min_cut(g, parts, 0, 1, region, fixed_point_weights(g)[0])
    assert scale < 1.0
    new, stats = refine_flow(g, parts, balance_rule(None, 2, 0.1, g.n))
    assert stats["cut_after"] <= stats["cut_before"]


def test_parameters_are_checked():
    g = build_graph(np.array([0, 1, 2]), np.array([1, 2, 3]))
    rule = balance_rule(None, 2, 0.0, 4)
    with pytest.raises(ParameterError, match="schedule"):
        refine_flow(g, np.array([0, 0, 1, 1]), rule, schedule="zigzag")
    with pytest.raises(ParameterError, match="layers"):
        refine_flow(g, np.array([0, 0, 1, 1]), rule, layers=0)
