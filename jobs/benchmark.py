"""Benchmark: Shardline's main partitioner against its quality table, and its speed and memory on R-MAT.

Part 1 (quality). For 15 public graphs of ``../shared/datasets`` (sources in its
CATALOG.md) × k ∈ {2, 8, 20, 64} × ε ∈ {0, 0.03}, it runs
:func:`partition.partitioner.partition_graph` with seed 0 and the default plan
and prints, per cell: the table figure, Shardline's cut fraction (cut edges /
edges), their ratio, the raw line cut (the winning start's line cut before any
refinement, so the refinement's share is visible), the best of linear
deterministic greedy, Fennel and label propagation
(:func:`partition.baselines.run_baseline`, seed 0) with its name, and the
seconds Shardline took. Then the number of cells within 1.03 × of the table
and the geometric mean of Shardline / table over all cells. The goals: every
cell within 1.03 ×, geometric mean at most 0.95. Every result is checked
against the balance rule.

The table's figures are the better, per cell, of two reference builds: a quick
build of this same linear-embedding method (Aydin, Bateni & Mirrokni, WSDM
2016) and recursive spectral bisection on the Fiedler order with pairwise-swap
refinement (Pothen, Simon & Liou, SIAM J. Matrix Anal. Appl. 1990). They are
rounded to four decimals, so on the road graph at k = 2 (cut fractions near
0.0003) one edge moves the ratio by several per cent.

Part 2 (speed and memory). A seeded R-MAT graph (``partition.generators.rmat``
with scale 16, Graph500 parameters a, b, c = 0.57, 0.19, 0.19, edge factor 16:
about 0.9 M undirected edges after removing duplicates and self-loops) is
written as an edge list to a temporary file, read back (``parse``, reported
separately), and partitioned into k = 64 shards with ε = 0.03 in a fresh
process: per-stage seconds, the total (goal ≤ 10 s on a 2-core machine, parse
excluded) and the process's peak resident memory (goal ≤ 2 GB; the process
reads ``resource.getrusage``). The compiled numba kernels are cached on disk;
the child process first partitions a small R-MAT graph (scale 10) to load or
compile them, so the figures are of a warm run.

Usage: python jobs/benchmark.py [--graphs NAME,...] [--k 2,8,...] [--eps 0,0.03] [--quick]
       [--jobs 1] [--skip-quality] [--skip-speed] [--no-baselines] [--affinity jaccard|ppr|unit]

``--quick`` runs k ∈ {2, 64}, ε = 0.03 on the five smallest graphs and the
speed part; ``--jobs 2`` runs two quality cells at once (the seconds are then
those of a shared machine).
"""

from __future__ import annotations

import argparse
import math
import multiprocessing as mp
import os
import resource
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
from rich.console import Console
from rich.table import Table

SHARED = Path(__file__).resolve().parents[2] / "shared" / "datasets"
KS = (2, 8, 20, 64)
EPSILONS = (0.0, 0.03)
BASELINES = ("ldg", "fennel", "labelprop")

# Cut fractions (cut edges / edges) "ε = 0 / ε = 0.03" for k = 2, 8, 20, 64: the better per cell of
# a quick build of the linear-embedding method (Aydin, Bateni & Mirrokni, WSDM 2016) and recursive
# spectral bisection on the Fiedler order with pairwise-swap refinement (Pothen, Simon & Liou, 1990).
TABLE_TEXT = """
3elt              | 0.0082 / 0.0082 | 0.0329 / 0.0329 | 0.0609 / 0.0603 | 0.1342 / 0.1322
airfoil1          | 0.0079 / 0.0066 | 0.0321 / 0.0319 | 0.0605 / 0.0606 | 0.1378 / 0.1361
as-caida20071105  | 0.0926 / 0.0886 | 0.2602 / 0.2458 | 0.3319 / 0.3236 | 0.4170 / 0.4089
bcsstk25          | 0.0064 / 0.0055 | 0.0384 / 0.0380 | 0.0912 / 0.0899 | 0.1699 / 0.1670
ca-AstroPh-lcc    | 0.0843 / 0.0807 | 0.2607 / 0.2581 | 0.3279 / 0.3191 | 0.3916 / 0.3876
ca-CondMat-lcc    | 0.0679 / 0.0650 | 0.1929 / 0.1940 | 0.2387 / 0.2375 | 0.2790 / 0.2786
ca-GrQc           | 0.0302 / 0.0296 | 0.0723 / 0.0674 | 0.0952 / 0.0920 | 0.1510 / 0.1453
ca-HepPh          | 0.0345 / 0.0334 | 0.1242 / 0.1058 | 0.1944 / 0.1751 | 0.3476 / 0.3318
commanche_dual    | 0.0037 / 0.0032 | 0.0212 / 0.0191 | 0.0408 / 0.0367 | 0.0824 / 0.0727
email-Enron       | 0.0587 / 0.0551 | 0.2677 / 0.2640 | 0.3456 / 0.3405 | 0.4531 / 0.4457
email-Eu-core     | 0.1859 / 0.1781 | 0.4579 / 0.4534 | 0.6127 / 0.6043 | 0.8005 / 0.7972
facebook_combined | 0.0037 / 0.0032 | 0.0376 / 0.0336 | 0.1608 / 0.1462 | 0.5100 / 0.5019
p2p-Gnutella31    | 0.1559 / 0.1538 | 0.3857 / 0.3816 | 0.4570 / 0.4570 | 0.4997 / 0.4988
usroads           | 0.0004 / 0.0003 | 0.0027 / 0.0026 | 0.0054 / 0.0050 | 0.0123 / 0.0110
wiki-Vote         | 0.0707 / 0.0617 | 0.3677 / 0.3552 | 0.5829 / 0.5715 | 0.7649 / 0.7610
"""
WITHIN = 1.03
GEOMEAN_GOAL = 0.95
QUICK_GRAPHS = ("email-Eu-core", "airfoil1", "facebook_combined", "3elt", "ca-GrQc")


def reference_table():
    """``{(graph, k, eps): figure}`` from :data:`TABLE_TEXT`."""
    out = {}
    for line in TABLE_TEXT.strip().splitlines():
        name, *cells = (x.strip() for x in line.split("|"))
        for k, cell in zip(KS, cells):
            for eps, value in zip(EPSILONS, cell.split("/")):
                out[(name, k, eps)] = float(value)
    return out


def graph_file(name):
    """The dataset file of a graph name (``.txt.gz`` or ``.txt``)."""
    for suffix in (".txt.gz", ".txt"):
        path = SHARED / f"{name}{suffix}"
        if path.exists():
            return path
    raise FileNotFoundError(f"no file for {name} in {SHARED}")


def cut_fraction(graph, parts):
    crossing = parts[graph.rows()] != parts[graph.indices]
    total = graph.total_edge_weight()
    return float(graph.edge_weight_array()[crossing].sum() / 2.0 / total) if total > 0 else 0.0


def _balanced(graph, parts, k, eps):
    from partition.balance import balance_rule

    loads = np.bincount(parts, weights=graph.node_weight_array(), minlength=k)
    return balance_rule(graph.node_weights, k, eps, graph.n).check(loads)


def quality_cell(task):
    """One cell: ``(name, k, eps, figure, cut, raw, baseline name, baseline cut, seconds)``."""
    name, k, eps, figure, baselines, affinity = task
    from partition.baselines import run_baseline
    from partition.edgelist import read_graph
    from partition.partitioner import partition_graph

    graph = read_graph(graph_file(name))
    started = time.perf_counter()
    result = partition_graph(graph, k, eps=eps, seed=0, affinity=affinity)
    seconds = time.perf_counter() - started
    if not _balanced(graph, result.parts, k, eps):
        raise AssertionError(f"{name} k={k} eps={eps}: the balance rule does not hold")
    chosen = result.report["chosen_start"]
    raw = next(s["raw_cut_fraction"] for s in result.report["starts"] if s["start"] == chosen)
    best = (None, math.nan)
    if baselines:
        for method in BASELINES:
            parts = run_baseline(method, graph, k, eps=eps, seed=0)
            if not _balanced(graph, parts, k, eps):
                raise AssertionError(f"baseline {method} broke the balance rule on {name} k={k}")
            c = cut_fraction(graph, parts)
            if best[0] is None or c < best[1]:
                best = (method, c)
    return name, k, eps, figure, cut_fraction(graph, result.parts), raw, best[0], best[1], seconds


def run_quality(console, graphs, ks, epsilons, jobs, baselines, affinity="jaccard"):
    table_ref = reference_table()
    tasks = [(g, k, e, table_ref[(g, k, e)], baselines, affinity) for g in graphs for k in ks for e in epsilons]
    table = Table(title=f"Cut fraction against the reference table (seed 0, default plan, {affinity} affinity)")
    for col in ("graph", "k", "ε", "table", "Shardline", "ratio", "raw line", "best baseline", "seconds"):
        table.add_column(col, justify="left" if col in ("graph", "best baseline") else "right")
    rows = []
    if jobs > 1:
        with mp.get_context("spawn").Pool(jobs) as pool:
            results = pool.imap(quality_cell, tasks)
            rows = _collect(results, table, console)
    else:
        rows = _collect(map(quality_cell, tasks), table, console)
    console.print(table)
    ratios = np.array([r[4] / r[3] for r in rows])
    within = int(np.count_nonzero(ratios <= WITHIN))
    geomean = float(np.exp(np.log(ratios).mean())) if ratios.size else math.nan
    console.print(f"cells within {WITHIN} × of the table: {within} / {len(rows)}   "
                  f"geometric mean of Shardline / table: {geomean:.4f} (goal ≤ {GEOMEAN_GOAL})   "
                  f"worst ratio: {ratios.max():.3f}   Shardline seconds: {sum(r[8] for r in rows):.0f}")
    return rows


def _collect(results, table, console):
    rows = []
    for row in results:
        name, k, eps, figure, cut, raw, bname, bcut, seconds = row
        ratio = cut / figure
        mark = "" if ratio <= WITHIN else " ✗"
        table.add_row(name, str(k), f"{eps:g}", f"{figure:.4f}", f"{cut:.4f}", f"{ratio:.3f}{mark}", f"{raw:.4f}",
                      "—" if bname is None else f"{bcut:.4f} ({bname})", f"{seconds:.1f}")
        print(f"  {name} k={k} ε={eps:g}: {cut:.4f} vs {figure:.4f} ({ratio:.3f}) in {seconds:.1f} s",
              file=sys.stderr, flush=True)
        rows.append(row)
    return rows


def speed_child(scale, k, eps, queue):
    """Runs in a fresh process: parse, warm-up, then the measured partition; puts a dict on ``queue``."""
    from partition.edgelist import read_graph
    from partition.generators import rmat, write_edgelist
    from partition.graph import build_graph
    from partition.partitioner import partition_graph

    small = build_graph(*rmat(10, seed=1))
    partition_graph(small, k, eps=eps, seed=0)  # loads (or compiles) the cached numba kernels
    src, dst = rmat(scale, seed=0)
    with tempfile.TemporaryDirectory() as tmp:
        path = os.path.join(tmp, f"rmat{scale}.txt")
        write_edgelist(path, src, dst)
        size = os.path.getsize(path)
        del src, dst
        started = time.perf_counter()
        graph = read_graph(path)
        parse = time.perf_counter() - started
    started = time.perf_counter()
    result = partition_graph(graph, k, eps=eps, seed=0)
    total = time.perf_counter() - started
    ok = _balanced(graph, result.parts, k, eps)
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024  # kilobytes on Linux
    queue.put({"n": graph.n, "m": graph.m, "file_bytes": size, "parse": parse, "total": total,
               "stages": result.report["stages"], "cut": cut_fraction(graph, result.parts), "balanced": ok,
               "peak_rss": peak, "starts": result.report["options"]["starts"]})


def run_speed(console, scale=16, k=64, eps=0.03):
    ctx = mp.get_context("spawn")
    queue = ctx.Queue()
    proc = ctx.Process(target=speed_child, args=(scale, k, eps, queue))
    proc.start()
    out = None
    while out is None:
        try:
            out = queue.get(timeout=5)
        except Exception:  # queue.Empty: no result yet; a dead child will never send one
            if not proc.is_alive():
                raise SystemExit(f"the speed run's process ended with exit code {proc.exitcode} and no result")
    proc.join()
    console.print(f"R-MAT scale {scale} (edge factor 16): n = {out['n']:,}, m = {out['m']:,}; "
                  f"k = {k}, ε = {eps:g}, seed 0; numba kernels warm (cached, loaded by a small run first)")
    table = Table(title="Speed and memory")
    table.add_column("stage")
    table.add_column("seconds", justify="right")
    table.add_column("cut after", justify="right")
    table.add_row("parse (excluded)", f"{out['parse']:.2f}", f"{out['file_bytes'] / 1e6:.0f} MB file")
    for row in out["stages"]:
        table.add_row(row["stage"], f"{row['seconds']:.2f}",
                      f"{row['cut_after']:.4f}" if "cut_after" in row else "")
    table.add_row("total (goal ≤ 10 s)", f"{out['total']:.2f}", f"{out['cut']:.4f}", end_section=True)
    table.add_row("peak RSS (goal ≤ 2 GB)", f"{out['peak_rss'] / 2**30:.2f} GB", "")
    console.print(table)
    console.print(f"balance rule holds: {out['balanced']}; starts: {', '.join(out['starts'])}")
    return out


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--graphs", help="comma-separated graph names (default: all 15 of the table)")
    ap.add_argument("--k", help="comma-separated k values (default 2,8,20,64)")
    ap.add_argument("--eps", help="comma-separated ε values (default 0,0.03)")
    ap.add_argument("--quick", action="store_true", help="five small graphs, k = 2 and 64, ε = 0.03")
    ap.add_argument("--jobs", type=int, default=1, help="quality cells run at once (default 1)")
    ap.add_argument("--skip-quality", action="store_true")
    ap.add_argument("--skip-speed", action="store_true")
    ap.add_argument("--no-baselines", action="store_true", help="leave out the baseline column")
    ap.add_argument("--affinity", default="jaccard", choices=("jaccard", "ppr", "unit"),
                    help="edge affinity of the partitioner (default jaccard, the partitioner's default)")
    args = ap.parse_args(argv)
    console = Console(width=140)
    names = [line.split("|")[0].strip() for line in TABLE_TEXT.strip().splitlines()]
    graphs = list(QUICK_GRAPHS) if args.quick else names
    ks, epsilons = ((2, 64), (0.03,)) if args.quick else (KS, EPSILONS)
    if args.graphs:
        graphs = [g.strip() for g in args.graphs.split(",") if g.strip()]
        unknown = sorted(set(graphs) - set(names))
        if unknown:
            ap.error(f"not in the table: {', '.join(unknown)}")
    if args.k:
        ks = tuple(int(x) for x in args.k.split(","))
    if args.eps:
        epsilons = tuple(float(x) for x in args.eps.split(","))
    bad = [(k, e) for k in ks for e in epsilons if k not in KS or e not in EPSILONS]
    if bad:
        ap.error(f"the table has k in {KS} and ε in {EPSILONS} only")
    if not args.skip_quality:
        if not SHARED.is_dir():
            console.print(f"no shared datasets at {SHARED}; skipping the quality table")
        else:
            run_quality(console, graphs, ks, epsilons, args.jobs, not args.no_baselines, args.affinity)
    if not args.skip_speed:
        run_speed(console)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
