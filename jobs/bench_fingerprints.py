"""Fingerprints of the in-memory default plan: cut and assignment checksum on every shared graph.

A change meant to alter no result (a refactoring, a speed-up) is checked by
running this before and after it and comparing the two tables line by line:
the checksum is the SHA-256 of the shard array (int64, dense node order), so
equal lines mean identical assignments, not just equal cuts. Graphs: every
``*.txt*`` edge list of ``../shared/datasets`` (sources in
``../shared/datasets/CATALOG.md``).

Usage::

    python jobs/bench_fingerprints.py [-k 8,64] [--eps 0.03] [--seed 0] > before.txt
    # ... change the code ...
    python jobs/bench_fingerprints.py > after.txt && diff before.txt after.txt
"""

from __future__ import annotations

import argparse
import hashlib
import sys
import time
from pathlib import Path

import numpy as np

DATASETS = Path(__file__).resolve().parents[2] / "shared" / "datasets"


def main(argv=None):
    from partition.edgelist import read_graph
    from partition.partitioner import partition_graph
    from partition.refine.gains import cut_total, cut_weights

    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("-k", default="8,64", help="comma-separated shard counts (default 8,64)")
    ap.add_argument("--eps", type=float, default=0.03)
    ap.add_argument("--seed", type=int, default=0)
    ap.add_argument("--graphs", help="comma-separated graph names (default: all)")
    args = ap.parse_args(argv)
    files = sorted(DATASETS.glob("*.txt*"))
    if args.graphs:
        files = [p for p in files if p.name.split(".")[0] in set(args.graphs.split(","))]
    if not files:
        raise SystemExit(f"no edge lists in {DATASETS}")
    print(f"{'graph':<24} {'k':>3} {'cut':>9}  {'sha256 of shards':<16}")
    for p in files:
        g = read_graph(p)
        for k in (int(x) for x in args.k.split(",")):
            t = time.perf_counter()
            r = partition_graph(g, k, args.eps, args.seed)
            cut = cut_total(g.indptr, g.indices, cut_weights(g.edge_weights)[0], r.parts)
            sha = hashlib.sha256(np.asarray(r.parts, dtype=np.int64).tobytes()).hexdigest()[:16]
            print(f"{p.name.split('.')[0]:<24} {k:>3} {cut:>9}  {sha}", flush=True)
            print(f"  {p.name} k = {k}: {time.perf_counter() - t:.1f} s", file=sys.stderr, flush=True)


if __name__ == "__main__":
    main()
