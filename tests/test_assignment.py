"""Tests of partition/assignment.py: reading and writing node→shard files.

References: Python's ``csv`` module (an RFC 4180 reader) and pandas'
Parquet reader read the written files back independently; every bad file is
checked for the file name and the physical line number in the error.
"""

from __future__ import annotations

import csv
import gzip
import io

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from partition.assignment import read_assignment, write_assignment
from partition.errors import InputError, ParameterError
from partition.graph import build_graph


def _ring(ids):
    """A cycle through ``ids`` (ints or strings), every id a node."""
    ids = np.asarray(ids, dtype=object if isinstance(ids[0], str) else np.int64)
    return build_graph(ids, np.roll(ids, -1), node_ids=ids, node_weights=np.ones(len(ids), np.int64))


INT_GRAPH = _ring([3, 10, 11, 40, 7])  # dense order: 3, 7, 10, 11, 40
STR_GRAPH = _ring(["b", "a, comma", 'say "hi"', "#hash", " pad ", "tab\there", "", "%pct", "ünï"])


def _write(tmp_path, name, text):
    path = tmp_path / name
    data = text.encode("utf-8") if isinstance(text, str) else text
    path.write_bytes(gzip.compress(data) if name.endswith(".gz") else data)
    return path


# --- round trips -----------------------------------------------------------


@pytest.mark.parametrize("name", ["p.csv", "p.tsv", "p.parquet", "p.csv.gz", "p.tsv.gz", "p.txt"])
@pytest.mark.parametrize("graph", [INT_GRAPH, STR_GRAPH], ids=["int-ids", "str-ids"])
def test_round_trip(tmp_path, name, graph):
    parts = np.random.default_rng(0).integers(0, 3, graph.n)
    write_assignment(tmp_path / name, graph, parts)
    back = read_assignment(tmp_path / name, graph)
    assert back.dtype == np.int64
    assert back.tolist() == parts.tolist()
    assert read_assignment(tmp_path / name, graph, k=3).tolist() == parts.tolist()


def test_written_csv_read_by_the_csv_module(tmp_path):
    # Reference: Python's csv module (RFC 4180) sees the same ids and shards.
    parts = np.arange(STR_GRAPH.n) % 4
    write_assignment(tmp_path / "p.csv", STR_GRAPH, parts)
    rows = list(csv.reader(io.StringIO((tmp_path / "p.csv").read_text(encoding="utf-8"))))
    assert rows[0] == ["node", "shard"]
    assert rows[1:] == [[str(i), str(p)] for i, p in zip(STR_GRAPH.ids, parts)]
    tsv = tmp_path / "p.tsv"
    write_assignment(tsv, STR_GRAPH, parts)
    rows = list(csv.reader(io.StringIO(tsv.read_text(encoding="utf-8")), delimiter="\t"))
    assert rows[1:] == [[str(i), str(p)] for i, p in zip(STR_GRAPH.ids, parts)]


def test_written_parquet_read_by_pandas(tmp_path):
    parts = np.arange(INT_GRAPH.n) % 2
    write_assignment(tmp_path / "p.parquet", INT_GRAPH, parts)
    df = pd.read_parquet(tmp_path / "p.parquet")  # reference: pandas' Parquet reader
    assert list(df.columns) == ["node", "shard"]
    assert df["node"].tolist() == [3, 7, 10, 11, 40]  # dense (sorted id) order
    assert df["shard"].tolist() == parts.tolist()


def test_written_text_is_plain_and_deterministic(tmp_path):
    parts = np.array([1, 0, 1, 0, 2])
    write_assignment(tmp_path / "a.csv", INT_GRAPH, parts)
    assert (tmp_path / "a.csv").read_text() == "node,shard\n3,1\n7,0\n10,1\n11,0\n40,2\n"
    for name in ("a.csv.gz", "a.parquet", "a.tsv"):
        write_assignment(tmp_path / name, STR_GRAPH, np.arange(STR_GRAPH.n) % 3)
        first = (tmp_path / name).read_bytes()
        write_assignment(tmp_path / name, STR_GRAPH, np.arange(STR_GRAPH.n) % 3)
        assert (tmp_path / name).read_bytes() == first


# Line breaks cannot live in text files (module docstring); NUL is left out
# because the graph builder's id normalisation treats a trailing NUL as absent.
_ID = st.text(st.characters(blacklist_categories=("Cs",), blacklist_characters="\r\n\x00"), max_size=8)


@settings(max_examples=30, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(ids=st.lists(_ID, min_size=2, max_size=12, unique=True), seed=st.integers(0, 1000),
       fmt=st.sampled_from(["csv", "tsv", "parquet"]))
def test_round_trip_any_string_ids(tmp_path, ids, seed, fmt):
    graph = _ring(ids)
    parts = np.random.default_rng(seed).integers(0, len(ids), graph.n)
    path = tmp_path / f"h.{fmt}"
    write_assignment(path, graph, parts)
    assert read_assignment(path, graph).tolist() == parts.tolist()


# --- accepted variations ---------------------------------------------------


def test_comments_blanks_spaces_and_crlf(tmp_path):
    text = "# node shard\n\n   3   1  \n% also a comment\n7\t0\r\n  # indented comment\n10 1\n11  0\n40 2"
    path = _write(tmp_path, "a.txt", text)
    assert read_assignment(path, INT_GRAPH).tolist() == [1, 0, 1, 0, 2]


def test_header_names_and_swapped_columns(tmp_path):
    path = _write(tmp_path, "a.tsv", "shard\tnode\n1\t3\n0\t7\n1\t10\n0\t11\n2\t40\n")
    assert read_assignment(path, INT_GRAPH).tolist() == [1, 0, 1, 0, 2]
    path = _write(tmp_path, "b.csv", "id,part\n3,1\n7,0\n10,1\n11, 0\n40,+2\n")
    assert read_assignment(path, INT_GRAPH).tolist() == [1, 0, 1, 0, 2]


def test_headerless_csv_with_string_ids(tmp_path):
    graph = _ring(["x", "y", "z"])
    path = _write(tmp_path, "a.csv", "z,0\nx,1\ny,0\n")
    assert read_assignment(path, graph).tolist() == [1, 0, 0]  # dense order x, y, z


def test_parquet_first_two_columns_and_string_shards(tmp_path):
    path = tmp_path / "a.parquet"
    pq.write_table(pa.table({"id": ["40", "3", "7", "10", "11"], "part": ["2", "1", "0", "1", "0"]}), path)
    assert read_assignment(path, INT_GRAPH).tolist() == [1, 0, 1, 0, 2]


def test_integer_ids_far_apart(tmp_path):
    graph = _ring([-5, 10**15, 7, 2**40])  # too sparse for a direct table
    write_assignment(tmp_path / "a.csv", graph, np.array([0, 1, 0, 1]))
    assert read_assignment(tmp_path / "a.csv", graph).tolist() == [0, 1, 0, 1]


# --- bad files: the error names the file and the line ----------------------


@pytest.mark.parametrize(
    "text, line, words",
    [
        ("node,shard\n3,1\n7,0,9\n10,1\n11,0\n40,2\n", 3, "expected 2 fields"),
        ("node,shard\n3,1\n7\n10,1\n11,0\n40,2\n", 3, "expected 2 fields"),
        ("node,shard\n3,1\n7,0\n10,one\n11,0\n40,2\n", 4, "not an integer"),
        ("node,shard\n3,1\n7,0\n10,1.0\n11,0\n40,2\n", 4, "not an integer"),
        ("node,shard\n3,1\n7,0\n10,\n11,0\n40,2\n", 4, "not an integer"),
        ("node,shard\n3,1\n7,-2\n10,1\n11,0\n40,2\n", 3, "negative"),
        ("node,shard\n3,1\n7,0\n10,1\n11,0\n40,9\n", 6, "out of range"),
        ("node,shard\n3,1\n7,0\n12,1\n11,0\n40,2\n", 4, "not a node of the graph"),
        ("node,shard\n3,1\n7,0\nten,1\n11,0\n40,2\n", 4, "not a node of the graph"),
        ("node,shard\n3,1\n7,0\n10,1\n3,0\n11,0\n40,2\n", 5, "listed twice (first on line 2)"),
        ("node,shard\n3,1\n7,0\n7,1\n3,0\n10,1\n11,0\n40,2\n", 4, "node 7 is listed twice (first on line 3)"),
        ("node,shard\n3,1\n7,0\n10,1\n11,99999999999999999999\n40,2\n", 5, "out of range"),
    ],
)
def test_bad_rows_name_file_and_line(tmp_path, text, line, words):
    path = _write(tmp_path, "bad.csv", text)
    with pytest.raises(InputError) as err:
        read_assignment(path, INT_GRAPH)
    assert err.value.path == str(path)
    assert err.value.line == line
    assert words in str(err.value) and f"{path}, line {line}:" in str(err.value)


def test_shard_not_below_k(tmp_path):
    path = _write(tmp_path, "a.csv", "3,1\n7,0\n10,3\n11,0\n40,2\n")
    with pytest.raises(InputError, match=r"line 3: shard 3 is out of range: with k = 3"):
        read_assignment(path, INT_GRAPH, k=3)
    assert read_assignment(path, INT_GRAPH, k=4)[2] == 3


def test_line_numbers_count_comments_and_compression(tmp_path):
    text = "# placement of the Larkspur depots\n\n3 1\n% note\n7 0\n10 x\n11 0\n40 2\n"
    for name in ("a.txt", "a.txt.gz"):
        with pytest.raises(InputError) as err:
            read_assignment(_write(tmp_path, name, text), INT_GRAPH)
        assert err.value.line == 6 and "'x' is not an integer" in str(err.value)


def test_missing_nodes_are_counted_and_named(tmp_path):
    path = _write(tmp_path, "a.csv", "node,shard\n7,0\n11,1\n")
    with pytest.raises(InputError) as err:
        read_assignment(path, INT_GRAPH)
    assert err.value.line is None and err.value.path == str(path)
    assert "3 node(s) of the graph have no shard in the file (first: 3, 10, 40)" in str(err.value)


@pytest.mark.parametrize(
    "content, words",
    [(b"", "no node-to-shard rows"), (b"# only a comment\n\n", "no node-to-shard rows"),
     (b"node,shard\n", "header but no"), (b"\x1f\x8bnot gzip", "not a valid gzip file")],
)
def test_empty_or_broken_files(tmp_path, content, words):
    path = tmp_path / "a.csv"
    path.write_bytes(content)
    with pytest.raises(InputError, match=words):
        read_assignment(path, INT_GRAPH)


def test_not_utf8_names_the_line(tmp_path):
    graph = _ring(["x", "y", "z"])
    path = _write(tmp_path, "a.csv", b"x,0\ny,1\n\xff\xfe,0\n")
    with pytest.raises(InputError) as err:
        read_assignment(path, graph)
    assert err.value.line == 3


def test_missing_file_and_fake_parquet(tmp_path):
    with pytest.raises(InputError, match="no such file"):
        read_assignment(tmp_path / "absent.csv", INT_GRAPH)
    with pytest.raises(InputError, match="not a Parquet file"):
        read_assignment(_write(tmp_path, "a.parquet", "3,1\n"), INT_GRAPH)


def test_parquet_errors_name_the_row(tmp_path):
    path = tmp_path / "a.parquet"
    pq.write_table(pa.table({"node": [3, 7, 10, 11, 40], "shard": [1, 0, -1, 0, 2]}), path)
    with pytest.raises(InputError, match=r"row 3: shard -1 is negative"):
        read_assignment(path, INT_GRAPH)
    pq.write_table(pa.table({"node": [3, 7, 10, 11, 40], "shard": [1.0, 0, 1, 0, 2]}), path)
    with pytest.raises(InputError, match="shard column has type double"):
        read_assignment(path, INT_GRAPH)
    pq.write_table(pa.table({"node": [3, 7, None, 11, 40], "shard": [1, 0, 1, 0, 2]}), path)
    with pytest.raises(InputError, match=r"row 3: the node is missing"):
        read_assignment(path, INT_GRAPH)
    huge = pa.array([1, 0, 1, 2**64 - 1, 2], pa.uint64())
    pq.write_table(pa.table({"node": [3, 7, 10, 11, 40], "shard": huge}), path)
    with pytest.raises(InputError, match=r"row 4: shard 18446744073709551615 is out of range"):
        read_assignment(path, INT_GRAPH)
    pq.write_table(pa.table({"node": [3, 7, 10, 11, 40]}), path)
    with pytest.raises(InputError, match="1 column"):
        read_assignment(path, INT_GRAPH)


def test_bad_k_is_a_parameter_error(tmp_path):
    path = _write(tmp_path, "a.csv", "3,1\n7,0\n10,1\n11,0\n40,2\n")
    for k in (0, 6, 2.5):
        with pytest.raises(ParameterError):
            read_assignment(path, INT_GRAPH, k=k)


# --- writing ---------------------------------------------------------------


@pytest.mark.parametrize(
    "parts, fmt",
    [(np.array([0, 1, 0]), None), (np.array([0.0, 1, 0, 1, 0]), None),
     (np.array([0, -1, 0, 1, 0]), None), (np.array([0, 1, 0, 1, 0]), "xml")],
)
def test_write_rejects_bad_input_and_leaves_no_file(tmp_path, parts, fmt):
    with pytest.raises(ParameterError):
        write_assignment(tmp_path / "out.csv", INT_GRAPH, parts, fmt=fmt)
    assert list(tmp_path.iterdir()) == []


def test_write_replaces_atomically(tmp_path):
    path = tmp_path / "out.csv"
    path.write_text("old\n")
    write_assignment(path, INT_GRAPH, np.zeros(INT_GRAPH.n, dtype=np.int64), fmt="tsv")
    assert path.read_text().splitlines()[0] == "node\tshard"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out.csv"]
