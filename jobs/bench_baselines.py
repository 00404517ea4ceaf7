"""Benchmark: cut fraction, imbalance and run time of every baseline partitioner.

For each public graph in ``../shared/datasets`` (sources in ../shared/datasets/CATALOG.md) and
each k in {2, 8, 20, 64} and ε in {0, 0.03}, runs every method of
:data:`partition.baselines.METHODS` and prints the cut fraction, the imbalance
(max shard weight / (W/k) − 1) and the seconds taken; every result is checked
against the balance rule. Then times each method on a seeded R-MAT graph of
about 1.3 M undirected edges (Graph500 parameters, scale 17, edge factor 11);
the goal is at most 60 s per method on a 2-core machine.

Usage: python jobs/bench_baselines.py [--graphs NAME ...] [--order random|bfs|given]
       [--scale 17] [--edge-factor 11] [--skip-shared] [--skip-large]
"""

from __future__ import annotations

import argparse
import time
from pathlib import Path

import numpy as np
from rich.console import Console
from rich.table import Table

from partition.balance import balance_rule, imbalance
from partition.baselines import METHODS, ORDERS, run_baseline
from partition.edgelist import read_graph
from partition.graph import build_graph

SHARED = Path(__file__).resolve().parents[2] / "shared" / "datasets"
KS = (2, 8, 20, 64)
EPSILONS = (0.0, 0.03)


def _cut_fraction(graph, parts):
    crossing = parts[graph.rows()] != parts[graph.indices]
    total = graph.total_edge_weight()
    cut = graph.edge_weight_array()[crossing].sum() / 2.0
    return float(cut / total) if total > 0 else 0.0


def _measure(name, graph, k, eps, seed, order):
    started = time.perf_counter()
    parts = run_baseline(name, graph, k, eps=eps, seed=seed, order=order)
    seconds = time.perf_counter() - started
    loads = np.bincount(parts, weights=graph.node_weight_array(), minlength=k)
    rule = balance_rule(graph.node_weights, k, eps, graph.n)
    if not rule.check(loads):
        raise AssertionError(f"{name} broke the balance rule: {rule.violations(loads)[:3]}")
    return _cut_fraction(graph, parts), imbalance(loads, graph.total_node_weight(), k), seconds


def _large_graph(scale, edge_factor, seed):
    try:
        from partition.generators import rmat
    except ImportError:  # generator not available: seeded uniform random pairs
        rng = np.random.default_rng(seed)
        n = 1 << scale
        src, dst = rng.integers(0, n, edge_factor * n), rng.integers(0, n, edge_factor * n)
        kind = "uniform random pairs"
    else:
        src, dst = rmat(scale, edge_factor=edge_factor, seed=seed)
        kind = "R-MAT (Graph500 a, b, c = 0.57, 0.19, 0.19)"
    return build_graph(src, dst), kind


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--graphs", nargs="*", help="file names in ../shared/datasets (default: all)")
    ap.add_argument("--order", choices=ORDERS, default="random", help="streaming order (default random)")
    ap.add_argument("--seed", type=int, default=0)
    ap.add_argument("--scale", type=int, default=17)
    ap.add_argument("--edge-factor", type=int, default=11)
    ap.add_argument("--skip-shared", action="store_true")
    ap.add_argument("--skip-large", action="store_true")
    args = ap.parse_args(argv)
    console = Console(width=120)

    # compile the numba kernels once so the timings below are of the work alone
    warm = build_graph(np.arange(20), np.arange(1, 21))
    for name in METHODS:
        run_baseline(name, warm, 3, eps=0.03, seed=0)
        run_baseline(name, warm, 3, eps=0.0, seed=0)

    totals = {name: [] for name in METHODS}
    if not args.skip_shared:
        if not SHARED.is_dir():
            console.print(f"no shared datasets at {SHARED}; skipping the public graphs")
        names = args.graphs or sorted(p.name for p in SHARED.glob("*.txt*"))
        for file_name in names:
            graph = read_graph(SHARED / file_name)
            table = Table(title=f"{file_name}: n = {graph.n:,}, m = {graph.m:,} (order {args.order})")
            for col in ("k", "ε", "method", "cut fraction", "imbalance", "seconds"):
                table.add_column(col, justify="right")
            for k in KS:
                for eps in EPSILONS:
                    for name in METHODS:
                        cut, imb, sec = _measure(name, graph, k, eps, args.seed, args.order)
                        totals[name].append((cut, sec))
                        table.add_row(str(k), f"{eps:g}", name, f"{cut:.4f}", f"{imb:.4f}", f"{sec:.3f}",
                                      end_section=name == list(METHODS)[-1])
            console.print(table)
        if any(totals.values()):
            summary = Table(title="all public graphs: mean cut fraction, total and max seconds per run")
            for col in ("method", "mean cut fraction", "total s", "max s"):
                summary.add_column(col, justify="right")
            for name, rows in totals.items():
                cuts, secs = np.array([r[0] for r in rows]), np.array([r[1] for r in rows])
                summary.add_row(name, f"{cuts.mean():.4f}", f"{secs.sum():.2f}", f"{secs.max():.2f}")
            console.print(summary)

    if not args.skip_large:
        started = time.perf_counter()
        graph, kind = _large_graph(args.scale, args.edge_factor, args.seed)
        built = time.perf_counter() - started
        table = Table(title=f"large graph: {kind}, scale {args.scale}, edge factor {args.edge_factor}: "
                            f"n = {graph.n:,}, m = {graph.m:,} (built in {built:.1f} s); goal ≤ 60 s per method")
        for col in ("method", "k", "ε", "cut fraction", "imbalance", "seconds", "≤ 60 s"):
            table.add_column(col, justify="right")
        for name in METHODS:
            for k in (2, 64):
                cut, imb, sec = _measure(name, graph, k, 0.0, args.seed, args.order)
                table.add_row(name, str(k), "0", f"{cut:.4f}", f"{imb:.4f}", f"{sec:.2f}",
                              "yes" if sec <= 60 else "NO")
        console.print(table)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
