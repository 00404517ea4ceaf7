"""Tests of partition/report/ and partition/commands/report.py: the HTML report and its figures.

References: networkx recounts the cut between every shard pair
(``nx.cut_size``) and the shard loads; matplotlib's own PNG reader
(``matplotlib.image.imread``) decodes every embedded figure; the PNG
signature is from the PNG specification (W3C / ISO 15948); the published
figures of 3elt are the Walshaw archive's best-known cuts as recorded in
``datasets/catalog.json`` (recalled from memory there, flagged so); 3elt
itself is read from ../shared/datasets (Walshaw archive mesh, SuiteSparse copy).
"""

from __future__ import annotations

import base64
import html.parser
import json
import re
from pathlib import Path

import networkx as nx
import numpy as np
import pytest

from partition.cli import main
from partition.errors import InputError, ShardlineError

from conftest import nx_graph, shared_missing  # noqa: E402

pytest.importorskip("matplotlib", reason="the report needs matplotlib: pip install 'shardline[report]'")

REPO = Path(__file__).resolve().parents[1]
SHARED = Path(__file__).resolve().parents[2] / "shared" / "datasets"
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"  # PNG specification, section 5.2


class Page(html.parser.HTMLParser):
    """The summary cells (``data-key``), the images and the links of a report page."""

    def __init__(self):
        super().__init__()
        self.cells, self.images, self.links, self._key = {}, [], [], None

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if tag == "td" and "data-key" in a:
            self._key = a["data-key"]
        if tag == "img":
            self.images.append(a)
        for name in ("href", "src"):
            if name in a and not str(a[name]).startswith("data:"):
                self.links.append(a[name])

    def handle_data(self, data):
        if self._key is not None:
            self.cells[self._key] = self.cells.get(self._key, "") + data

    def handle_endtag(self, tag):
        if tag == "td":
            self._key = None


def parse_page(text):
    page = Page()
    page.feed(text)
    return page


@pytest.fixture(scope="module")
def small_run(tmp_path_factory):
    """A planted-partition graph partitioned through the API and written as `shardline run` writes it."""
    from partition.api import partition_edges
    from partition.generators import planted_partition, write_edgelist

    tmp = tmp_path_factory.mktemp("report")
    src, dst, _ = planted_partition(4, 40, 0.25, 0.02, seed=2)
    graph = tmp / "planted.txt"
    write_edgelist(graph, src + 100, dst + 100)  # ids 100.. so they are not dense positions
    run = partition_edges(graph, 4, imbalance=0.05, seed=3, starts="hierarchy,spectral",
                          refine="window,multilevel,pick,swaps")
    run.write(tmp / "shards.csv", order_path=tmp / "order.csv")
    return tmp, run


def recount(run):
    """Shard loads and the shard × shard cut with networkx, from the graph's own edges."""
    g = nx_graph(run.graph)
    k = run.report["k"]
    groups = [set(np.flatnonzero(run.parts == s).tolist()) for s in range(k)]
    matrix = [[0 if a == b else nx.cut_size(g, groups[a], groups[b]) for b in range(k)] for a in range(k)]
    return [len(x) for x in groups], matrix


def test_report_figures_hold_the_runs_numbers(small_run):
    from partition.report import build_report

    tmp, run = small_run
    loads, matrix = recount(run)
    assert run.report["result"]["shard_weights"] == loads
    assert run.report["result"]["cut_matrix"] == matrix  # networkx's cut_size per shard pair
    rep = build_report(run.report, graph=run.graph, parts=run.parts, order=run.order,
                       baselines={"ldg": _baseline("ldg", run), "hash": _baseline("hash", run)})
    assert list(rep.figures) == ["loads", "cut_matrix", "adjacency", "hierarchy", "refinement", "starts",
                                 "baselines"]
    bars = rep.figures["loads"][1].axes[0].patches
    assert [b.get_height() for b in bars] == loads
    heat = rep.figures["cut_matrix"][1].axes[0].images[0].get_array()
    assert np.array_equal(np.ma.filled(heat, 0), np.array(matrix))
    # every start's raw and final cut, as the report holds them
    starts = rep.figures["starts"][1].axes[0].patches
    raw = [s["raw_cut_fraction"] for s in run.report["starts"]]
    final = [s["cut_fraction"] for s in run.report["starts"]]
    assert [p.get_height() for p in starts] == pytest.approx(raw + final)
    # the baselines are measured here; the hash baseline's cut is recounted with networkx
    hash_row = [b for b in rep.baselines if b["name"] == "hash"][0]
    g = nx.Graph(list(zip(run.graph.rows().tolist(), run.graph.indices.tolist())))
    hp = _baseline("hash", run)
    cut = sum(1 for u, v in g.edges if hp[u] != hp[v])
    assert hash_row["cut_edges"] == cut


def _baseline(name, run):
    from partition.baselines import run_baseline

    return run_baseline(name, run.graph, run.report["k"], eps=run.report["imbalance_allowed"], seed=0)


def test_command_writes_one_self_contained_page_and_pngs(small_run, capsys):
    tmp, run = small_run
    page_path, png_dir = tmp / "page.html", tmp / "png"
    status = main(["report", str(tmp / "shards.csv"), "-o", str(page_path), "--run-baselines", "ldg,fennel",
                   "--png-dir", str(png_dir), "--quiet"])
    assert status == 0
    out = capsys.readouterr()
    assert out.err == ""  # --quiet
    text = page_path.read_text(encoding="utf-8")
    page = parse_page(text)
    assert page.links == []  # nothing loaded from elsewhere: every figure is a data: URI
    assert not re.search(r"(?i)(src|href)\s*=\s*['\"]?(https?:|//)", text)
    assert len(page.images) == 7
    import matplotlib.image as mpimg
    import io

    for img in page.images:
        data = base64.b64decode(img["src"].split(",", 1)[1])
        assert data.startswith(PNG_SIGNATURE)
        pixels = mpimg.imread(io.BytesIO(data), format="png")
        assert pixels.shape[0] > 100 and pixels.std() > 0.01  # decoded, and not a blank picture
    assert sorted(p.name for p in png_dir.iterdir()) == sorted(f"{i['data-figure']}.png" for i in page.images)
    res = run.report["result"]
    assert page.cells["result.cut_edges"] == f"{res['cut_edges']:,}"
    assert float(page.cells["result.cut_fraction"]) == pytest.approx(res["cut_fraction"], abs=5e-7)
    assert float(page.cells["result.imbalance"]) == pytest.approx(res["imbalance"], abs=5e-7)
    assert int(page.cells["k"]) == run.report["k"]
    assert "order by shard" not in text  # the run's linear order was found through the report
    assert out.out == ""  # --quiet: no summary line either
    assert main(["report", str(tmp / "shards.csv"), "-o", str(page_path), "--no-graph", "--json"]) == 0
    summary = json.loads(capsys.readouterr().out)
    assert summary["bytes"] == page_path.stat().st_size and summary["output"] == str(page_path)


def test_spy_plot_samples_large_graphs_the_same_way_each_time():
    from partition.generators import grid2d
    from partition.graph import build_graph
    from partition.report.figures import spy_plot

    g = build_graph(*grid2d(30, 30))
    pos = np.arange(g.n)
    fig1, drawn1 = spy_plot(g.indptr, g.indices, pos, seed=4, max_points=500)
    fig2, drawn2 = spy_plot(g.indptr, g.indices, pos, seed=4, max_points=500)
    assert drawn1 == drawn2 == 500 < g.indices.size
    a = fig1.axes[0].collections[0].get_offsets()
    b = fig2.axes[0].collections[0].get_offsets()
    assert np.array_equal(a, b)
    _, everything = spy_plot(g.indptr, g.indices, pos, seed=4)
    assert everything == g.indices.size == 2 * (2 * 30 * 29)  # a 30 × 30 grid has 2·30·29 edges


def test_workload_figures_from_a_small_replay_summary(small_run, tmp_path):
    from partition.report import build_report
    from partition.report.workload import read_workload

    summary = {"policies": {
        "shard-aware": {"fanout_histogram": {"1": 70, "2": 25, "3": 5},
                        "hit_rate": [{"cache_size": 10, "hit_rate": 0.4}, {"cache_size": 100, "hit_rate": 0.8}]},
        "hash": {"fanout_histogram": [[1, 20], [2, 30], [4, 50]], "hit_rate": [[10, 0.2], [100, 0.5]]},
    }}
    path = tmp_path / "replay.json"
    path.write_text(json.dumps(summary))
    work = read_workload(path)
    _, run = small_run
    rep = build_report(run.report, workload=work)
    hist = rep.figures["fanout"][1].axes[0].patches
    # shares of requests per fan-out 1, 2, 3, 4, policy by policy: 70/100, 25/100, ...
    assert [round(p.get_height(), 6) for p in hist] == [0.7, 0.25, 0.05, 0.0, 0.2, 0.3, 0.0, 0.5]
    lines = rep.figures["hit_rate"][1].axes[0].lines
    assert [list(line.get_ydata()) for line in lines] == [[0.4, 0.8], [0.2, 0.5]]
    assert [t.get_text() for t in rep.figures["hit_rate"][1].axes[0].get_legend().get_texts()] == \
        ["shard-aware", "hash"]


@pytest.mark.parametrize("text, line, words", [
    ('{"policies": {"a": {"fanout_histogram": {"1": 3}}},\n oops}', 2, "not valid JSON"),
    ('{"policies": {"a": {"fanout_histogram": {"0": 3}}}}', None, "fan-out must lie in"),
    ('{"policies": {"a": {"fanout_histogram": {"1": 3}, "hit_rate": [[5, 1.5]]}}}', None, "hit rate"),
    ('{"runs": []}', None, "policies"),
])
def test_bad_workload_summaries_name_the_file(tmp_path, text, line, words):
    from partition.report.workload import read_workload

    path = tmp_path / "w.json"
    path.write_text(text)
    with pytest.raises(InputError) as err:
        read_workload(path)
    assert str(path) in str(err.value) and words in str(err.value)
    assert err.value.line == line


def test_bad_input_stops_with_exit_2_and_no_page(small_run, tmp_path, capsys):
    tmp, run = small_run
    out = tmp_path / "page.html"
    # the output may not be one of the inputs
    assert main(["report", str(tmp / "shards.csv"), "-o", str(tmp / "shards.csv")]) == 2
    assert "is also an input" in capsys.readouterr().err
    # nor a baseline given as NAME=FILE
    fake = tmp_path / "fake.html"
    fake.write_text("node,shard\n")
    assert main(["report", str(tmp / "shards.csv"), "-o", str(fake), "--baseline", f"ldg={fake}"]) == 2
    assert "is also an input" in capsys.readouterr().err
    # a missing report names the file
    assert main(["report", str(tmp / "order.csv"), "-o", str(out)]) == 2
    assert "order.csv.report.json: no such file" in capsys.readouterr().err
    # another graph than the one the run partitioned
    other = tmp_path / "other.txt"
    other.write_text("1 2\n2 3\n")
    assert main(["report", str(tmp / "shards.csv"), "-o", str(out), "--graph", str(other)]) == 2
    assert "not the graph this run partitioned" in capsys.readouterr().err
    # a broken workload summary
    bad = tmp_path / "w.json"
    bad.write_text("{")
    assert main(["report", str(tmp / "shards.csv"), "-o", str(out), "--workload", str(bad), "--quiet"]) == 2
    assert "w.json, line 1: is not valid JSON" in capsys.readouterr().err
    assert not out.exists() and not list(tmp_path.glob(".shardline-tmp-*"))


def test_a_weighted_run_needs_its_weight_column(tmp_path, capsys):
    demo = REPO / "datasets" / "demo" / "larkspur-bay-rides.csv.gz"
    assert main(["run", str(demo), "--weight-column", "rides", "-k", "4", "-o", str(tmp_path / "s.csv"), "--quiet",
                 "--starts", "hierarchy", "--refine", "window"]) == 0
    capsys.readouterr()
    assert main(["report", str(tmp_path / "s.csv"), "-o", str(tmp_path / "p.html")]) == 2
    assert "give --weight-column" in capsys.readouterr().err
    assert main(["report", str(tmp_path / "s.csv"), "-o", str(tmp_path / "p.html"), "--weight-column", "rides",
                 "--quiet"]) == 0
    page = parse_page((tmp_path / "p.html").read_text(encoding="utf-8"))
    report = json.loads((tmp_path / "s.csv.report.json").read_text())
    assert page.cells["result.cut_edges"] == f"{report['result']['cut_edges']:,}"
    assert "order by shard" in (tmp_path / "p.html").read_text()  # no --order-output: nodes sorted by shard


def test_missing_matplotlib_says_how_to_install_it(monkeypatch):
    import sys

    from partition.report.figures import require_matplotlib

    monkeypatch.setitem(sys.modules, "matplotlib", None)  # makes `import matplotlib` fail
    with pytest.raises(ShardlineError, match=r"pip install 'shardline\[report\]'"):
        require_matplotlib()


def test_every_published_figure_names_its_source_and_says_if_recalled():
    from partition.catalog import load_catalog

    refs = [(e["name"], r) for e in load_catalog() for r in e["reference"]]
    assert refs, "the catalog lists published figures"
    for name, r in refs:
        assert r["citation"] and isinstance(r["from_memory"], bool), name
        assert r["metric"] in ("cut_edges", "cut_fraction") and r["k"] >= 2 and r["imbalance"] >= 0
    walshaw = {(r["k"], r["imbalance"]): r["value"] for name, r in refs if name == "3elt"}
    assert set(walshaw) == {(k, e) for k in (2, 4, 8, 16, 32, 64) for e in (0.0, 0.01, 0.03, 0.05)}
    for k in (2, 4, 8, 16, 32, 64):  # more slack never makes the best-known cut larger
        assert walshaw[(k, 0.0)] >= walshaw[(k, 0.01)] >= walshaw[(k, 0.03)] >= walshaw[(k, 0.05)]


@pytest.mark.skipif(not (SHARED / "3elt.txt.gz").is_file(),
                    reason=shared_missing("3elt.txt.gz"))
def test_a_catalog_graph_gets_its_published_figures_in_score_and_report(tmp_path, capsys):
    graph = SHARED / "3elt.txt.gz"
    out = tmp_path / "k4.csv"
    assert main(["run", str(graph), "-k", "4", "--imbalance", "0.03", "-o", str(out), "--quiet",
                 "--starts", "hierarchy", "--refine", "window,multilevel"]) == 0
    capsys.readouterr()
    assert main(["score", str(graph), str(out), "--imbalance", "0.03", "--json"]) == 0
    scored = json.loads(capsys.readouterr().out)
    rows = scored["published"]["rows"]
    assert scored["published"]["graph"] == "3elt" and scored["published"]["matched_by"] == "sha256"
    assert [r["imbalance"] for r in rows] == [0.0, 0.01, 0.03, 0.05]
    same = [r for r in rows if r["same_eps"]]
    assert len(same) == 1 and same[0]["published"] == 198  # catalog: Walshaw archive, k = 4, ε = 3 %
    assert same[0]["ours"] == scored["cut_edges"] and same[0]["ratio"] == pytest.approx(scored["cut_edges"] / 198)
    assert main(["report", str(out), "-o", str(tmp_path / "p.html"), "--quiet"]) == 0
    text = (tmp_path / "p.html").read_text(encoding="utf-8")
    assert "Published figures for this graph" in text and "data-ref='0.03'>198<" in text
    assert "recalled from memory and not checked" in text


def test_spy_plot_of_a_large_graph_counts_every_sampled_entry_once():
    from partition.generators import grid2d
    from partition.graph import build_graph
    from partition.report.figures import DENSITY_ABOVE, DENSITY_BINS, spy_plot

    g = build_graph(*grid2d(150, 150))  # 22,500 nodes: above DENSITY_ABOVE, drawn as entries per cell
    assert g.n > DENSITY_ABOVE
    fig, drawn = spy_plot(g.indptr, g.indices, np.arange(g.n), seed=1, max_points=50_000)
    counts = fig.axes[0].images[0].get_array()
    assert counts.shape == (DENSITY_BINS, DENSITY_BINS)
    assert drawn == 50_000 and int(np.ma.filled(counts, 0).sum()) == drawn
    # in row-major id order a grid's neighbours are 1 or 150 positions apart; a cell spans 22,500 / 400 =
    # 56.25 positions, so every entry lies within ⌈150 / 56.25⌉ = 3 cells of the diagonal
    rows, cols = np.nonzero(np.ma.filled(counts, 0))
    assert np.abs(rows - cols).max() == 3


def test_a_spark_shaped_report_gets_the_missing_figures_measured(small_run):
    """The Spark engine's report holds cut and balance only, and its starts as cut weights (partition/spark/engine.py)."""
    from partition.report import build_report
    from partition.score import score

    _, run = small_run
    full = run.report["result"]
    spark = dict(run.report, engine="spark", mode="distributed",
                 result={key: full[key] for key in ("cut_edges", "cut_fraction", "cut_weight", "edges", "imbalance",
                                                    "nodes", "shards", "total_edge_weight", "total_node_weight")},
                 starts=[{"start": s["start"], "raw_cut": s["raw_cut_fraction"] * full["total_edge_weight"],
                          "cut": s["cut_fraction"] * full["total_edge_weight"]} for s in run.report["starts"]],
                 stages=[{"stage": r["stage"], "seconds": r["seconds"]} for r in run.report["stages"]])
    rep = build_report(spark, graph=run.graph, parts=run.parts)
    cells = {key: text for key, _, text in rep.summary}
    s = score(run.graph, run.parts, k=run.report["k"])
    assert cells["result.fanout"] == f"{s.fanout:.6f}" and cells["result.communication_volume"] == \
        f"{s.communication_volume:,}"
    assert "measured here from the graph" in " ".join(rep.notes)
    assert "refinement" not in rep.figures and "cut_matrix" in rep.figures
    heights = [p.get_height() for p in rep.figures["starts"][1].axes[0].patches]
    assert heights == pytest.approx([x["raw_cut_fraction"] for x in run.report["starts"]]
                                    + [x["cut_fraction"] for x in run.report["starts"]])
