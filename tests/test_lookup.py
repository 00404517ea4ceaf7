"""Tests of partition/placement/lookup.py: the Placement lookup and the node,shard reader."""

from __future__ import annotations

import gzip
from pathlib import Path

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from partition.errors import InputError, ParameterError
from partition.placement import lookup
from partition.node_shards import read_node_shards
from partition.placement.lookup import Placement, fnv1a64, string_key_hash

from conftest import shared_missing  # noqa: E402

SHARED = Path(__file__).resolve().parents[2] / "shared" / "datasets"

INT64 = st.integers(min_value=-(2**63), max_value=2**63 - 1)
SETTINGS = settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])


# --- hashes ------------------------------------------------------------------


def test_fnv1a64_published_vectors():
    # FNV-1a 64-bit: the empty string hashes to the offset basis 0xcbf29ce484222325 (FNV
    # specification, Fowler/Noll/Vo, draft-eastlake-fnv); "a" -> 0xaf63dc4c8601ec8c and
    # "foobar" -> 0x85944171f73967e8 are from the FNV test suite (values from memory,
    # matched by the reference recurrence below).
    got = fnv1a64(["", "a", "foobar"])
    assert [int(x) for x in got] == [0xCBF29CE484222325, 0xAF63DC4C8601EC8C, 0x85944171F73967E8]


def _fnv1a64_reference(data: bytes) -> int:
    """The published FNV-1a recurrence: h = (h xor byte) * 0x100000001b3 mod 2**64."""
    h = 0xCBF29CE484222325
    for byte in data:
        h = ((h ^ byte) * 0x100000001B3) % 2**64
    return h


@SETTINGS
@given(st.lists(st.text(max_size=12), max_size=20))
def test_fnv1a64_matches_reference_recurrence(words):
    got = fnv1a64(words)
    assert [int(x) for x in got] == [_fnv1a64_reference(w.encode()) for w in words]


def test_string_key_hash_is_splitmix64_finaliser_of_fnv():
    # splitmix64 (Steele, Lea & Flood, OOPSLA 2014): its first output from state 0 is
    # 0xE220A8397B1DCDAF (value from memory); the finaliser is that output function.
    from partition.rules import mix64

    assert int(mix64(np.uint64(0))) == 0xE220A8397B1DCDAF
    words = ["", "a", "node-17", "Zürich", "東京"]
    assert np.array_equal(string_key_hash(words), mix64(fnv1a64(words)))


# --- lookups against a Python dict -------------------------------------------


def _check_against_dict(p, mapping, queries):
    expect = [mapping.get(q, -1) for q in queries]
    assert p.shards_of(np.array(queries, dtype=object) if queries and isinstance(queries[0], str)
                       else np.array(queries, dtype=np.int64)).tolist() == expect
    assert [p.shard_of(q, -1) for q in queries] == expect
    assert [q in p for q in queries] == [q in mapping for q in queries]


@SETTINGS
@given(st.dictionaries(INT64, st.integers(0, 40000), max_size=300), st.lists(INT64, max_size=50),
       st.integers(0, 2**32 - 1))
def test_integer_lookups_match_dict(mapping, extra, seed):
    # reference: a Python dict built from the same pairs
    keys = np.array(list(mapping), dtype=np.int64)
    shards = np.array(list(mapping.values()), dtype=np.int64)
    p = Placement.from_arrays(keys, shards)
    rng = np.random.default_rng(seed)
    present = [int(x) for x in rng.choice(keys, size=min(len(keys), 50), replace=False)] if len(keys) else []
    near = [k + d for k in present[:10] for d in (-1, 1) if -(2**63) <= k + d < 2**63]
    _check_against_dict(p, mapping, present + near + extra)
    assert p.integer_keys and len(p) == len(mapping)
    got_keys, got_shards = p.to_arrays()
    assert dict(zip(got_keys.tolist(), got_shards.tolist())) == mapping


@SETTINGS
@given(st.dictionaries(st.text(max_size=10), st.integers(0, 200), max_size=200),
       st.lists(st.text(max_size=10), max_size=40))
def test_string_lookups_match_dict(mapping, extra):
    # reference: a Python dict; unicode, empty and prefix-sharing keys included
    keys = np.array(list(mapping), dtype=object)
    p = Placement.from_arrays(keys, np.array(list(mapping.values()), dtype=np.int64))
    queries = list(mapping)[:60] + [k + "x" for k in list(mapping)[:10]] + extra
    if queries:
        _check_against_dict(p, mapping, queries)
    assert not p.integer_keys
    got_keys, got_shards = p.to_arrays()
    assert dict(zip(got_keys.tolist(), got_shards.tolist())) == mapping


def test_string_lookups_exact_when_hashes_collide(monkeypatch):
    # with only two hash bits every key shares its hash with ~1/4 of the others; the
    # byte comparison must still give the dict's answer (reference: a Python dict)
    monkeypatch.setattr(lookup, "_HASH_MASK", np.uint64(3))
    rng = np.random.default_rng(5)
    mapping = {f"k{i}": int(rng.integers(0, 9)) for i in range(400)}
    p = Placement.from_arrays(np.array(list(mapping), dtype=object), np.array(list(mapping.values())))
    queries = list(mapping) + [f"k{i}" for i in range(400, 450)] + ["", "k"]
    _check_against_dict(p, mapping, queries)
    with pytest.raises(ParameterError, match="appears twice"):
        Placement.from_arrays(np.array(["k1", "k2", "k1"], dtype=object), [0, 1, 2])


def test_string_placement_takes_integer_queries_as_decimal_text():
    p = Placement.from_arrays(np.array(["10", "abc", "-3"], dtype=object), [1, 2, 3])
    assert p.shards_of(np.array([10, -3, 4])).tolist() == [1, 3, -1]
    assert p.shard_of(10) == 1 and p.shard_of("abc") == 2


def test_integer_placement_edges_of_int64_and_unsigned_queries():
    lo, hi = -(2**63), 2**63 - 1
    p = Placement.from_arrays(np.array([lo, 0, hi], dtype=np.int64), [3, 4, 5])
    assert p.shards_of(np.array([lo, 0, hi, 1, lo + 1], dtype=np.int64)).tolist() == [3, 4, 5, -1, -1]
    big = np.array([2**63 - 1, 2**63, 2**64 - 1, 0], dtype=np.uint64)
    assert p.shards_of(big).tolist() == [5, -1, -1, 4]
    assert p.shard_of(2**63, default=None) is None and p.shard_of("0", default=None) is None


def test_missing_key_raises_key_error_or_returns_default():
    p = Placement.from_arrays([5, 7], [0, 1])
    with pytest.raises(KeyError):
        p.shard_of(6)
    assert p.shard_of(6, default="none") == "none"
    assert p.shards_of([6, 7], default=99).tolist() == [99, 1]


def test_empty_placement_misses_everything():
    p = Placement.from_arrays(np.zeros(0, dtype=np.int64), np.zeros(0, dtype=np.int64))
    assert len(p) == 0 and p.k == 0
    assert p.shards_of(np.array([0, 1, -5])).tolist() == [-1, -1, -1]
    assert p.shard_of(0, -2) == -2


def test_bad_arguments_raise_parameter_errors():
    p = Placement.from_arrays([1, 2], [0, 1])
    with pytest.raises(ParameterError, match="integer keys"):
        p.shards_of(np.array([1.5, 2.0]))
    with pytest.raises(ParameterError, match="integer keys"):
        p.shards_of(np.array(["1"]))
    with pytest.raises(ParameterError, match="default"):
        p.shards_of([1], default=2**40)
    with pytest.raises(ParameterError, match="appears twice"):
        Placement.from_arrays([4, 1, 4], [0, 1, 2])
    with pytest.raises(ParameterError, match="out of range"):
        Placement.from_arrays([1, 2], [0, -1])
    with pytest.raises(ParameterError, match="keys but"):
        Placement.from_arrays([1, 2, 3], [0, 1])


@pytest.mark.parametrize("kind", ["dense", "sparse", "clustered", "wide"])
def test_integer_keys_take_at_most_24_bytes(kind):
    # the project's memory goal for service lookups: at most 24 bytes per integer key
    # (8 key + 2 shard + at most 4 of directory = 14 by construction)
    rng = np.random.default_rng(3)
    n = 50_000
    keys = {
        "dense": np.arange(n),
        "sparse": rng.choice(10**12, size=n, replace=False),
        "clustered": np.concatenate([np.arange(n // 2), 10**15 + np.arange(n - n // 2)]),
        "wide": np.unique(rng.integers(-(2**63), 2**63 - 1, size=n, dtype=np.int64)),
    }[kind].astype(np.int64)
    p = Placement.from_arrays(keys, rng.integers(0, 1000, size=keys.size))
    assert p.nbytes / len(p) <= 14.0 + 64 / len(p)
    assert p.shards_of(keys[::97]).tolist() == p.to_arrays()[1][np.searchsorted(p.to_arrays()[0], keys[::97])].tolist()


@pytest.mark.skipif(not (SHARED / "ca-GrQc.txt.gz").exists(), reason=shared_missing("ca-GrQc.txt.gz"))
def test_lookup_over_the_node_ids_of_a_public_graph():
    # ca-GrQc (SNAP, Leskovec & Krevl): 5242 nodes with non-contiguous ids (CATALOG.md);
    # reference: a Python dict over the same ids
    from partition.edgelist import read_graph

    g = read_graph(SHARED / "ca-GrQc.txt.gz")
    assert g.n == 5242
    shards = (g.ids * 2654435761) % 13
    mapping = dict(zip(g.ids.tolist(), shards.tolist()))
    p = Placement.from_arrays(g.ids, shards)
    queries = np.arange(g.ids.min() - 5, g.ids.max() + 5)
    assert p.shards_of(queries).tolist() == [mapping.get(int(q), -1) for q in queries]


# --- reading node,shard files ------------------------------------------------


def _write(tmp_path, name, text):
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def test_read_csv_tsv_gzip_and_parquet(tmp_path):
    csv_path = _write(tmp_path, "a.csv", "node,shard\n10,1\n\n7, 0\n-3,2\n")
    table = read_node_shards(csv_path)
    ids, shards = table.ids, table.shards
    assert ids.dtype == np.int64 and ids.tolist() == [10, 7, -3] and shards.tolist() == [1, 0, 2]
    tsv_path = _write(tmp_path, "b.tsv", "shard\tnode\tnote\n1\talpha\tx\n0\tbeta\ty\n")
    table = read_node_shards(tsv_path)
    ids, shards = table.ids, table.shards
    assert ids.dtype == object and ids.tolist() == ["alpha", "beta"] and shards.tolist() == [1, 0]
    gz = tmp_path / "c.csv.gz"
    gz.write_bytes(gzip.compress(b"node,shard\n007,3\nx,1\n"))
    table = read_node_shards(gz)
    ids, _ = table.ids, table.shards
    assert ids.tolist() == ["007", "x"]  # not all integers: every id is a string
    pq_path = tmp_path / "d.parquet"
    pq.write_table(pa.table({"node": pa.array([5, 6], pa.int64()), "shard": pa.array([0, 1], pa.int32())}), pq_path)
    p = Placement.load(pq_path)
    assert p.shards_of([5, 6, 7]).tolist() == [0, 1, -1]


def test_quoted_ids_with_line_breaks_keep_line_numbers(tmp_path):
    path = _write(tmp_path, "q.csv", 'node,shard\n"a\nb",1\n"c,d",2\n"a\nb",3\n')
    with pytest.raises(InputError) as err:
        read_node_shards(path)
    # the repeated id starts on line 5 (lines: 1 header, 2-3 first record, 4, 5-6)
    assert err.value.line == 5 and "first on line 2" in str(err.value)


@pytest.mark.parametrize(
    "text, line, fragment",
    [
        ("node,weight\n1,2\n", 1, "node and shard"),
        ("node,shard\n1,0\n2,zero\n", 3, "not an integer"),
        ("node,shard\n1,0\n\n2,-1\n", 4, "out of range"),
        ("node,shard\n1,0\n2,99999999999999999999\n", 3, "out of range"),
        ("node,shard\n1,0\n2,1\n1,1\n", 4, "listed twice (first on line 2)"),
        ("node,shard\n1,0\n2,1,5\n", 3, "expected 2 fields"),
        ("node,shard\n1,0\n,1\n", 3, "empty"),
    ],
)
def test_bad_text_files_name_the_file_and_line(tmp_path, text, line, fragment):
    path = _write(tmp_path, "bad.csv", text)
    with pytest.raises(InputError) as err:
        Placement.load(path)
    assert err.value.line == line and fragment in str(err.value) and str(path) in str(err.value)


def test_bad_files_without_lines(tmp_path):
    with pytest.raises(InputError, match="no such file"):
        read_node_shards(tmp_path / "missing.csv")
    with pytest.raises(InputError, match="no node,shard rows"):
        read_node_shards(_write(tmp_path, "empty.csv", "node,shard\n"))
    with pytest.raises(InputError, match="PAR1"):
        read_node_shards(_write(tmp_path, "fake.parquet", "node,shard\n1,2\n"))
    bad = tmp_path / "null.parquet"
    pq.write_table(pa.table({"node": [1, 2, 3], "shard": pa.array([0, None, 1], pa.int64())}), bad)
    with pytest.raises(InputError, match="row 2: the shard is missing"):
        read_node_shards(bad)
    other = tmp_path / "cols.parquet"
    pq.write_table(pa.table({"weight": [5], "id": [1], "part": [0]}), other)
    table = read_node_shards(other)  # the usual names id/part are found by name, not position
    assert table.ids.tolist() == [1] and table.shards.tolist() == [0] and table.columns == ("id", "part")
    unknown = tmp_path / "unknown.parquet"
    pq.write_table(pa.table({"a": [1], "b": [0], "c": [2]}), unknown)
    with pytest.raises(InputError, match="cannot tell the node and shard columns"):
        read_node_shards(unknown)


@pytest.mark.parametrize("suffix", [".csv", ".tsv", ".parquet", ".csv.gz"])
def test_reads_files_written_by_write_assignment(tmp_path, suffix):
    # interoperability with partition.assignment: ids that need quoting (blanks, comma, leading #)
    # come back exactly; integer ids come back as int64
    from partition.assignment import write_assignment
    from partition.graph import build_graph

    g = build_graph(np.array(["a b", "#x", " c", "d,e"], dtype=object), np.array(["x", "y", "z", "w"], dtype=object))
    parts = np.arange(g.n) % 3
    write_assignment(tmp_path / f"s{suffix}", g, parts)
    table = read_node_shards(tmp_path / f"s{suffix}")
    ids, shards = table.ids, table.shards
    assert ids.tolist() == g.ids.tolist() and shards.tolist() == parts.tolist()
    g = build_graph(np.array([5, -3, 2**62]), np.array([1, 2, 3]))
    write_assignment(tmp_path / f"i{suffix}", g, np.arange(g.n) % 2)
    p = Placement.load(tmp_path / f"i{suffix}")
    assert p.integer_keys and p.shards_of(g.ids).tolist() == (np.arange(g.n) % 2).tolist()
