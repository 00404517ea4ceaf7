"""Tests of partition.affinity against networkx, dense matrix algebra and public graphs."""

from pathlib import Path

import networkx as nx
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.stats import spearmanr

from partition.affinity import (
    common_neighbours,
    edge_affinity,
    jaccard_value,
    ppr_value,
    reverse_entries,
    wedge_sums,
)
from partition.errors import ParameterError
from partition.graph import build_graph
from partition.rules import AFFINITY_SCALE

from conftest import shared_missing  # noqa: E402

DATASETS = Path(__file__).resolve().parents[2] / "shared" / "datasets"


def graph_of(G):
    u, v = (np.array(x, dtype=np.int64) for x in zip(*G.edges())) if G.number_of_edges() else ([], [])
    return build_graph(np.asarray(u, np.int64), np.asarray(v, np.int64), node_ids=np.array(list(G.nodes()), np.int64), node_weights=np.ones(G.number_of_nodes(), np.int64))


def entries(g):
    return g.rows().astype(np.int64), g.indices.astype(np.int64)


def closed_jaccard_expected(G, g, hub_cap=None):
    """floor(2**20 · |N[u] ∩ N[v]| / |N[u] ∪ N[v]|) from networkx neighbour sets."""
    ids = g.ids
    rows, cols = entries(g)
    out = []
    for p in range(rows.shape[0]):
        u, v = int(ids[rows[p]]), int(ids[cols[p]])
        nu = set(G.neighbors(u)) | {u}
        nv = set(G.neighbors(v)) | {v}
        common = nu & nv
        if hub_cap is not None:  # capped hubs do not count as common neighbours
            common = {w for w in common if w in (u, v) or G.degree(w) <= hub_cap}
        union = len(nu) + len(nv) - len(common)
        out.append((len(common) * AFFINITY_SCALE) // union)
    return np.array(out, dtype=np.int64)


@pytest.mark.parametrize(
    "G",
    [
        nx.karate_club_graph(),  # Zachary 1977, as shipped with networkx
        nx.gnm_random_graph(120, 700, seed=4),
        nx.barabasi_albert_graph(150, 4, seed=2),
        nx.complete_graph(7),
    ],
)
def test_jaccard_matches_networkx_neighbourhoods(G):
    g = graph_of(G)
    got = edge_affinity(g, "jaccard", hub_cap=10**6)
    assert np.array_equal(got, closed_jaccard_expected(G, g))


def test_jaccard_of_complete_graph_is_one():
    # in K_n every closed neighbourhood is the whole vertex set
    g = graph_of(nx.complete_graph(6))
    assert (edge_affinity(g, "jaccard") == AFFINITY_SCALE).all()


def test_hub_cap_drops_wedges_through_hubs():
    G = nx.barabasi_albert_graph(200, 3, seed=9)
    g = graph_of(G)
    cap = 12
    got = edge_affinity(g, "jaccard", hub_cap=cap)
    assert np.array_equal(got, closed_jaccard_expected(G, g, hub_cap=cap))
    assert not np.array_equal(got, edge_affinity(g, "jaccard", hub_cap=10**6))


def test_triangle_total_matches_networkx():
    G = nx.gnm_random_graph(300, 3000, seed=11)
    g = graph_of(G)
    count = common_neighbours(g, hub_cap=10**6)
    # every triangle gives each of its 3 edges one common neighbour, and each
    # edge appears twice in CSR: sum = 6 · triangles (nx.triangles counts each
    # triangle at its 3 corners)
    assert count.sum() == 6 * (sum(nx.triangles(G).values()) // 3)


def test_wedge_sums_match_python_sets():
    G = nx.gnm_random_graph(90, 600, seed=12)
    g = graph_of(G)
    value = np.random.default_rng(0).integers(0, 1000, g.n)
    cap = 16
    got = wedge_sums(g, value, hub_cap=cap)
    rows, cols = entries(g)
    nbr = [set(G.neighbors(x)) for x in range(g.n)]
    want = [sum(int(value[w]) for w in nbr[a] & nbr[b] if len(nbr[w]) <= cap) for a, b in zip(rows, cols)]
    assert got.tolist() == want
    with pytest.raises(ParameterError):
        wedge_sums(g, np.ones(3, dtype=np.int64))


def dense_truncated_ppr(G, g, alpha, steps):
    """ppr_u(v) = Σ_{t=1..T} α(1−α)^t P^t[u, v], P = D⁻¹A, by dense matrix powers."""
    A = nx.to_numpy_array(G, nodelist=[int(x) for x in g.ids], weight=None)
    P = A / A.sum(axis=1, keepdims=True)
    out, Pt = np.zeros_like(P), np.eye(P.shape[0])
    for t in range(1, steps + 1):
        Pt = Pt @ P
        out += alpha * (1 - alpha) ** t * Pt
    return out


@pytest.mark.parametrize("alpha,steps", [(0.15, 2), (0.3, 2), (0.15, 1)])
@pytest.mark.parametrize("G", [nx.karate_club_graph(), nx.gnm_random_graph(80, 400, seed=5)])
def test_ppr_matches_dense_series(G, alpha, steps):
    G = nx.Graph(G.subgraph(max(nx.connected_components(G), key=len)))
    g = graph_of(G)
    got = edge_affinity(g, "ppr", alpha=alpha, steps=steps, hub_cap=10**6)
    ppr = dense_truncated_ppr(G, g, alpha, steps)
    rows, cols = entries(g)
    # documented symmetrisation: min of the two directions, divided by α(1−α)
    want = np.minimum(ppr[rows, cols], ppr[cols, rows]) / (alpha * (1 - alpha)) * AFFINITY_SCALE
    # fixed-point wedge sums (floor(2**32/d) per wedge) cost < 1e-6 unit
    assert np.abs(got - want).max() <= 1.0


def test_ppr_orders_edges_like_networkx_pagerank():
    # sanity check of order only: full personalised PageRank (networkx, damping
    # 1 − α) symmetrised the same way should rank edges similarly
    G = nx.karate_club_graph()
    g = graph_of(G)
    alpha = 0.15
    got = edge_affinity(g, "ppr", alpha=alpha, hub_cap=10**6)
    nodes = [int(x) for x in g.ids]
    pr = {u: nx.pagerank(G, alpha=1 - alpha, personalization={u: 1.0}, weight=None) for u in nodes}
    rows, cols = entries(g)
    ref = [min(pr[nodes[a]][nodes[b]], pr[nodes[b]][nodes[a]]) for a, b in zip(rows, cols)]
    rho = spearmanr(got, ref).statistic
    assert rho > 0.8, rho


@settings(max_examples=25, deadline=None)
@given(
    st.lists(st.tuples(st.integers(0, 25), st.integers(0, 25)), min_size=1, max_size=120),
    st.sampled_from(["jaccard", "ppr", "weights", "unit"]),
    st.integers(1, 6),
)
def test_affinity_is_symmetric_and_in_range(edges, method, hub_cap):
    src = np.array([a for a, _ in edges], dtype=np.int64)
    dst = np.array([b for _, b in edges], dtype=np.int64)
    w = np.arange(1, len(edges) + 1, dtype=np.float64)
    g = build_graph(src, dst, weights=w)
    aff = edge_affinity(g, method, hub_cap=hub_cap)
    assert aff.dtype == np.int64 and aff.shape == g.indices.shape
    assert np.array_equal(aff, aff[reverse_entries(g)])
    assert (aff >= 0).all() and (aff <= AFFINITY_SCALE).all()


def test_value_kernels_worked_examples():
    # triangle edge: N[u] = N[v] = {u, v, w}, Jaccard 3/3 = 1
    assert jaccard_value([1], [2], [2]).tolist() == [AFFINITY_SCALE]
    # path edge inside a path: N[u] = {t, u, v}, N[v] = {u, v, x}: 2/4
    assert jaccard_value([0], [2], [2]).tolist() == [AFFINITY_SCALE // 2]
    # isolated edge: both directions are α(1−α)·1, divided by α(1−α) = 1
    assert ppr_value([0], [1], [1]).tolist() == [AFFINITY_SCALE]
    # triangle edge, α = 0.15: (1 + 0.85 · 1/2) / 2 = 0.7125
    assert ppr_value([2**31], [2], [2]).tolist() == [round(0.7125 * AFFINITY_SCALE)]


def test_reverse_entries_is_the_twin():
    g = graph_of(nx.gnm_random_graph(50, 200, seed=1))
    rev = reverse_entries(g)
    rows, cols = entries(g)
    assert np.array_equal(rows[rev], cols) and np.array_equal(cols[rev], rows)
    assert np.array_equal(rev[rev], np.arange(rows.shape[0]))


def test_weights_and_unit():
    g = build_graph(np.array([0, 1, 2]), np.array([1, 2, 0]), weights=np.array([2.0, 4.0, 1.0]))
    aff = edge_affinity(g, "weights")
    rows, cols = entries(g)
    w = {(0, 1): 2.0, (1, 2): 4.0, (0, 2): 1.0}
    want = [round(w[(min(a, b), max(a, b))] / 4.0 * AFFINITY_SCALE) for a, b in zip(rows, cols)]
    assert aff.tolist() == want
    assert (edge_affinity(g, "unit") == AFFINITY_SCALE).all()
    zero = build_graph(np.array([0]), np.array([1]), weights=np.array([0.0]))
    assert (edge_affinity(zero, "weights") == 0).all()


def test_bad_parameters():
    g = graph_of(nx.path_graph(4))
    with pytest.raises(ParameterError):
        edge_affinity(g, "cosine")
    with pytest.raises(ParameterError):
        edge_affinity(g, "ppr", alpha=1.0)
    with pytest.raises(ParameterError):
        edge_affinity(g, "ppr", steps=3)
    with pytest.raises(ParameterError):
        edge_affinity(g, "jaccard", hub_cap=0)


def test_public_graph_common_neighbours():
    # email-Eu-core (SNAP, Leskovec & Krevl): per-edge common neighbours from
    # networkx neighbour sets; triangle total from nx.triangles
    path = DATASETS / "email-Eu-core.txt.gz"
    if not path.exists():
        pytest.skip(shared_missing("email-Eu-core.txt.gz"))
    from partition.edgelist import read_graph

    g = read_graph(path)
    G = nx.Graph()
    G.add_nodes_from(range(g.n))
    G.add_edges_from(zip(*g.edges()[:2]))
    count = common_neighbours(g, hub_cap=10**6)
    rows, cols = entries(g)
    nbr = [set(G.neighbors(x)) for x in range(g.n)]
    want = np.array([len(nbr[a] & nbr[b]) for a, b in zip(rows, cols)])
    assert np.array_equal(count, want)
    assert count.sum() == 2 * sum(nx.triangles(G).values())
