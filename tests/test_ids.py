"""Id fidelity: every key the user gave comes back exactly as given (partition/ids.py, partition/edgelist.py).

The references are outside the project:

* Python's own integer parser and printer: a text id is a canonical int64 when
  ``str(int(s)) == s`` and ``-2**63 <= int(s) < 2**63`` (the rule of
  partition/ids.py, written here without it);
* Python's ``csv`` module (RFC 4180 quoting) writes the awkward CSV inputs and
  reads the outputs back;
* Python's UTF-8 codec says which byte strings are valid UTF-8.
"""

from __future__ import annotations

import csv
import gzip
import io
import json
import os

import numpy as np
import pyarrow as pa
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from conftest import AWKWARD

from partition.cli import main
from partition.edgelist import read_graph
from partition.errors import InputError
from partition.ids import canonical_ints, first_invalid_utf8, id_column

INT64_MIN, INT64_MAX = -(2**63), 2**63 - 1


def python_canonical(s):
    """The reference rule: Python parses ``s`` as an int and prints it back unchanged, within int64."""
    try:
        v = int(s)
    except ValueError:
        return False
    return str(v) == s and INT64_MIN <= v <= INT64_MAX




@given(st.lists(AWKWARD, min_size=1, max_size=30))
@settings(max_examples=200, deadline=None, derandomize=True)
def test_canonical_rule_matches_python_int(values):
    got = canonical_ints(pa.array(values, pa.string()))
    if all(python_canonical(v) for v in values):
        assert got is not None and got.tolist() == [int(v) for v in values]
    else:
        assert got is None


@given(st.lists(AWKWARD, min_size=1, max_size=30))
@settings(max_examples=200, deadline=None, derandomize=True)
def test_id_column_keeps_every_value_byte_for_byte(values):
    ids = id_column(pa.array(values, pa.string()))
    assert [str(v) for v in ids.tolist()] == values  # written back exactly as read
    if ids.dtype == object:
        assert all(isinstance(v, str) for v in ids)


def _graph_rows(ids):
    """A connected graph over the distinct ids: a path, plus a chord every third node."""
    rows = [(ids[i], ids[i + 1]) for i in range(len(ids) - 1)]
    rows += [(ids[i], ids[i + 2]) for i in range(0, len(ids) - 2, 3)]
    return rows


def _read_csv(path):
    with open(path, newline="", encoding="utf-8") as fh:
        reader = csv.reader(fh)
        head = next(reader)
        return head, list(reader)


@pytest.mark.parametrize("fmt", ["text", "csv"])
@given(ids=st.lists(AWKWARD, min_size=3, max_size=25, unique=True))
@settings(max_examples=25, deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
def test_run_and_export_give_back_every_id(tmp_path_factory, fmt, ids):
    if fmt == "text":  # text ids are blank-, comma- and semicolon-free and not comments
        ids = [i for i in ids if not any(c in i for c in " \t,;\"'") and not i.startswith(("#", "%"))]
        if len(ids) < 3:
            return
    tmp = tmp_path_factory.mktemp("ids")
    rows = _graph_rows(ids)
    graph = tmp / ("g.txt" if fmt == "text" else "g.csv")
    if fmt == "text":
        graph.write_text("".join(f"{a} {b}\n" for a, b in rows), encoding="utf-8")
    else:
        buf = io.StringIO()
        w = csv.writer(buf, lineterminator="\n")
        w.writerow(["src", "dst"])
        w.writerows(rows)
        graph.write_text(buf.getvalue(), encoding="utf-8")
    out = tmp / "shards.csv"
    assert main(["run", str(graph), "-k", "2", "-o", str(out), "--quiet"]) == 0
    head, body = _read_csv(out)
    assert head == ["node", "shard"]
    assert sorted(r[0] for r in body) == sorted(ids)  # every id once, exactly as given
    assert {r[1] for r in body} <= {"0", "1"}
    placed = tmp / "placement"
    assert main(["export", str(out), "-o", str(placed), "--format", "csv", "--quiet"]) == 0
    manifest = json.loads((placed / "manifest.json").read_text())
    assert manifest  # the folder is complete
    assert main(["score", str(graph), str(placed), "--quiet"]) == 0  # the export reads back as the assignment


def test_zip_codes_signs_and_big_hashes_stay_distinct(tmp_path):
    graph = tmp_path / "g.txt"
    graph.write_text("007 7\n7 8\n+5 5\n5 6\n18446744073709551616 18446744073709551617\n8 5\n6 "
                     "18446744073709551616\n")
    g = read_graph(graph)
    assert g.ids.dtype == object
    assert sorted(g.ids.tolist()) == sorted(["007", "7", "8", "+5", "5", "6", "18446744073709551616",
                                             "18446744073709551617"])


def test_integer_ids_stay_integers_in_parquet_output(tmp_path):
    import pyarrow.parquet as pq

    graph = tmp_path / "g.txt"
    graph.write_text("1 2\n2 3\n3 1\n-4 1\n9223372036854775807 2\n")
    out = tmp_path / "s.parquet"
    assert main(["run", str(graph), "-k", "2", "-o", str(out), "--quiet"]) == 0
    table = pq.read_table(out)
    assert table.schema.field("node").type == pa.int64()
    assert sorted(table.column("node").to_pylist()) == [-4, 1, 2, 3, 9223372036854775807]


@pytest.mark.parametrize("raw, line", [
    (b"1 2\n2 a\xffb\n", 2),
    (b"# comment \xc3\n1 2\n3 \xc3\x28\n", 3),  # 0xC3 0x28: an invalid two-byte sequence
    (b"1 2\n\xed\xa0\x80 3\n", 2),              # an encoded surrogate is not UTF-8
])
def test_bytes_that_are_not_utf8_are_an_error_naming_the_line(tmp_path, capsys, raw, line):
    def python_valid(b):  # the reference: Python's UTF-8 codec
        try:
            b.decode("utf-8")
        except UnicodeDecodeError:
            return False
        return True

    bad = raw.splitlines()[line - 1]
    assert not python_valid(bad) and (first_invalid_utf8(bad) is not None)
    path = tmp_path / "bad.txt"
    path.write_bytes(raw)
    out = tmp_path / "s.csv"
    assert main(["run", str(path), "-k", "2", "-o", str(out), "--quiet"]) == 2
    err = capsys.readouterr().err
    assert f"bad.txt, line {line}: is not valid UTF-8" in err and "Traceback" not in err
    assert not out.exists()


def test_valid_utf8_agrees_with_python_codec():
    samples = [b"", b"abc", "日本".encode(), b"\xff", b"\xc3\x28", b"\xe2\x82", "é".encode() + b"\x80",
               b"\xf4\x90\x80\x80", b"\xed\xa0\x80", "🙂".encode()]
    for b in samples:
        try:
            b.decode("utf-8")
            valid = True
        except UnicodeDecodeError:
            valid = False
        assert (first_invalid_utf8(b) is None) == valid, b


def test_text_header_line_stops_with_the_option_to_pass(tmp_path, capsys):
    path = tmp_path / "h.txt"
    path.write_text("src dst\n1 2\n2 3\n3 1\n")
    out = tmp_path / "s.csv"
    assert main(["run", str(path), "-k", "2", "-o", str(out), "--quiet"]) == 2
    err = capsys.readouterr().err
    assert "h.txt, line 1" in err and "--header" in err and not out.exists()
    assert main(["run", str(path), "-k", "2", "-o", str(out), "--quiet", "--header"]) == 0
    assert sorted(r[0] for r in _read_csv(out)[1]) == ["1", "2", "3"]


def test_csv_without_header_stops_unless_told(tmp_path, capsys):
    path = tmp_path / "n.csv"
    path.write_text("1,2\n2,3\n3,1\n")
    out = tmp_path / "s.csv"
    assert main(["run", str(path), "-k", "2", "-o", str(out), "--quiet"]) == 2
    assert "--no-header" in capsys.readouterr().err
    assert main(["run", str(path), "-k", "2", "-o", str(out), "--quiet", "--no-header"]) == 0
    assert sorted(r[0] for r in _read_csv(out)[1]) == ["1", "2", "3"]


@pytest.mark.parametrize("sep, option", [("\t", None), (";", None), (",", None), ("\t", "\\t"), ("\t", "tab"),
                                         (";", "semicolon"), ("|", "pipe")])
def test_delimiter_is_sniffed_or_decoded(tmp_path, sep, option):
    # the reference: Python's csv.Sniffer finds the same delimiter in these lines
    text = sep.join(["a", "b"]) + "\n" + "\n".join(sep.join(r) for r in (("x", "y"), ("y", "z"), ("z", "x"))) + "\n"
    if option is None:
        assert csv.Sniffer().sniff(text, delimiters=",;\t").delimiter == sep
    path = tmp_path / "g.csv"
    path.write_text(text)
    out = tmp_path / "s.csv"
    argv = ["run", str(path), "-k", "2", "-o", str(out), "--quiet"] + ([] if option is None else
                                                                       ["--delimiter", option])
    assert main(argv) == 0
    assert sorted(r[0] for r in _read_csv(out)[1]) == ["x", "y", "z"]


def test_one_column_error_names_the_delimiter_and_suggests_the_option(tmp_path):
    path = tmp_path / "g.csv"
    path.write_text("a|b\nx|y\ny|z\n")
    with pytest.raises(InputError) as info:
        read_graph(path, delimiter=",")
    assert "','" in str(info.value) or "comma" in str(info.value)
    assert "--delimiter" in str(info.value)


def test_float_parquet_ids_are_refused(tmp_path):
    import pyarrow.parquet as pq

    path = tmp_path / "g.parquet"
    pq.write_table(pa.table({"src": pa.array([1.0, 2.0]), "dst": pa.array([2.0, 3.0])}), path)
    with pytest.raises(InputError, match="float"):
        read_graph(path)


def test_gzip_text_ids_read_the_same(tmp_path):
    plain, packed = tmp_path / "g.txt", tmp_path / "g.txt.gz"
    text = "007 7\n7 x\nx 007\n"
    plain.write_text(text)
    packed.write_bytes(gzip.compress(text.encode()))
    a, b = read_graph(plain), read_graph(packed)
    assert a.ids.tolist() == b.ids.tolist() and np.array_equal(a.indptr, b.indptr)
    assert os.path.getsize(packed) > 0
