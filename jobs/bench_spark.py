"""Benchmark of the Spark engine: stage times and Spark jobs against the I/O floor, and agreement.

In one Spark session (local[2] unless ``--master``):

1. the I/O floor: read the edge list and count degrees (``groupBy``), run twice,
   the second (warm) time kept;
2. the whole distributed job (:func:`partition.spark.engine.run_spark`) on an
   R-MAT graph (Chakrabarti, Zhan & Faloutsos, SDM 2004; ``--scale``, default
   16, edge factor 16), with per-stage seconds, the Spark jobs each stage
   started (job ids of the session's job group before and after, from the
   status tracker), the stage time as a multiple of the floor and the peak
   resident memory of the whole process tree (sampled with psutil);
3. with ``--star N``: skew — one hub with N leaves (default 1,000,000) plus a
   50-clique hanging off it, partitioned in distributed mode (k = 8); prints
   the stage times, whether the shards equal the in-memory engine's, and the
   peak resident memory of the driver and of the Spark JVM (``local``: the
   executors live in it; read from ``/proc``);
4. with ``--agreement``: every graph of the shared datasets folder (or those
   named by ``--graphs``) partitioned by both engines in distributed mode
   (in memory: ``starts=("hierarchy",)``, ``refine=UNIT_STEPS``); prints
   whether the shards are identical, the times and the cut fraction.

Usage::

    python jobs/bench_spark.py [--scale 16] [-k 16] [--agreement] [--graphs 3elt,ca-GrQc] [--skip-rmat]
                               [--star 1000000]
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

from partition.plan import make_plan

ROOT = Path(__file__).resolve().parents[1]
DATASETS = ROOT.parent / "shared" / "datasets"


def floor_pass(spark, path):
    from pyspark.sql import functions as F

    t = time.perf_counter()
    df = spark.read.text(str(path)).filter(~F.col("value").startswith("#"))
    f = F.split(F.trim("value"), r"[\s,]+")
    ends = df.select(f[0].alias("x")).unionByName(df.select(f[1].alias("x")))
    ends.groupBy("x").count().count()
    return time.perf_counter() - t


def bench_rmat(spark, args, work):
    from partition.generators import rmat, write_edgelist
    from partition.spark.engine import run_spark

    src, dst = rmat(args.scale, 16, seed=args.seed)
    path = Path(work) / f"rmat{args.scale}.txt"
    write_edgelist(path, src, dst, comment=f"R-MAT scale {args.scale}, edge factor 16, seed {args.seed}")
    sc = spark.sparkContext
    sc.setJobGroup("shardline-bench", "benchmark")
    floor_pass(spark, path)
    floor = floor_pass(spark, path)
    seen = [len(sc.statusTracker().getJobIdsForGroup("shardline-bench"))]
    rows = []

    def progress(row):
        jobs = len(sc.statusTracker().getJobIdsForGroup("shardline-bench"))
        if "seconds" in row and not str(row.get("stage", "")).startswith(("fm round", "swaps round", "window round")):
            rows.append((row["stage"], row["seconds"], jobs - seen[0]))
            seen[0] = jobs
        print("  " + str(row), file=sys.stderr, flush=True)

    t = time.perf_counter()
    with TreePeak() as mem:
        rep = run_spark(str(path), make_plan(args.k, 0.0, args.seed, engine="spark"), work_dir=Path(work) / "run",
                        output=Path(work) / "out", progress=progress, spark=spark)
    total = time.perf_counter() - t
    print(f"\nR-MAT scale {args.scale}: n = {rep['graph']['nodes']}, m = {rep['graph']['edges']}, k = {args.k}, "
          f"cut fraction {rep['cut_fraction']}, balanced {rep['balance']['balanced']}")
    print(f"I/O floor (warm read + degree count): {floor:.2f} s")
    print(f"{'stage':<34} {'seconds':>9} {'jobs':>6} {'x floor':>8}")
    for name, sec, jobs in rows:
        print(f"{name:<34} {sec:>9.2f} {jobs:>6} {sec / floor:>8.1f}")
    print(f"{'whole job (wall)':<34} {total:>9.2f} {'':>6} {total / floor:>8.1f}")
    print(f"peak resident memory of the process tree (driver, Spark JVM, Python workers): {mem.peak / 2**30:.2f} GiB "
          f"(JVM alone {mem.peak_jvm / 2**30:.2f} GiB)")


def _peak_rss_mb(pid="self"):
    """Peak resident set (VmHWM) of a process in MB, from ``/proc``; None where unavailable."""
    try:
        for line in Path(f"/proc/{pid}/status").read_text().splitlines():
            if line.startswith("VmHWM:"):
                return int(line.split()[1]) / 1024
    except OSError:
        return None
    return None


class TreePeak:
    """Peak resident memory of this process and all its descendants (Spark JVM, Python workers), sampled twice a second."""

    def __init__(self):
        import threading

        self.peak = self.peak_jvm = 0
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._run, daemon=True)

    def _run(self):
        import psutil

        me = psutil.Process()
        while not self._stop.is_set():
            total = 0
            for p in [me] + me.children(recursive=True):
                try:
                    rss = p.memory_info().rss
                    total += rss
                    if p.name().startswith("java"):
                        self.peak_jvm = max(self.peak_jvm, rss)
                except psutil.Error:
                    pass
            self.peak = max(self.peak, total)
            self._stop.wait(0.5)

    def __enter__(self):
        self._thread.start()
        return self

    def __exit__(self, *exc):
        self._stop.set()
        self._thread.join()


def _jvm_pid():
    import subprocess

    out = subprocess.run(["pgrep", "-f", "org.apache.spark.deploy.SparkSubmit"], capture_output=True, text=True)
    pids = [int(x) for x in out.stdout.split()]
    return max(pids) if pids else None


def bench_star(spark, args, work):
    from partition.edgelist import read_graph
    from partition.generators import write_edgelist
    from partition.partitioner import partition_graph
    from partition.spark.engine import run_spark
    from partition.plan import UNIT_STEPS

    leaves = args.star
    clique = np.array([(i, j) for i in range(leaves + 1, leaves + 51) for j in range(i + 1, leaves + 51)])
    src = np.concatenate((np.zeros(leaves, dtype=np.int64), clique[:, 0], [0]))
    dst = np.concatenate((np.arange(1, leaves + 1, dtype=np.int64), clique[:, 1], [leaves + 1]))
    path = Path(work) / "star.txt"
    write_edgelist(path, src, dst, comment=f"star with {leaves} leaves and a 50-clique")
    print(f"\nskew: star with {leaves:,} leaves + 50-clique ({src.size:,} edges), k = 8, distributed mode")
    t = time.perf_counter()
    rep = run_spark(str(path), make_plan(8, 0.0, args.seed, engine="spark"), work_dir=Path(work) / "star-run",
                    output=Path(work) / "star-out", spark=spark,
                    progress=lambda row: print("  " + str(row), file=sys.stderr, flush=True))
    total = time.perf_counter() - t
    for row in rep["stages"]:
        print(f"  {row['stage']:<32} {row['seconds']:>9.2f}")
    import pyarrow.parquet as pq

    got = pq.read_table(Path(work) / "star-out").to_pandas().sort_values("node")
    g = read_graph(path)
    ref = partition_graph(g, 8, 0.0, args.seed, starts=("hierarchy",), refine=UNIT_STEPS)
    same = bool(np.array_equal(got["shard"].to_numpy(np.int64), ref.parts[np.searchsorted(g.ids, got["node"])]))
    jvm = _jvm_pid()
    print(f"  whole job {total:.1f} s, cut fraction {rep['cut_fraction']:.4f}, balanced {rep['balance']['balanced']}, "
          f"identical to in-memory {same}; peak RSS driver (python) {_peak_rss_mb():.0f} MB, "
          f"Spark JVM {(_peak_rss_mb(jvm) or float('nan')):.0f} MB")


def bench_agreement(spark, args, work):
    from partition.edgelist import read_graph
    from partition.partitioner import partition_graph
    from partition.spark.engine import partition_spark
    from partition.spark.io import read_graph_df
    from partition.plan import UNIT_STEPS

    files = sorted(p for p in DATASETS.glob("*.txt*"))
    if args.graphs:
        want = set(args.graphs.split(","))
        files = [p for p in files if p.name.split(".")[0] in want]
    print(f"\nagreement, k = {args.agreement_k}, seed {args.seed} (graphs: {DATASETS}, sources in CATALOG.md)")
    print("distributed: Spark units vs in-memory starts=hierarchy, refine=window,fm,swaps; "
          "full: Spark input + driver plan vs in-memory default plan")
    print(f"{'graph':<24} {'n':>8} {'m':>8} {'spark s':>8} {'memory s':>9} {'cut':>8} {'identical':>9} "
          f"{'full s':>7} {'full cut':>8} {'full identical':>14}")
    bad = 0
    for p in files:
        t = time.perf_counter()
        sg = read_graph_df(spark, str(p))
        parts, _, rep = partition_spark(spark, sg, make_plan(args.agreement_k, seed=args.seed, engine="spark"),
                                        work_dir=Path(work) / p.name)
        ts = time.perf_counter() - t
        g = read_graph(p)
        t = time.perf_counter()
        ref = partition_graph(g, args.agreement_k, 0.0, args.seed, starts=("hierarchy",), refine=UNIT_STEPS)
        tm = time.perf_counter() - t
        same = bool(np.array_equal(parts, ref.parts))
        t = time.perf_counter()
        fparts, _, frep = partition_spark(spark, sg, make_plan(args.agreement_k, seed=args.seed, engine="spark",
                                                               mode="full"), work_dir=Path(work) / (p.name + "-full"))
        tf = time.perf_counter() - t
        fsame = bool(np.array_equal(fparts, partition_graph(g, args.agreement_k, 0.0, args.seed).parts))
        bad += (not same) + (not fsame)
        print(f"{p.name.split('.')[0]:<24} {sg.n:>8} {sg.m:>8} {ts:>8.1f} {tm:>9.2f} {rep['cut_fraction']:>8.4f} "
              f"{str(same):>9} {tf:>7.1f} {frep['cut'] / sg.m:>8.4f} {str(fsame):>14}", flush=True)
    print(f"graphs: {len(files)}, disagreements: {bad}")
    return bad


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--scale", type=int, default=16)
    ap.add_argument("-k", type=int, default=16)
    ap.add_argument("--seed", type=int, default=0)
    ap.add_argument("--agreement", action="store_true")
    ap.add_argument("--agreement-k", type=int, default=8)
    ap.add_argument("--graphs", default=None, help="comma-separated dataset names (default: all)")
    ap.add_argument("--skip-rmat", action="store_true")
    ap.add_argument("--star", type=int, nargs="?", const=1_000_000, default=None,
                    help="also the skew check: a star with this many leaves (default 1,000,000) plus a clique")
    ap.add_argument("--master", default=None)
    ap.add_argument("--driver-memory", default="4g", help="spark.driver.memory of the local session (default 4g)")
    args = ap.parse_args(argv)
    from partition.spark.session import spark_session

    with tempfile.TemporaryDirectory(prefix="bench-spark-") as work:
        spark = spark_session(master=args.master, work_dir=work, driver_memory=args.driver_memory)
        if not args.skip_rmat:
            bench_rmat(spark, args, work)
        if args.star:
            bench_star(spark, args, work)
        if args.agreement:
            if not DATASETS.exists():
                print(f"no datasets folder at {DATASETS}; agreement skipped")
            else:
                bench_agreement(spark, args, work)
        spark.stop()


if __name__ == "__main__":
    main()
