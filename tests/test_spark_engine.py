"""Tests of partition.spark: the Spark engine gives exactly the in-memory engine's result.

The reference is the in-memory engine itself (partition.partitioner.partition_graph
and its stages), which the project tests against published formulas and
reference libraries; here every array must be equal, bit for bit. Graphs are
small scenarios built in the tests (grids, cliques, a star) and one public
graph in the resume test's sibling benchmark (jobs/bench_spark.py --agreement).
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

pytest.importorskip("pyspark")

from partition.affinity import edge_affinity  # noqa: E402
from partition.edgelist import read_graph  # noqa: E402
from partition.errors import InputError  # noqa: E402
from partition.hierarchy import build_hierarchy  # noqa: E402
from partition.partitioner import partition_graph  # noqa: E402
from partition.plan import make_plan  # noqa: E402

pytestmark = pytest.mark.spark
ROOT = Path(__file__).resolve().parents[1]
UNIT = ("window", "fm", "swaps")


@pytest.fixture(scope="module")
def spark(tmp_path_factory):
    from partition.spark.session import spark_session

    s = spark_session(work_dir=tmp_path_factory.mktemp("spark"))
    yield s
    s.stop()


def _grid(r, c, offset=0):
    idx = np.arange(r * c).reshape(r, c) + offset
    a = np.concatenate((idx[:, :-1].ravel(), idx[:-1, :].ravel()))
    b = np.concatenate((idx[:, 1:].ravel(), idx[1:, :].ravel()))
    return a, b


def _write(path, a, b, comments=True):
    lines = ["# scenario: a made-up road network", "% second comment style"] if comments else []
    seps = [" ", "\t", ","]
    lines += [f"{x}{seps[i % 3]}{y}" for i, (x, y) in enumerate(zip(a, b))]
    Path(path).write_text("\n".join(lines) + "\n")
    return str(path)


@pytest.fixture(scope="module")
def mixed_graph(tmp_path_factory):
    """A 12×12 grid, a separate triangle, an isolated node (self-loop line), ids with gaps, one duplicate."""
    a, b = _grid(12, 12)
    a, b = a * 3 + 7, b * 3 + 7  # ids with gaps
    a = np.concatenate((a, [1000, 1001, 1002, 5000, 7, 10]))
    b = np.concatenate((b, [1001, 1002, 1000, 5000, 10, 7]))  # 5000: self-loop only; (7,10) twice
    return _write(tmp_path_factory.mktemp("g") / "mixed.txt", a, b)


def _run(spark, path, k, mode, tmp, **kw):
    from partition.spark.engine import partition_spark
    from partition.spark.io import read_graph_df

    sg = read_graph_df(spark, path, **{x: kw.pop(x) for x in ("node_weights", "allow_isolated") if x in kw})
    plan = make_plan(k, kw.pop("eps", 0.0), kw.pop("seed", 0), engine="spark", mode=mode, **kw)
    return partition_spark(spark, sg, plan, work_dir=tmp)


def test_input_normalised_like_memory(spark, mixed_graph, tmp_path):
    from partition.spark.io import collect_graph, read_graph_df

    ref = read_graph(mixed_graph)
    got = collect_graph(read_graph_df(spark, mixed_graph))
    assert np.array_equal(got.ids, ref.ids)
    assert np.array_equal(got.indptr, ref.indptr) and np.array_equal(got.indices, ref.indices)
    assert got.n == 12 * 12 + 4  # grid, triangle, the self-loop node kept


def test_csv_with_header_and_weight_column_read_like_memory(spark, tmp_path):
    """CSV/TSV input: header, picked columns, quoted string ids, comments, gzip; the same graph as in memory."""
    import gzip

    from partition.spark.io import collect_graph, read_graph_df

    rows = ["# invented scenario: ferry berths and the crossings between them", "trips,from,to",
            '3,"berth A",berth B', "2,berth B,berth C", "5,berth C,\"berth A\"", "1,berth B,berth A",
            "", "4,berth D,berth C", "7,berth D,berth D"]
    path = tmp_path / "crossings.csv.gz"
    path.write_bytes(gzip.compress(("\n".join(rows) + "\n").encode()))
    opts = dict(source_column="from", target_column="to", weight_column="trips")
    ref = read_graph(path, **opts)
    got = collect_graph(read_graph_df(spark, str(path), **opts))
    assert list(got.ids) == list(ref.ids) == ["berth A", "berth B", "berth C", "berth D"]
    assert np.array_equal(got.indptr, ref.indptr) and np.array_equal(got.indices, ref.indices)
    assert np.array_equal(got.edge_weights, ref.edge_weights)  # (A,B) = 3 + 1 summed
    tsv = tmp_path / "plain.tsv"
    tsv.write_text("1\t2\n2\t3\n3\t1\n")
    ref = read_graph(tsv, header=False)
    got = collect_graph(read_graph_df(spark, str(tsv), header=False))
    assert np.array_equal(got.ids, ref.ids) and np.array_equal(got.indices, ref.indices)
    bad = tmp_path / "bad.csv"
    bad.write_text("# note above the header\na,b\n1,2\n2,3,4\n")
    with pytest.raises(InputError) as err:
        read_graph_df(spark, str(bad))
    assert err.value.line == 4 and "bad.csv" in str(err.value)
    bad.write_text("a,b\n1,2\n# below the header a line is a row\n2,3\n")
    for reader in (lambda: read_graph(bad), lambda: read_graph_df(spark, str(bad))):
        with pytest.raises(InputError) as err:
            reader()
        assert err.value.line == 3 and "expected 2 fields" in str(err.value)
    with pytest.raises(InputError) as err:
        read_graph_df(spark, str(path), source_column="origin")
    assert "origin" in str(err.value)


def test_affinity_and_hierarchy_match_memory(spark, mixed_graph, tmp_path):
    from partition.spark.affinity import edge_affinity_df
    from partition.spark.frames import to_numpy
    from partition.spark.hierarchy import build_hierarchy_df
    from partition.spark.io import read_graph_df

    g = read_graph(mixed_graph)
    sg = read_graph_df(spark, mixed_graph)
    aff = edge_affinity_df(sg)
    got = to_numpy(aff, ["u", "v", "aff"], sort=["u", "v"])
    ref = edge_affinity(g)
    up = g.rows() < g.indices
    assert np.array_equal(got["aff"], ref[up])
    # many triangles and hubs (networkx's powerlaw_cluster_graph, Holme & Kim 2002): 7 colours, 35 listing tasks
    import networkx as nx

    G = nx.powerlaw_cluster_graph(300, 5, 0.5, seed=2)
    tri = _write(tmp_path / "tri.txt", *zip(*G.edges()))
    g2, sg2 = read_graph(tri), read_graph_df(spark, tri)
    up2 = g2.rows() < g2.indices
    for method in ("jaccard", "ppr"):
        split = to_numpy(edge_affinity_df(sg2, method, hub_cap=20, task_edges=300), ["u", "v", "aff"],
                         sort=["u", "v"])
        assert np.array_equal(split["aff"], edge_affinity(g2, method, hub_cap=20)[up2])
    wpath = tmp_path / "weighted.txt"  # the same graph with weights 1, 1.5, ..., 3: the input-weight affinities
    wpath.write_text("".join(f"{a} {b} {1 + ((a * 7 + b) % 5) / 2}\n" for a, b in G.edges()))
    gw, sgw = read_graph(str(wpath), weighted=True), read_graph_df(spark, str(wpath), weighted=True)
    upw = gw.rows() < gw.indices
    for method in ("weights", "unit"):
        got = to_numpy(edge_affinity_df(sgw, method), ["u", "v", "aff"], sort=["u", "v"])
        assert np.array_equal(got["aff"], edge_affinity(gw, method)[upw]), method
    # collect_edges=0: every round runs as Spark jobs (pointer jumping, contraction)
    rows = []
    h = build_hierarchy_df(spark, aff, sg.n, seed=4, work=tmp_path, collect_edges=0, progress=rows.append)
    hr = build_hierarchy(g, ref, seed=4)
    assert h.sizes == hr.sizes and h.edges == hr.edges
    # one progress row per round, round 0 being the affinity edges written: clusters and edges left after each
    assert [r["stage"] for r in rows] == [f"hierarchy round {i}" for i in range(len(hr.sizes))]
    assert [(r["clusters"], r["edges"]) for r in rows] == list(zip(hr.sizes, hr.edges))
    for x, y in zip(h.parents, hr.parents):
        assert np.array_equal(x, y)
    for x, y in zip(h.picked, hr.picked):
        assert all(np.array_equal(p, q) for p, q in zip(x, y))


_RESULTS = {}


def _distributed_mixed(spark, path, tmp):
    if path not in _RESULTS:
        _RESULTS[path] = _run(spark, path, 3, "distributed", tmp, seed=2)
    return _RESULTS[path]


def test_distributed_mode_matches_memory(spark, mixed_graph, tmp_path):
    g = read_graph(mixed_graph)
    parts, order, rep = _distributed_mixed(spark, mixed_graph, tmp_path)
    ref = partition_graph(g, 3, 0.0, 2, starts=("hierarchy",), refine=UNIT)
    assert np.array_equal(order, ref.order)
    assert np.array_equal(parts, ref.parts)
    assert rep["balance"]["balanced"]


def test_full_mode_string_ids_and_node_weights(spark, tmp_path):
    # two 8-cliques joined by a path; string ids; node weights 1..3 (a made-up shop inventory)
    names = [f"shelf-{i:02d}" for i in range(20)]
    ea = [(i, j) for i in range(8) for j in range(i + 1, 8)] + [(i, j) for i in range(12, 20) for j in range(i + 1, 20)]
    ea += [(7, 8), (8, 9), (9, 10), (10, 11), (11, 12)]
    path = _write(tmp_path / "shop.txt", [names[x] for x, _ in ea], [names[y] for _, y in ea])
    nwp = tmp_path / "shop.weights"
    nwp.write_text("\n".join(f"{nm} {1 + i % 3}" for i, nm in enumerate(names)) + "\n")
    g = read_graph(path, node_weights=str(nwp))
    parts, order, rep = _run(spark, path, 2, "full", tmp_path / "w", seed=1, node_weights=str(nwp))
    ref = partition_graph(g, 2, 0.0, 1)
    assert rep["chosen_start"] == ref.report["chosen_start"]
    assert np.array_equal(parts, ref.parts)
    assert np.array_equal(order, ref.order)


def test_distributed_mode_weighted_edges_and_nodes_match_memory(spark, tmp_path):
    # a made-up delivery network: 10 × 10 grid of depots, trips per road 1..5, parcels per depot 1..3
    from partition.spark.engine import partition_spark
    from partition.spark.io import read_graph_df

    a, b = _grid(10, 10)
    lines = [f"{x} {y} {1 + (7 * x + 3 * y) % 5}" for x, y in zip(a, b)]
    path = tmp_path / "depots.txt"
    path.write_text("\n".join(lines) + "\n")
    nwp = tmp_path / "depots.weights"
    nwp.write_text("\n".join(f"{i} {1 + i % 3}" for i in range(100)) + "\n")
    g = read_graph(str(path), weighted=True, node_weights=str(nwp))
    sg = read_graph_df(spark, str(path), weighted=True, node_weights=str(nwp))
    parts, order, rep = partition_spark(spark, sg, make_plan(4, 0.03, 3, engine="spark"), work_dir=tmp_path / "w")
    ref = partition_graph(g, 4, 0.03, 3, starts=("hierarchy",), refine=UNIT)
    assert np.array_equal(order, ref.order)
    assert np.array_equal(parts, ref.parts)
    assert rep["balance"]["balanced"]


def test_text_and_parquet_give_the_same_partition(spark, mixed_graph, tmp_path):
    import pyarrow as pa
    import pyarrow.parquet as pq

    g = read_graph(mixed_graph)
    e = g.edges()
    src, dst = g.ids[e[0]], g.ids[e[1]]
    # the self-loop node exists only as a self-loop row
    pq.write_table(pa.table({"from": np.append(src, 5000), "to": np.append(dst, 5000)}), tmp_path / "m.parquet")
    p1, _, _ = _distributed_mixed(spark, mixed_graph, tmp_path / "a")
    p2, _, _ = _run(spark, str(tmp_path / "m.parquet"), 3, "distributed", tmp_path / "b", seed=2)
    assert np.array_equal(p1, p2)


def test_star_with_many_leaves_completes(spark, tmp_path):
    # skew: one hub with 10,000 leaves plus a 30-clique hanging off it
    leaves = np.arange(1, 10_001)
    ca = [(i, j) for i in range(20_000, 20_030) for j in range(i + 1, 20_030)]
    a = np.concatenate((np.zeros(leaves.size, dtype=np.int64), [x for x, _ in ca], [0]))
    b = np.concatenate((leaves, [y for _, y in ca], [20_000]))
    path = _write(tmp_path / "star.txt", a, b, comments=False)
    parts, _, rep = _run(spark, path, 2, "distributed", tmp_path / "w")
    ref = partition_graph(read_graph(path), 2, 0.0, 0, starts=("hierarchy",), refine=UNIT)
    assert np.array_equal(parts, ref.parts)
    assert rep["balance"]["balanced"]


def test_bad_line_names_file_and_line(spark, tmp_path):
    from partition.spark.io import read_graph_df

    p = tmp_path / "bad.txt"
    p.write_text("# header\n1 2\n2 3\n4\n")
    with pytest.raises(InputError) as err:
        read_graph_df(spark, str(p))
    assert "bad.txt" in str(err.value) and err.value.line == 4


def test_bad_line_number_exact_when_the_file_spans_many_splits(spark, tmp_path):
    # ~60 kB text read in 4 kB splits: the faulty line sits in a late split, after comments
    from partition.spark.io import read_graph_df

    lines = ["# a made-up library loan log"] + [f"{i} {i + 1} 2" if i % 50 else f"# block {i}" for i in range(6000)]
    bad_weight, short = 4321, 5555  # 0-based indices into lines
    lines[bad_weight] = "17 18 -3"
    big = tmp_path / "loans.txt"
    big.write_text("\n".join(lines) + "\n")
    folder = tmp_path / "parts"
    folder.mkdir()
    (folder / "a.txt").write_text("1 2\n2 3\n")
    (folder / "b.txt").write_text("# second file\n3 4\n5\n")
    old = spark.conf.get("spark.sql.files.maxPartitionBytes")
    spark.conf.set("spark.sql.files.maxPartitionBytes", "4096")
    try:
        assert spark.read.text(str(big)).rdd.getNumPartitions() > 5
        with pytest.raises(InputError) as err:
            read_graph_df(spark, str(big), weighted=True)
        assert err.value.line == bad_weight + 1 and "weight" in str(err.value)
        lines[bad_weight] = "17 18 3"
        lines[short] = "99"
        big.write_text("\n".join(lines) + "\n")
        with pytest.raises(InputError) as err:  # three fields a line: weighted, like the in-memory reader needs
            read_graph_df(spark, str(big), weighted=True)
        assert err.value.line == short + 1
        with pytest.raises(InputError) as err:
            read_graph_df(spark, str(folder))
        assert err.value.path.endswith("b.txt") and err.value.line == 3
    finally:
        spark.conf.set("spark.sql.files.maxPartitionBytes", old)


def test_fits_driver_rule():
    from partition.spark.engine import BYTES_PER_EDGE, fits_driver

    gib = 1 << 30
    # edges × 40 bytes < a quarter of memory (our rule, documented in engine.py)
    assert fits_driver({"edges": 1_000_000}, 4 * gib)
    assert not fits_driver({"edges": gib // BYTES_PER_EDGE + 1}, 4 * gib)  # just over a quarter


def test_resume_after_kill_gives_the_same_result(mixed_graph, tmp_path):
    import pyarrow.parquet as pq

    work = tmp_path / "work"
    out = tmp_path / "out"
    env = dict(os.environ, PYSPARK_PYTHON=sys.executable, PYSPARK_DRIVER_PYTHON=sys.executable)
    cmd = [sys.executable, str(ROOT / "jobs" / "spark_partition.py"), mixed_graph, "-k", "3", "--seed", "2",
           "-o", str(out), "--work-dir", str(work), "--collect-edges", "40", "--quiet"]
    proc = subprocess.Popen(cmd, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                            start_new_session=True)
    marker = work / "hierarchy" / "round_001" / "done.json"
    try:
        deadline = time.time() + 400
        while not marker.exists() and proc.poll() is None and time.time() < deadline:
            time.sleep(0.2)
        assert marker.exists(), "no checkpoint marker appeared"
    # (with --collect-edges 40 the 12×12 grid's first round runs on Spark, the rest on the driver)
        os.killpg(proc.pid, signal.SIGKILL)  # the driver and its JVM, mid-run
    finally:
        if proc.poll() is None:
            os.killpg(proc.pid, signal.SIGKILL)
        proc.wait()
    assert not out.exists()  # nothing half-written
    done = subprocess.run(cmd + ["--resume"], env=env, capture_output=True, text=True, timeout=600)
    assert done.returncode == 0, done.stderr[-2000:]
    table = pq.read_table(out).to_pandas().sort_values("node")
    g = read_graph(mixed_graph)
    ref = partition_graph(g, 3, 0.0, 2, starts=("hierarchy",), refine=UNIT)
    assert np.array_equal(table["node"].to_numpy(), g.ids)
    assert np.array_equal(table["shard"].to_numpy(), ref.parts)
    rep = json.loads(Path(str(out) + ".report.json").read_text())
    assert rep["cut"] == int(np.count_nonzero(ref.parts[g.rows()] != ref.parts[g.indices]) // 2)


def test_spark_run_output_exports_like_the_memory_run(spark, mixed_graph, tmp_path):
    """The Spark run's folder and report go through `export`: same tables and figures as the in-memory run's."""
    from partition.cli import main
    from partition.placement.export import export_run
    from partition.spark.engine import run_spark

    rep = run_spark(mixed_graph, make_plan(3, 0.0, 2, engine="spark"), output=tmp_path / "spark.parquet",
                    report=str(tmp_path / "spark.parquet.report.json"), work_dir=tmp_path / "w", spark=spark)
    assert main(["run", mixed_graph, "-k", "3", "--seed", "2", "--starts", "hierarchy", "--refine",
                 "window,fm,swaps", "--engine", "memory", "--quiet", "-o", str(tmp_path / "mem.csv")]) == 0
    m_spark = export_run(tmp_path / "spark.parquet", tmp_path / "exp-spark", created="fixed")
    m_mem = export_run(tmp_path / "mem.csv", tmp_path / "exp-mem", created="fixed")
    got = {f["path"]: f["sha256"] for f in m_spark["files"]}
    want = {f["path"]: f["sha256"] for f in m_mem["files"]}
    assert got == want  # node→shard table and every per-shard list, byte for byte
    for key in ("cut_edges", "cut_weight", "cut_fraction", "imbalance", "total_edge_weight"):
        assert m_spark["metrics"][key] == pytest.approx(m_mem["metrics"][key], rel=1e-12), key
    assert m_spark["input"]["sha256"] == m_mem["input"]["sha256"]
    assert rep["input"]["nodes"] == read_graph(mixed_graph).n


def test_recut_on_spark_equals_memory(spark, mixed_graph, tmp_path):
    """A Spark run's stored order, re-cut into more shards on Spark and in memory: identical shards."""
    from partition.placement.recut import read_order, recut
    from partition.spark.engine import run_spark
    from partition.spark.io import read_graph_df
    from partition.spark.recut import read_order_df, recut_spark

    order_path = tmp_path / "order.parquet"
    run_spark(mixed_graph, make_plan(3, 0.0, 2, engine="spark"), output=tmp_path / "run.parquet", order_output=order_path,
              work_dir=tmp_path / "w", spark=spark)
    g = read_graph(mixed_graph)
    sg = read_graph_df(spark, mixed_graph)
    ref_order = partition_graph(g, 3, 0.0, 2, starts=("hierarchy",), refine=UNIT).order
    assert np.array_equal(read_order(order_path, g), ref_order)  # the in-memory reader takes the folder
    order = read_order_df(spark, str(order_path), sg)
    assert np.array_equal(order, ref_order)
    for k, eps in ((4, 0.0), (5, 0.03)):
        got, stats = recut_spark(spark, sg, order, k, eps=eps, seed=1)
        want, ref = recut(g, ref_order, k, eps=eps, seed=1)
        assert np.array_equal(got, want), (k, eps)
        for key in ("cut_line", "cut_window", "cut", "floor", "min_load", "max_load", "balanced"):
            assert stats[key] == ref[key], key
    bad = tmp_path / "bad-order.csv"
    bad.write_text("node,position\n7,0\n10,0\n")
    with pytest.raises(InputError) as err:
        read_order_df(spark, str(bad), sg)
    assert "bad-order.csv" in str(err.value)


def test_spark_export_holds_the_rows_of_the_memory_export(spark, mixed_graph, tmp_path):
    """Spark's export folders hold, shard by shard, the rows of the in-memory export; checksums verify."""
    from partition.spark.engine import run_spark

    run_spark(mixed_graph, make_plan(5, 0.0, 2, engine="spark"), output=tmp_path / "run.parquet", report=str(tmp_path / "run.parquet.report.json"),
              work_dir=tmp_path / "w", spark=spark)
    for fmt in ("parquet", "csv"):
        (tmp_path / fmt).mkdir()
        _check_export(spark, mixed_graph, tmp_path / fmt, fmt)


def _check_export(spark, mixed_graph, tmp_path, fmt):
    import pyarrow.csv as pacsv
    import pyarrow.dataset as ds

    from partition.placement.export import export_run, verify_export
    from partition.spark.export import export_run_spark

    run = tmp_path.parent / "run.parquet"
    ms = export_run_spark(spark, run, tmp_path / "exp-spark", fmt=fmt, created="fixed")
    mm = export_run(run, tmp_path / "exp-mem", fmt=fmt, created="fixed")

    def rows(path):
        if fmt == "parquet":
            t = ds.dataset(str(path), format="parquet").to_table()
        else:
            t = ds.dataset(str(path), format=ds.CsvFileFormat()).to_table() if os.path.isdir(path) \
                else pacsv.read_csv(str(path))
        return t.to_pydict()

    assert [f["path"] for f in ms["files"]] == [f["path"] for f in mm["files"]]
    assert [f["rows"] for f in ms["files"]] == [f["rows"] for f in mm["files"]]
    for fs, fm in zip(ms["files"], mm["files"]):
        assert rows(tmp_path / "exp-spark" / fs["path"]) == rows(tmp_path / "exp-mem" / fm["path"]), fs["path"]
    assert ms["metrics"] == mm["metrics"] and ms["input"] == mm["input"]
    assert verify_export(tmp_path / "exp-spark", graph=mixed_graph)["files"] == 6
    first = next(f for f in ms["files"] if f["shard"] == 0)
    part = sorted((tmp_path / "exp-spark" / first["path"]).glob("part-*"))[0]
    part.write_bytes(part.read_bytes() + b"\n")
    with pytest.raises(InputError):
        verify_export(tmp_path / "exp-spark")


AWKWARD_IDS = ["007", "7", "+5", "5", "-0", "0", "18446744073709551616", "18446744073709551617",
               "9223372036854775808", "-9223372036854775809", "1.0", "1e3", "größe", "東京", "x"]
"""Ids one careless reader would merge: zip codes, signs, past-int64 hashes, float-looking text, any script."""


def test_awkward_ids_read_and_partition_alike_on_both_engines(spark, tmp_path):
    """The id rule of partition/ids.py on both engines; the reference is Python's int(): str(int(s)) == s."""
    from partition.spark.io import collect_graph, read_graph_df

    ids = AWKWARD_IDS
    rows = [(ids[i], ids[(i + 1) % len(ids)]) for i in range(len(ids))] + [(ids[i], ids[i + 3]) for i in (0, 4, 8)]
    path = tmp_path / "awkward.txt"
    path.write_text("".join(f"{a} {b}\n" for a, b in rows), encoding="utf-8")
    ref = read_graph(path)
    got = collect_graph(read_graph_df(spark, str(path)))
    assert sorted(ref.ids.tolist()) == sorted(ids)  # not every id is canonical: all are text, none merged
    assert list(got.ids) == list(ref.ids)
    assert np.array_equal(got.indptr, ref.indptr) and np.array_equal(got.indices, ref.indices)
    mem = partition_graph(ref, 3, 0.0, 2, starts=("hierarchy",), refine=UNIT)
    parts, _, rep = _run(spark, str(path), 3, "distributed", tmp_path / "w", seed=2)
    assert np.array_equal(parts, mem.parts) and rep["balance"]["balanced"]


def test_invalid_utf8_is_an_error_naming_the_line_on_spark(spark, tmp_path):
    """Spark keeps the raw bytes; the check must read them before any regex turns a bad byte into U+FFFD."""
    from partition.spark.io import read_graph_df

    for name, raw, line in (("bad.txt", b"1 2\n2 a\xffb\n3 1\n", 2), ("bad.csv", b"s,d\n1,2\n2,a\xc3\x28\n", 3)):
        path = tmp_path / name
        path.write_bytes(raw)
        with pytest.raises(InputError) as info:
            read_graph_df(spark, str(path))
        assert f"{name}, line {line}: is not valid UTF-8" in str(info.value)


def test_header_rule_on_spark_is_the_memory_rule(spark, tmp_path):
    from partition.spark.io import read_graph_df

    text = tmp_path / "h.txt"
    text.write_text("src dst\n1 2\n2 3\n")
    csv_ = tmp_path / "n.csv"
    csv_.write_text("1,2\n2,3\n")
    for path, option in ((text, "--header"), (csv_, "--no-header")):
        with pytest.raises(InputError) as mem:
            read_graph(path)
        with pytest.raises(InputError) as spk:
            read_graph_df(spark, str(path))
        assert option in str(mem.value) and option in str(spk.value)
        assert "line 1" in str(mem.value) and "line 1" in str(spk.value)


def test_random_awkward_id_sets_come_back_alike_on_both_engines(spark, tmp_path_factory):
    """Hypothesis over awkward ids (tests/conftest.py), written with Python's csv module; a few draws in CI."""
    import csv
    import io

    from hypothesis import HealthCheck, example, given, settings
    from hypothesis import strategies as st

    from conftest import AWKWARD
    from partition.spark.io import collect_graph, read_graph_df

    @given(st.lists(AWKWARD, min_size=3, max_size=12, unique=True))
    @example(["00", "0", 'M+"', "-0"])  # a doubled quote inside a quoted field (Spark's default escape was '\\')
    @example(["a,b", 'say "hi"', "x y", "#tag"])
    @settings(max_examples=4, deadline=None, suppress_health_check=list(HealthCheck), database=None,
              derandomize=True)
    def check(ids):
        tmp = tmp_path_factory.mktemp("awk")
        buf = io.StringIO()
        w = csv.writer(buf, lineterminator="\n")
        w.writerow(["src", "dst"])
        w.writerows([(ids[i], ids[(i + 1) % len(ids)]) for i in range(len(ids))])
        path = tmp / "g.csv"
        path.write_text(buf.getvalue(), encoding="utf-8")
        ref = read_graph(path)
        got = collect_graph(read_graph_df(spark, str(path)))
        assert sorted(str(v) for v in ref.ids.tolist()) == sorted(ids)
        assert [str(v) for v in got.ids.tolist()] == [str(v) for v in ref.ids.tolist()]
        assert got.ids.dtype.kind == ref.ids.dtype.kind
        mem = partition_graph(ref, 2, 0.0, 0, starts=("hierarchy",), refine=UNIT)
        parts, _, _ = _run(spark, str(path), 2, "distributed", tmp / "w", seed=0)
        assert np.array_equal(parts, mem.parts)

    check()


def test_spark_job_runs_the_starts_and_steps_asked_for(mixed_graph, tmp_path):
    """spark-submit's script with --starts/--refine/--order-output gives the in-memory plan's assignment."""
    import pyarrow.parquet as pq

    env = dict(os.environ, PYSPARK_PYTHON=sys.executable, PYSPARK_DRIVER_PYTHON=sys.executable)
    out, order = tmp_path / "shards", tmp_path / "order.parquet"
    cmd = [sys.executable, str(ROOT / "jobs" / "spark_partition.py"), mixed_graph, "-k", "3", "--seed", "4",
           "--starts", "hierarchy,spectral", "--refine", "window,fm", "-o", str(out), "--order-output", str(order),
           "--quiet"]
    done = subprocess.run(cmd, env=env, capture_output=True, text=True, timeout=900)
    assert done.returncode == 0, done.stderr[-2000:]
    g = read_graph(mixed_graph)
    ref = partition_graph(g, 3, 0.0, 4, starts=("hierarchy", "spectral"), refine=("window", "fm"))
    table = pq.read_table(out).to_pandas().sort_values("node")
    assert np.array_equal(table["node"].to_numpy(), g.ids)
    assert np.array_equal(table["shard"].to_numpy(), ref.parts)
    rep = json.loads(Path(str(out) + ".report.json").read_text())
    assert rep["options"]["starts"] == ["hierarchy", "spectral"] and rep["options"]["refine"] == ["window", "fm"]
    assert pq.read_table(order).num_rows == g.n
    bad = subprocess.run(cmd[:-1] + ["--starts", "degree"], env=env, capture_output=True, text=True, timeout=600)
    assert bad.returncode == 2 and "distributed mode takes the starts" in bad.stderr


def test_spark_report_has_the_in_memory_figures_and_summary(spark, mixed_graph, tmp_path, capsys):
    """One report schema: the Spark run's `result` holds partition.score's figures for its assignment."""
    from partition.cli import main
    from partition.score import score

    out = tmp_path / "shards.parquet"
    assert main(["run", mixed_graph, "-k", "3", "--seed", "2", "--engine", "spark", "-o", str(out)]) == 0
    table = capsys.readouterr().out
    rep = json.loads(Path(str(out) + ".report.json").read_text())
    g = read_graph(mixed_graph)
    from partition.assignment import read_assignment

    want = score(g, read_assignment(str(out), g), k=3).to_dict()
    for key in ("cut_edges", "cut_weight", "communication_volume", "boundary_nodes", "shard_weights"):
        assert rep["result"][key] == want[key], key
    for key in ("cut_fraction", "imbalance", "fanout"):
        assert rep["result"][key] == pytest.approx(want[key], abs=1e-12), key
    # the summary table is the in-memory one, with the engine in its title
    for row in ("cut edges", "cut fraction", "communication volume", "fanout", "start chosen", "raw line cut"):
        assert row in table, row
    assert "(Spark engine" in table
