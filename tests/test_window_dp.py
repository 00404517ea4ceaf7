"""Tests of partition.refine.window_dp: boundary moves by dynamic programming."""

from __future__ import annotations

import itertools
from pathlib import Path

import networkx as nx
import numpy as np
import pytest
import scipy.sparse.csgraph as csgraph
from hypothesis import given, settings
from hypothesis import strategies as st

from partition.balance import balance_rule
from partition.cut import boundaries_from_parts, line_cut, parts_from_boundaries
from partition.errors import ParameterError
from partition.graph import build_graph
from partition.refine.gains import cut_weights
from partition.refine.window_dp import chain_dp, line_edges, refine_window, window_dp_round

from conftest import nx_cut, nx_graph, shared_missing  # noqa: E402

DATASETS = Path(__file__).resolve().parents[2] / "shared" / "datasets"


def _random_graph(n, p, seed, weighted=False, node_weights=None):
    rng = np.random.default_rng(seed)
    iu, ju = np.triu_indices(n, 1)
    keep = rng.random(iu.shape[0]) < p
    src, dst = iu[keep], ju[keep]
    w = rng.integers(1, 4, src.shape[0]).astype(np.float64) if weighted else None
    return build_graph(src, dst, weights=w, node_ids=np.arange(n),
                       node_weights=np.ones(n, np.int64) if node_weights is None else node_weights)


def _unit_nodes(g):
    # drop node weights that are all ones so the exact (floor) rule applies
    g.node_weights = None if np.all(g.node_weights == 1) else g.node_weights
    return g


def _windows(b, n, w):
    # the window rule as documented in partition.refine.window_dp, written out independently
    full = [0] + list(b) + [n]
    out = []
    for j in range(1, len(full) - 1):
        lo = max(full[j] - w, -(-(full[j - 1] + full[j]) // 2))
        hi = min(full[j] + w, (full[j] + full[j + 1]) // 2)
        out.append(range(lo, hi + 1))
    return out


def _balanced(g, order, b, k, rule):
    parts = parts_from_boundaries(order, np.array(b, dtype=np.int64), k)
    return rule.check(np.bincount(parts, weights=g.node_weight_array(), minlength=k)), parts


def _brute_force(g, G, order, b, k, rule, w, free):
    """Least cut over all boundary vectors with the free boundaries in their windows."""
    wins = _windows(b, g.n, w)
    choices = [wins[j] if free[j] else [b[j]] for j in range(k - 1)]
    best = None
    for cand in itertools.product(*choices):
        if any(x > y for x, y in zip(cand, cand[1:])):
            continue
        ok, parts = _balanced(g, order, cand, k, rule)
        if ok:
            c = nx_cut(G, parts, k)
            best = c if best is None else min(best, c)
    return best


def _setup(n, k, seed, eps, weighted_nodes):
    rng = np.random.default_rng(seed)
    nw = rng.integers(0, 4, n) if weighted_nodes else None
    g = _unit_nodes(_random_graph(n, 0.3, seed, weighted=seed % 2 == 0, node_weights=nw))
    order = rng.permutation(n)
    parts = line_cut(order, g.node_weights, k)
    rule = balance_rule(g.node_weights, k, eps, n_nodes=n)
    weights, _ = cut_weights(g.edge_weights)
    p, q, ew = line_edges(g, order, weights)
    prefix = np.concatenate(([0], np.cumsum(g.node_weight_array()[order])))
    return g, order, parts, rule, (p, q, ew, prefix)


@settings(max_examples=40, deadline=None)
@given(
    st.integers(min_value=6, max_value=16),
    st.integers(min_value=2, max_value=4),
    st.integers(min_value=1, max_value=3),
    st.sampled_from([0.0, 0.25, 0.6]),
    st.booleans(),
    st.integers(0, 2**31),
)
def test_matches_brute_force(n, k, w, eps, weighted_nodes, seed):
    k = min(k, n)
    g, order, parts, rule, (p, q, ew, prefix) = _setup(n, k, seed, eps, weighted_nodes)
    G = nx_graph(g)
    b = boundaries_from_parts(order, parts, k)
    before = nx_cut(G, parts, k)
    masks = [np.ones(k - 1, bool)] + [np.arange(k - 1) == j for j in range(k - 1)]
    for free in masks:
        new, gain = window_dp_round(p, q, ew, prefix, b, free, w, rule.cap, rule.floor)
        ok, out = _balanced(g, order, new, k, rule)
        assert ok
        assert np.all(new[~free] == b[~free])
        after = nx_cut(G, out, k)
        assert after == before - gain  # reported gain = networkx recount
        assert after == _brute_force(g, G, order, b.tolist(), k, rule, w, free)  # exact optimum


@settings(max_examples=25, deadline=None)
@given(
    st.integers(min_value=8, max_value=60),
    st.integers(min_value=2, max_value=8),
    st.sampled_from([0, 1, 2, 3]),
    st.sampled_from([0.0, 0.1, 0.5]),
    st.booleans(),
    st.integers(0, 2**31),
)
def test_refine_keeps_balance_and_never_raises_the_cut(n, k, chain_length, eps, weighted_nodes, seed):
    k = min(k, n)
    g, order, parts, rule, _ = _setup(n, k, seed, eps, weighted_nodes)
    G = nx_graph(g)
    before = nx_cut(G, parts, k)
    out, stats = refine_window(g, order, parts, k, rule, w=3, chain_length=chain_length)
    assert rule.check(np.bincount(out, weights=g.node_weight_array(), minlength=k))
    assert stats["cut_before"] == before
    assert stats["cut_after"] == nx_cut(G, out, k) <= before
    assert np.array_equal(boundaries_from_parts(order, out, k), stats["boundaries"])


@settings(max_examples=25, deadline=None)
@given(st.integers(min_value=20, max_value=80), st.integers(min_value=3, max_value=9),
       st.integers(min_value=1, max_value=3), st.integers(0, 2**31))
def test_chains_are_independent(n, k, chain, seed):
    k = min(k, n)
    g, order, parts, rule, (p, q, ew, prefix) = _setup(n, k, seed, 0.3, False)
    b = boundaries_from_parts(order, parts, k)
    j = np.arange(1, k)
    free = j % (chain + 1) != 0  # runs of `chain` free boundaries between fixed ones
    together, gain = window_dp_round(p, q, ew, prefix, b, free, 4, rule.cap, rule.floor)
    # each chain alone (everything else fixed), from the same start, then merged
    merged, total = b.copy(), 0
    runs = np.split(np.flatnonzero(free), np.flatnonzero(np.diff(np.flatnonzero(free)) > 1) + 1)
    for run in runs:
        if run.size == 0:
            continue
        alone = np.zeros(k - 1, bool)
        alone[run] = True
        out, g1 = window_dp_round(p, q, ew, prefix, b, alone, 4, rule.cap, rule.floor)
        merged[run] = out[run]
        total += g1
    assert np.array_equal(merged, together) and total == gain


def test_grid_reaches_straight_cut():
    # 9 × 8 grid laid out row by row, 2 pieces. The half cut at position 36 falls mid-row
    # (8 + 1 = 9 edges, by hand); a straight cut across the shorter side of an a × b grid
    # has min(a, b) = 8 edges (classical fact for grids) and row-major pieces can make it
    # at positions 32 or 40, allowed by ε = 0.12 (cap ⌈1.12 · 36⌉ = 41).
    G = nx.grid_2d_graph(9, 8)
    index = {v: i for i, v in enumerate(sorted(G.nodes()))}  # row-major numbering
    u, v = zip(*[(index[a], index[b]) for a, b in G.edges()])
    g = build_graph(np.array(u), np.array(v))
    order = np.arange(72)
    rule = balance_rule(None, 2, 0.12, n_nodes=72)
    parts = line_cut(order, None, 2)
    H = nx.relabel_nodes(G, index)
    assert nx_cut(H, parts, 2) == 9
    out, stats = refine_window(g, order, parts, 2, rule, w=8)
    assert nx_cut(H, out, 2) == stats["cut_after"] == 8 == min(9, 8)
    assert stats["boundaries"].tolist() == [32]  # tie 32/40 (both move 4): smaller position first


def test_exact_balance_cannot_move_when_k_divides_n():
    # unit weights, ε = 0 and k | n: every piece must hold exactly n/k nodes (partition.balance)
    g = _unit_nodes(_random_graph(24, 0.3, 5))
    order = np.random.default_rng(5).permutation(24)
    rule = balance_rule(None, 4, 0.0, n_nodes=24)
    parts = line_cut(order, None, 4)
    out, stats = refine_window(g, order, parts, 4, rule, w=3)
    assert np.array_equal(out, parts) and stats["moved"] == 0


def test_chain_dp_kernel_alone():
    # line 0..5, path edges (0,1)..(4,5); one boundary between fixed ends 0 and 6, window [1, 5]:
    # every position cuts exactly one path edge, so the current position 2 stays (least move)
    p = np.arange(5)
    q = p + 1
    pw = np.arange(7)
    pos, gain, ok = chain_dp(p, q, np.empty(0, np.int64), pw, 0, 6, [1], [5], [2], 6, 0)
    assert ok and pos.tolist() == [2] and gain == 0
    # add an edge (1, 3) of weight 5 (by hand): positions 2 and 3 cut it, positions 1, 4 and 5
    # cut one path edge only; of those, 1 is nearest to the start position 2 (gain 6 − 1 = 5)
    pos, gain, ok = chain_dp(np.append(p, 1), np.append(q, 3), np.array([1, 1, 1, 1, 1, 5]), pw, 0, 6,
                             [1], [5], [2], 6, 0)
    assert ok and pos.tolist() == [1] and gain == 5
    with pytest.raises(ParameterError):
        chain_dp(p, q, np.empty(0, np.int64), pw, 0, 6, [3], [5], [2], 6, 0)  # cur outside window


def test_refine_window_inputs():
    g = _unit_nodes(_random_graph(12, 0.3, 1))
    order = np.arange(12)
    rule = balance_rule(None, 3, 0.2, n_nodes=12)
    parts, stats = refine_window(g, order, np.array([4, 8]), 3, rule)  # boundaries instead of shards
    assert stats["cut_after"] <= stats["cut_before"]
    with pytest.raises(ParameterError, match="not contiguous"):
        refine_window(g, order, np.arange(12) % 3, 3, rule)
    with pytest.raises(ParameterError):
        refine_window(g, order, np.array([4, 8]), 4, rule)
    with pytest.raises(ParameterError):
        refine_window(g, order[:-1], np.array([4, 8]), 3, rule)


def test_3elt_cuthill_mckee_line():
    # 3elt: Walshaw archive finite-element mesh (copy from SuiteSparse), 4720 nodes, 13722 edges.
    # Line order: reverse Cuthill–McKee from scipy (a bandwidth-reducing order; Cuthill & McKee 1969).
    path = DATASETS / "3elt.txt.gz"
    if not path.exists():
        pytest.skip(shared_missing(path.name))
    data = np.loadtxt(path, comments="#", dtype=np.int64, ndmin=2)
    g = build_graph(data[:, 0], data[:, 1], source=str(path))
    assert (g.n, g.m) == (4720, 13722)  # counts from ../shared/datasets/CATALOG.md
    order = csgraph.reverse_cuthill_mckee(g.to_scipy().tocsr(), symmetric_mode=True).astype(np.int64)
    k = 8
    G = nx_graph(g)
    for eps in (0.0, 0.03):
        rule = balance_rule(None, k, eps, n_nodes=g.n)
        parts = line_cut(order, None, k)
        out, stats = refine_window(g, order, parts, k, rule)
        assert rule.check(np.bincount(out, minlength=k))
        assert stats["cut_before"] == nx_cut(G, parts, k)
        assert stats["cut_after"] == nx_cut(G, out, k)
        if eps > 0:
            assert stats["cut_after"] < stats["cut_before"]  # 3 % slack leaves room to move
        else:
            assert stats["cut_after"] <= stats["cut_before"]
