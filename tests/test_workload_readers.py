"""Tests of partition.workload.readers and partition.workload.log: request-log formats, the key rule, time order, errors."""

import gzip
import json
from pathlib import Path

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from partition.errors import InputError, ParameterError
from partition.workload.log import log_from_lists
from partition.workload.readers import read_log

from conftest import shared_missing  # noqa: E402

SHARED = Path(__file__).resolve().parents[2] / "shared" / "datasets"


def _requests(log):
    return [sorted(log.keys[log.members[log.indptr[r]:log.indptr[r + 1]]].tolist()) for r in range(log.n_requests)]


def test_basket_lines_in_order_with_repeats_merged(tmp_path):
    p = tmp_path / "b.dat"
    p.write_text("3 1 2\n\n2 2 5\t7\n9\n")
    log = read_log(p)
    assert log.keys.dtype == np.int64
    assert _requests(log) == [[1, 2, 3], [2, 5, 7], [9]]  # hand-written expectation; blank line skipped
    assert log.access_counts().tolist() == [1, 2, 1, 1, 1, 1]  # keys 1 2 3 5 7 9


def test_key_rule_keeps_non_canonical_keys_as_strings(tmp_path):
    p = tmp_path / "b.dat.gz"
    p.write_bytes(gzip.compress(b"007 1 -0\n1 2\n"))
    log = read_log(p)
    # "007" and "-0" are not canonical int64 text: every key stays a string, byte for byte
    assert log.keys.dtype == object
    assert sorted(log.keys.tolist()) == ["-0", "007", "1", "2"]


def test_int64_overflow_and_floats_stay_strings(tmp_path):
    p = tmp_path / "b.dat"
    p.write_text("9223372036854775808 1\n1.0 2\n")
    log = read_log(p)
    assert log.keys.dtype == object and "1.0" in log.keys.tolist() and "9223372036854775808" in log.keys.tolist()


def test_long_rows_sorted_by_time(tmp_path):
    p = tmp_path / "log.csv"
    p.write_text("request,key,time\nb,x,5\na,y,1\nb,z,6\na,x,2\nc,007,3\n")
    log = read_log(p)
    assert log.times.tolist() == [1.0, 3.0, 5.0]  # request times: min of their rows
    assert _requests(log) == [["x", "y"], ["007"], ["x", "z"]]


def test_long_rows_iso_times(tmp_path):
    p = tmp_path / "log.tsv"
    p.write_text("req\titem\ttime\n1\t10\t2024-01-01T00:00:05\n2\t11\t2024-01-01T00:00:01\n")
    log = read_log(p)
    assert _requests(log) == [[11], [10]]
    assert log.times[1] - log.times[0] == 4.0


def test_parquet_list_column_and_jsonl(tmp_path):
    pq.write_table(pa.table({"keys": [[1, 2], [2, 3, 3]], "time": [2.0, 1.0]}), tmp_path / "l.parquet")
    log = read_log(tmp_path / "l.parquet")
    assert _requests(log) == [[2, 3], [1, 2]]
    (tmp_path / "l.jsonl").write_text(json.dumps({"keys": ["a", "b"]}) + "\n" + json.dumps(["b", "c"]) + "\n")
    assert _requests(read_log(tmp_path / "l.jsonl")) == [["a", "b"], ["b", "c"]]


def test_parquet_long_rows(tmp_path):
    pq.write_table(pa.table({"request": [1, 1, 2], "key": ["p", "q", "p"]}), tmp_path / "r.parquet")
    assert _requests(read_log(tmp_path / "r.parquet")) == [["p", "q"], ["p"]]


@pytest.mark.parametrize("name,text,line", [
    ("bad.jsonl", '["a"]\n{"keys": [1.5]}\n', 2),
    ("bad2.jsonl", '["a"]\nnot json\n', 2),
    ("bad.csv", "request,key\n1,a\n2,\n", 3),
    ("bad.dat", "1 2\n\xff\xfe 3\n", 2),
])
def test_errors_name_file_and_line(tmp_path, name, text, line):
    p = tmp_path / name
    p.write_bytes(text.encode("latin-1"))
    with pytest.raises(InputError) as err:
        read_log(p)
    assert err.value.path == str(p) and err.value.line == line


def test_empty_and_missing(tmp_path):
    (tmp_path / "e.dat").write_text("\n\n")
    with pytest.raises(InputError):
        read_log(tmp_path / "e.dat")
    with pytest.raises(InputError):
        read_log(tmp_path / "nope.dat")


def test_split_by_fraction_and_time():
    log = log_from_lists([[1, 2], [2, 3], [3, 4], [4, 5]], times=[0, 1, 2, 3])
    a, b = log.split(train_fraction=0.5)
    assert (a.n_requests, b.n_requests) == (2, 2)
    a, b = log.split(split_time=3)
    assert (a.n_requests, b.n_requests) == (3, 1)
    with pytest.raises(ParameterError):
        log.split(train_fraction=1.0)


def test_retail_baskets_counts():
    """Brijs, Swinnen, Vanhoof & Wets, KDD 1999 (FIMI repository retail.dat); counts from ../shared/datasets/CATALOG.md."""
    path = SHARED / "retail-baskets.dat.gz"
    if not path.exists():
        pytest.skip(shared_missing("retail-baskets.dat.gz"))
    log = read_log(path)
    assert (log.n_requests, log.n_keys, int(log.sizes().sum())) == (88162, 16470, 908577)
    assert log.sizes().max() == 76 and np.median(log.sizes()) == 8  # basket sizes 1–76, median 8 (catalog)


def test_minus_zero_and_zero_are_two_keys(tmp_path):
    # the reference: Python's int() and str() — str(int("-0")) == "0" != "-0", so "-0" is not canonical
    from partition.workload.readers import read_log

    p = tmp_path / "z.dat"
    p.write_text("-0 0\n0 5\n")
    log = read_log(p)
    assert sorted(log.keys.tolist()) == ["-0", "0", "5"]
