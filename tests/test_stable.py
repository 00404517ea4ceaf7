"""Tests of partition/placement/stable.py: renaming and move-cost refinement near a current placement."""

from __future__ import annotations

import itertools

import networkx as nx
import numpy as np
import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

from partition.balance import balance_rule
from partition.cut import line_cut
from partition.errors import ParameterError
from partition.generators import grid2d, planted_partition
from partition.graph import build_graph
from partition.placement.stable import anchored_graph, move_objective, stabilise

from conftest import nx_cut, nx_graph  # noqa: E402

SETTINGS = settings(max_examples=30, deadline=None, suppress_health_check=[HealthCheck.too_slow])


def _random_graph(n, p, seed, weighted=False):
    rng = np.random.default_rng(seed)
    iu, ju = np.triu_indices(n, 1)
    keep = rng.random(iu.shape[0]) < p
    src, dst = iu[keep], ju[keep]
    loops = np.arange(n)  # keeps every node (build_graph drops the self-loops)
    w = None
    if weighted:
        w = np.concatenate((rng.integers(1, 5, src.shape[0]).astype(np.float64), np.ones(n)))
    return build_graph(np.concatenate((src, loops)), np.concatenate((dst, loops)), weights=w)


@SETTINGS
@given(st.integers(1, 5), st.integers(1, 6), st.integers(0, 30), st.integers(0, 2**32))
def test_renaming_equals_brute_force(k, k_old, n, seed):
    # reference: exhaustive search over every one-to-one naming of the new shards with names 0..k-1;
    # only nodes whose old shard is < k can stay (old shards >= k are drained)
    assume(n >= k)
    rng = np.random.default_rng(seed)
    g = _random_graph(n, 0.2, seed)
    new = rng.integers(0, k, n)
    old = rng.integers(-1, k_old, n)  # -1: a node without a previous shard
    rule = balance_rule(None, k, 10.0, n)
    parts, stats = stabilise(g, new, old, k, rule, move_cost=0.0)
    assert set(np.unique(parts).tolist()) <= set(range(k))
    best = max(sum(1 for o, x in zip(old.tolist(), new.tolist()) if o == names[x])
               for names in itertools.permutations(range(k)))
    kept = int(np.sum((old >= 0) & (parts == old)))
    assert kept == best
    has = old >= 0
    assert stats["moved_fraction"] == pytest.approx(1 - kept / has.sum() if has.any() else 0.0)
    assert stats["drained_shards"] == sorted(set(old[old >= k].tolist()))
    assert stats["new_nodes"] == int((old < 0).sum())
    assert stats["cut_after"] == stats["cut_before"]  # renaming alone never changes the cut


@SETTINGS
@given(st.integers(2, 5), st.integers(-1, 1), st.sampled_from([0.0, 0.03, 0.2]),
       st.sampled_from([0.0, 0.25, 1.0, 5.0]), st.booleans(), st.integers(0, 2**32))
def test_stabilise_never_breaks_balance(k, dk, eps, lam, weighted, seed):
    # reference: the balance rule (README "Balance rule"), and the networkx cut recount
    rng = np.random.default_rng(seed)
    n = 40
    g = _random_graph(n, 0.12, seed, weighted=weighted)
    rule = balance_rule(None, k, eps, n)
    new = line_cut(rng.permutation(n), None, k, eps).astype(np.int64)  # a balanced start
    old = rng.integers(0, max(k + dk, 1), n)
    parts, stats = stabilise(g, new, old, k, rule, move_cost=lam, refine=True, seed=seed % 97)
    loads = np.bincount(parts, minlength=k)
    assert rule.check(loads), rule.violations(loads)
    assert stats["balanced"]
    assert stats["cut_after"] == pytest.approx(nx_cut(nx_graph(g), parts, k))
    # the rounds lower cut + λ·moved (exact: λ is a multiple of 2**-16)
    assert stats["objective_after"] <= stats["objective_before"] + 1e-9
    assert stats["objective_after"] == pytest.approx(move_objective(g, parts, old, lam))


def _grid_case():
    g = build_graph(*grid2d(24, 24))
    k = 6
    rule = balance_rule(None, k, 0.05, g.n)
    old = line_cut(np.arange(g.n), None, k).astype(np.int64)  # row bands of the grid
    # the new partition: column bands (a very different, equally balanced partition)
    cols = (np.arange(g.n) % 24) * 24 + np.arange(g.n) // 24
    new = line_cut(cols, None, k).astype(np.int64)
    return g, k, rule, old, new


def test_a_large_move_cost_moves_fewer_nodes():
    g, k, rule, old, new = _grid_case()
    free, s0 = stabilise(g, new, old, k, rule, move_cost=0.0, refine=True)
    tied, s1 = stabilise(g, new, old, k, rule, move_cost=10.0)
    assert s1["moved_fraction"] < s0["moved_fraction"]
    assert s1["moved_fraction"] < 0.5 * s1["moved_fraction_renamed"]
    for parts in (free, tied):
        assert rule.check(np.bincount(parts, minlength=k))
    # with λ = 10 every node is worth ten edges: it goes back wherever the balance allows,
    # so the result is (close to) the old partition itself
    assert s1["moved_fraction"] <= 0.05


def test_move_cost_trades_cut_for_moves():
    g, k, rule, old, new = _grid_case()
    moved, cuts = [], []
    for lam in (0.0, 0.25, 1.0, 4.0):
        _, s = stabilise(g, new, old, k, rule, move_cost=lam, refine=True)
        moved.append(s["moved_fraction"])
        cuts.append(s["cut_after"])
    assert moved[-1] < moved[0]
    assert cuts[0] <= cuts[-1]


def test_anchored_graph_cut_is_cut_plus_move_cost():
    # reference: networkx cut of the graph with one anchor per shard, anchors fixed in their shard
    g = build_graph(*planted_partition(3, 10, 0.5, 0.05, seed=4)[:2])
    rng = np.random.default_rng(2)
    old = rng.integers(0, 3, g.n)
    parts = rng.integers(0, 3, g.n)
    lam = 0.75
    indptr, indices, weights, unit = anchored_graph(g, old, 3, lam)
    G = nx.Graph()
    G.add_nodes_from(range(g.n + 3))
    for u in range(g.n + 3):
        for e in range(indptr[u], indptr[u + 1]):
            G.add_edge(u, int(indices[e]), weight=int(weights[e]))
    aug = np.concatenate((parts, np.arange(3)))
    cut = nx_cut(G, aug, 3)
    assert cut / unit == pytest.approx(move_objective(g, parts, old, lam))
    assert G.number_of_edges() == g.m + g.n  # one anchor edge per node


def test_drained_and_added_shards():
    g = build_graph(*grid2d(10, 10))
    rng = np.random.default_rng(0)
    new = line_cut(rng.permutation(g.n), None, 4).astype(np.int64)
    old = line_cut(np.arange(g.n), None, 6).astype(np.int64)  # 6 → 4 shards: 4 and 5 are drained
    rule = balance_rule(None, 4, 0.0, g.n)
    parts, st_ = stabilise(g, new, old, 4, rule, move_cost=1.0)
    assert st_["previous_k"] == 6 and st_["drained_shards"] == [4, 5]
    assert st_["drained_nodes"] == int((old >= 4).sum())
    assert parts.max() < 4 and rule.check(np.bincount(parts, minlength=4))
    assert np.all(parts[old >= 4] != old[old >= 4])  # drained nodes always move
    # 4 → 6 shards: every old name is kept by some new shard, the two extra are named 4 and 5
    rule6 = balance_rule(None, 6, 0.0, g.n)
    new6 = line_cut(rng.permutation(g.n), None, 6).astype(np.int64)
    parts6, st6 = stabilise(g, new6, parts, 6, rule6)
    assert sorted(st6["mapping"]) == list(range(6))
    assert st6["previous_k"] == 4


def test_same_input_same_output():
    g, k, rule, old, new = _grid_case()
    a, sa = stabilise(g, new, old, k, rule, move_cost=0.5, seed=3)
    b, sb = stabilise(g, new, old, k, rule, move_cost=0.5, seed=3)
    assert np.array_equal(a, b) and sa == sb


def test_bad_parameters():
    g, k, rule, old, new = _grid_case()
    with pytest.raises(ParameterError, match="balance rule"):
        stabilise(g, new, old, k + 1, rule)
    with pytest.raises(ParameterError, match="move cost"):
        stabilise(g, new, old, k, rule, move_cost=-1)
    with pytest.raises(ParameterError, match="move cost"):
        stabilise(g, new, old, k, rule, move_cost=float("nan"))
    with pytest.raises(ParameterError, match="-1"):
        stabilise(g, new, old - 5, k, rule)
    with pytest.raises(ParameterError):
        stabilise(g, new + k, old, k, rule)
    with pytest.raises(ParameterError, match="one integer shard per node"):
        stabilise(g, new, old[:-1], k, rule)
