"""Tests of partition/placement/export.py (and the export command): folders with checksummed manifests."""

from __future__ import annotations

import csv
import hashlib
import json
import os
import shutil

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq
import pytest

import partition.placement.export as export_mod
from partition.cli import main
from partition.errors import InputError, ParameterError
from partition.generators import planted_partition, write_edgelist
from partition.placement.export import export_run, verify_export
from partition.node_shards import read_node_shards

WEIRD_IDS = ["a,b", 'q"uote', "back\\slash", "tab\tid", "ünï", "ctrl\x01x", "#hash", " lead", "plain", "x"]


@pytest.fixture(scope="module")
def run_output(tmp_path_factory):
    """A real `shardline run` output on an invented planted-partition graph."""
    folder = tmp_path_factory.mktemp("run")
    edges = folder / "g.txt"
    src, dst = planted_partition(4, 30, 0.3, 0.02, seed=7)[:2]
    write_edgelist(edges, src, dst)
    out = folder / "a.csv"
    assert main(["run", str(edges), "-k", "4", "--imbalance", "0.05", "--seed", "3", "-o", str(out),
                 "--quiet", "--starts", "hierarchy"]) == 0
    return folder, edges, out


@pytest.fixture(scope="module")
def weird_run(tmp_path_factory):
    """A run on string ids that need quoting or escaping (a cycle through them, in Parquet)."""
    folder = tmp_path_factory.mktemp("weird")
    edges = folder / "g.parquet"
    pq.write_table(pa.table({"u": WEIRD_IDS, "v": WEIRD_IDS[1:] + WEIRD_IDS[:1]}), edges)
    out = folder / "a.parquet"
    assert main(["run", str(edges), "-k", "3", "-o", str(out), "--quiet", "--starts", "hierarchy"]) == 0
    return folder, edges, out


def _sha(path):
    return hashlib.sha256(path.read_bytes()).hexdigest()  # reference: hashlib (FIPS 180-4 SHA-256)


@pytest.mark.parametrize("fmt", ["parquet", "csv", "jsonl"])
def test_manifest_checksums_equal_hashlib(run_output, tmp_path, fmt):
    folder, edges, out = run_output
    dest = tmp_path / "exp"
    manifest = export_run(out, dest, fmt=fmt)
    on_disk = json.loads((dest / "manifest.json").read_text())
    assert on_disk == manifest
    assert manifest["input"]["sha256"] == _sha(edges)
    assert manifest["input"]["bytes"] == edges.stat().st_size
    assert manifest["source"]["assignment"]["sha256"] == _sha(out)
    report = json.loads((folder / "a.csv.report.json").read_text())
    assert manifest["k"] == report["k"] == 4 and manifest["seed"] == 3 and manifest["imbalance_allowed"] == 0.05
    assert manifest["metrics"]["cut_fraction"] == report["result"]["cut_fraction"]
    assert "cut_matrix" not in manifest["metrics"]
    assert manifest["nondeterministic"] == ["created_utc"]
    listed = {f["path"] for f in manifest["files"]}
    written = {str(p.relative_to(dest)).replace(os.sep, "/") for p in dest.rglob("*") if p.is_file()}
    assert written == listed | {"manifest.json"}
    for f in manifest["files"]:
        assert f["sha256"] == _sha(dest / f["path"]) and f["bytes"] == (dest / f["path"]).stat().st_size
    assert verify_export(dest, graph=edges)["files"] == 5


def _read_rows(path, fmt):
    if fmt == "parquet":
        return pq.read_table(path).to_pylist()
    if fmt == "jsonl":
        return [json.loads(line) for line in path.read_text(encoding="utf-8").splitlines()]  # reference: json
    with open(path, newline="", encoding="utf-8") as fh:  # reference: Python's csv module (RFC 4180)
        rows = list(csv.DictReader(fh))
    return [{k: (int(v) if k == "shard" else v) for k, v in r.items()} for r in rows]


@pytest.mark.parametrize("fmt", ["parquet", "csv", "jsonl"])
def test_tables_hold_the_placement(weird_run, tmp_path, fmt):
    _, _, out = weird_run
    table = read_node_shards(out)
    ids, shards = table.ids, table.shards
    want = dict(zip(ids.tolist(), shards.tolist()))
    dest = tmp_path / "exp"
    manifest = export_run(out, dest, fmt=fmt)
    rows = _read_rows(dest / f"assignment.{fmt}", fmt)
    assert {r["node"]: r["shard"] for r in rows} == want
    assert [r["node"] for r in rows] == sorted(want)  # sorted by id
    seen = {}
    for f in manifest["files"][1:]:
        for r in _read_rows(dest / f["path"], fmt):
            seen[r["node"]] = f["shard"]
        assert f["rows"] == sum(1 for v in want.values() if v == f["shard"])
    assert seen == want


def test_failure_midway_leaves_no_folder(run_output, tmp_path, monkeypatch):
    _, _, out = run_output
    dest = tmp_path / "exp"
    real = export_mod._write_table
    calls = []

    def failing(path, table, fmt):
        calls.append(path)
        if len(calls) == 3:
            raise OSError("disk full (simulated)")
        real(path, table, fmt)

    monkeypatch.setattr(export_mod, "_write_table", failing)
    with pytest.raises(OSError, match="simulated"):
        export_run(out, dest, fmt="csv")
    assert not dest.exists()
    assert os.listdir(tmp_path) == []  # the temporary sibling is gone too
    # an existing folder survives a failed --force replacement unchanged
    monkeypatch.setattr(export_mod, "_write_table", real)
    export_run(out, dest, fmt="csv", created="2000-01-01T00:00:00Z")
    before = {p.name: p.read_bytes() for p in dest.rglob("*") if p.is_file()}
    calls.clear()
    monkeypatch.setattr(export_mod, "_write_table", failing)
    with pytest.raises(OSError):
        export_run(out, dest, fmt="jsonl", force=True)
    assert {p.name: p.read_bytes() for p in dest.rglob("*") if p.is_file()} == before
    assert sorted(os.listdir(tmp_path)) == ["exp"]


def test_existing_folder_needs_force(run_output, tmp_path):
    _, _, out = run_output
    dest = tmp_path / "exp"
    export_run(out, dest, fmt="csv")
    with pytest.raises(ParameterError, match="already exists"):
        export_run(out, dest, fmt="parquet")
    assert (dest / "assignment.csv").exists()
    export_run(out, dest, fmt="parquet", force=True)
    assert (dest / "assignment.parquet").exists() and not (dest / "assignment.csv").exists()
    assert sorted(os.listdir(tmp_path)) == ["exp"]
    afile = tmp_path / "file"
    afile.write_text("x")
    with pytest.raises(ParameterError, match="not a folder"):
        export_run(out, afile, force=True)


def test_checksum_mismatch_is_an_error(run_output, tmp_path):
    folder, edges, out = run_output
    other = tmp_path / "other.txt"
    other.write_text(edges.read_text() + "1 2\n")
    dest = tmp_path / "exp"
    with pytest.raises(InputError, match="does not match the input checksum"):
        export_run(out, dest, graph=other)
    assert not dest.exists()
    export_run(out, dest, graph=edges)  # the same bytes under any name are fine
    with pytest.raises(InputError, match="this export was made from another graph"):
        verify_export(dest, graph=other)
    victim = dest / "shards" / "shard-00001.parquet"
    victim.write_bytes(victim.read_bytes() + b"\0")
    with pytest.raises(InputError, match="differs from the manifest"):
        verify_export(dest)


def test_missing_graph_and_bad_report(run_output, tmp_path):
    folder, edges, out = run_output
    # a copy of the run whose report names a graph that is gone
    moved = tmp_path / "moved"
    moved.mkdir()
    shutil.copy(out, moved / "a.csv")
    report = json.loads((folder / "a.csv.report.json").read_text())
    report["input"]["graph"] = str(tmp_path / "gone.txt")
    (moved / "a.csv.report.json").write_text(json.dumps(report))
    with pytest.raises(InputError, match="was not found.*--graph"):
        export_run(moved / "a.csv", tmp_path / "e1")
    manifest = export_run(moved / "a.csv", tmp_path / "e1", graph=edges)
    assert manifest["input"]["sha256"] == _sha(edges)
    # a report that records the checksum: a changed graph file is caught
    report["input"]["graph"] = str(edges)
    report["input"]["sha256"] = "0" * 64
    (moved / "a.csv.report.json").write_text(json.dumps(report))
    with pytest.raises(InputError, match="changed after the run"):
        export_run(moved / "a.csv", tmp_path / "e2")
    (moved / "a.csv.report.json").write_text('{"k": 4,\n "input": ')
    with pytest.raises(InputError, match=r"line 2: is not valid JSON"):
        export_run(moved / "a.csv", tmp_path / "e3")
    with pytest.raises(InputError, match="no such file"):
        export_run(moved / "a.csv", tmp_path / "e3", report=tmp_path / "none.json")
    with pytest.raises(ParameterError, match="format"):
        export_run(out, tmp_path / "e3", fmt="xml")
    assert not any((tmp_path / name).exists() for name in ("e2", "e3"))


def test_report_paths_relative_to_the_run_folder(tmp_path, monkeypatch):
    # the run was started in tmp_path with relative paths; the export runs from elsewhere
    src, dst = planted_partition(2, 20, 0.3, 0.05, seed=1)[:2]
    monkeypatch.chdir(tmp_path)
    write_edgelist("g.txt", src, dst)
    os.mkdir("out")
    assert main(["run", "g.txt", "-k", "2", "-o", "out/a.csv", "--quiet", "--starts", "hierarchy"]) == 0
    elsewhere = tmp_path / "sub"
    elsewhere.mkdir()
    monkeypatch.chdir(elsewhere)
    manifest = export_run(tmp_path / "out" / "a.csv", tmp_path / "exp")
    assert manifest["input"]["sha256"] == _sha(tmp_path / "g.txt")


def test_same_inputs_same_bytes(run_output, tmp_path):
    _, _, out = run_output
    for fmt in ("parquet", "csv", "jsonl"):
        a = export_run(out, tmp_path / f"a{fmt}", fmt=fmt, created="2020-02-02T00:00:00Z")
        b = export_run(out, tmp_path / f"b{fmt}", fmt=fmt, created="2020-02-02T00:00:00Z")
        assert a == b
        assert (tmp_path / f"a{fmt}" / "manifest.json").read_bytes() == (tmp_path / f"b{fmt}" / "manifest.json").read_bytes()


def test_export_command(run_output, tmp_path, capsys):
    folder, edges, out = run_output
    dest = tmp_path / "exp"
    assert main(["export", str(out), "-o", str(dest), "--format", "jsonl", "--json"]) == 0
    manifest = json.loads(capsys.readouterr().out)
    assert manifest["format"] == "jsonl" and (dest / "assignment.jsonl").exists()
    assert main(["export", str(out), "-o", str(dest)]) == 2
    assert "already exists; use --force" in capsys.readouterr().err
    assert main(["export", "--verify", str(dest), "--graph", str(edges)]) == 0
    other = tmp_path / "o.txt"
    other.write_text("1 2\n")
    assert main(["export", "--verify", str(dest), "--graph", str(other)]) == 2
    assert "made from another graph" in capsys.readouterr().err
    assert main(["export", str(out)]) == 2
    assert np.all([f["rows"] >= 0 for f in manifest["files"]])


def test_folder_checksum_is_sha256_over_its_data_files(tmp_path):
    """A dataset folder's checksum: SHA-256 (FIPS 180-4, via hashlib) over each data file's path and digest."""
    folder = tmp_path / "shards.parquet"
    (folder / "sub").mkdir(parents=True)
    (folder / "part-1.parquet").write_bytes(b"second")
    (folder / "part-0.parquet").write_bytes(b"first")
    (folder / "sub" / "part-2.parquet").write_bytes(b"third")
    (folder / "_SUCCESS").write_bytes(b"")
    (folder / ".part-0.parquet.crc").write_bytes(b"crc")
    h = hashlib.sha256()
    for rel, data in (("part-0.parquet", b"first"), ("part-1.parquet", b"second"), ("sub/part-2.parquet", b"third")):
        h.update(rel.encode() + b"\0" + hashlib.sha256(data).digest())
    assert export_mod.file_sha256(folder) == h.hexdigest()
    (folder / "part-1.parquet").write_bytes(b"changed")
    assert export_mod.file_sha256(folder) != h.hexdigest()


def test_lookup_reads_a_parquet_folder(tmp_path):
    folder = tmp_path / "out.parquet"
    folder.mkdir()
    pq.write_table(pa.table({"node": [5, 1], "shard": [0, 1]}), folder / "part-0.parquet")
    pq.write_table(pa.table({"node": [3], "shard": [1]}), folder / "part-1.parquet")
    table = read_node_shards(folder)
    ids, shards = table.ids, table.shards
    assert sorted(zip(ids.tolist(), shards.tolist())) == [(1, 1), (3, 1), (5, 0)]
