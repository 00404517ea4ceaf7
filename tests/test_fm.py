"""Tests of partition/refine/fm.py: balance kept, exact gains (networkx cut_size), optimum on small graphs."""

import networkx as nx
import numpy as np
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from partition.balance import balance_rule
from partition.errors import ParameterError
from partition.graph import build_graph
from partition.refine.fm import fm_pair, fm_round, refine_fm, refine_fm_kway
from partition.refine.schedule import round_robin
from partition.refine.units import fixed_point_weights

from conftest import nx_cut, nx_graph  # noqa: E402


def random_graph(seed, n, m, weighted=False, node_weights=False, isolated=0):
    rng = np.random.default_rng(seed)
    src = rng.integers(0, n, m)
    dst = rng.integers(0, n, m)
    w = rng.integers(1, 6, m).astype(np.float64) if weighted else None
    ids = np.arange(n + isolated)
    nw = rng.integers(1, 4, n + isolated) if node_weights else None
    if node_weights or isolated:
        nw = np.ones(n + isolated, dtype=np.int64) if nw is None else nw
        return build_graph(src, dst, w, node_ids=ids, node_weights=nw)
    return build_graph(src, dst, w)


def balanced_start(g, k, seed):
    """Random start satisfying the rule: shuffle, then cut the shuffled order into k equal-weight pieces."""
    rng = np.random.default_rng(seed)
    order = rng.permutation(g.n)
    w = g.node_weight_array()[order]
    csum = np.cumsum(w) - w
    parts = np.empty(g.n, dtype=np.int64)
    parts[order] = np.minimum(csum * k // max(int(w.sum()), 1), k - 1)
    return parts


def loads(g, parts, k):
    return np.bincount(parts, weights=g.node_weight_array(), minlength=k)


graphs = st.builds(
    lambda seed, n, dens, weighted, nweights, iso: random_graph(seed, n, int(n * dens), weighted, nweights, iso),
    st.integers(0, 10_000), st.integers(6, 60), st.floats(0.5, 4.0), st.booleans(), st.booleans(),
    st.integers(0, 5),
)


@settings(max_examples=60, deadline=None)
@given(g=graphs, k=st.integers(2, 6), eps=st.sampled_from([0.0, 0.03, 0.1, 0.5]), seed=st.integers(0, 99))
def test_units_keep_balance_and_report_exact_gains(g, k, eps, seed):
    k = min(k, g.n)
    rule = balance_rule(g.node_weights, k, eps, g.n)
    parts = balanced_start(g, k, seed)
    assume(rule.check(loads(g, parts, k)))  # weighted starts may miss the cap; the rule is what FM keeps
    G = nx_graph(g)
    w, scale = fixed_point_weights(g)
    assert scale == 1
    for pairs in round_robin(k):
        for a, b in pairs:
            before = nx_cut(G, parts)
            nodes = np.flatnonzero((parts == a) | (parts == b))
            new, gain = fm_pair(g.indptr, g.indices, w, g.node_weight_array(), parts, a, b, nodes,
                                rule.cap, rule.cap, rule.floor, rule.floor, 8, -1)
            parts = parts.copy()
            parts[nodes] = new
            after = nx_cut(G, parts)
            # Reference: networkx cut_size recount; the kernel's gain is the exact change.
            assert gain == pytest.approx(before - after)
            assert gain >= 0  # a rolled-back pass never loses
            assert rule.check(loads(g, parts, k)), rule.violations(loads(g, parts, k))


@settings(max_examples=25, deadline=None)
@given(g=graphs, k=st.integers(2, 5), eps=st.sampled_from([0.0, 0.05]), sched=st.sampled_from(["round_robin", "line", "matched"]))
def test_refine_fm_never_increases_cut_and_keeps_rule(g, k, eps, sched):
    k = min(k, g.n)
    rule = balance_rule(g.node_weights, k, eps, g.n)
    parts = balanced_start(g, k, 0)
    assume(rule.check(loads(g, parts, k)))
    new, stats = refine_fm(g, parts, rule, schedule=sched)
    G = nx_graph(g)
    assert nx_cut(G, new) <= nx_cut(G, parts)
    assert stats["cut_after"] == pytest.approx(nx_cut(G, new))
    assert stats["cut_before"] - stats["cut_after"] == pytest.approx(sum(r["gain"] for r in stats["rounds"]))
    assert stats["balanced"] and rule.check(loads(g, new, k))


def test_escapes_a_local_optimum_of_single_moves():
    # Worked example. Shard A = {0, 1, 2, 3}, shard B = {4, 5, 6, 7}; edges:
    #   0-1 weight 3; 0-4, 0-5, 1-6, 1-7 weight 1 (the cut, 4);
    #   B ring 4-5-6-7-4 weight 2; A pair 2-3 weight 2.
    # Single-move gains: node 0: +2 (edges to B) - 3 (edge to 1) = -1, node 1: -1,
    # nodes 2, 3: -2, nodes 4..7: +1 - 4 = -3. No positive move exists, so a
    # greedy refinement that only takes positive gains stops at cut 4. After
    # moving 0 (gain -1) node 1's gain becomes +2 + 3 = +5, so the pass 0, 1
    # gains 4 and reaches cut 0. ε = 0.5 gives cap ⌈1.5 · 4⌉ = 6 for B's 6 nodes.
    src = np.array([0, 0, 0, 1, 1, 4, 5, 6, 7, 2])
    dst = np.array([1, 4, 5, 6, 7, 5, 6, 7, 4, 3])
    w = np.array([3, 1, 1, 1, 1, 2, 2, 2, 2, 2], dtype=np.float64)
    g = build_graph(src, dst, w)
    parts = np.array([0, 0, 0, 0, 1, 1, 1, 1])
    G = nx_graph(g)
    base = nx_cut(G, parts)
    assert base == 4
    for v in range(8):  # every single move loses (networkx recount)
        moved = parts.copy()
        moved[v] = 1 - moved[v]
        assert nx_cut(G, moved) > base
    rule = balance_rule(None, 2, 0.5, 8)
    new, stats = refine_fm(g, parts, rule)
    assert nx_cut(G, new) == 0
    assert new.tolist() == [1, 1, 0, 0, 1, 1, 1, 1]
    assert stats["rounds"][0]["gain"] == 4


def _optimum_bisection(g):
    """Exhaustive search over every balanced bisection (sizes ⌊n/2⌋ and ⌈n/2⌉).

    All 2**n sides are enumerated as bit masks and the cut of each is
    ``xᵀ W (1 − x)`` with the dense weight matrix ``W``; the best side found is
    then recounted with networkx.cut_size, the outside reference.
    """
    n = g.n
    W = g.to_scipy().toarray()
    masks = np.arange(2**n, dtype=np.int64)
    X = ((masks[:, None] >> np.arange(n)) & 1).astype(np.float64)
    size = X.sum(1)
    X = X[(size == n // 2) | (size == (n + 1) // 2)]
    cuts = ((X @ W) * (1 - X)).sum(1)
    best = X[np.argmin(cuts)]
    value = nx.cut_size(nx_graph(g), set(np.flatnonzero(best).tolist()), weight="weight")
    assert value == cuts.min()
    return value


def test_two_way_fm_finds_the_optimum_bisection_on_small_graphs():
    # Reference: exhaustive search over all balanced bisections, checked with
    # networkx cut_size. Measured: FM from one random balanced start reached
    # the optimum on 94 of 111 seeded G(n, m) graphs with n = 10..16 (85 %);
    # networkx's kernighan_lin_bisection from the same starts: 75 of 111.
    # We require >= 80 %.
    hits, cases = 0, 0
    for seed in range(150):
        rng = np.random.default_rng(seed)
        n = int(rng.integers(10, 17))
        g = random_graph(seed, n, int(rng.integers(n, 3 * n)), weighted=bool(seed % 2))
        if g.n < n:  # an id never drawn: skip (the graph would be smaller than planned)
            continue
        cases += 1
        rule = balance_rule(None, 2, 0.0, g.n)
        parts = balanced_start(g, 2, seed)
        new, _ = refine_fm(g, parts, rule, max_passes=20)
        assert rule.check(loads(g, new, 2))
        hits += nx_cut(nx_graph(g), new) == _optimum_bisection(g)
    assert cases == 111
    assert hits >= 0.8 * cases, f"optimum reached on {hits} of {cases}"


def test_on_par_with_networkx_kernighan_lin():
    # Reference: networkx.algorithms.community.kernighan_lin_bisection started
    # from the same balanced bisection (ε = 0). Measured on these 50 seeded
    # graphs (40 nodes, 100 drawn edges): ours no worse on 38 (strictly better
    # on 13, worse on 12); mean cut 38.94 against 38.64. Pair-swap KL and
    # single-move FM are heuristics of the same class, so we require no worse
    # on >= 70 % and a total cut within 2 % of KL's.
    from networkx.algorithms.community import kernighan_lin_bisection

    ours, theirs, cases = [], [], 50
    for seed in range(cases):
        g = random_graph(100 + seed, 40, 100, weighted=bool(seed % 2))
        G = nx_graph(g)
        parts = balanced_start(g, 2, seed)
        start = (set(np.flatnonzero(parts == 0).tolist()), set(np.flatnonzero(parts == 1).tolist()))
        kl = kernighan_lin_bisection(G, partition=start, max_iter=20, weight="weight", seed=seed)
        theirs.append(nx.cut_size(G, kl[0], weight="weight"))
        new, _ = refine_fm(g, parts, balance_rule(None, 2, 0.0, g.n), max_passes=20)
        ours.append(nx_cut(G, new))
    ours, theirs = np.array(ours), np.array(theirs)
    ok = int((ours <= theirs).sum())
    assert ok >= 0.7 * cases, f"no worse than networkx KL on {ok} of {cases}"
    assert ours.sum() <= 1.02 * theirs.sum()


def test_units_of_a_round_are_independent():
    # The pairs of a round touch disjoint shards: running them forward, in
    # reverse order (each unit seeing the previous units' moves) or in two
    # threads from the start-of-round state must give the same partition.
    g = random_graph(3, 400, 1600)
    k = 8
    rule = balance_rule(None, k, 0.03, g.n)
    parts = balanced_start(g, k, 1)
    for pairs in round_robin(k)[:3]:
        fwd, gf = fm_round(g, parts, pairs, rule)
        rev, gr = fm_round(g, parts, pairs[::-1], rule)
        par, gp = fm_round(g, parts, pairs, rule, n_jobs=2)
        np.testing.assert_array_equal(fwd, rev)
        np.testing.assert_array_equal(fwd, par)
        assert gf == gr[::-1] == gp
        assert sum(gf) > 0


def test_same_seed_same_result_and_errors():
    g = random_graph(4, 200, 800)
    rule = balance_rule(None, 6, 0.03, g.n)
    parts = balanced_start(g, 6, 2)
    a, _ = refine_fm(g, parts, rule, seed=11)
    b, _ = refine_fm(g, parts, rule, seed=11)
    np.testing.assert_array_equal(a, b)
    with pytest.raises(ParameterError, match="schedule"):
        refine_fm(g, parts, rule, schedule="spiral")
    with pytest.raises(ParameterError, match="one entry per node"):
        refine_fm(g, parts[:-1], rule)
    with pytest.raises(ParameterError, match=r"\[0, 6\)"):
        refine_fm(g, parts + 6, rule)
    with pytest.raises(ParameterError, match="disjoint"):
        fm_round(g, parts, [(0, 1), (1, 2)], rule)


def test_exact_balance_with_unit_weights_keeps_sizes():
    # ε = 0, unit weights, n = 203, k = 4: sizes must be 50 or 51 with three
    # shards of 51 (203 = 4 · 50 + 3) — the rule of partition/balance.py.
    g = random_graph(9, 203, 700)
    rule = balance_rule(None, 4, 0.0, g.n)
    parts = balanced_start(g, 4, 0)
    new, stats = refine_fm(g, parts, rule)
    sizes = np.sort(np.bincount(new, minlength=4))
    assert sizes.tolist() == [50, 51, 51, 51]
    assert stats["cut_after"] < stats["cut_before"]


def test_float_weights_use_fixed_point():
    # Non-integral weights go through rule 1 of partition/rules.py (scale 2**20);
    # the reported gain matches the networkx recount to within the rounding.
    g0 = random_graph(12, 120, 500, weighted=True)
    rng = np.random.default_rng(0)
    u, v, w = g0.edges()
    g = build_graph(u, v, w * rng.uniform(0.1, 1.0, w.shape[0]))
    rule = balance_rule(None, 3, 0.05, g.n)
    parts = balanced_start(g, 3, 0)
    new, stats = refine_fm(g, parts, rule)
    G = nx_graph(g)
    gain = sum(r["gain"] for r in stats["rounds"])
    assert gain == pytest.approx(nx_cut(G, parts) - nx_cut(G, new), abs=1e-4)


@settings(max_examples=25, deadline=None)
@given(g=graphs, k=st.integers(2, 6), eps=st.sampled_from([0.0, 0.05, 0.3]))
def test_kway_keeps_rule_and_gain_is_exact(g, k, eps):
    k = min(k, g.n)
    rule = balance_rule(g.node_weights, k, eps, g.n)
    parts = balanced_start(g, k, 1)
    assume(rule.check(loads(g, parts, k)))
    new, stats = refine_fm_kway(g, parts, rule)
    G = nx_graph(g)
    assert stats["gain"] == pytest.approx(nx_cut(G, parts) - nx_cut(G, new))
    assert stats["gain"] >= 0
    assert rule.check(loads(g, new, k))


def test_skipping_settled_pairs_changes_no_result():
    # refine_fm skips pairs whose last unit changed nothing and whose shards did
    # not change since; running every pair of the same seeded round-robin tour
    # with fm_round directly must give the same partition.
    g = random_graph(21, 300, 1200)
    k = 6
    rule = balance_rule(None, k, 0.03, g.n)
    parts = balanced_start(g, k, 3)
    tour = round_robin(k)
    perm = np.random.default_rng(5).permutation(len(tour))
    ours, stats = refine_fm(g, parts, rule, schedule="round_robin", max_rounds=6 * len(tour), seed=5)
    ref = parts
    for r in range(6 * len(tour)):
        ref, _ = fm_round(g, ref, tour[perm[r % len(tour)]], rule)
    np.testing.assert_array_equal(ours, ref)
    assert sum(r["pairs"] for r in stats["rounds"]) < 6 * k * (k - 1) // 2  # some pairs were skipped
