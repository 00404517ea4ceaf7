"""Tests of partition/placement/online.py: capacity-aware online placement of arriving nodes."""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

from partition.cli import main
from partition.errors import ParameterError
from partition.placement.bounded_hash import bounded_assign, capacity, consistent_assign, key_hashes
from partition.placement.online import LATER, OK, SELF, UNKNOWN, OnlinePlacer, discount, final_capacity

SETTINGS = settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])


def test_discount_matches_the_published_formula():
    # ψ(f) = 1 − e^(f−1): Mehta, Saberi, Vazirani & Vazirani, JACM 2007 (trade-off function)
    assert discount(0.0) == pytest.approx(1 - 1 / math.e)  # ψ(0) = 1 − 1/e ≈ 0.632
    assert discount(0.0) == pytest.approx(0.6321205588285577, abs=1e-15)
    assert discount(1.0) == pytest.approx(0.0, abs=1e-15)  # ψ(1) = 0: a full shard pulls nothing
    assert discount(0.5) == pytest.approx(1 - math.exp(-0.5))  # ≈ 0.3935
    f = np.linspace(0, 1, 11)
    assert np.all(np.diff(discount(f)) < 0)  # strictly decreasing on [0, 1]


def test_final_capacity_is_the_balance_rule_cap():
    # ⌈(1 + ε)·n/k⌉ for unit weights (common practice; README "Balance rule")
    assert final_capacity(4, 0.0, final_nodes=10) == 3
    assert final_capacity(4, 0.1, final_nodes=100) == math.ceil(1.1 * 100 / 4)
    # weighted: ⌈(1 + ε)W/k⌉ + w_max − 1 = ⌈12/3⌉ + 5 − 1
    assert final_capacity(3, 0.0, final_weights=[5, 1, 1, 1, 1, 1, 1, 1]) == 8
    with pytest.raises(ParameterError):
        final_capacity(3, 0.0)


def test_greedy_picks_the_max_affinity_shard():
    # hand example: shards 0, 1, 2; the arrival has 1 edge into 0, 3 into 1, 2 into 2
    ids = np.arange(9)
    parts = np.array([0, 0, 0, 1, 1, 1, 2, 2, 2])
    pl = OnlinePlacer(ids, parts, 3, capacity=10, rule="greedy")
    assert pl.place(100, [0, 3, 4, 5, 6, 7]) == 1
    # ties in affinity go to the least-loaded shard: shard 1 now holds 4 nodes
    assert pl.place(101, [0, 3]) == 0
    # a weighted edge wins over two unit edges
    assert pl.place(102, [6, 3, 4], weights=[5.0, 1.0, 1.0]) == 2


def test_discount_gives_way_as_a_shard_fills():
    # shard 0 (fill 9/10) has 3 edges, shard 1 (fill 1/10) has 1 edge:
    # 3·ψ(0.9) = 3(1 − e^-0.1) ≈ 0.285 < 1·ψ(0.1) = 1 − e^-0.9 ≈ 0.593  (MSVV 2007 formula)
    ids = np.arange(10)
    parts = np.array([0] * 9 + [1])
    for rule, want in (("discount", 1), ("greedy", 0), ("ldg", 1)):
        pl = OnlinePlacer(ids, parts, 2, capacity=10, rule=rule)
        assert pl.place(50, [0, 1, 2, 9]) == want, rule
    # LDG: 3·(1 − 0.9) = 0.3 < 1·(1 − 0.1) = 0.9 (Stanton & Kliot 2012)


def _reference_choice(aff, loads, cap, w, rule, mu=0.0, forecast=None, remaining=0.0):
    """Plain-Python restatement of the rule in the module docstring."""
    best, key = -1, None
    for s in range(len(loads)):
        a = aff.get(s, 0.0)
        if a <= 0 or loads[s] + w > cap[s]:
            continue
        f = loads[s] / cap[s] if cap[s] > 0 else 1.0
        base = {"discount": a * (1 - math.exp(f - 1)), "ldg": a * (1 - f), "greedy": a}[rule]
        if mu > 0:
            fh = (loads[s] + forecast[s] * remaining) / cap[s] if cap[s] > 0 else 1.0
            base = (1 - mu) * base + mu * a * max(0.0, 1 - fh)
        cand = (base, a, -f, -s)
        if key is None or cand > key:
            best, key = s, cand
    if best < 0:
        room = [s for s in range(len(loads)) if loads[s] + w <= cap[s]]
        if room:
            best = min(room, key=lambda s: (loads[s] / cap[s] if cap[s] > 0 else 1.0, s))
    return best


@st.composite
def _scenario(draw):
    k = draw(st.integers(1, 5))
    n = draw(st.integers(0, 12))
    parts = draw(st.lists(st.integers(0, k - 1), min_size=n, max_size=n))
    arrivals = draw(st.integers(1, 15))
    cap = draw(st.integers(0, 8))
    edges = []
    for i in range(arrivals):
        pool = n + i
        m = draw(st.integers(0, min(pool, 4)))
        nb = draw(st.lists(st.integers(0, max(pool - 1, 0)), min_size=m, max_size=m, unique=True)) if pool else []
        ws = draw(st.lists(st.sampled_from([0.5, 1.0, 2.0, 3.0]), min_size=len(nb), max_size=len(nb)))
        edges.append((nb, ws))
    nw = draw(st.lists(st.integers(0, 3), min_size=arrivals, max_size=arrivals))
    rule = draw(st.sampled_from(["discount", "greedy", "ldg", "hash"]))
    mu = draw(st.sampled_from([0.0, 0.5, 1.0]))
    return k, parts, cap, edges, nw, rule, mu


@SETTINGS
@given(_scenario())
def test_capacity_is_never_exceeded_and_choices_follow_the_rule(case):
    # reference: the loads recounted from the placements, and a plain-Python restatement of the rule
    k, parts, cap, edges, nw, rule, mu = case
    n = len(parts)
    pl = OnlinePlacer(np.arange(n), np.array(parts, dtype=np.int64), k, capacity=cap, rule=rule, mu=mu)
    shard = dict(enumerate(parts))
    loads = np.bincount(np.array(parts, dtype=np.int64), minlength=k).astype(np.int64)
    caps = [cap] * k
    forecast = loads / loads.sum() if loads.sum() else np.full(k, 1.0 / k)
    expected = float(np.maximum(np.array(caps) - loads, 0).sum())
    arrived = 0.0
    for i, ((nb, ws), w) in enumerate(zip(edges, nw)):
        node = n + i
        aff = {}
        for v, x in zip(nb, ws):
            if shard[v] >= 0:
                aff[shard[v]] = aff.get(shard[v], 0.0) + x
        got = pl.place(node, nb, weights=ws, node_weight=w)
        if rule != "hash":
            want = _reference_choice(aff, loads, caps, w, rule, mu, forecast, max(expected - arrived, 0.0))
            assert got == want
        if got >= 0:
            loads[got] += w
            arrived += w
        else:  # rejected only when no shard had room
            assert all(loads[s] + w > cap for s in range(k))
        shard[node] = got
        assert np.array_equal(pl.loads, loads)
        assert pl.loads.max() <= max(cap, max(np.bincount(parts, minlength=k), default=0))
    new_ids, new_shards = pl.new_nodes()
    assert new_ids.tolist() == list(range(n, n + len(edges)))
    assert pl.rejected == int((new_shards < 0).sum())


@SETTINGS
@given(st.integers(1, 6), st.integers(0, 30), st.integers(1, 40), st.sampled_from(["discount", "greedy", "ldg", "hash"]),
       st.integers(0, 2**32))
def test_no_rejection_when_capacity_covers_the_final_average(k, n, arrivals, rule, seed):
    # unit weights, cap = ⌈final n / k⌉ (the balance rule's cap): while a node is unplaced the placed
    # weight is at most W − 1 < k·cap, so some shard has room (pigeonhole; module docstring)
    rng = np.random.default_rng(seed)
    total = n + arrivals
    assume(k <= total)
    cap = final_capacity(k, 0.0, final_nodes=total)
    parts = np.arange(n) % k  # a balanced start
    pl = OnlinePlacer(np.arange(n), parts, k, capacity=cap, rule=rule, seed=seed % 1000)
    for i in range(arrivals):
        pool = n + i
        nb = rng.choice(pool, size=min(pool, 3), replace=False).tolist() if pool else []
        assert pl.place(n + i, nb) >= 0
        assert pl.loads.max() <= cap
    assert pl.rejected == 0


def test_hash_rule_is_consistent_hashing_without_a_bound():
    # reference: plain consistent hashing of the same keys (Karger et al. 1997), one point per shard
    keys = np.arange(1000, 1400)
    pl = OnlinePlacer(np.empty(0, dtype=np.int64), np.empty(0, dtype=np.int64), 7, capacity=10**6,
                      rule="hash", seed=3)
    got = pl.place_many(keys, np.zeros(keys.size + 1, dtype=np.int64), np.empty(0, dtype=np.int64))
    assert np.array_equal(got, consistent_assign(keys, np.arange(7), seed=3))


def test_hash_rule_in_ring_order_equals_bounded_load_hashing():
    # reference: bounded-load consistent hashing of the whole key set (Mirrokni, Thorup &
    # Zadimoghaddam 2018), which places keys in increasing hash order with c = ⌈(1+ε)m/n⌉
    keys = np.arange(5000, 5600)
    order = np.argsort(key_hashes(keys, 11))
    c = capacity(keys.size, 9, 0.1)
    pl = OnlinePlacer(np.empty(0, dtype=np.int64), np.empty(0, dtype=np.int64), 9, capacity=c,
                      rule="hash", seed=11)
    got = pl.place_many(keys[order], np.zeros(keys.size + 1, dtype=np.int64), np.empty(0, dtype=np.int64))
    want = bounded_assign(keys, np.arange(9), 0.1, seed=11)
    assert np.array_equal(got, want[order])
    assert pl.loads.max() <= c


def test_forecast_blend_scores_against_the_projected_fill():
    # μ = 1: score = a · max(0, 1 − (L + π R)/C). Shard 0: L = 4, π = 0.9; shard 1: L = 4, π = 0.1;
    # C = 10, R = 10 (given). Shard 0 projects to 13/10 (score 0), shard 1 to 5/10 (score 0.5·a).
    ids = np.arange(8)
    parts = np.array([0, 0, 0, 0, 1, 1, 1, 1])
    args = dict(capacity=10, forecast=[0.9, 0.1], expected=10)
    plain = OnlinePlacer(ids, parts, 2, rule="discount", mu=0.0, **args)
    blended = OnlinePlacer(ids, parts, 2, rule="discount", mu=1.0, **args)
    nb = [0, 1, 4]  # two edges into shard 0, one into shard 1
    assert plain.place(20, nb) == 0
    assert blended.place(20, nb) == 1
    # μ = 0.5 with 2·ψ(0.4)·0.5 ≈ 0.451 vs 1·ψ(0.4)·0.5 + 0.5·0.5 ≈ 0.476: shard 1 again
    half = OnlinePlacer(ids, parts, 2, rule="discount", mu=0.5, **args)
    assert half.place(20, nb) == 1


def test_resolve_reports_each_neighbour():
    pl = OnlinePlacer(np.array([1, 2, 3]), np.array([0, 1, 0]), 2, capacity=5)
    ids, codes, status = pl.resolve([10, 11], [0, 3, 6], [1, 10, 11, 10, 11, 99])
    assert status.tolist() == [OK, SELF, LATER, OK, SELF, UNKNOWN]
    assert codes[0] == 0 and codes[1] == -1 and codes[3] >= 3


def test_unplaced_neighbours_are_an_error_or_dropped():
    pl = OnlinePlacer(np.array([1, 2]), np.array([0, 1]), 2, capacity=5)
    with pytest.raises(ParameterError, match="not placed yet"):
        pl.place_many([10, 11], [0, 1, 2], [11, 2])
    assert pl.placed_new == 0  # nothing placed by the failed call
    out = pl.place_many([10, 11], [0, 1, 2], [11, 2], unplaced="ignore")
    assert out.tolist() == [0, 1]  # 10 has no placed neighbour: least-filled, lowest index


def test_bad_input_is_rejected():
    ids, parts = np.array([1, 2, 3]), np.array([0, 1, 0])
    with pytest.raises(ParameterError, match="rule"):
        OnlinePlacer(ids, parts, 2, capacity=5, rule="nearest")
    with pytest.raises(ParameterError, match="mu"):
        OnlinePlacer(ids, parts, 2, capacity=5, mu=1.5)
    with pytest.raises(ParameterError, match=r"\[0, 2\)"):
        OnlinePlacer(ids, np.array([0, 2, 0]), 2, capacity=5)
    with pytest.raises(ParameterError, match="capacity"):
        OnlinePlacer(ids, parts, 2, capacity=-1)
    with pytest.raises(ParameterError, match="twice"):
        OnlinePlacer(np.array([1, 1, 3]), parts, 2, capacity=5)
    pl = OnlinePlacer(ids, parts, 2, capacity=5)
    with pytest.raises(ParameterError, match="already placed"):
        pl.place(2, [1])
    with pytest.raises(ParameterError, match="strs but the placed ids are ints"):
        pl.place("x", [1])
    with pytest.raises(ParameterError, match="listed twice"):
        pl.place_many([7, 7], [0, 0, 0], [])
    with pytest.raises(ParameterError, match="weights"):
        pl.place(8, [1], weights=[-1.0])


def test_string_ids_and_rejection_count():
    pl = OnlinePlacer(np.array(["a", "b"], dtype=object), np.array([0, 1]), 2, capacity=2)
    assert pl.place("c", ["a"]) == 0
    assert pl.place("d", ["a", "c"]) == 1  # shard 0 is full
    assert pl.place("e", ["a"]) == -1  # both full: rejected and counted
    assert pl.rejected == 1 and pl.shard_of("e") == -1 and pl.shard_of("d") == 1
    assert pl.loads.tolist() == [2, 2]


def test_same_input_same_output():
    rng = np.random.default_rng(5)
    ids = np.arange(200)
    parts = rng.integers(0, 6, 200)
    nb = rng.integers(0, 200, 300)
    ptr = np.arange(0, 301, 3)
    runs = [OnlinePlacer(ids, parts, 6, capacity=60, rule=r).place_many(np.arange(1000, 1100), ptr, nb)
            for r in ("discount", "discount")]
    assert np.array_equal(runs[0], runs[1])


def test_place_command(tmp_path, capsys):
    placement = tmp_path / "p.csv"
    placement.write_text("node,shard\n1,0\n2,0\n3,1\n4,1\n")
    arrivals = tmp_path / "a.txt"
    arrivals.write_text("# arrivals\n5 1\n5 2\n6 6\n7 5\n7 3\n\n8 3\n")
    out = tmp_path / "new.csv"
    assert main(["place", str(placement), str(arrivals), "-o", str(out), "--json"]) == 0
    # 5 → shard 0 (two edges), 6 has no edge → least filled (shard 1), 7 ties → shard 0, 8 → shard 1
    assert out.read_text() == "node,shard\n5,0\n6,1\n7,0\n8,1\n"
    capsys.readouterr()
    bad = tmp_path / "b.txt"
    bad.write_text("5 1\n6 9\n")
    assert main(["place", str(placement), str(bad), "-o", str(tmp_path / "x.csv")]) == 2
    assert "b.txt, line 2: neighbour 9 of arrival 6 is not placed yet" in capsys.readouterr().err
    assert not (tmp_path / "x.csv").exists()
    again = tmp_path / "c.txt"
    again.write_text("5 1\n6 5\n5 2\n")
    assert main(["place", str(placement), str(again), "-o", str(tmp_path / "x.csv")]) == 2
    assert "c.txt, line 3: arrival 5 comes again" in capsys.readouterr().err
    rej = tmp_path / "rej.csv"
    assert main(["place", str(placement), str(bad), "-o", str(tmp_path / "x.csv"), "--ignore-unplaced",
                 "--capacity", "2", "--rejected", str(rej)]) == 0
    assert rej.read_text() == "node\n5\n6\n"  # every shard already holds 2


def test_place_command_writes_the_merged_placement_and_a_report(tmp_path, capsys):
    placement = tmp_path / "p.csv"
    placement.write_text("node,shard\n1,0\n2,0\n3,1\n4,1\n")
    arrivals = tmp_path / "a.txt"
    arrivals.write_text("5 1\n5 2\n6 6\n")
    out, merged = tmp_path / "new.csv", tmp_path / "all.csv"
    assert main(["place", str(placement), str(arrivals), "-o", str(out), "--merged", str(merged), "--quiet"]) == 0
    assert capsys.readouterr().out == ""
    # by hand: 5 has both edges to shard 0; 6 has none and goes to the least filled shard, 1
    assert out.read_text() == "node,shard\n5,0\n6,1\n"
    assert merged.read_text() == "node,shard\n1,0\n2,0\n3,1\n4,1\n5,0\n6,1\n"
    report = json.loads((tmp_path / "new.csv.report.json").read_text())
    assert report["merged_nodes"] == 6 and report["per_shard_after"] == [3, 3] and report["imbalance_allowed"] == 0.0
