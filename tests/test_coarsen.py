"""Tests of partition/refine/coarsen.py: clusters inside shards, nested levels, size cap, exact coarse cuts."""

import networkx as nx
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from partition.balance import balance_rule
from partition.contract import contract
from partition.errors import ParameterError
from partition.graph import build_graph
from partition.refine.coarsen import cluster_within, partition_levels, visit_order
from partition.refine.multilevel import refine_multilevel
from partition.refine.units import edge_cut

from conftest import nx_cut  # noqa: E402


def from_nx(G, weight=None):
    """Graph from a networkx graph with integer nodes 0..n-1 (all nodes kept)."""
    u, v = (np.array(x, dtype=np.int64) for x in zip(*G.edges())) if G.number_of_edges() else ([], [])
    w = None if weight is None else np.array([d[weight] for _, _, d in G.edges(data=True)], dtype=np.float64)
    n = G.number_of_nodes()
    return build_graph(u, v, w, node_ids=np.arange(n), node_weights=np.ones(n, dtype=np.int64))


def random_graph(seed, n=300, m=1200):
    rng = np.random.default_rng(seed)
    return build_graph(rng.integers(0, n, m), rng.integers(0, n, m))


def same_grouping(a, b):
    """True when two labellings group the nodes identically (labels may differ)."""
    pairs = set(zip(a.tolist(), b.tolist()))
    return len(pairs) == len(set(a.tolist())) == len(set(b.tolist()))


def test_ring_of_cliques_gives_the_cliques():
    # networkx.ring_of_cliques(8, 6): 8 cliques of 6 nodes, consecutive cliques joined by one edge.
    # With room for a whole clique (cap >= 6) label propagation must find exactly the cliques:
    # every node has 5 edges into its clique and at most 1 out.
    G = nx.ring_of_cliques(8, 6)
    g = from_nx(G)
    parts = np.zeros(g.n, dtype=np.int64)
    levels = partition_levels(g, parts, 1, factor=48 / 6, min_nodes=1, max_levels=1)
    expected = np.arange(g.n) // 6  # networkx numbers the nodes of clique i as 6i .. 6i+5
    assert same_grouping(levels[1], expected)


def test_clusters_never_cross_shards_and_levels_nest():
    g = random_graph(1)
    k = 4
    parts = np.random.default_rng(2).integers(0, k, g.n)
    levels = partition_levels(g, parts, k, seed=3, min_nodes=10)
    assert len(levels) >= 3
    assert np.array_equal(levels[0], np.arange(g.n))
    for fine, coarse in zip(levels, levels[1:]):
        # nested: nodes in one fine cluster share one coarse cluster
        first = np.full(fine.max() + 1, -1)
        first[fine] = coarse
        assert np.array_equal(first[fine], coarse)
        # inside shards: each coarse cluster holds nodes of one shard only
        shard = np.full(coarse.max() + 1, -1)
        shard[coarse] = parts
        assert np.array_equal(shard[coarse], parts)
        # labels are dense 0..c-1, numbered by smallest member
        c = coarse.max() + 1
        assert set(coarse.tolist()) == set(range(c))
        smallest = np.full(c, g.n)
        np.minimum.at(smallest, coarse, np.arange(g.n))
        assert np.all(np.diff(smallest) > 0)


def test_size_cap_holds_on_every_level():
    g = random_graph(4, n=400, m=2400)
    k = 2
    parts = np.zeros(g.n, dtype=np.int64)
    factor = 8  # cap = ceil(400 / 16) = 25
    for lab in partition_levels(g, parts, k, factor=factor, min_nodes=5)[1:]:
        assert np.bincount(lab).max() <= 25


def test_coarse_cut_equals_fine_cut():
    # the cut of every contracted level equals the fine cut (networkx.cut_size summed over shards)
    G = nx.connected_watts_strogatz_graph(200, 6, 0.2, seed=5)
    g = from_nx(G)
    k = 3
    parts = np.random.default_rng(6).integers(0, k, g.n)
    fine = nx_cut(G, parts, k, weight=None)
    for lab in partition_levels(g, parts, k, min_nodes=5)[1:]:
        c = lab.max() + 1
        coarse = contract(g, lab, c)
        cp = np.empty(c, dtype=np.int64)
        cp[lab] = parts
        assert edge_cut(coarse, cp) == fine


def test_same_seed_same_levels_other_seed_may_differ():
    g = random_graph(7)
    parts = np.random.default_rng(8).integers(0, 2, g.n)
    a = partition_levels(g, parts, 2, seed=11)
    b = partition_levels(g, parts, 2, seed=11)
    assert len(a) == len(b) and all(np.array_equal(x, y) for x, y in zip(a, b))


def test_shards_are_independent_units():
    # clustering shard 0 alone (its induced subgraph) gives the same groups as clustering all shards at once
    g = random_graph(9, n=200, m=900)
    parts = np.random.default_rng(10).integers(0, 2, g.n)
    order = visit_order(np.diff(g.indptr), 5, 1)
    w = np.ones(g.indices.shape[0], dtype=np.int64)
    nw = np.ones(g.n, dtype=np.int64)
    whole = cluster_within(g.indptr, g.indices, w, nw, parts, order, 6, 3)
    nodes = np.flatnonzero(parts == 0)
    sub = g.to_scipy().tocsr()[nodes][:, nodes].tocsr()
    sub.sort_indices()
    local = np.full(g.n, -1)
    local[nodes] = np.arange(nodes.size)
    sub_order = local[order[parts[order] == 0]]
    alone = cluster_within(sub.indptr.astype(np.int64), sub.indices.astype(np.int32),
                           np.ones(sub.indices.shape[0], dtype=np.int64), np.ones(nodes.size, dtype=np.int64),
                           np.zeros(nodes.size, dtype=np.int64), sub_order, 6, 3)
    assert same_grouping(whole[nodes], alone)


def test_visit_order_is_by_degree_first():
    deg = np.array([3, 1, 2, 1, 0])
    o = visit_order(deg, 0, 1)
    assert sorted(o.tolist()) == [0, 1, 2, 3, 4]
    assert np.all(np.diff(deg[o]) >= 0)


@settings(max_examples=15, deadline=None)
@given(seed=st.integers(0, 10_000), k=st.integers(2, 5), eps=st.sampled_from([0.0, 0.03]))
def test_vcycle_keeps_balance_and_never_raises_the_cut(seed, k, eps):
    g = random_graph(seed, n=120, m=400)
    rule = balance_rule(None, k, eps, g.n)
    start = np.random.default_rng(seed).permutation(np.arange(g.n) % k)
    levels = partition_levels(g, start, k, seed=seed, min_nodes=2 * k)
    out, _ = refine_multilevel(g, levels, start, rule, min_atoms=1)
    assert rule.check(np.bincount(out, minlength=k))
    assert edge_cut(g, out) <= edge_cut(g, start)


def test_bad_parameters():
    g = random_graph(1, n=20, m=40)
    parts = np.zeros(g.n, dtype=np.int64)
    with pytest.raises(ParameterError):
        partition_levels(g, parts, 1, factor=0)
    with pytest.raises(ParameterError):
        partition_levels(g, parts, 1, iterations=0)
    with pytest.raises(ParameterError):
        partition_levels(g, np.full(g.n, 3), 2)


def test_the_rating_decides_which_edges_merge():
    # a 6-cycle (networkx.cycle_graph) rated 1 on the matching (0,1), (2,3), (4,5) and 0 elsewhere:
    # label propagation only joins clusters it has positive rating to, so level 1 is the matching
    G = nx.cycle_graph(6)
    g = from_nx(G)
    rows = g.rows()
    matched = (np.minimum(rows, g.indices) % 2 == 0) & (np.abs(rows - g.indices) == 1)
    rating = matched.astype(np.int64)
    levels = partition_levels(g, np.zeros(6, dtype=np.int64), 1, factor=1, min_nodes=1, max_levels=1,
                              weights=rating)
    assert same_grouping(levels[1], np.array([0, 0, 1, 1, 2, 2]))
    # all-zero rating: nothing merges, so no coarse level is kept
    assert len(partition_levels(g, np.zeros(6, dtype=np.int64), 1, min_nodes=1,
                                weights=np.zeros_like(rating))) == 1
