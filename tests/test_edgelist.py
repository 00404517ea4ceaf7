"""Tests of partition/edgelist.py and partition/graph.py: reading and normalising edge lists."""

from __future__ import annotations

import bz2
import gzip

import networkx as nx
import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from partition.edgelist import read_graph
from partition.errors import InputError
from partition.graph import build_graph

from conftest import SHARED, SHARED_MISSING, shared_graph_rows


def _catalog_counts():
    """Node and edge counts from ../shared/datasets/CATALOG.md (the collections' own counts)."""
    return {name: (n, m) for name, (n, m, _) in shared_graph_rows().items()}


def _nx_from_file(path):
    """Independent reference: networkx Graph from the raw lines, self-loops removed."""
    opener = gzip.open if str(path).endswith(".gz") else open
    g = nx.Graph()
    with opener(path, "rt") as fh:
        for line in fh:
            s = line.strip()
            if not s or s[0] in "#%":
                continue
            u, v = s.split()[:2]
            g.add_node(int(u))
            g.add_node(int(v))
            if u != v:
                g.add_edge(int(u), int(v))
    return g


@pytest.mark.skipif(not SHARED.exists(), reason=SHARED_MISSING)
def test_shared_graph_counts_match_catalog():
    # Source of the expected values: CATALOG.md, counts published by SNAP /
    # SuiteSparse / the Walshaw archive after symmetrising and dropping self-loops.
    counts = _catalog_counts()
    assert len(counts) == 17
    for name, (n, m) in counts.items():
        g = read_graph(SHARED / name)
        assert (g.n, g.m) == (n, m), name
        # CSR invariants: symmetric, sorted rows, no self-loops
        assert np.all(np.diff(g.indices[g.indptr[0] : g.indptr[1]]) > 0)
        assert not np.any(g.rows() == g.indices)


@pytest.mark.skipif(not SHARED.exists(), reason=SHARED_MISSING)
@pytest.mark.parametrize("name", ["ca-GrQc.txt.gz", "email-Eu-core.txt.gz", "minnesota.txt.gz"])
def test_edges_equal_networkx(name):
    # Reference: networkx's Graph, which merges u v / v u / repeats into one edge.
    ref = _nx_from_file(SHARED / name)
    g = read_graph(SHARED / name)
    u, v, _ = g.edges()
    ours = {(int(g.ids[a]), int(g.ids[b])) for a, b in zip(u, v)}
    theirs = {(min(a, b), max(a, b)) for a, b in ref.edges()}
    assert ours == theirs
    assert set(g.ids.tolist()) == set(ref.nodes())


def test_text_variants(tmp_path):
    body = "# header comment\n% matrix-market style comment\n1 2\n2\t3\n3,4\n  4   5  \n\n5 1\r\n2 1\n6 6\n"
    p = tmp_path / "g.txt"
    p.write_text(body)
    g = read_graph(p)
    # Worked by hand: nodes 1..6 (6 only in a self-loop: isolated), edges
    # {1-2, 2-3, 3-4, 4-5, 5-1}; "2 1" repeats 1-2.
    assert g.ids.tolist() == [1, 2, 3, 4, 5, 6]
    assert g.m == 5
    assert g.degrees().tolist() == [2, 2, 2, 2, 2, 0]
    for suffix, opener in ((".gz", gzip.open), (".bz2", bz2.open)):
        q = tmp_path / ("g.txt" + suffix)
        with opener(q, "wt") as fh:
            fh.write(body)
        h = read_graph(q)
        assert h.indices.tolist() == g.indices.tolist()


def test_string_ids_and_sorted_mapping(tmp_path):
    p = tmp_path / "g.txt"
    p.write_text("dock-b dock-a\ndock-c dock-b\n10 dock-a\n")
    g = read_graph(p)
    # Mixed ids: every id becomes a string; dense ids follow sorted string order.
    assert g.ids.tolist() == ["10", "dock-a", "dock-b", "dock-c"]
    assert g.m == 3


def test_weighted_duplicates_are_summed(tmp_path):
    p = tmp_path / "w.txt"
    p.write_text("a b 1.5\nb a 2\nb c 0.25\n")
    g = read_graph(p, weighted=True)
    u, v, w = g.edges()
    got = {(g.ids[a], g.ids[b]): x for a, b, x in zip(u, v, w)}
    assert got == {("a", "b"): 3.5, ("b", "c"): 0.25}  # 1.5 + 2 summed by hand
    assert g.total_edge_weight() == 3.75


def test_csv_tsv_parquet_columns(tmp_path):
    p = tmp_path / "e.csv"
    p.write_text("ts,src,dst,strength\n1,x,y,2\n2,y,z,3\n3,x,y,1\n")
    g = read_graph(p, source_column="src", target_column="dst", weight_column="strength")
    u, v, w = g.edges()
    assert sorted(w.tolist()) == [3.0, 3.0]  # x-y: 2 + 1; y-z: 3
    t = tmp_path / "e.tsv"
    t.write_text("src\tdst\n1\t2\n2\t3\n")
    assert read_graph(t).m == 2
    q = tmp_path / "e.parquet"
    pq.write_table(pa.table({"a": [1, 2, 3], "b": [2, 3, 1], "w": [1.0, 2.0, 3.0]}), q)
    g = read_graph(q, weight_column="w")
    assert g.m == 3 and g.total_edge_weight() == 6.0
    with pytest.raises(InputError, match="no column named 'nope'"):
        read_graph(q, source_column="nope")


def test_node_weights_and_isolated(tmp_path):
    e = tmp_path / "e.txt"
    e.write_text("1 2\n2 3\n")
    nw = tmp_path / "nw.txt"
    nw.write_text("# id weight\n1 5\n2 1\n3 0\n4 7\n")
    with pytest.raises(InputError) as err:
        read_graph(e, node_weights=nw)
    assert err.value.line == 5 and "does not appear in the edge list" in str(err.value)
    g = read_graph(e, node_weights=nw, allow_isolated=True)
    assert g.ids.tolist() == [1, 2, 3, 4]
    assert g.node_weights.tolist() == [5, 1, 0, 7]
    assert g.degrees().tolist() == [1, 2, 1, 0]
    partial = tmp_path / "partial.txt"
    partial.write_text("1 5\n2 1\n")
    with pytest.raises(InputError, match="have no weight"):
        read_graph(e, node_weights=partial)


@pytest.mark.parametrize(
    "body, weighted, line, pattern",
    [
        ("1 2\n2 3 4\n", False, 2, "expected 2 fields, found 3"),
        ("1 2\n2\n", False, 2, "expected 2 fields, found 1"),
        ("# c\n1 2 0.5\n2 3 heavy\n", True, 3, "is not a number"),
        ("1 2 1\n2 3 -1\n", True, 2, "finite and >= 0"),
        ("1 2 1\n2 3 nan\n", True, 2, "finite and >= 0"),
        ("1 2 1\n\n# x\n2 3 inf\n", True, 4, "finite and >= 0"),
    ],
)
def test_bad_lines_are_named(tmp_path, body, weighted, line, pattern):
    p = tmp_path / "bad.txt"
    p.write_text(body)
    with pytest.raises(InputError, match=pattern) as err:
        read_graph(p, weighted=weighted)
    assert err.value.line == line
    assert str(p) in str(err.value) and f"line {line}" in str(err.value)


def test_bad_node_weights(tmp_path):
    e = tmp_path / "e.txt"
    e.write_text("1 2\n")
    for body, line, pattern in (("1 2\n2 x\n", 2, "not a whole number"), ("1 1\n2 -3\n", 2, "negative"),
                                ("1 1\n2 1.5\n", 2, "not a whole number"), ("1 1\n1 2\n2 1\n", 2, "listed twice")):
        nw = tmp_path / "nw.txt"
        nw.write_text(body)
        with pytest.raises(InputError, match=pattern) as err:
            read_graph(e, node_weights=nw)
        assert err.value.line == line, body


def test_empty_and_missing(tmp_path):
    p = tmp_path / "empty.txt"
    p.write_text("# nothing here\n\n")
    with pytest.raises(InputError, match="empty"):
        read_graph(p)
    with pytest.raises(InputError, match="no such file"):
        read_graph(tmp_path / "missing.txt")


edge_lists = st.lists(st.tuples(st.integers(0, 30), st.integers(0, 30)), min_size=1, max_size=80)


@settings(max_examples=60, deadline=None)
@given(edge_lists, st.randoms(use_true_random=False))
def test_order_independent_and_matches_networkx(edges, rnd):
    # Reference: networkx Graph built from the same pairs, self-loops removed.
    src = np.array([e[0] for e in edges], dtype=np.int64)
    dst = np.array([e[1] for e in edges], dtype=np.int64)
    g = build_graph(src, dst)
    perm = list(range(len(edges)))
    rnd.shuffle(perm)
    h = build_graph(dst[perm], src[perm])  # reversed direction, shuffled order
    assert g.indices.tolist() == h.indices.tolist() and g.indptr.tolist() == h.indptr.tolist()
    ref = nx.Graph()
    ref.add_nodes_from(src.tolist() + dst.tolist())
    ref.add_edges_from((a, b) for a, b in edges if a != b)
    assert g.n == ref.number_of_nodes() and g.m == ref.number_of_edges()
    a = nx.to_scipy_sparse_array(ref, nodelist=g.ids.tolist(), format="csr")
    assert (abs(a - g.to_scipy()).sum()) == 0
