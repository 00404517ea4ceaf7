"""Output safety (partition/outputs.py) and the exit status of ``score`` checks.

Every writing command refuses, before it reads or computes anything and with
exit status 2: an output naming one of its inputs, two outputs naming one path,
a file output naming an existing directory, and an extension its writer does
not produce. The input's bytes are compared before and after (``filecmp``
from the standard library), and the folder is listed to show nothing was
written. ``score`` exits 3 when a check the user asked for (``--imbalance``,
``--capacity``) is broken, so a pipeline can gate on it; loads are counted by
hand in the comments.
"""

from __future__ import annotations

import filecmp
import json
import shutil

import pytest

from partition.cli import main


@pytest.fixture()
def files(tmp_path):
    graph = tmp_path / "tri.txt"
    graph.write_text("1 2\n2 3\n3 1\n3 4\n")
    shutil.copy(graph, tmp_path / "pristine.txt")
    assignment = tmp_path / "a.csv"
    assignment.write_text("node,shard\n1,0\n2,0\n3,0\n4,1\n")
    keys = tmp_path / "keys.txt"
    keys.write_text("a\nb\nc\n")
    order = tmp_path / "order.csv"
    order.write_text("node,position\n1,0\n2,1\n3,2\n4,3\n")
    arrivals = tmp_path / "arr.txt"
    arrivals.write_text("5 1\n")
    (tmp_path / "folder").mkdir()
    return tmp_path


def _fmt(argv, d):
    return [a.format(d=d) for a in argv]


@pytest.mark.parametrize("argv, says", [
    (["run", "{d}/tri.txt", "-k", "2", "-o", "{d}/tri.txt"], "-o {d}/tri.txt is also an input"),
    (["run", "{d}/tri.txt", "-k", "2", "-o", "{d}/s.csv", "--report", "{d}/tri.txt"], "--report"),
    (["run", "{d}/tri.txt", "-k", "2", "-o", "{d}/s.csv", "--previous", "{d}/a.csv", "--order-output", "{d}/a.csv"],
     "also an input"),
    (["run", "{d}/tri.txt", "-k", "2", "-o", "{d}/folder"], "existing directory"),
    (["run", "{d}/tri.txt", "-k", "2", "-o", "{d}/s.xlsx"], "must end in .csv"),
    (["run", "{d}/tri.txt", "-k", "2", "-o", "{d}/s.csv", "--order-output", "{d}/s.csv"], "both name"),
    (["run", "{d}/tri.txt", "-k", "2", "-o", "{d}/s.csv", "--report", "{d}/r.txt"], "must end in .json"),
    (["baseline", "ldg", "{d}/tri.txt", "-k", "2", "-o", "{d}/tri.txt"], "also an input"),
    (["recut", "{d}/order.csv", "{d}/tri.txt", "-k", "2", "-o", "{d}/order.csv"], "also an input"),
    (["place", "{d}/a.csv", "{d}/arr.txt", "-o", "{d}/arr.txt"], "also an input"),
    (["place", "{d}/a.csv", "{d}/arr.txt", "-o", "{d}/p.csv", "--merged", "{d}/a.csv"], "also an input"),
    (["diff", "{d}/a.csv", "{d}/a.csv", "-o", "{d}/a.csv"], "also an input"),
    (["diff", "{d}/a.csv", "{d}/a.csv", "-o", "{d}/m.json"], "must end in"),
    (["ring", "assign", "{d}/keys.txt", "-k", "2", "-o", "{d}/keys.txt"], "also an input"),
    (["ring", "assign", "{d}/keys.txt", "-k", "2", "-o", "{d}/k.xlsx"], "must end in"),
    (["export", "{d}/a.csv", "-o", "{d}/tri.txt"], "existing file"),
    (["report", "{d}/a.csv", "-o", "{d}/a.csv"], "also an input"),
])
def test_refused_outputs_write_nothing(files, capsys, argv, says):
    before = sorted(p.name for p in files.iterdir())
    status = main(_fmt(argv, files))
    err = capsys.readouterr().err
    assert status == 2, err
    assert err.startswith("shardline: error: ") and says.format(d=files) in err and "Traceback" not in err
    assert sorted(p.name for p in files.iterdir()) == before
    assert filecmp.cmp(files / "tri.txt", files / "pristine.txt", shallow=False)


def test_accepted_outputs_still_write(files):
    assert main(["run", str(files / "tri.txt"), "-k", "2", "-o", str(files / "s.csv.gz"), "--quiet"]) == 0
    assert (files / "s.csv.gz").exists() and (files / "s.csv.gz.report.json").exists()
    assert main(["ring", "assign", str(files / "keys.txt"), "-k", "2", "-o", str(files / "k.parquet"),
                 "--quiet"]) == 0
    import pyarrow.parquet as pq

    assert sorted(pq.read_table(files / "k.parquet").column("node").to_pylist()) == ["a", "b", "c"]


def test_score_exit_status_gates_on_the_checks(files, capsys):
    g, a = str(files / "tri.txt"), str(files / "a.csv")
    # loads: shard 0 holds 1, 2, 3 (3 nodes), shard 1 holds 4; W = 4, k = 2, W/k = 2
    assert main(["score", g, a, "--quiet"]) == 0                       # no check asked: valid file, status 0
    assert main(["score", g, a, "--imbalance", "0.5", "--quiet"]) == 0  # cap ⌈1.5 · 2⌉ = 3 ≥ 3
    assert main(["score", g, a, "--imbalance", "0.2", "--quiet"]) == 0  # cap ⌈1.2 · 2⌉ = ⌈2.4⌉ = 3 ≥ 3
    assert main(["score", g, a, "--imbalance", "0", "--quiet"]) == 3    # cap 2 < 3: broken, status 3
    capsys.readouterr()


def test_score_capacity_and_named_columns(files, capsys):
    g = str(files / "tri.txt")
    swapped = files / "swapped.csv"
    swapped.write_text("where,what\n0,1\n0,2\n0,3\n1,4\n")
    argv = ["score", g, str(swapped), "--node-column", "what", "--shard-column", "where", "--json"]
    assert main(argv + ["--capacity", "3"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["checks"]["capacity"] == {"holds": True, "capacity": 3.0, "shards_over": []}
    assert main(argv + ["--capacity", "2"]) == 3  # shard 0 weighs 3 > 2
    out = json.loads(capsys.readouterr().out)
    assert out["checks"]["capacity"]["shards_over"] == [0]
    assert main(["score", g, str(swapped), "--capacity", "-1", "--quiet"]) == 2


def test_report_and_output_of_different_runs_are_not_paired(files, capsys):
    g = str(files / "tri.txt")
    one, two = files / "one.csv", files / "two.csv"
    assert main(["run", g, "-k", "2", "-o", str(one), "--quiet"]) == 0
    assert main(["run", g, "-k", "2", "--seed", "1", "-o", str(two), "--quiet"]) == 0
    rep = json.loads((files / "one.csv.report.json").read_text())
    import hashlib

    # the recorded checksum is the file's own (hashlib as the reference)
    assert rep["outputs"]["sha256"]["assignment"] == hashlib.sha256(one.read_bytes()).hexdigest()
    two.write_text(two.read_text().replace("4,1", "4,0") if "4,1" in two.read_text() else
                   two.read_text().replace("4,0", "4,1"))  # an edited file no longer matches its report
    capsys.readouterr()
    assert main(["export", str(two), "-o", str(files / "placed"), "--quiet"]) == 2
    assert "different runs" in capsys.readouterr().err
    assert not (files / "placed").exists()
    assert main(["export", str(one), "-o", str(files / "placed"), "--quiet"]) == 0
