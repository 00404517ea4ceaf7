"""Tests of partition/placement/relabel.py: optimal shard renaming and the moved fraction."""

from __future__ import annotations

import itertools

import networkx as nx
import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from partition.errors import ParameterError
from partition.placement.relabel import MAX_CELLS, moved_fraction, overlap_matrix, relabel_to_match

SETTINGS = settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])


@st.composite
def two_partitions(draw, max_k=6, max_n=40):
    k_old = draw(st.integers(1, max_k))
    k_new = draw(st.integers(1, max_k))
    n = draw(st.integers(0, max_n))
    old = draw(st.lists(st.integers(0, k_old - 1), min_size=n, max_size=n))
    new = draw(st.lists(st.integers(0, k_new - 1), min_size=n, max_size=n))
    kind = draw(st.sampled_from(["unit", "int", "float"]))
    if kind == "unit":
        w = None
    elif kind == "int":
        w = draw(st.lists(st.integers(0, 9), min_size=n, max_size=n))
    else:
        w = draw(st.lists(st.floats(0, 10, allow_nan=False), min_size=n, max_size=n))
    return np.array(old, dtype=np.int64), np.array(new, dtype=np.int64), k_old, k_new, w


def _kept(old, new_relabelled, w):
    """Weight kept in place, recounted node by node."""
    w = [1.0] * len(old) if w is None else w
    return sum(wi for o, r, wi in zip(old.tolist(), new_relabelled.tolist(), w) if o == r)


def _brute_force_best(old, new, k_old, k_new, w):
    """Largest kept weight over every one-to-one renaming of the new shards (all permutations)."""
    labels = range(max(k_old, k_new))
    best = 0.0
    for names in itertools.permutations(labels, k_new):
        best = max(best, _kept(old, np.array(names, dtype=np.int64)[new] if len(new) else new, w))
    return best


@SETTINGS
@given(two_partitions())
def test_relabelling_equals_brute_force_optimum(case):
    # reference: exhaustive search over all permutations of shard names (k <= 6)
    old, new, k_old, k_new, w = case
    mapping, relabelled = relabel_to_match(old, new, k_old, k_new, weights=w)
    assert np.array_equal(relabelled, mapping[new])
    assert len(set(mapping.tolist())) == k_new  # one-to-one
    assert all(0 <= x < max(k_old, k_new) for x in mapping.tolist())
    if k_new >= k_old:
        assert set(mapping.tolist()) == set(range(k_new))
    assert _kept(old, relabelled, w) == pytest.approx(_brute_force_best(old, new, k_old, k_new, w), abs=1e-9)


@SETTINGS
@given(two_partitions(max_k=5), st.integers(0, 2**32 - 1))
def test_moved_fraction_matches_direct_recount(case, seed):
    # reference: a plain Python loop over the nodes
    old, new, _, _, w = case
    got = moved_fraction(old, new, weights=w)
    ws = [1.0] * len(old) if w is None else [float(x) for x in w]
    total = sum(ws)
    moved = sum(wi for o, n_, wi in zip(old.tolist(), new.tolist(), ws) if o != n_)
    assert got == pytest.approx(moved / total if total > 0 else 0.0, abs=1e-12)


def test_overlap_matrix_counts_each_pair():
    # hand count: nodes (old, new) = (0,1), (0,1), (1,0), (2,0), (2,2)
    old = np.array([0, 0, 1, 2, 2])
    new = np.array([1, 1, 0, 0, 2])
    expect = np.array([[0, 1, 1],   # new 0 <- old 1 (one node), old 2 (one node)
                       [2, 0, 0],   # new 1 <- old 0 (two nodes)
                       [0, 0, 1]])  # new 2 <- old 2 (one node)
    assert np.array_equal(overlap_matrix(old, new, 3, 3), expect)


def test_permuted_names_are_recovered():
    # the new partition is the old one under a known renaming perm: the optimum renames it back
    rng = np.random.default_rng(11)
    k = 9
    old = rng.integers(0, k, size=2000)
    old[:k] = np.arange(k)  # every shard non-empty, so the optimum is unique
    perm = rng.permutation(k)
    mapping, relabelled = relabel_to_match(old, perm[old], k, k)
    assert np.array_equal(mapping[perm], np.arange(k))
    assert np.array_equal(relabelled, old) and moved_fraction(old, relabelled) == 0.0


def test_ties_keep_names():
    # identical partitions with empty shards: every renaming of the empty shards is optimal;
    # the names are kept
    old = np.array([0, 0, 3, 3])
    mapping, _ = relabel_to_match(old, old.copy(), 5, 5)
    assert mapping.tolist() == [0, 1, 2, 3, 4]


def test_growing_and_shrinking_k():
    old = np.array([0, 0, 0, 1, 1, 1])
    # growing: new shard 2 takes old 0's nodes 0-1, new 0 takes old 1; spare shards 1, 3 get 2, 3
    new = np.array([2, 2, 1, 0, 0, 3])
    mapping, relabelled = relabel_to_match(old, new, 2, 4)
    assert mapping.tolist() == [1, 2, 0, 3]
    assert relabelled.tolist() == [0, 0, 2, 1, 1, 3]
    # shrinking: one new shard keeps the larger old shard's name
    mapping, _ = relabel_to_match(np.array([0, 1, 1, 2, 2, 2]), np.zeros(6, dtype=np.int64), 3, 1)
    assert mapping.tolist() == [2]


@pytest.mark.parametrize("k", [12, 20])
def test_agrees_with_networkx_max_weight_matching(k):
    # reference: networkx.max_weight_matching on the bipartite overlap graph (integer weights,
    # exact); beyond brute-force sizes
    rng = np.random.default_rng(k)
    old = rng.integers(0, k, size=3000)
    new = np.where(rng.random(3000) < 0.7, (old * 7 + 3) % k, rng.integers(0, k, size=3000))
    w = rng.integers(1, 5, size=3000)
    m = overlap_matrix(old, new, k, k, w)
    g = nx.Graph()
    for j in range(k):
        for i in range(k):
            if m[j, i] > 0:
                g.add_edge(("new", j), ("old", i), weight=int(m[j, i]))
    matching = nx.max_weight_matching(g)
    best = sum(g.edges[a, b]["weight"] for a, b in matching)
    _, relabelled = relabel_to_match(old, new, k, k, weights=w)
    assert int(w[relabelled == old].sum()) == best


def test_bad_inputs_raise_parameter_errors():
    with pytest.raises(ParameterError, match="outside"):
        relabel_to_match([0, 3], [0, 1], 3, 2)
    with pytest.raises(ParameterError, match="nodes"):
        relabel_to_match([0, 1], [0], 2, 2)
    with pytest.raises(ParameterError, match="non-negative"):
        relabel_to_match([0, 1], [0, 1], 2, 2, weights=[1, -1])
    with pytest.raises(ParameterError, match="integer"):
        moved_fraction([0.5], [0])
    with pytest.raises(ParameterError, match="k must be"):
        relabel_to_match([0], [0], 0, 1)
    k = int(np.sqrt(MAX_CELLS)) + 1
    with pytest.raises(ParameterError, match="dense assignment"):
        relabel_to_match([0], [0], k, k)
