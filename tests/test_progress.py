"""Tests of partition/progress.py and of the progress the commands show.

References: the time-left estimate is a linear extrapolation (elapsed time per
finished step × steps left, common practice for progress bars), checked here
with whole-number arithmetic on a fake clock; label propagation's reported
round cuts are recounted with networkx's ``cut_size``.
"""

from __future__ import annotations

import io

import numpy as np
import pytest
from rich.console import Console

from partition.progress import FIRST_LINE, LINE_EVERY, Progress, progress_for

from conftest import nx_cut, nx_graph  # noqa: E402


class FakeClock:
    def __init__(self):
        self.now = 0.0

    def __call__(self):
        return self.now


def plain():
    out = io.StringIO()
    return Progress(Console(file=out, force_terminal=False, width=200), clock=FakeClock()), out


def test_plain_lines_carry_the_stage_and_a_linear_estimate():
    prog, out = plain()
    clock = prog.clock
    prog.task("export: writing tables", total=100)
    for step in range(20):
        clock.now += 0.1 if step < 10 else 0.9  # 10 steps in 1 s, then 10 more in 9 s
        prog.advance()
    prog.done()
    text = out.getvalue()
    assert "export: writing tables: started (100 steps)" in text
    # after 20 of 100 steps in 10 s: 10 / 20 × 80 = 40 s left (linear extrapolation)
    assert "export: writing tables: 20/100 (20%), 10.0 s, about 40 s left" in text
    # the first tenth came after 1 s, before FIRST_LINE = 2 s had passed: no line for it
    assert "10/100" not in text and FIRST_LINE == 2.0
    assert "export: writing tables: done, 20 steps, 10.00 s" in text
    assert prog.bar is None  # no bar when standard error is not a terminal


def test_plain_lines_come_every_few_seconds_without_a_total():
    prog, out = plain()
    prog.task("baseline ldg, k = 8")
    for _ in range(12):
        prog.clock.now += 1.0
        prog.advance()
    lines = [ln for ln in out.getvalue().splitlines() if "baseline ldg" in ln]
    # started, then one line each LINE_EVERY = 5 s (at 5 s and 10 s)
    assert LINE_EVERY == 5.0 and len(lines) == 3, lines
    assert "left" not in out.getvalue()  # no total, no estimate


def test_terminal_gets_a_bar_that_follows_the_plan():
    from partition.generators import grid2d
    from partition.graph import build_graph
    from partition.partitioner import partition_graph

    out = io.StringIO()
    prog = Progress(Console(file=out, force_terminal=True, width=120))
    partition_graph(build_graph(*grid2d(5, 5)), 2, progress=prog)
    assert prog.bar is not None
    task = prog.bar.tasks[0]
    assert task.total == len(prog.plan) and task.completed == task.total
    prog.task("export: writing tables", total=3)
    prog.advance(3)
    prog.close()
    assert prog.bar is None
    text = out.getvalue()
    assert "\x1b[" in text and "hierarchy" in text and "export: writing tables: done" in text


def test_quiet_means_no_reporter():
    assert progress_for(quiet=True) is None
    assert isinstance(progress_for(quiet=False), Progress)


def test_label_propagation_reports_every_round_cut_and_leaves_the_graph_alone():
    from partition.baselines.labelprop import label_propagation
    from partition.generators import planted_partition
    from partition.graph import build_graph

    src, dst, _ = planted_partition(4, 60, 0.2, 0.02, seed=3)
    weights = 1.0 + (np.arange(src.size) % 3)
    graph = build_graph(src, dst, weights=weights)
    before = [a.copy() for a in (graph.indptr, graph.indices, graph.edge_weights)]
    rows = []
    parts = label_propagation(graph, 4, eps=0.03, seed=1, progress=rows.append)
    # the rounds read the graph's arrays and never write into them (a weighted graph's weights included)
    assert all(np.array_equal(a, b) for a, b in zip(before, (graph.indptr, graph.indices, graph.edge_weights)))
    assert rows and [r["round"] for r in rows] == list(range(1, len(rows) + 1))
    final = nx_cut(nx_graph(graph), parts, 4)
    # the result is the best assignment seen: its cut is at most every reported round's cut
    assert final <= min(r["cut"] for r in rows) + 1e-9


def test_baseline_and_export_commands_show_progress_and_quiet_silences_it(tmp_path, capsys):
    from partition.cli import build_parser
    from partition.generators import planted_partition, write_edgelist

    src, dst, _ = planted_partition(4, 50, 0.2, 0.02, seed=5)
    graph = tmp_path / "g.txt"
    write_edgelist(graph, src, dst)
    parser = build_parser()
    args = parser.parse_args(["baseline", "labelprop", str(graph), "-k", "4", "-o", str(tmp_path / "b.csv")])
    assert args._run(args) == 0
    err = capsys.readouterr().err
    assert "labelprop baseline, k = 4: started" in err and "labelprop: round 1" in err
    args = parser.parse_args(["baseline", "ldg", str(graph), "-k", "4", "-o", str(tmp_path / "c.csv")])
    args.quiet = True  # the flag every command's parser carries
    assert args._run(args) == 0
    assert capsys.readouterr().err == ""

    args = parser.parse_args(["run", str(graph), "-k", "4", "-o", str(tmp_path / "r.csv"), "--starts", "hierarchy",
                              "--refine", "window"])
    assert args._run(args) == 0
    assert "hierarchy: window" in capsys.readouterr().err
    args = parser.parse_args(["run", str(graph), "-k", "4", "-o", str(tmp_path / "r.csv"), "--starts", "hierarchy",
                              "--refine", "window", "--quiet"])
    assert args._run(args) == 0
    assert capsys.readouterr().err == ""
    args = parser.parse_args(["export", str(tmp_path / "r.csv"), "-o", str(tmp_path / "placement"),
                              "--format", "csv"])
    assert args._run(args) == 0
    assert "export: writing 5 csv tables: done, 5 steps" in capsys.readouterr().err


@pytest.mark.parametrize("quiet", [False, True])
def test_export_run_reports_one_step_per_table(tmp_path, quiet):
    from partition.generators import grid2d, write_edgelist
    from partition.placement.export import export_run
    from partition.cli import main

    src, dst = grid2d(6, 6)
    graph = tmp_path / "grid.txt"
    write_edgelist(graph, src, dst)
    assert main(["run", str(graph), "-k", "3", "-o", str(tmp_path / "a.csv"), "--quiet", "--starts", "hierarchy",
                 "--refine", "window"]) == 0
    prog, out = plain()
    export_run(tmp_path / "a.csv", tmp_path / "exp", fmt="csv", progress=None if quiet else prog)
    if quiet:
        assert out.getvalue() == ""
    else:
        assert "export: writing 4 csv tables: started (4 steps)" in out.getvalue()
        assert "done, 4 steps" in out.getvalue()
