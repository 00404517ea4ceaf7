"""Tests of partition.placement.bounded_hash (and its command, partition.commands.ring)."""

from __future__ import annotations

import argparse
import bisect
import hashlib
import json
import math
from fractions import Fraction

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from partition.commands import ring as ring_cmd
from partition.errors import InputError, ParameterError
from partition.placement.bounded_hash import (
    BoundedLoadRing, bounded_assign, capacity, consistent_assign, key_hashes, mod_assign,
    place_on_ring, shard_points,
)

INF = float("inf")
U64 = (1 << 64) - 1


# -- outside references written from the published definitions -------------------------------

def _splitmix64(state):
    # splitmix64 output for a state (Steele, Lea & Flood, OOPSLA 2014; the constants of
    # S. Vigna's public splitmix64.c), in Python integers
    z = (state + 0x9E3779B97F4A7C15) & U64
    z = ((z ^ (z >> 30)) * 0xBF58476D1CE4E5B9) & U64
    z = ((z ^ (z >> 27)) * 0x94D049BB133111EB) & U64
    return z ^ (z >> 31)


def _reference_cap(m, n, eps):
    # c = ⌈(1+ε)m/n⌉ (Mirrokni, Thorup & Zadimoghaddam, SODA 2018), exact rational arithmetic;
    # with no bound a shard can take every key
    if eps == INF:
        return m
    return math.ceil((1 + Fraction(repr(float(eps)))) * m / n)


def _reference_placement(keys, shards, eps, seed, pts):
    """Bounded-load consistent hashing by its definition, one key at a time in plain Python.

    Keys in increasing hash order (ties by key); each walks clockwise from the first point at or
    after its hash and stops at the first shard whose load is below c (Mirrokni, Thorup &
    Zadimoghaddam, SODA 2018). Points are ordered by position, then shard, then point number.
    """
    kh = dict(zip(keys, (int(h) for h in key_hashes(np.array(keys, dtype=np.int64), seed))))
    points = sorted((int(p), s, j) for s in shards
                    for j, p in enumerate(shard_points(np.array([s], dtype=np.int64), pts, seed)))
    pos = [p[0] for p in points]
    cap = _reference_cap(len(keys), len(shards), eps)
    load = {s: 0 for s in shards}
    out = {}
    for key in sorted(keys, key=lambda k: (kh[k], k)):
        i = bisect.bisect_left(pos, kh[key]) % len(points)
        while load[points[i][1]] >= cap:
            i = (i + 1) % len(points)
        out[key] = points[i][1]
        load[points[i][1]] += 1
    return out


def _as_dict(ring):
    k, s = ring.assignment()
    return dict(zip(k.tolist(), s.tolist()))


# -- worked examples --------------------------------------------------------------------------

def test_hand_worked_ring():
    # Ring positions written out: shard A (index 0) at 10, B (1) at 20, C (2) at 30.
    # Keys at 1, 2, 3, 4, 12, 35 in that (priority) order; m = 6, n = 3.
    points = np.array([10, 20, 30], dtype=np.uint64)
    owner = np.array([0, 1, 2])
    keys = np.array([1, 2, 3, 4, 12, 35], dtype=np.uint64)
    # ε = 0: c = ⌈6/3⌉ = 2.  1→A, 2→A (A full), 3: A full → B, 4→B (B full),
    # 12: first point ≥ 12 is B (full) → C, 35: past the last point, wraps to A (full) → B (full) → C.
    shard, loads = place_on_ring(keys, points, owner, 3, capacity(6, 3, 0.0))
    assert shard.tolist() == [0, 0, 1, 1, 2, 2]  # derived by hand above
    assert loads.tolist() == [2, 2, 2]
    # ε = 0.5: c = ⌈1.5·6/3⌉ = 3.  1, 2, 3 → A (full), 4 → B, 12 → B, 35 → wraps: A full → B (3rd).
    shard, loads = place_on_ring(keys, points, owner, 3, capacity(6, 3, 0.5))
    assert shard.tolist() == [0, 0, 0, 1, 1, 1]  # derived by hand above
    assert loads.tolist() == [3, 3, 0]
    # a point exactly at a key's position takes it: key 20 goes to B while B has room
    assert place_on_ring(np.array([20], dtype=np.uint64), points, owner, 3, 1)[0].tolist() == [1]


def test_capacity_is_exact():
    # ⌈(1+ε)m/n⌉ by hand: ⌈1.1·100/10⌉ = 11 (a float product gives 11.000000000000002 and 12)
    assert capacity(100, 10, 0.1) == 11
    assert capacity(7, 3, 0.0) == 3        # ⌈7/3⌉
    assert capacity(6, 3, 0.0) == 2        # 6/3
    assert capacity(10, 4, 0.25) == 4      # ⌈12.5/4⌉ = ⌈3.125⌉
    assert capacity(0, 5, 1.0) == 0
    assert capacity(9, 2, INF) == 9        # no bound: a shard may take all m keys
    with pytest.raises(ParameterError):
        capacity(5, 0, 0.1)
    with pytest.raises(ParameterError):
        capacity(5, 2, -0.1)


# -- hashes against their published definitions ----------------------------------------------

def test_integer_key_hash_is_seeded_splitmix64():
    # first output of splitmix64 from state 0 is 0xE220A8397B1DCDAF (value from memory of the
    # reference generator's output)
    assert _splitmix64(0) == 0xE220A8397B1DCDAF
    keys = np.array([0, 1, 2, 12345, -1, 2**63 - 1, -(2**63)], dtype=np.int64)
    for seed in (0, 7, U64):
        want = [_splitmix64(_splitmix64(seed) ^ (int(x) & U64)) for x in keys]
        assert key_hashes(keys, seed).tolist() == want


def test_string_key_hash_is_keyed_blake2b():
    # Python's hashlib BLAKE2b (Aumasson et al., ACNS 2013) computed directly
    keys = ["", "a", "user-17", "naïve", "鍵"]
    for seed in (0, 99):
        want = [int.from_bytes(hashlib.blake2b(k.encode("utf-8"), digest_size=8, key=seed.to_bytes(8, "little"),
                                               person=b"shardline-key").digest(), "little") for k in keys]
        assert key_hashes(keys, seed).tolist() == want


def test_shard_points_definition():
    seed, s = 5, 42
    base = _splitmix64(_splitmix64(seed + 1) ^ s)
    want = [_splitmix64((base + j) & U64) for j in range(4)]
    assert shard_points(np.array([s]), 4, seed).tolist() == want
    salt = (3).to_bytes(8, "little")
    d = hashlib.blake2b(b"east", digest_size=8, key=seed.to_bytes(8, "little"), person=b"shardline-shard", salt=salt)
    assert shard_points(["east"], 4, seed)[3] == int.from_bytes(d.digest(), "little")


# -- bounded loads: the definition, the bound, and updates equal to a recomputation ----------

def _ops():
    return st.lists(st.tuples(st.sampled_from(["add_key", "remove_key", "add_shard", "remove_shard"]),
                              st.integers(0, 60)), max_size=25)


@settings(max_examples=60, deadline=None)
@given(shards=st.sets(st.integers(0, 12), min_size=1, max_size=6),
       keys=st.sets(st.integers(-30, 60), max_size=40),
       eps=st.sampled_from([0.0, 0.1, 0.25, 0.5, 1.0, 2.0, INF]),
       pts=st.sampled_from([1, 3]), seed=st.integers(0, 3), ops=_ops())
def test_updates_equal_definition_and_respect_bound(shards, keys, eps, pts, seed, ops):
    ring = BoundedLoadRing(sorted(shards), eps, seed=seed, points_per_shard=pts, keys=sorted(keys))
    keys, shards = set(keys), set(shards)
    assert _as_dict(ring) == _reference_placement(sorted(keys), sorted(shards), eps, seed, pts)
    for op, v in ops:
        before = _as_dict(ring)
        if op == "add_key" and v not in keys:
            keys.add(v)
            moves = ring.add_key(v)
        elif op == "remove_key" and v in keys:
            keys.discard(v)
            moves = ring.remove_key(v)
        elif op == "add_shard" and v % 15 not in shards:
            shards.add(v % 15)
            moves = ring.add_shard(v % 15)
        elif op == "remove_shard" and v % 15 in shards and len(shards) > 1:
            shards.discard(v % 15)
            moves = ring.remove_shard(v % 15)
        else:
            with pytest.raises(ParameterError):
                getattr(ring, op)(v if op.endswith("key") else v % 15)
            continue
        after = _as_dict(ring)
        # the state after the change equals the placement of the new sets from scratch
        assert after == _reference_placement(sorted(keys), sorted(shards), eps, seed, pts)
        # the load bound ⌈(1+ε)m/n⌉ (Mirrokni, Thorup & Zadimoghaddam 2018) holds after every change
        cap = _reference_cap(len(keys), len(shards), eps)
        assert ring.capacity == cap
        assert max(ring.loads().values(), default=0) <= cap
        assert sum(ring.loads().values()) == len(keys)
        # the reported moves are exactly the keys present before and after whose shard changed
        moved = {k: (before[k], after[k]) for k in before if k in after and before[k] != after[k]}
        assert dict(zip(moves.keys.tolist(), zip(moves.before.tolist(), moves.after.tolist()))) == moved


def test_larger_update_sequence_equals_from_scratch():
    rng = np.random.default_rng(11)
    keys = set(rng.choice(10**9, 3000, replace=False).tolist())
    shards = set(range(40))
    ring = BoundedLoadRing(sorted(shards), 0.1, seed=2, keys=sorted(keys))
    for step in range(30):
        r = step % 4
        if r == 0:
            ring.add_shard(100 + step)
            shards.add(100 + step)
        elif r == 1:
            s = sorted(shards)[int(rng.integers(len(shards)))]
            ring.remove_shard(s)
            shards.discard(s)
        elif r == 2:
            k = int(rng.integers(10**9, 2 * 10**9))
            ring.add_key(k)
            keys.add(k)
        else:
            k = sorted(keys)[int(rng.integers(len(keys)))]
            ring.remove_key(k)
            keys.discard(k)
        ks = np.array(sorted(keys))
        want = bounded_assign(ks, sorted(shards), 0.1, seed=2)
        assert _as_dict(ring) == dict(zip(ks.tolist(), want.tolist()))
        assert max(ring.loads().values()) <= capacity(len(keys), len(shards), 0.1)


def test_string_keys_and_shards():
    keys = [f"order-{i}" for i in range(500)]
    shards = ["east", "north", "south", "west"]
    ring = BoundedLoadRing(shards, 0.05, seed=3, keys=keys)
    want = bounded_assign(keys, shards, 0.05, seed=3)
    assert _as_dict(ring) == dict(zip(keys, want.tolist()))
    assert max(ring.loads().values()) <= 132  # ⌈1.05·500/4⌉ = ⌈131.25⌉
    assert ring.shard_of("order-7") == _as_dict(ring)["order-7"]
    ring.add_shard("centre")
    assert _as_dict(ring) == dict(zip(keys, bounded_assign(keys, shards + ["centre"], 0.05, seed=3).tolist()))


def test_loads_do_not_depend_on_priority_order():
    # with one point per shard this is linear probing with buckets of size c, whose occupied
    # capacity is independent of the insertion order (Knuth, TAOCP vol. 3, section 6.4; recalled
    # from memory) — only which key sits where changes. (With several points per shard a shard's
    # capacity is shared between arcs and the loads do depend on the order.)
    rng = np.random.default_rng(5)
    pts = np.sort(rng.integers(0, 2**63, 10, dtype=np.uint64))
    owner = rng.permutation(10)
    keys = rng.integers(0, 2**63, 400, dtype=np.uint64)
    cap = capacity(400, 10, 0.1)
    _, base = place_on_ring(keys, pts, owner, 10, cap)
    assert base.max() == cap  # the bound binds here, so the check is not vacuous
    for _ in range(5):
        _, loads = place_on_ring(rng.permutation(keys), pts, owner, 10, cap)
        assert loads.tolist() == base.tolist()


def test_exact_balance_when_eps_is_zero():
    # ε = 0 and n | m: c = m/n and n·c = m, so every shard is full (pigeonhole)
    ring = BoundedLoadRing(range(8), 0.0, seed=1, keys=np.arange(800))
    assert set(ring.loads().values()) == {100}


@pytest.mark.parametrize("eps", [INF, 1e9])
def test_no_bound_is_plain_consistent_hashing(eps):
    # with no bound each key takes the first point clockwise (Karger et al., STOC 1997)
    keys = np.arange(-500, 1500)
    shards = list(range(7))
    got = bounded_assign(keys, shards, eps, seed=4, points_per_shard=5)
    assert got.tolist() == consistent_assign(keys, shards, seed=4, points_per_shard=5).tolist()
    # and that is the definition, evaluated point by point in Python
    ring = sorted((int(p), s) for s in shards for p in shard_points(np.array([s]), 5, 4))
    pos = [p for p, _ in ring]
    want = [ring[bisect.bisect_left(pos, int(h)) % len(ring)][1] for h in key_hashes(keys, 4)]
    assert got.tolist() == want


# -- keys moved by a shard change -------------------------------------------------------------

def test_mod_hashing_moves_almost_every_key():
    # a key stays iff h mod n = h mod (n+1); for uniform h that has probability 1/(n+1), so
    # a fraction 1 − 1/(n+1) of the keys moves (the formula for modulo hashing)
    keys = np.arange(40_000)
    n = 10
    before = mod_assign(keys, list(range(n)), seed=9)
    after = mod_assign(keys, list(range(n + 1)), seed=9)
    h = [int(x) for x in key_hashes(keys, 9)]
    assert (before != after).tolist() == [x % n != x % (n + 1) for x in h]
    # binomial sd = sqrt(p(1−p)/m) ≈ 0.0014; tolerance about 5 sd
    assert abs((before != after).mean() - (1 - 1 / (n + 1))) < 0.007


@pytest.mark.parametrize("pts, seeds, tol", [(1, 300, 0.025), (100, 40, 0.008)])
def test_consistent_hashing_moves_about_m_over_n_plus_1(pts, seeds, tol):
    # expected keys moved by adding a shard = m/(n+1) (Karger et al., STOC 1997: the new shard
    # takes an expected 1/(n+1) of the ring). Tolerances ≈ 4 standard errors over the seeds
    # (arc sd ≈ 0.083 for one point, ≈ 0.01 with 100 points, plus key sampling noise).
    m, n = 2000, 10
    keys = np.arange(m)
    fractions = []
    for seed in range(seeds):
        before = consistent_assign(keys, list(range(n)), seed=seed, points_per_shard=pts)
        after = consistent_assign(keys, list(range(n + 1)), seed=seed, points_per_shard=pts)
        moved = before != after
        # monotonicity (Karger et al.): keys only move to the new shard
        assert (after[moved] == n).all()
        fractions.append(moved.mean())
    assert abs(np.mean(fractions) - 1 / (n + 1)) < tol


def test_consistent_hashing_removal_moves_only_that_shard():
    # removing a shard moves exactly its own keys (Karger et al., STOC 1997)
    keys = np.arange(5000)
    before = consistent_assign(keys, list(range(12)), seed=1, points_per_shard=10)
    after = consistent_assign(keys, [s for s in range(12) if s != 5], seed=1, points_per_shard=10)
    assert ((before != after) == (before == 5)).all()


def test_bounded_moves_returned_by_shard_changes():
    ring = BoundedLoadRing(range(20), 0.5, seed=8, keys=np.arange(4000))
    before = _as_dict(ring)
    moves = ring.remove_shard(3)
    after = _as_dict(ring)
    # every key of the removed shard must move, and those are reported too
    assert {k for k, s in before.items() if s == 3} <= set(moves.keys.tolist())
    assert len(moves) == sum(before[k] != after[k] for k in before)
    back = ring.add_shard(3)
    assert _as_dict(ring) == before  # the placement depends only on the sets (no history)
    assert len(back) == len(moves)


# -- determinism and errors -------------------------------------------------------------------

def test_same_seed_same_output():
    keys = np.arange(3000)
    a = bounded_assign(keys, range(9), 0.2, seed=13)
    assert a.tolist() == bounded_assign(keys, range(9), 0.2, seed=13).tolist()
    assert a.tolist() != bounded_assign(keys, range(9), 0.2, seed=14).tolist()


def test_bad_parameters():
    ring = BoundedLoadRing([0, 1], 0.1, keys=[1, 2, 3])
    with pytest.raises(ParameterError):
        ring.add_key(2)
    with pytest.raises(ParameterError):
        ring.add_key("2")  # the ring holds integer keys
    with pytest.raises(ParameterError):
        ring.remove_key(9)
    with pytest.raises(ParameterError):
        ring.add_shard(1)
    ring.remove_shard(1)
    with pytest.raises(ParameterError):
        ring.remove_shard(0)  # the last shard
    for bad in (dict(eps=-1), dict(eps=float("nan")), dict(seed=-1), dict(points_per_shard=0)):
        kw = dict(eps=0.1) | bad
        with pytest.raises(ParameterError):
            BoundedLoadRing([0, 1], **kw)
    with pytest.raises(ParameterError):
        bounded_assign([1, 1], [0, 1], 0.1)
    with pytest.raises(ParameterError):
        bounded_assign([1, "a"], [0, 1], 0.1)
    with pytest.raises(ParameterError):
        BoundedLoadRing([0, 0], 0.1)
    with pytest.raises(ParameterError):
        place_on_ring(np.arange(5, dtype=np.uint64), np.array([3, 1], dtype=np.uint64), [0, 1], 2, 3)


# -- the command (partition/commands/ring.py) -------------------------------------------------

def _run(argv):
    parser = argparse.ArgumentParser()
    ring_cmd.add_arguments(parser)
    return ring_cmd.run(parser.parse_args(argv))


def test_command_assign_writes_the_library_placement(tmp_path, capsys):
    keys = [f"sku-{i}" for i in range(300)]
    (tmp_path / "keys.txt").write_text("\n".join(keys) + "\n")
    out = tmp_path / "out.csv"
    assert _run(["assign", str(tmp_path / "keys.txt"), "--shards", "6", "--imbalance", "0.2",
                 "--seed", "1", "-o", str(out), "--json"]) == 0
    fig = json.loads(capsys.readouterr().out)
    rows = [line.split(",") for line in out.read_text().splitlines()]
    assert rows[0] == ["node", "shard"]  # the node,shard columns of every command
    got = {k: int(s) for k, s in rows[1:]}
    want = bounded_assign(keys, list(range(6)), 0.2, seed=1, points_per_shard=ring_cmd.DEFAULT_POINTS)
    assert got == dict(zip(keys, want.tolist()))
    assert fig["capacity"] == 60 and fig["max_load"] <= 60  # ⌈1.2·300/6⌉ = 60


def test_command_moves_counts(tmp_path, capsys):
    (tmp_path / "k.csv").write_text("id,name\n" + "".join(f"{i},x{i}\n" for i in range(1000)))
    moved = tmp_path / "moved.csv"
    assert _run(["moves", str(tmp_path / "k.csv"), "--column", "id", "--integer-keys", "-k", "8",
                 "--remove", "2", "--seed", "3", "--json", "-o", str(moved)]) == 0
    fig = json.loads(capsys.readouterr().out)
    keys = np.arange(1000)
    pts = ring_cmd.DEFAULT_POINTS  # defaults: ε = 0 as in every command, DEFAULT_POINTS points per shard
    b = bounded_assign(keys, range(8), 0.0, seed=3, points_per_shard=pts)
    a = bounded_assign(keys, [s for s in range(8) if s != 2], 0.0, seed=3, points_per_shard=pts)
    assert fig["moved"]["bounded"] == int((a != b).sum()) == len(moved.read_text().splitlines()) - 1
    assert moved.read_text().splitlines()[0] == "node,from,to"
    c0 = consistent_assign(keys, range(8), seed=3, points_per_shard=pts)
    assert fig["moved"]["consistent"] == int((c0 == 2).sum())  # only the removed shard's keys


@pytest.mark.parametrize("content, flags, line, words", [
    ("1\n2\nx3\n", ["--integer-keys"], 3, "not a 64-bit integer"),
    ("a\nb\na\n", [], 3, "more than once"),
    ("a\n\nb\n", [], 2, "empty key"),
    ("99999999999999999999\n", ["--integer-keys"], 1, "not a 64-bit integer"),
])
def test_command_bad_keys_name_the_line_and_write_nothing(tmp_path, content, flags, line, words):
    path = tmp_path / "keys.txt"
    path.write_text(content)
    out = tmp_path / "out.csv"
    with pytest.raises(InputError) as err:
        _run(["assign", str(path), "--shards", "2", "-o", str(out), *flags])
    assert err.value.line == line and words in str(err.value) and str(path) in str(err.value)
    assert list(tmp_path.iterdir()) == [path]  # no output, no temporary file left


def test_command_bad_parameters(tmp_path):
    path = tmp_path / "keys.txt"
    path.write_text("a\nb\n")
    for argv in (["--shards", "0"], ["--shards", "2", "--imbalance", "-1"], ["--shards", "2", "--points", "0"]):
        with pytest.raises(ParameterError):
            _run(["assign", str(path), "-o", str(tmp_path / "o.csv"), *argv])
    with pytest.raises(ParameterError):
        _run(["moves", str(path), "--shards", "2", "--remove", "5"])
    with pytest.raises(InputError):
        _run(["assign", str(tmp_path / "missing.txt"), "--shards", "2", "-o", str(tmp_path / "o.csv")])
