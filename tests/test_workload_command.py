"""Tests of ``shardline workload``: outputs, JSON report, errors (exit 2, file and line, no output)."""

import json

import numpy as np

from partition.assignment import read_assignment
from partition.cli import main
from partition.edgelist import read_graph
from partition.workload.readers import read_log
from partition.workload.tables import read_key_table


def _synth(tmp_path):
    log = tmp_path / "lib.dat"
    assert main(["workload", "synth", "-o", str(log), "--requests", "3000", "--keys", "600", "--topics", "12",
                 "-k", "4", "--planted-output", str(tmp_path / "planted.csv")]) == 0
    return log


def test_partition_replay_route_and_coaccess(tmp_path, capsys):
    log = _synth(tmp_path)
    table = tmp_path / "keys.csv"
    assert main(["workload", "partition", str(log), "-k", "4", "--train-fraction", "0.7", "-o", str(table),
                 "--quiet"]) == 0
    keys = read_key_table(table, read_log(log), 4)
    assert (keys >= 0).sum() > 0
    capsys.readouterr()
    assert main(["workload", "replay", str(log), "-k", "4", "--table", str(table), "--train-fraction", "0.7",
                 "--json", "--quiet"]) == 0
    rep = json.loads(capsys.readouterr().out)
    assert rep["sharded"]["partition"]["mean"] < rep["sharded"]["hash"]["mean"]
    routes = tmp_path / "routes.csv"
    assert main(["workload", "route", str(log), "-k", "4", "--table", str(table), "-o", str(routes)]) == 0
    assert len(routes.read_text().splitlines()) == 3001
    edges, nw = tmp_path / "e.parquet", tmp_path / "nw.parquet"
    assert main(["workload", "coaccess", str(log), "-o", str(edges), "--node-weights-output", str(nw)]) == 0
    g = read_graph(edges, weight_column="weight", node_weights=nw, allow_isolated=True)
    assert g.node_weights.sum() == read_log(log).sizes().sum()  # loads = access counts
    # the key table reads as an assignment of the co-access graph's nodes (keys of the first 70 % only)
    part = tmp_path / "all.csv"
    assert main(["workload", "partition", str(log), "-k", "4", "-o", str(part), "--quiet"]) == 0
    assert np.all(read_assignment(part, g, k=4) >= 0)


def test_bad_log_exits_2_and_writes_nothing(tmp_path, capsys):
    bad = tmp_path / "bad.jsonl"
    bad.write_text('["a", "b"]\n["c", 2.5]\n')
    out = tmp_path / "keys.csv"
    assert main(["workload", "partition", str(bad), "-k", "2", "-o", str(out)]) == 2
    err = capsys.readouterr().err
    assert f"shardline: error: {bad}, line 2" in err
    assert not out.exists() and not (tmp_path / "keys.csv.report.json").exists()


def test_help_for_every_action(capsys):
    for action in ("coaccess", "partition", "route", "replay", "synth"):
        try:
            main(["workload", action, "--help"])
        except SystemExit as exc:
            assert exc.code == 0
        assert "usage" in capsys.readouterr().out
