"""Benchmark: edge-list parsing speed and in-memory graph size.

Writes a synthetic edge list (R-MAT, Graph500 parameters) as plain text, then
times reading it (parse: text → id columns) and normalising it (symmetrise,
merge duplicates, drop self-loops, dense ids, CSR), and prints bytes per edge
of the resulting graph. Goals: parse ≥ 3 M edges/s; graph ≤ 24 bytes per
undirected edge + 16 per node.

Usage: python jobs/bench_input.py [--scale 20] [--repeat 3] [--also-shared]
"""

from __future__ import annotations

import argparse
import os
import tempfile
import time
from pathlib import Path

import numpy as np

from partition.edgelist import read_edges, read_graph
from partition.graph import build_graph


def _edges(scale, seed):
    try:
        from partition.generators import rmat
    except ImportError:  # generators not available: uniform random pairs
        rng = np.random.default_rng(seed)
        n = 1 << scale
        m = 16 * n
        return rng.integers(0, n, m), rng.integers(0, n, m)
    return rmat(scale, seed=seed)


def _write(path, src, dst):
    with open(path, "w") as fh:
        fh.write("# synthetic R-MAT edge list\n")
        chunk = 1 << 20
        for i in range(0, len(src), chunk):
            block = np.column_stack((src[i : i + chunk], dst[i : i + chunk]))
            np.savetxt(fh, block, fmt="%d", delimiter="\t")


def _peak_rss_mb():
    try:
        import resource

        return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0
    except Exception:  # pragma: no cover
        return float("nan")


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--scale", type=int, default=20)
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--also-shared", action="store_true", help="also time every graph in ../shared/datasets")
    args = ap.parse_args(argv)

    rows = []
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / f"rmat{args.scale}.txt"
        src, dst = _edges(args.scale, seed=1)
        _write(path, src, dst)
        lines = len(src)
        size_mb = os.path.getsize(path) / 1e6
        del src, dst
        parse_t, build_t, cpu_t = [], [], []
        for _ in range(args.repeat):
            c0 = time.process_time()
            t0 = time.perf_counter()
            s, d, _ = read_edges(path)
            t1 = time.perf_counter()
            c1 = time.process_time()
            g = build_graph(s, d, source=str(path))
            t2 = time.perf_counter()
            parse_t.append(t1 - t0)
            build_t.append(t2 - t1)
            cpu_t.append(c1 - c0)
            del s, d
        parse, build = min(parse_t), min(build_t)
        bytes_per_edge = (g.indices.nbytes + (0 if g.edge_weights is None else g.edge_weights.nbytes)) / g.m
        bytes_per_node = (g.indptr.nbytes + g.ids.nbytes) / g.n
        rows.append((f"rmat scale {args.scale}", lines, g.n, g.m, size_mb, parse, lines / parse / 1e6,
                     build, lines / (parse + build) / 1e6, bytes_per_edge, bytes_per_node))

    if args.also_shared:
        shared = Path(__file__).resolve().parents[2] / "shared" / "datasets"
        for f in sorted(shared.glob("*.txt*")):
            t0 = time.perf_counter()
            g = read_graph(f)
            t = time.perf_counter() - t0
            rows.append((f.name, None, g.n, g.m, os.path.getsize(f) / 1e6, t, None, None, g.m / t / 1e6,
                         g.indices.nbytes / max(g.m, 1), (g.indptr.nbytes + g.ids.nbytes) / g.n))

    hdr = ("input", "lines", "nodes", "edges", "MB", "parse s", "parse Medges/s", "build s",
           "total Medges/s", "B/edge", "B/node")
    print(" | ".join(hdr))
    print(" | ".join("---" for _ in hdr))
    for r in rows:
        print(" | ".join("" if x is None else (f"{x:.3f}" if isinstance(x, float) else str(x)) for x in r))
    print(f"parse CPU seconds (all threads), best of {args.repeat}: {min(cpu_t):.3f}")
    print(f"load average while measuring: {os.getloadavg()[0]:.1f} (wall times are only meaningful on a quiet machine)")
    print(f"peak RSS of this process: {_peak_rss_mb():.0f} MB")
    print("goals: parse >= 3 M edges/s; graph <= 24 B per undirected edge + 16 B per node")


if __name__ == "__main__":
    main()
