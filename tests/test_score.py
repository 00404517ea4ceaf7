"""Tests of partition/score.py: cut, balance, volume, boundary and fanout figures.

References: networkx (``cut_size``, ``node_boundary``, ``quotient_graph`` and
direct recounts over ``G[v]``), hand-worked examples with the arithmetic
written out, and the public graphs in ../shared/datasets with the node and
edge counts listed in their CATALOG.md.
"""

from __future__ import annotations

import gzip
import json

import networkx as nx
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from partition.errors import ParameterError
from partition.graph import build_graph
from partition.score import CUT_PAIRS_LIMIT, DENSE_MATRIX_MAX_K, score

from conftest import SHARED, nx_cut, shared_graph_rows, shared_missing  # noqa: E402


# --- helpers: the graph both ways, and networkx recounts -------------------


def _both(n, m, seed, weighted=False):
    """A seeded ``nx.gnm_random_graph`` and the same graph as a Shardline Graph."""
    G = nx.gnm_random_graph(n, m, seed=seed)
    rng = np.random.default_rng(seed)
    for u, v in G.edges():
        G[u][v]["weight"] = float(rng.integers(1, 10)) if weighted else 1.0
    edges = list(G.edges(data="weight"))
    src = np.array([e[0] for e in edges], dtype=np.int64)
    dst = np.array([e[1] for e in edges], dtype=np.int64)
    w = np.array([e[2] for e in edges]) if weighted else None
    g = build_graph(src, dst, weights=w, node_ids=np.arange(n), node_weights=np.ones(n, np.int64))
    return G, g


def _blocks(parts, k):
    return [set(np.flatnonzero(parts == a).tolist()) for a in range(k)]


def _nx_volume(G, parts):
    """Direct recount: Σ_v |{shard of u : u ∈ N(v)} \\ {shard of v}|."""
    return sum(len({int(parts[u]) for u in G[v]} - {int(parts[v])}) for v in G)


def _nx_fanout(G, parts):
    """Direct recount: mean over v of |{shard of v} ∪ {shard of u : u ∈ N(v)}|."""
    return sum(len({int(parts[v])} | {int(parts[u]) for u in G[v]}) for v in G) / G.number_of_nodes()


def _nx_boundary(G, parts, k):
    """Union over shards of ``nx.node_boundary(G, S_a)`` (neighbours outside S_a)."""
    out = set()
    for S in _blocks(parts, k):
        out |= nx.node_boundary(G, S)
    return out


# --- against networkx ------------------------------------------------------


@pytest.mark.parametrize("weighted", [False, True])
@pytest.mark.parametrize("k", [2, 5, 64, 100])
def test_figures_match_networkx(weighted, k):
    G, g = _both(400, 1500, seed=k + 7 * weighted, weighted=weighted)
    parts = np.random.default_rng(k).integers(0, k, g.n)
    s = score(g, parts, k)
    assert s.cut_weight == pytest.approx(nx_cut(G, parts, k))  # networkx cut_size
    assert s.cut_edges == nx_cut(G, parts, k, weight=None)  # networkx cut_size, unweighted
    assert s.total_edge_weight == pytest.approx(G.size(weight="weight"))  # networkx size
    assert s.cut_fraction == pytest.approx(nx_cut(G, parts, k) / G.size(weight="weight"))
    assert s.communication_volume == _nx_volume(G, parts)  # direct networkx recount
    assert s.boundary_nodes == len(_nx_boundary(G, parts, k))  # networkx node_boundary
    assert s.fanout == pytest.approx(_nx_fanout(G, parts))  # direct networkx recount
    S = _blocks(parts, k)
    for a in range(k):  # cut weight of each shard against the rest: networkx cut_size(G, S)
        assert s.shard_cut_weights[a] == pytest.approx(nx.cut_size(G, S[a], weight="weight"))
    assert s.shard_sizes.tolist() == [len(b) for b in S]


def test_cut_matrix_matches_networkx_quotient_graph():
    G, g = _both(300, 900, seed=3, weighted=True)
    k = 6
    parts = np.random.default_rng(3).integers(0, k, g.n)
    s = score(g, parts, k)
    S = _blocks(parts, k)
    # networkx quotient_graph sums the weights of the edges between two blocks.
    Q = nx.quotient_graph(G, [frozenset(b) for b in S], relabel=True)
    expected = np.zeros((k, k))
    for a, b, w in Q.edges(data="weight"):
        expected[a, b] = expected[b, a] = w
    assert np.allclose(s.cut_matrix.toarray(), expected)
    for a in range(k):
        for b in range(a + 1, k):
            assert s.cut_matrix[a, b] == pytest.approx(nx.cut_size(G, S[a], S[b], weight="weight"))
    assert s.cut_matrix.diagonal().tolist() == [0.0] * k


def test_two_way_cut_matches_networkx():
    G, g = _both(1000, 5000, seed=11, weighted=True)
    parts = (np.random.default_rng(11).random(g.n) < 0.3).astype(np.int64)
    S = set(np.flatnonzero(parts == 0).tolist())
    s = score(g, parts)
    assert s.k == 2
    assert s.cut_weight == pytest.approx(nx.cut_size(G, S, weight="weight"))  # networkx cut_size
    assert s.cut_edges == nx.cut_size(G, S)  # networkx cut_size, unweighted
    assert s.boundary_nodes == len(nx.node_boundary(G, S) | nx.node_boundary(G, set(G) - S))


@settings(max_examples=40, deadline=None)
@given(
    n=st.integers(1, 25),
    edges=st.lists(st.tuples(st.integers(0, 24), st.integers(0, 24), st.integers(1, 5)), max_size=60),
    k=st.integers(1, 6),
    seed=st.integers(0, 2**16),
    weighted=st.booleans(),
)
def test_random_small_graphs_match_networkx(n, edges, k, seed, weighted):
    edges = [(u % n, v % n, w) for u, v, w in edges]
    k = min(k, n)
    G = nx.Graph()
    G.add_nodes_from(range(n))
    for u, v, w in edges:  # networkx reference: self-loops dropped, repeated weights summed
        if u == v:
            continue
        if G.has_edge(u, v):
            G[u][v]["weight"] += w if weighted else 0
        else:
            G.add_edge(u, v, weight=w if weighted else 1)
    src = np.array([e[0] for e in edges], dtype=np.int64)
    dst = np.array([e[1] for e in edges], dtype=np.int64)
    w = np.array([e[2] for e in edges], dtype=np.float64) if weighted else None
    g = build_graph(src, dst, weights=w, node_ids=np.arange(n), node_weights=np.ones(n, np.int64))
    parts = np.random.default_rng(seed).integers(0, k, n)
    s = score(g, parts, k)
    assert s.cut_weight == pytest.approx(nx_cut(G, parts, k))
    assert s.cut_edges == nx_cut(G, parts, k, weight=None)
    assert s.communication_volume == _nx_volume(G, parts)
    assert s.boundary_nodes == len(_nx_boundary(G, parts, k))
    assert s.fanout == pytest.approx(_nx_fanout(G, parts))
    loads = np.bincount(parts, minlength=k)
    # imbalance = max load / (W / k) − 1 (the formula in partition/balance.py)
    assert s.imbalance == pytest.approx(loads.max() / (n / k) - 1)


def test_many_shards_listed_as_pairs():
    G, g = _both(2000, 6000, seed=5, weighted=True)
    k = 300  # above DENSE_MATRIX_MAX_K: pairs instead of the dense matrix
    assert k > DENSE_MATRIX_MAX_K
    parts = np.random.default_rng(5).integers(0, k, g.n)
    s = score(g, parts, k)
    d = s.to_dict()
    assert d["cut_matrix"] is None
    expected = {}  # direct recount over networkx's edge list
    for u, v, w in G.edges(data="weight"):
        a, b = sorted((int(parts[u]), int(parts[v])))
        if a != b:
            expected[(a, b)] = expected.get((a, b), 0.0) + w
    listed = {(a, b): w for a, b, w in d["cut_pairs"]}
    assert listed.keys() == expected.keys()
    assert all(listed[p] == pytest.approx(expected[p]) for p in expected)
    assert [p for p, _ in zip(listed, range(5))] == sorted(expected)[:5]  # sorted by (a, b)
    assert d["cut_pair_count"] == len(expected)
    assert s.cut_weight == pytest.approx(sum(expected.values()))
    small = s.to_dict(pairs_limit=10)
    assert small["cut_pairs"] is None and small["cut_pair_count"] == len(expected)
    assert CUT_PAIRS_LIMIT >= 10


def test_sparse_cut_matrix_above_dense_accumulation_limit():
    G, g = _both(3000, 9000, seed=8, weighted=True)
    k = 1500  # above the dense accumulation limit (1024) of the cut matrix
    parts = np.random.default_rng(8).integers(0, k, g.n)
    s = score(g, parts, k)
    expected = np.zeros((k, k))  # direct recount over networkx's edge list
    for u, v, w in G.edges(data="weight"):
        if parts[u] != parts[v]:
            expected[parts[u], parts[v]] += w
            expected[parts[v], parts[u]] += w
    assert np.allclose(s.cut_matrix.toarray(), expected)
    assert s.communication_volume == _nx_volume(G, parts)


# --- hand-worked examples --------------------------------------------------


def test_six_cycle_split_in_halves():
    # C6 = 0-1-2-3-4-5-0 cut into {0,1,2}, {3,4,5}: the cut edges are 2-3 and 5-0.
    g = build_graph(np.arange(6), (np.arange(6) + 1) % 6)
    s = score(g, np.array([0, 0, 0, 1, 1, 1]), eps=0.0)
    assert s.cut_edges == 2
    assert s.cut_fraction == pytest.approx(2 / 6)  # 2 of 6 edges
    assert s.imbalance == 0.0  # loads 3, 3; W/k = 3; 3/3 − 1 = 0
    assert s.communication_volume == 4  # nodes 0, 2, 3, 5 each see one other shard
    assert s.boundary_nodes == 4
    assert s.fanout == pytest.approx(10 / 6)  # four nodes touch 2 shards, two touch 1: (8 + 2)/6
    assert s.cut_matrix.toarray().tolist() == [[0, 2], [2, 0]]
    assert s.balanced is True and s.cap == 3  # ⌈6/2⌉ = 3, floor ⌊6/2⌋ = 3


def test_six_cycle_with_an_empty_shard():
    g = build_graph(np.arange(6), (np.arange(6) + 1) % 6)
    s = score(g, np.array([0, 0, 0, 1, 1, 1]), k=3, eps=0.0)
    assert s.shard_sizes.tolist() == [3, 3, 0]
    assert s.imbalance == pytest.approx(0.5)  # max load 3, W/k = 6/3 = 2: 3/2 − 1
    assert s.balanced is False  # cap ⌈6/3⌉ = 2 < 3, and shard 2 is below the floor 2
    assert len(s.violations) == 3


def test_star_centre_alone():
    # Star K1,4 (nx.star_graph(4)): centre 0 in shard 0, leaves 1..4 in shard 1.
    G = nx.star_graph(4)
    g = build_graph(np.array([u for u, _ in G.edges()]), np.array([v for _, v in G.edges()]))
    parts = np.array([0, 1, 1, 1, 1])
    s = score(g, parts, eps=0.0)
    assert s.cut_edges == 4 and s.cut_fraction == 1.0  # every edge touches the centre
    assert s.imbalance == pytest.approx(0.6)  # loads 1, 4; W/k = 2.5; 4/2.5 − 1 = 0.6
    assert s.communication_volume == 5  # the centre sees shard 1, each leaf sees shard 0
    assert s.boundary_nodes == 5
    assert s.fanout == 2.0  # every neighbourhood spans both shards
    assert s.balanced is False  # cap ⌈5/2⌉ = 3 < 4
    assert score(g, parts, eps=0.6).balanced is True  # cap ⌈1.6 · 5/2⌉ = 4


def test_weighted_triangle_with_node_weights():
    # Triangle a-b (1), b-c (2), a-c (3); a, b in shard 0 and c in shard 1;
    # node weights a = 1, b = 1, c = 4.
    g = build_graph(
        np.array(["a", "b", "a"], dtype=object), np.array(["b", "c", "c"], dtype=object),
        weights=np.array([1.0, 2.0, 3.0]),
        node_ids=np.array(["a", "b", "c"], dtype=object), node_weights=np.array([1, 1, 4]),
    )
    s = score(g, np.array([0, 0, 1]), eps=0.0)
    assert s.cut_edges == 2  # b-c and a-c
    assert s.cut_weight == 5.0  # 2 + 3
    assert s.total_edge_weight == 6.0  # 1 + 2 + 3
    assert s.cut_fraction == pytest.approx(5 / 6)
    assert s.shard_weights.tolist() == [2, 4]  # 1 + 1, 4
    assert s.imbalance == pytest.approx(1 / 3)  # W = 6, W/k = 3, 4/3 − 1
    assert s.communication_volume == 3 and s.boundary_nodes == 3
    assert s.shard_cut_weights.tolist() == [5.0, 5.0]
    # cap = ⌈6/2⌉ + w_max − 1 = 3 + 3 = 6 (partition/balance.py rule)
    assert s.cap == 6 and s.balanced is True


def test_edgeless_graph():
    g = build_graph(np.array([0, 1, 2]), np.array([0, 1, 2]))  # self-loops only: 3 isolated nodes
    s = score(g, np.array([0, 1, 2]))
    assert (s.cut_edges, s.cut_weight, s.cut_fraction) == (0, 0.0, 0.0)
    assert s.communication_volume == 0 and s.boundary_nodes == 0
    assert s.fanout == 1.0  # a lone node touches only its own shard
    assert s.to_dict()["cut_pair_count"] == 0


def test_to_dict_is_json_and_deterministic():
    G, g = _both(200, 600, seed=1, weighted=True)
    parts = np.random.default_rng(1).integers(0, 4, g.n)
    first = json.dumps(score(g, parts, 4, eps=0.1).to_dict(), sort_keys=True)
    again = json.dumps(score(g, parts, 4, eps=0.1).to_dict(), sort_keys=True)
    assert first == again
    d = json.loads(first)
    assert d["balance"]["imbalance_allowed"] == 0.1
    assert len(d["cut_matrix"]) == 4 and d["cut_pairs"] is None


@pytest.mark.parametrize(
    "parts, k, eps",
    [
        (np.array([0, 1, 0]), None, None),  # wrong length
        (np.array([0.0, 1.0, 0.0, 1.0]), None, None),  # not integers
        (np.array([0, 1, 2, 3]), 3, None),  # shard 3 >= k
        (np.array([0, -1, 0, 1]), None, None),  # negative shard
        (np.array([0, 1, 0, 1]), 5, None),  # k above the node count
        (np.array([0, 1, 0, 1]), 0, None),  # k < 1
        (np.array([0, 1, 0, 1]), 2, -0.1),  # negative imbalance
        (np.array([0, 1, 0, 4]), None, None),  # inferred k above the node count
    ],
)
def test_bad_parameters(parts, k, eps):
    g = build_graph(np.arange(4), (np.arange(4) + 1) % 4)
    with pytest.raises(ParameterError):
        score(g, parts, k, eps=eps)


# --- public graphs ---------------------------------------------------------


def _catalog():
    """file → (nodes, undirected edges) from ../shared/datasets/CATALOG.md."""
    return {name: (n, m) for name, (n, m, _) in shared_graph_rows().items()}


def _plain_read(path):
    """Plain Python reader: ``u v`` int pairs, ``#``/``%`` comment lines skipped."""
    opener = gzip.open if path.suffix == ".gz" else open
    pairs = []
    with opener(path, "rt") as fh:
        for line in fh:
            s = line.strip()
            if s and s[0] not in "#%":
                u, v = s.split()[:2]
                pairs.append((int(u), int(v)))
    return pairs


_LARGE = 100_000  # edges; larger graphs are marked slow and scored at k = 2
_COUNTS = _catalog() if (SHARED / "CATALOG.md").exists() else {}


@pytest.mark.skipif(not _COUNTS, reason=shared_missing("CATALOG.md"))
@pytest.mark.parametrize(
    "name",
    [pytest.param(f, marks=pytest.mark.slow) if m > _LARGE else f for f, (_, m) in sorted(_COUNTS.items())]
    or ["none"],
)
def test_public_graph_cut_matches_networkx(name):
    # Source of each file and of its counts: CATALOG.md (SNAP, SuiteSparse,
    # Walshaw archive); the counts are after symmetrising and dropping self-loops.
    n_expected, m_expected = _COUNTS[name]
    pairs = _plain_read(SHARED / name)
    G = nx.Graph()
    G.add_nodes_from(x for p in pairs for x in p)
    G.add_edges_from(p for p in pairs if p[0] != p[1])
    assert (G.number_of_nodes(), G.number_of_edges()) == (n_expected, m_expected)
    arr = np.array(pairs, dtype=np.int64)
    g = build_graph(arr[:, 0], arr[:, 1], source=name)
    assert (g.n, g.m) == (n_expected, m_expected)
    k = 2 if m_expected > _LARGE else 4
    parts = np.random.default_rng(2024).integers(0, k, g.n)
    part_of = dict(zip(g.ids.tolist(), parts.tolist()))
    expected = nx_cut(G, part_of, k, weight=None)
    s = score(g, parts, k)
    assert s.cut_edges == expected  # networkx cut_size over shard pairs
    assert s.cut_weight == float(expected)
