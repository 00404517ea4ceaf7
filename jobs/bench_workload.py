"""Benchmark of the request-log path: build + partition + held-out replay, with time and peak memory.

On ``../shared/datasets/retail-baskets.dat.gz`` (Brijs, Swinnen, Vanhoof & Wets,
"Using association rules for product assortment decisions: a case study",
KDD 1999; via the FIMI repository) the first 70 % of the lines build the key
table and the last 30 % are replayed, k = 8, load imbalance ε = 0.03. Prints
fan-out and load for sharded data (hash vs the workload partition, with and
without the request-net refinement), per-replica LRU hit rates for every
routing policy, the drift figures, and the time and peak memory of each case;
then the same path on a synthetic log (:mod:`partition.workload.synthetic`)
``--scale`` times larger. Each case runs in its own process, so its peak
resident memory is its own. ``--spark`` also checks the Spark co-access build
against the in-memory one on the whole shared log.

    .venv/bin/python jobs/bench_workload.py [--scale 10] [--spark]
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
RETAIL = ROOT.parent / "shared" / "datasets" / "retail-baskets.dat.gz"


def _child(case, path, k, eps, frac, nets, seed):
    from partition.workload.readers import read_log
    from partition.workload.pipeline import partition_workload
    from partition.workload.replay import replay

    t0 = time.perf_counter()
    log = read_log(path)
    t1 = time.perf_counter()
    train, test = log.split(train_fraction=frac)
    table, build = partition_workload(train, k, eps=eps, seed=seed, nets=nets)
    t2 = time.perf_counter()
    rep = replay(train, test, table, k, seed=seed)
    t3 = time.perf_counter()
    rep["case"] = case
    rep["log"] = {"requests": log.n_requests, "keys": log.n_keys, "accesses": int(log.sizes().sum())}
    rep["build"] = build
    rep["seconds"] = {"read": t1 - t0, "build+partition": t2 - t1, "replay": t3 - t2, "total": t3 - t0}
    rep["peak_rss_gib"] = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 2**20
    print(json.dumps(rep, default=str))


def _run(case, path, args, nets=True):
    cmd = [sys.executable, __file__, "--child", case, "--path", str(path), "-k", str(args.k), "--imbalance",
           str(args.imbalance), "--train-fraction", str(args.train_fraction), "--seed", str(args.seed)]
    if not nets:
        cmd.append("--no-net-refine")
    env = dict(os.environ, PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    out = subprocess.run(cmd, check=True, capture_output=True, text=True, env=env).stdout
    return json.loads(out.strip().splitlines()[-1])


def _print(rep):
    from partition.commands.workload import print_replay

    print(f"\n== {rep['case']}: {rep['log']['requests']:,} requests, {rep['log']['keys']:,} keys, "
          f"{rep['log']['accesses']:,} accesses ==")
    print_replay(rep)
    b = rep["build"]
    print(f"co-access graph: {b['coaccess']['edges']:,} edges ({b['coaccess']['large_requests']} requests above "
          f"{b['coaccess']['size_limit']} keys); Σ(λ−1) on training: partitioner {b['nets']['connectivity_before']:,}"
          + (f" → request-net FM {b['nets']['connectivity_after']:,} (cap {b['nets']['cap']:,}, "
             f"{b['nets']['rebalance_moves']:,} rebalancing moves)" if "connectivity_after" in b["nets"] else ""))
    s = rep["seconds"]
    print(f"time: read {s['read']:.1f} s, build + partition {s['build+partition']:.1f} s "
          f"(co-access {b['seconds']['coaccess']:.1f}, partitioner {b['seconds']['partition']:.1f}, "
          f"request nets {b['seconds']['nets']:.1f}), replay {s['replay']:.1f} s; total {s['total']:.1f} s; "
          f"peak memory {rep['peak_rss_gib']:.2f} GiB")


def _synthetic(path, scale, seed):
    from partition.workload.synthetic import library_workload, write_log

    w = library_workload(n_requests=88162 * scale, n_keys=16470 * scale, n_topics=80 * scale, k=8,
                         mean_size=10.3, seed=seed)
    write_log(path, w.log)
    return w


def _spark_check():
    from partition.spark.coaccess import coaccess_frames
    from partition.spark.session import spark_session
    from partition.workload.coaccess import coaccess_pairs
    from partition.workload.readers import read_log

    log = read_log(RETAIL)
    train = log.split(train_fraction=0.7)[0]
    t = time.perf_counter()
    u, v, w, _ = coaccess_pairs(train)
    t_mem = time.perf_counter() - t
    spark = spark_session()
    t = time.perf_counter()
    edges, nodes, _ = coaccess_frames(spark, str(RETAIL), train_fraction=0.7)
    e = edges.toPandas()
    t_spark = time.perf_counter() - t
    same = set(zip(train.keys[u].tolist(), train.keys[v].tolist(), w.tolist())) == \
        set(zip(e.source.tolist(), e.target.tolist(), e.weight.tolist()))
    print(f"\nSpark co-access build on the shared log (first 70 %): {len(e):,} edges in {t_spark:.1f} s "
          f"(in memory {t_mem:.1f} s); equal to the in-memory build: {same}")
    spark.stop()


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("-k", type=int, default=8)
    ap.add_argument("--imbalance", type=float, default=0.03)
    ap.add_argument("--train-fraction", type=float, default=0.7)
    ap.add_argument("--seed", type=int, default=0)
    ap.add_argument("--scale", type=int, default=10, help="synthetic log size as a multiple of the shared log")
    ap.add_argument("--spark", action="store_true", help="also compare the Spark co-access build")
    ap.add_argument("--child", help=argparse.SUPPRESS)
    ap.add_argument("--path", help=argparse.SUPPRESS)
    ap.add_argument("--no-net-refine", action="store_true", help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.child:
        return _child(args.child, args.path, args.k, args.imbalance, args.train_fraction, not args.no_net_refine,
                      args.seed)
    if not RETAIL.exists():
        print(f"{RETAIL} is absent: the shared datasets folder is needed for the benchmark", file=sys.stderr)
        return 1
    print(f"k = {args.k}, ε = {args.imbalance}, first {args.train_fraction:.0%} of the requests build, "
          f"the rest is replayed")
    _print(_run("retail-baskets (Brijs et al., KDD 1999; FIMI), request-net FM under the load cap", RETAIL, args))
    _print(_run("retail-baskets, partitioner only (its balance rule, no request-net step)", RETAIL, args,
                nets=False))
    if args.scale > 0:
        with tempfile.TemporaryDirectory() as tmp:
            path = Path(tmp) / f"library-x{args.scale}.dat"
            t = time.perf_counter()
            _synthetic(path, args.scale, args.seed)
            print(f"\n(synthetic log written in {time.perf_counter() - t:.1f} s, not counted)")
            _print(_run(f"synthetic library log, {args.scale} x the shared log", path, args))
    if args.spark:
        _spark_check()
    return 0


if __name__ == "__main__":
    sys.exit(main())
