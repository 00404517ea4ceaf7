"""Tests of partition/contract.py against scipy (Pᵀ A P) and networkx (quotient_graph, cut_size)."""

import networkx as nx
import numpy as np
import pytest
import scipy.sparse as sp
from hypothesis import given, settings
from hypothesis import strategies as st

from partition.contract import contract, dense_labels, project
from partition.errors import ParameterError
from partition.graph import build_graph

from conftest import nx_graph  # noqa: E402


def _random_graph(seed, n=30, m=80, weighted=True, node_weights=True):
    rng = np.random.default_rng(seed)
    src = rng.integers(0, n, m)
    dst = rng.integers(0, n, m)
    w = rng.integers(1, 9, m).astype(np.float64) if weighted else None
    nw = rng.integers(0, 5, n) if node_weights else None
    return build_graph(src, dst, w, node_ids=np.arange(n) if node_weights else None, node_weights=nw)


def _indicator(labels, c):
    n = labels.shape[0]
    return sp.csr_matrix((np.ones(n), (np.arange(n), labels)), shape=(n, c))


@settings(max_examples=40, deadline=None)
@given(seed=st.integers(0, 10_000), c=st.integers(1, 12))
def test_contract_matches_scipy_quotient_matrix(seed, c):
    # Reference: the coarse adjacency is Pᵀ A P with the diagonal removed, and
    # the coarse node weights are Pᵀ w (scipy.sparse matrix products).
    g = _random_graph(seed)
    labels = np.random.default_rng(seed + 1).integers(0, c, g.n)
    coarse = contract(g, labels, c)
    p = _indicator(labels, c)
    expect = (p.T @ g.to_scipy() @ p).toarray()
    np.fill_diagonal(expect, 0.0)
    np.testing.assert_array_equal(coarse.to_scipy().toarray(), expect)
    np.testing.assert_array_equal(coarse.node_weights, p.T @ g.node_weights)
    assert coarse.n == c
    # CSR invariants of the shared Graph type: rows sorted, symmetric, no self-loops.
    for i in range(coarse.n):
        row = coarse.neighbours(i)
        assert np.all(np.diff(row) > 0) and i not in row


def test_contract_matches_networkx_quotient_graph():
    # Reference: networkx.quotient_graph sums the weights of the edges between
    # blocks (its default edge_data); node weights summed with node_data.
    g = _random_graph(7, n=20, m=50)
    labels = np.random.default_rng(3).integers(0, 5, g.n)
    G = nx.Graph()
    for v in range(g.n):
        G.add_node(v, w=int(g.node_weights[v]))
    for u, v, w in zip(*g.edges()):
        G.add_edge(int(u), int(v), weight=float(w))
    blocks = [set(np.flatnonzero(labels == b).tolist()) for b in range(5)]
    Q = nx.quotient_graph(G, blocks, node_data=lambda b: {"w": sum(G.nodes[v]["w"] for v in b)}, relabel=True)
    coarse = contract(g, labels, 5)
    for b in range(5):
        assert coarse.node_weights[b] == Q.nodes[b]["w"]
    qe = {(min(u, v), max(u, v)): d["weight"] for u, v, d in Q.edges(data=True) if u != v}
    ours = {(int(u), int(v)): float(w) for u, v, w in zip(*coarse.edges())}
    assert ours == {e: w for e, w in qe.items() if w != 0}


def test_contract_unit_weights_counts_edges():
    # Worked example: path 0-1-2-3 grouped as {0,1},{2,3}: one coarse edge of
    # weight 1 (the edge 1-2), node weights 2 and 2.
    g = build_graph(np.array([0, 1, 2]), np.array([1, 2, 3]))
    coarse = contract(g, np.array([0, 0, 1, 1]))
    assert coarse.n == 2 and coarse.m == 1
    assert coarse.edge_weights.tolist() == [1.0, 1.0]
    assert coarse.node_weights.tolist() == [2, 2]


def test_unused_labels_are_empty_nodes():
    g = build_graph(np.array([0, 1]), np.array([1, 2]))
    coarse = contract(g, np.array([0, 3, 3]), n_clusters=5)
    assert coarse.n == 5
    assert coarse.node_weights.tolist() == [1, 0, 0, 2, 0]
    assert coarse.degrees().tolist() == [1, 0, 0, 1, 0]


@settings(max_examples=30, deadline=None)
@given(seed=st.integers(0, 10_000))
def test_cut_is_preserved_by_projection(seed):
    # Reference: networkx.algorithms.cut_size on the fine graph equals the
    # weight between the two coarse sides counted on the coarse graph.
    g = _random_graph(seed, node_weights=False)
    rng = np.random.default_rng(seed)
    labels = rng.integers(0, 8, g.n)
    q = rng.integers(0, 2, 8)
    coarse = contract(g, labels, 8)
    fine = project(q, labels)
    G = nx_graph(g)
    side = set(np.flatnonzero(fine == 1).tolist())
    expect = nx.cut_size(G, side, weight="weight")
    cu, cv, cw = coarse.edges()
    assert float(cw[q[cu] != q[cv]].sum()) == pytest.approx(expect)


def test_project_is_indexing():
    labels = np.array([2, 0, 1, 2, 0])
    assert project(np.array([5, 6, 7]), labels).tolist() == [7, 5, 6, 7, 5]
    with pytest.raises(ParameterError):
        project(np.array([0, 1]), labels)
    with pytest.raises(ParameterError):
        project(np.array([0, 1, 2]), labels.astype(float))


def test_bad_labels_are_rejected():
    g = build_graph(np.array([0, 1]), np.array([1, 2]))
    with pytest.raises(ParameterError, match="length 3"):
        contract(g, np.array([0, 1]))
    with pytest.raises(ParameterError, match="non-negative"):
        contract(g, np.array([0, -1, 1]))
    with pytest.raises(ParameterError, match="n_clusters"):
        contract(g, np.array([0, 4, 1]), n_clusters=2)
    with pytest.raises(ParameterError, match="integers"):
        contract(g, np.array([0.0, 1.0, 1.0]))


def test_dense_labels_number_tuples_lexicographically():
    # Reference: numpy.unique over the rows of the stacked columns (axis=0)
    # gives the distinct tuples in lexicographic order and the inverse index.
    rng = np.random.default_rng(5)
    a = rng.integers(0, 4, 200)
    b = rng.integers(0, 3, 200)
    labels, count = dense_labels(a, b)
    uniq, inverse = np.unique(np.stack([a, b], axis=1), axis=0, return_inverse=True)
    assert count == uniq.shape[0]
    np.testing.assert_array_equal(labels, inverse.ravel())
