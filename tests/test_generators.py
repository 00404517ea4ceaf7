"""Tests for partition/generators.py (and the demo graph built by datasets/make_demo.py)."""

from __future__ import annotations

import gzip
import importlib.util
from pathlib import Path

import networkx as nx
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from partition.errors import ParameterError
from partition.generators import edgelist_bytes, grid2d, grid3d, planted_partition, rmat, write_edgelist

REPO = Path(__file__).resolve().parents[1]


def _edge_set(src, dst):
    return {(int(min(u, v)), int(max(u, v))) for u, v in zip(src, dst)}


# ----------------------------------------------------------------------------
# grids
# ----------------------------------------------------------------------------
@settings(max_examples=25, deadline=None)
@given(st.integers(1, 9), st.integers(1, 9))
def test_grid2d_matches_networkx_and_edge_formula(a, b):
    src, dst = grid2d(a, b)
    # Edge count of the a x b grid: a(b-1) + b(a-1) (count of row and column neighbours).
    assert len(src) == a * (b - 1) + b * (a - 1)
    # networkx.grid_2d_graph with node (i, j) -> row-major id i*b + j is the same edge set.
    ref = nx.grid_2d_graph(a, b)
    expected = {tuple(sorted((i * b + j, k * b + l))) for (i, j), (k, l) in ref.edges()}
    assert _edge_set(src, dst) == expected
    assert len(_edge_set(src, dst)) == len(src)  # no duplicates
    assert (src < dst).all()


@settings(max_examples=15, deadline=None)
@given(st.integers(1, 5), st.integers(1, 5), st.integers(1, 5))
def test_grid3d_matches_networkx(a, b, c):
    src, dst = grid3d(a, b, c)
    # Edge count of the a x b x c grid: ab(c-1) + a(b-1)c + (a-1)bc.
    assert len(src) == a * b * (c - 1) + a * (b - 1) * c + (a - 1) * b * c
    ref = nx.grid_graph(dim=[c, b, a])  # networkx nodes are (i, j, l) tuples for sides a, b, c
    expected = {tuple(sorted(((i * b + j) * c + l, (p * b + q) * c + r))) for (i, j, l), (p, q, r) in ref.edges()}
    assert _edge_set(src, dst) == expected


def test_straight_cut_of_4x6_grid_has_4_edges():
    # Expected 4: the straight cut across the longer side of an a x b grid (a <= b, b even)
    # cuts a edges; it is the minimum bisection (Bollobás & Leader 1991, from memory).
    a, b = 4, 6
    src, dst = grid2d(a, b)
    g = nx.Graph(list(zip(src.tolist(), dst.tolist())))
    left = {i * b + j for i in range(a) for j in range(b // 2)}
    assert len(left) == a * b // 2
    assert nx.cut_size(g, left) == 4


def test_minimum_bisection_of_small_grid_by_exhaustion():
    # Brute force over all balanced bisections of the 2 x 4 grid: the minimum is a = 2
    # (the value the edge-isoperimetric result gives for a <= b, b even).
    from itertools import combinations

    src, dst = grid2d(2, 4)
    g = nx.Graph(list(zip(src.tolist(), dst.tolist())))
    best = min(nx.cut_size(g, set(side)) for side in combinations(range(8), 4))
    assert best == 2


def test_grid_rejects_bad_sides():
    with pytest.raises(ParameterError):
        grid2d(0, 3)
    with pytest.raises(ParameterError):
        grid3d(2, 2, 1.5)


# ----------------------------------------------------------------------------
# planted partition
# ----------------------------------------------------------------------------
def test_planted_cut_equals_networkx_cut_size():
    src, dst, parts = planted_partition(3, 40, 0.3, 0.02, seed=7)
    n = 120
    assert np.bincount(parts).tolist() == [40, 40, 40]
    g = nx.Graph()
    g.add_nodes_from(range(n))
    g.add_edges_from(zip(src.tolist(), dst.tolist()))
    assert g.number_of_edges() == len(src)  # no duplicate pairs
    assert nx.number_of_selfloops(g) == 0
    planted_cut = int((parts[src] != parts[dst]).sum())
    # networkx.cut_size of block 0 vs the rest plus block 1 vs block 2 counts every between-block edge.
    sets = [set(np.flatnonzero(parts == p).tolist()) for p in range(3)]
    ref = nx.cut_size(g, sets[0]) + nx.cut_size(g, sets[1], sets[2])
    assert planted_cut == ref
    # ids are shuffled: block 0 is not simply the first 40 ids
    assert sets[0] != set(range(40))


def test_planted_partition_edge_counts_follow_binomial_means():
    # Expected counts: k*C(s,2)*p_in within blocks and C(k,2)*s^2*p_out between (binomial means);
    # tolerance 5 standard deviations.
    k, s, p_in, p_out = 4, 100, 0.1, 0.01
    src, dst, parts = planted_partition(k, s, p_in, p_out, seed=3)
    inside = int((parts[src] == parts[dst]).sum())
    between = len(src) - inside
    n_in, n_out = k * s * (s - 1) // 2, k * (k - 1) // 2 * s * s
    assert abs(inside - n_in * p_in) < 5 * np.sqrt(n_in * p_in * (1 - p_in))
    assert abs(between - n_out * p_out) < 5 * np.sqrt(n_out * p_out * (1 - p_out))


def test_planted_partition_extremes_and_seed():
    src, dst, parts = planted_partition(2, 5, 1.0, 0.0, seed=1)
    assert len(src) == 2 * 10  # two complete K5: 2 * C(5,2)
    assert (parts[src] == parts[dst]).all()
    src, dst, _ = planted_partition(3, 4, 0.0, 1.0, seed=1)
    assert len(src) == 3 * 16  # complete 3-partite K(4,4,4): C(3,2) * 4 * 4
    a = planted_partition(3, 30, 0.2, 0.05, seed=11)
    b = planted_partition(3, 30, 0.2, 0.05, seed=11)
    c = planted_partition(3, 30, 0.2, 0.05, seed=12)
    assert all(np.array_equal(x, y) for x, y in zip(a, b))
    assert not np.array_equal(a[0], c[0]) or not np.array_equal(a[1], c[1])
    with pytest.raises(ParameterError):
        planted_partition(2, 5, 1.5, 0.0)


# ----------------------------------------------------------------------------
# R-MAT
# ----------------------------------------------------------------------------
def test_rmat_size_range_and_seed():
    src, dst = rmat(10, edge_factor=8, seed=5)
    # Graph500 specification: the generator emits edge_factor * 2^scale edges before deduplication.
    assert len(src) == len(dst) == 8 * 2**10
    assert src.dtype == np.int64 and src.min() >= 0 and max(src.max(), dst.max()) < 2**10
    again = rmat(10, edge_factor=8, seed=5)
    assert np.array_equal(src, again[0]) and np.array_equal(dst, again[1])
    other = rmat(10, edge_factor=8, seed=6)
    assert not np.array_equal(src, other[0])


def test_rmat_degree_skew():
    # R-MAT with the Graph500 parameters has a heavy-tailed degree distribution
    # (Chakrabarti, Zhan & Faloutsos 2004): the largest degree is far above the mean.
    src, dst = rmat(14, seed=1)
    g = nx.Graph()
    g.add_edges_from(zip(src.tolist(), dst.tolist()))
    g.remove_edges_from(nx.selfloop_edges(g))
    deg = np.array([d for _, d in g.degree()])
    assert deg.max() > 20 * deg.mean()
    # The permutation spreads hubs: the 10 largest-degree nodes are not all low ids.
    top = np.argsort(deg)[-10:]
    nodes = np.array(list(g.nodes()))[top]
    assert nodes.max() > 2**12


def test_rmat_quadrant_probabilities_at_top_level():
    # R-MAT definition: one bit level picks quadrant 00, 01, 10, 11 with probabilities a, b, c,
    # d = 1 - a - b - c. At scale 1 there are 2 nodes, and under either relabelling of them
    a, b, c = 0.6, 0.15, 0.2
    src, dst = rmat(1, edge_factor=200000, a=a, b=b, c=c, seed=2)
    same = src == dst
    # "src == dst" means quadrant 00 or 11: probability a + d (tolerance 5 binomial std devs).
    d = 1 - a - b - c
    m = len(src)
    assert abs(same.mean() - (a + d)) < 5 * np.sqrt((a + d) * (1 - a - d) / m)


def test_rmat_rejects_bad_parameters():
    with pytest.raises(ParameterError):
        rmat(0)
    with pytest.raises(ParameterError):
        rmat(4, a=0.5, b=0.3, c=0.3)


# ----------------------------------------------------------------------------
# output
# ----------------------------------------------------------------------------
def test_write_edgelist_round_trip_with_networkx(tmp_path):
    src, dst = grid2d(3, 5)
    for name in ("g.txt", "g.txt.gz"):
        path = tmp_path / name
        write_edgelist(path, src, dst, comment="3 x 5 grid\nrow-major ids")
        g = nx.read_edgelist(path, nodetype=int)  # networkx reads '#' comments and .gz by name
        assert {tuple(sorted(e)) for e in g.edges()} == _edge_set(src, dst)
    raw = gzip.decompress((tmp_path / "g.txt.gz").read_bytes())
    assert raw == (tmp_path / "g.txt").read_bytes()
    assert raw.startswith(b"# 3 x 5 grid\n# row-major ids\n# u v\n")
    write_edgelist(tmp_path / "again.txt.gz", src, dst, comment="3 x 5 grid\nrow-major ids")
    assert (tmp_path / "again.txt.gz").read_bytes() == (tmp_path / "g.txt.gz").read_bytes()


def test_edgelist_bytes_weights_and_errors():
    text = edgelist_bytes(np.array([1, 2]), np.array([3, 4]), weights=[0.5, 2.0])
    assert text.decode().splitlines() == ["# u v w", "1 3 0.5", "2 4 2"]
    with pytest.raises(ParameterError):
        edgelist_bytes(np.array([1, 2]), np.array([3]))
    with pytest.raises(ParameterError):
        edgelist_bytes(np.array(["a"], dtype=object), np.array(["b"], dtype=object))


# ----------------------------------------------------------------------------
# the demo graph
# ----------------------------------------------------------------------------
def _load_make_demo():
    spec = importlib.util.spec_from_file_location("make_demo", REPO / "datasets" / "make_demo.py")
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod


def test_demo_graph_is_reproduced_byte_for_byte(tmp_path):
    committed = REPO / "datasets" / "demo" / "larkspur-bay-rides.csv.gz"
    make_demo = _load_make_demo()
    out = tmp_path / "demo.csv.gz"
    make_demo.write_demo(out)
    assert out.read_bytes() == committed.read_bytes()
    assert committed.stat().st_size < 300_000


def test_demo_graph_shape():
    from partition.edgelist import read_graph

    g = read_graph(REPO / "datasets" / "demo" / "larkspur-bay-rides.csv.gz", weighted=True)
    assert 2000 <= g.n <= 5000
    assert g.weighted and g.edge_weight_array().min() >= 4  # MIN_RIDES in make_demo.py
    assert g.ids.dtype == object and all(str(i).startswith("dock-") for i in g.ids[:50])
    # nx.is_connected as an outside check that the scenario is one network
    h = nx.Graph()
    s, t, _ = g.edges()
    h.add_edges_from(zip(s.tolist(), t.tolist()))
    assert h.number_of_nodes() == g.n and nx.is_connected(h)
