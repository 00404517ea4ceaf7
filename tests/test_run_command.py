"""Tests of partition/commands/run.py: the ``shardline run`` command line.

References: networkx (connected components for the top of the hierarchy,
``cut_size`` recounts), the ``shardline score`` command's figures for the same
file, pyarrow's CSV and Parquet readers for the written tables, the baselines
LDG (Stanton & Kliot, KDD 2012), Fennel (Tsourakakis et al., WSDM 2014) and a
seeded random placement, and the public graphs of ../shared/datasets with the
node counts listed in their CATALOG.md.
"""

from __future__ import annotations

import csv
import gzip
import json
import os
import re
import subprocess
import sys
from pathlib import Path

import networkx as nx
import numpy as np
import pyarrow as pa
import pyarrow.csv as pacsv
import pyarrow.parquet as pq
import pytest

from partition.assignment import read_assignment
from partition.baselines import run_baseline
from partition.cli import main
from partition.edgelist import read_graph
from partition.generators import planted_partition
from partition.score import score

from conftest import SHARED_MISSING, nx_cut  # noqa: E402

REPO = Path(__file__).resolve().parents[1]
DEMO = REPO / "datasets" / "demo" / "larkspur-bay-rides.csv.gz"
SHARED = Path(__file__).resolve().parents[2] / "shared" / "datasets"
DATASETS = sorted(p.name for p in SHARED.glob("*.txt*")) if SHARED.is_dir() else []


# --- helpers -----------------------------------------------------------------


def shardline(capsys, *argv):
    """Run ``shardline ARGV`` in this process; return (status, stdout, stderr)."""
    status = main([str(a) for a in argv])
    out = capsys.readouterr()
    return status, out.out, out.err


def two_cliques_text():
    """Two 6-cliques (ids 1..6 and 11..16) joined by the edge 6–11, plus a path 21–22–23."""
    lines = ["# two cliques and a path"]
    for base in (0, 10):
        ids = [base + i for i in range(1, 7)]
        lines += [f"{u} {v}" for i, u in enumerate(ids) for v in ids[i + 1:]]
    lines += ["6 11", "21 22", "22 23"]
    return "\n".join(lines) + "\n"


def read_node_shard(path):
    """The node→shard CSV read by the csv module: {node text: shard}."""
    with open(path, newline="") as fh:
        rows = list(csv.reader(fh))
    assert rows[0] == ["node", "shard"]
    out = {}
    for node, shard in rows[1:]:
        assert node not in out, f"{node} listed twice"
        out[node] = int(shard)
    return out


def read_table(path):
    return pq.read_table(path) if str(path).endswith(".parquet") else pacsv.read_csv(path)


@pytest.fixture
def graph_file(tmp_path):
    p = tmp_path / "g.txt"
    p.write_text(two_cliques_text())
    return p


# --- bad parameters and bad files: status 2, a clear message, nothing written --

BAD_FILES = {
    "malformed.txt": ("1 2\n2 3\n3 x y z\n4 5\n", [], r"malformed\.txt, line 3"),
    "negative.txt": ("1 2 1.5\n2 3 -2\n3 1 1\n", ["--weighted"], r"negative\.txt, line 2"),
    "weights.csv": ("a,b,w\n1,2,3\n2,3,oops\n", ["--weight-column", "w"], r"weights\.csv, line 3"),
}


@pytest.mark.parametrize("extra,pattern", [
    (["-k", "0"], r"k must be at least 1"),
    (["-k", "99"], r"k = 99 is larger than the number of nodes \(15\)"),
    (["-k", "2", "--imbalance", "-0.1"], r"imbalance"),
    (["-k", "2", "--imbalance", "nan"], r"imbalance"),
    (["-k", "2", "--refine", "window,bogus"], r"unknown refinement 'bogus'"),
    (["-k", "2", "--starts", "bogus"], r"unknown start 'bogus'"),
    (["-k", "2", "--hub-cap", "0"], r"hub-cap"),
])
def test_bad_parameters_exit_2_and_write_nothing(capsys, tmp_path, graph_file, extra, pattern):
    out = tmp_path / "out.csv"
    status, stdout, err = shardline(capsys, "run", graph_file, *extra, "-o", out, "--quiet",
                                    "--order-output", tmp_path / "order.csv",
                                    "--hierarchy-output", tmp_path / "h.parquet")
    assert status == 2
    assert err.startswith("shardline: error:") and re.search(pattern, err), err
    assert sorted(p.name for p in tmp_path.iterdir()) == ["g.txt"]  # no output, no report, no tables


@pytest.mark.parametrize("name", sorted(BAD_FILES))
def test_bad_files_exit_2_name_file_and_line_and_write_nothing(capsys, tmp_path, name):
    text, opts, pattern = BAD_FILES[name]
    src = tmp_path / name
    src.write_text(text)
    status, _, err = shardline(capsys, "run", src, *opts, "-k", "2", "-o", tmp_path / "out.csv", "--quiet")
    assert status == 2
    assert err.startswith("shardline: error:") and re.search(pattern, err), err
    assert sorted(p.name for p in tmp_path.iterdir()) == [name]


def test_rejected_output_name_leaves_no_other_table(capsys, tmp_path, graph_file):
    status, _, err = shardline(capsys, "run", graph_file, "-k", "2", "-o", tmp_path / "out.parquet.gz",
                               "--order-output", tmp_path / "order.csv", "--quiet")
    assert status == 2 and err.startswith("shardline: error:")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["g.txt"]


def test_missing_file_exits_2(capsys, tmp_path):
    status, _, err = shardline(capsys, "run", tmp_path / "nope.txt", "-k", "2", "-o", tmp_path / "out.csv")
    assert status == 2
    assert err.startswith("shardline: error:") and "nope.txt" in err and "no such file" in err
    assert list(tmp_path.iterdir()) == []


# --- a good run ------------------------------------------------------------------


def test_good_run_writes_assignment_and_report(capsys, tmp_path, graph_file):
    out = tmp_path / "shards.csv"
    status, _, err = shardline(capsys, "run", graph_file, "-k", "3", "--imbalance", "0.1", "--seed", "4",
                               "-o", out, "--quiet")
    assert status == 0, err
    assert sorted(p.name for p in tmp_path.iterdir()) == ["g.txt", "shards.csv", "shards.csv.report.json"]

    placed = read_node_shard(out)
    ids = {str(i) for i in [*range(1, 7), *range(11, 17), 21, 22, 23]}
    assert set(placed) == ids  # every node exactly once
    assert set(placed.values()) <= {0, 1, 2}
    sizes = np.bincount(list(placed.values()), minlength=3)
    assert sizes.max() <= -(-11 * 15 // 30)  # ⌈(1+ε)n/k⌉ = ⌈1.1·15/3⌉, unit weights (common practice)

    report = json.loads((tmp_path / "shards.csv.report.json").read_text())
    for key in ("input", "k", "seed", "imbalance_allowed", "options", "stages", "starts",
                "chosen_start", "result", "outputs", "hierarchy", "balance"):
        assert key in report, key
    assert report["k"] == 3 and report["seed"] == 4 and report["imbalance_allowed"] == 0.1
    assert report["input"]["nodes"] == 15 and report["input"]["edges"] == 15 + 15 + 1 + 2
    assert report["stages"], "the stage list is not empty"
    chosen = {r["start"]: r for r in report["starts"]}[report["chosen_start"]]
    assert chosen["raw_cut_fraction"] >= chosen["cut_fraction"]
    assert report["result"]["balance"]["holds"] is True

    # the cut fraction is the one `shardline score` finds for the written file
    status, stdout, _ = shardline(capsys, "score", graph_file, out, "-k", "3", "--imbalance", "0.1", "--json")
    assert status == 0
    scored = json.loads(stdout)
    assert report["result"]["cut_fraction"] == scored["cut_fraction"]
    assert chosen["cut_fraction"] == pytest.approx(scored["cut_fraction"], abs=1e-6)
    assert scored["balance"]["holds"] is True

    # and networkx agrees on the cut
    G = nx.read_edgelist(graph_file, nodetype=str)
    G.add_nodes_from(placed)
    cut = nx_cut(G, placed, 3, weight=None)
    assert scored["cut_edges"] == cut


def test_report_path_option_and_json_on_stdout(capsys, tmp_path, graph_file):
    rep = tmp_path / "elsewhere.json"
    status, stdout, _ = shardline(capsys, "run", graph_file, "-k", "2", "-o", tmp_path / "o.tsv",
                                  "--report", rep, "--json", "--quiet")
    assert status == 0
    assert json.loads(stdout) == json.loads(rep.read_text())
    assert not (tmp_path / "o.tsv.report.json").exists()
    assert (tmp_path / "o.tsv").read_text().splitlines()[0] == "node\tshard"


def test_node_weights_keep_the_weighted_balance_rule(capsys, tmp_path, graph_file):
    ids = [*range(1, 7), *range(11, 17), 21, 22, 23]
    weights = {v: (v % 4) + 1 for v in ids}  # 1..4
    nw = tmp_path / "w.txt"
    nw.write_text("".join(f"{v} {w}\n" for v, w in weights.items()))
    out = tmp_path / "o.csv"
    status, _, err = shardline(capsys, "run", graph_file, "--node-weights", nw, "-k", "3", "-o", out, "--quiet")
    assert status == 0, err
    placed = read_node_shard(out)
    loads = np.zeros(3, dtype=np.int64)
    for v, s in placed.items():
        loads[s] += weights[int(v)]
    W = sum(weights.values())
    # cap = ⌈(1 + ε) W / k⌉ + w_max − 1 (partition.balance docstring; ε = 0)
    assert loads.max() <= -(-W // 3) + max(weights.values()) - 1


# --- order and hierarchy tables ----------------------------------------------


@pytest.mark.parametrize("ext", ["csv", "parquet"])
def test_order_and_hierarchy_tables(capsys, tmp_path, graph_file, ext):
    out = tmp_path / "o.csv"
    order_path, hier_path = tmp_path / f"order.{ext}", tmp_path / f"hier.{ext}"
    status, _, err = shardline(capsys, "run", graph_file, "-k", "2", "-o", out, "--quiet",
                               "--order-output", order_path, "--hierarchy-output", hier_path)
    assert status == 0, err
    report = json.loads((tmp_path / "o.csv.report.json").read_text())
    ids = sorted([*range(1, 7), *range(11, 17), 21, 22, 23])

    order = read_table(order_path).to_pydict()
    assert sorted(order["node"]) == ids  # a permutation of the nodes
    assert order["position"] == list(range(len(ids)))

    h = read_table(hier_path).to_pydict()
    levels = sorted(set(h["level"]))
    assert levels == list(range(1, report["hierarchy"]["rounds"] + 1))
    cluster = {(lv, v): c for v, lv, c in zip(h["node"], h["level"], h["cluster"])}
    assert len(cluster) == len(ids) * len(levels)
    for lv in levels:
        # the report's cluster counts per level (level 0 = the nodes)
        assert len({cluster[lv, v] for v in ids}) == report["hierarchy"]["clusters"][lv]
    for lo, hi in zip(levels, levels[1:]):  # clusters nest: one parent per cluster
        parent = {}
        for v in ids:
            assert parent.setdefault(cluster[lo, v], cluster[hi, v]) == cluster[hi, v]
    # the top level: one cluster per connected component (networkx)
    G = nx.read_edgelist(graph_file, nodetype=int)
    comps = {frozenset(c) for c in nx.connected_components(G)}
    top = {}
    for v in ids:
        top.setdefault(cluster[levels[-1], v], set()).add(v)
    assert {frozenset(c) for c in top.values()} == comps


# --- string ids, determinism ---------------------------------------------------


def test_string_ids_round_trip(capsys, tmp_path):
    names = ["dock-α", "dock b", "pier,7", "quay\"x", "#wharf", "slip-9", "berth-10", "mole-11"]
    edges = [(names[i], names[j]) for i in range(8) for j in range(i + 1, 8) if (i < 4) == (j < 4)]
    edges.append((names[3], names[4]))
    src = tmp_path / "docks.parquet"
    pq.write_table(pa.table({"a": [e[0] for e in edges], "b": [e[1] for e in edges]}), src)
    for ext in ("csv", "parquet"):
        out = tmp_path / f"docks-out.{ext}"
        status, _, err = shardline(capsys, "run", src, "-k", "2", "-o", out, "--quiet",
                                   "--order-output", tmp_path / f"order.{ext}")
        assert status == 0, err
        graph = read_graph(src)
        parts = read_assignment(out, graph, k=2)  # every id found again, exactly as written
        assert sorted(graph.ids.tolist()) == sorted(names)
        assert sorted(read_table(tmp_path / f"order.{ext}").column("node").to_pylist()) == sorted(names)
        # the two 4-cliques joined by one edge: the best bisection cuts that edge only
        assert score(graph, parts, k=2).cut_edges == 1


def test_same_input_same_bytes_and_edge_order_does_not_matter(capsys, tmp_path):
    rng = np.random.default_rng(3)
    s, d, _ = planted_partition(4, 30, 0.3, 0.02, seed=3)
    w = rng.integers(1, 9, size=s.size)
    plain = tmp_path / "a.txt"
    plain.write_text("".join(f"{u} {v} {x}\n" for u, v, x in zip(s, d, w)))
    perm = rng.permutation(s.size)  # shuffled lines, every pair reversed
    shuffled = tmp_path / "b.txt.gz"
    shuffled.write_bytes(gzip.compress("".join(f"{d[i]}\t{s[i]}\t{w[i]}\n" for i in perm).encode()))

    outs = []
    for i, src in enumerate([plain, plain, shuffled]):
        out = tmp_path / f"out{i}.csv"
        status, _, err = shardline(capsys, "run", src, "--weighted", "-k", "4", "--imbalance", "0.03",
                                   "--seed", "9", "-o", out, "--quiet", "--order-output", tmp_path / f"ord{i}.csv")
        assert status == 0, err
        outs.append(out.read_bytes())
    assert outs[0] == outs[1]  # byte-identical
    assert (tmp_path / "ord0.csv").read_bytes() == (tmp_path / "ord1.csv").read_bytes()
    assert outs[0] == outs[2]  # rows are in id order, so the same partition is the same bytes
    r0 = json.loads((tmp_path / "out0.csv.report.json").read_text())
    r2 = json.loads((tmp_path / "out2.csv.report.json").read_text())
    assert r0["result"] == r2["result"]


def test_separate_processes_give_the_same_bytes(capsys, tmp_path):
    """A fresh interpreter with another string-hash seed writes what this process writes."""
    src = tmp_path / "docks.csv"
    lines = ["from,to"]
    for c in range(3):
        names = [f"dock-{c}-{i}" for i in range(9)]
        lines += [f"{a},{names[j]}" for i, a in enumerate(names) for j in range(i + 1, 9) if (i * j + c) % 3]
        lines.append(f"dock-{c}-0,dock-{(c + 1) % 3}-5")
    src.write_text("\n".join(lines) + "\n")
    args = ["run", src, "-k", "3", "--seed", "2", "--quiet"]
    status, _, err = shardline(capsys, *args, "-o", tmp_path / "here.csv")
    assert status == 0, err
    out = tmp_path / "there.csv"
    env = {**os.environ, "PYTHONHASHSEED": "12345"}
    proc = subprocess.run([sys.executable, "-m", "partition.cli", *map(str, args), "-o", str(out)],
                          env=env, capture_output=True, text=True, timeout=300)
    assert proc.returncode == 0, proc.stderr
    assert out.read_bytes() == (tmp_path / "here.csv").read_bytes()


# --- the demo graph ------------------------------------------------------------


def test_demo_graph_beats_the_baselines(capsys, tmp_path):
    out = tmp_path / "docks.csv"
    status, _, err = shardline(capsys, "run", DEMO, "--weight-column", "rides", "-k", "8",
                               "--imbalance", "0.03", "--seed", "1", "-o", out, "--quiet")
    assert status == 0, err
    graph = read_graph(DEMO, weight_column="rides")
    parts = read_assignment(out, graph, k=8)
    ours = score(graph, parts, k=8, eps=0.03)
    assert ours.balanced, ours.violations
    # ⌈(1 + ε) n / k⌉ for unit node weights (common practice), computed here directly
    assert ours.shard_weights.max() <= -(-103 * graph.n // 800)  # ⌈1.03·n/8⌉
    best = {}
    for name in ("ldg", "fennel", "random"):
        for order in ("random", "bfs"):
            theirs = score(graph, run_baseline(name, graph, 8, eps=0.03, seed=1, order=order), k=8, eps=0.03)
            assert theirs.balanced
            best[name, order] = theirs.cut_weight
    assert ours.cut_weight < min(best.values()), (ours.cut_weight, best)


# --- public graphs ---------------------------------------------------------------


def _catalog_counts():
    """Node and edge counts from ../shared/datasets/CATALOG.md (counted after symmetrising)."""
    path = SHARED / "CATALOG.md"
    if not path.is_file():
        return {}
    row = re.compile(r"^\| (\S+\.txt(?:\.gz)?) \|[^|]*\|[^|]*\| (\d+) \| (\d+) \|", re.M)
    return {m.group(1): (int(m.group(2)), int(m.group(3))) for m in row.finditer(path.read_text())}


_COUNTS = _catalog_counts()
_LARGE = 100_000  # edges; larger graphs are marked slow (CI still runs them)


@pytest.mark.skipif(not DATASETS, reason=SHARED_MISSING)
@pytest.mark.parametrize("name", [pytest.param(n, marks=pytest.mark.slow) if _COUNTS.get(n, (0, 0))[1] > _LARGE else n
                                  for n in DATASETS])
def test_shared_graph_k8_meets_the_balance_bound(capsys, tmp_path, name):
    out = tmp_path / "parts.csv"
    status, _, err = shardline(capsys, "run", SHARED / name, "-k", "8", "--imbalance", "0.03", "-o", out, "--quiet")
    assert status == 0, err
    report = json.loads((tmp_path / "parts.csv.report.json").read_text())
    n = report["input"]["nodes"]
    if name in _COUNTS:
        assert n == _COUNTS[name][0]  # CATALOG.md node count (source named there)
    table = pacsv.read_csv(out)
    shards = table.column("shard").to_numpy()
    assert table.num_rows == n and len(set(table.column("node").to_pylist())) == n  # every node once
    sizes = np.bincount(shards, minlength=8)
    assert shards.min() >= 0 and sizes.size == 8
    # ⌈(1 + ε) n / k⌉ with unit weights (common practice), computed here directly
    assert sizes.max() <= -(-103 * n // 800), sizes  # ⌈1.03·n/8⌉ in integers
    assert report["result"]["balance"]["holds"] is True


def test_progress_bar_follows_the_engine_plan_to_the_end():
    """The CLI's bar takes the plan the partitioner announces and is full when the last stage ends."""
    import io

    from rich.console import Console

    from partition.progress import Progress as _Progress
    from partition.generators import grid2d
    from partition.graph import build_graph
    from partition.partitioner import partition_graph

    out = io.StringIO()
    prog = _Progress(Console(file=out, force_terminal=True, width=100))
    seen = []

    def spy(row):
        if "plan" not in row and prog.bar is not None:
            seen.append(prog.bar.tasks[0].completed)
        prog(row)

    partition_graph(build_graph(*grid2d(6, 6)), 4, progress=spy)
    task = prog.bar.tasks[0]
    assert task.total == len(prog.plan) and task.completed == task.total
    assert seen == sorted(seen)  # never moves back
    prog.close()
    assert "affinity" in out.getvalue() and "hierarchy" in out.getvalue()
