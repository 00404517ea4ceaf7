"""Benchmark of the ordering stages: affinity, hierarchy, linear order, raw line cut.

For every public graph in ``../shared/datasets`` (sources in ../shared/datasets/CATALOG.md)
and a Graph500 R-MAT graph of about a million edges, print the time of each
stage and the raw line-cut fraction at k = 2, 8, 64: the order is cut into k
contiguous pieces of (as near as possible) equal node count and the fraction
of edges whose ends land in different pieces is counted. Orders: the
hierarchy's leaf order on Jaccard and on PageRank affinity, and the spectral
(Fiedler) order.

Times are wall seconds per stage; ``cpu`` is the CPU seconds of all stages of
the row (the two differ when other jobs share the machine).

Usage: ``python jobs/bench_order.py [--datasets DIR] [--only NAME ...]
[--rmat-scale 16] [--rmat-edge-factor 16] [--no-spectral]``.
"""

from __future__ import annotations

import argparse
import time
from pathlib import Path

import numpy as np

from partition.affinity import edge_affinity
from partition.embedding import linear_order, positions, spectral_order
from partition.graph import build_graph
from partition.hierarchy import build_hierarchy

KS = (2, 8, 64)
DEFAULT_DATASETS = Path(__file__).resolve().parents[2] / "shared" / "datasets"


def line_cut(graph, order, k):
    """Fraction of edges cut when ``order`` is split into k equal-count pieces."""
    pos = positions(order)
    piece = (pos * k) // graph.n
    rows = graph.rows()
    return float((piece[rows] != piece[graph.indices]).sum() / 2 / max(graph.m, 1))


def timed(fn, *args, **kw):
    """Result, wall seconds and CPU seconds of this process (other jobs on the
    machine stretch the wall time, not the CPU time)."""
    t, c = time.perf_counter(), time.process_time()
    out = fn(*args, **kw)
    return out, time.perf_counter() - t, time.process_time() - c


def bench_graph(name, graph, spectral=True):
    rows = []
    for method in ("jaccard", "ppr"):
        aff, t_aff, c_aff = timed(edge_affinity, graph, method)
        hier, t_hier, c_hier = timed(build_hierarchy, graph, aff)
        order, t_ord, c_ord = timed(linear_order, hier, graph)
        cuts = [line_cut(graph, order, k) for k in KS]
        rows.append((method, t_aff, t_hier, t_ord, c_aff + c_hier + c_ord, hier.rounds, cuts))
    if spectral:
        order, t_ord, c_ord = timed(spectral_order, graph)
        cuts = [line_cut(graph, order, k) for k in KS]
        rows.append(("spectral", 0.0, 0.0, t_ord, c_ord, 0, cuts))
    for method, t_aff, t_hier, t_ord, cpu, depth, cuts in rows:
        cut_txt = " ".join(f"{c:8.4f}" for c in cuts)
        print(
            f"{name:24s} {graph.n:>8d} {graph.m:>8d} {method:9s} {t_aff:7.3f} {t_hier:7.3f} "
            f"{t_ord:7.3f} {cpu:7.3f} {depth:>5d} {cut_txt}",
            flush=True,
        )


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--datasets", type=Path, default=DEFAULT_DATASETS)
    parser.add_argument("--only", nargs="*", default=None, help="dataset file names to run")
    parser.add_argument("--rmat-scale", type=int, default=16)
    parser.add_argument("--rmat-edge-factor", type=int, default=16)
    parser.add_argument("--no-spectral", action="store_true")
    args = parser.parse_args(argv)

    # warm the compiled kernels so the first graph's times are not compile times
    warm = build_graph(np.array([0, 1, 2]), np.array([1, 2, 0]))
    linear_order(build_hierarchy(warm, edge_affinity(warm, "ppr")))

    head = " ".join(f"{'k=' + str(k):>8s}" for k in KS)
    print(f"{'graph':24s} {'n':>8s} {'m':>8s} {'order':9s} {'t_aff':>7s} {'t_hier':>7s} {'t_order':>7s} {'cpu':>7s} {'depth':>5s} {head}")
    if args.datasets.is_dir():
        from partition.edgelist import read_graph

        files = sorted(p for p in args.datasets.iterdir() if p.name.endswith((".txt", ".txt.gz")))
        for path in files:
            if args.only and path.name not in args.only:
                continue
            graph = read_graph(path)
            bench_graph(path.name, graph, spectral=not args.no_spectral)
    else:
        print(f"# no datasets folder at {args.datasets}")

    try:
        from partition.generators import rmat
    except ImportError:
        print("# partition.generators.rmat not available: R-MAT row skipped")
        return
    if args.only and "rmat" not in args.only:
        return
    src, dst = rmat(args.rmat_scale, edge_factor=args.rmat_edge_factor, seed=1)
    graph = build_graph(src, dst)
    bench_graph(f"rmat-s{args.rmat_scale}-ef{args.rmat_edge_factor}", graph, spectral=False)


if __name__ == "__main__":
    main()
