"""spark-submit entry point of the Spark engine: the options of ``shardline run``, then the library.

Usage::

    spark-submit jobs/spark_partition.py GRAPH -k K [--imbalance EPS] [--seed S] -o OUT
        [--report R] [--mode distributed|full] [--work-dir DIR] [--resume] [--csv]
        [the input options of shardline run: --format, --weight-column, --no-header, ...]

Progress goes to standard error, one line per stage and hierarchy round.
"""

from __future__ import annotations

import argparse
import json
import sys

from partition.affinity import DEFAULT_HUB_CAP, METHODS
from partition.commands.common import add_graph_arguments
from partition.errors import ShardlineError
from partition.rules import LINKAGES


def main(argv=None):
    ap = argparse.ArgumentParser(prog="spark_partition", description=__doc__.splitlines()[0])
    add_graph_arguments(ap)  # the input options of every shardline command
    ap.add_argument("-k", "--shards", dest="k", type=int, required=True)
    ap.add_argument("--imbalance", type=float, default=0.0)
    ap.add_argument("--seed", type=int, default=0)
    ap.add_argument("-o", "--output", required=True, help="folder for the id,shard table")
    ap.add_argument("--report", help="JSON report path (default: OUTPUT.report.json)")
    ap.add_argument("--affinity", choices=METHODS, default="jaccard")
    ap.add_argument("--linkage", choices=LINKAGES, default="sum")
    ap.add_argument("--hub-cap", type=int, default=DEFAULT_HUB_CAP)
    ap.add_argument("--mode", choices=["distributed", "full"], default="distributed")
    ap.add_argument("--csv", action="store_true", help="write CSV instead of Parquet")
    ap.add_argument("--work-dir", help="checkpoints (needed for --resume)")
    ap.add_argument("--resume", action="store_true", help="continue an interrupted run in --work-dir")
    ap.add_argument("--collect-edges", type=int, default=None,
                    help="finish the hierarchy on the driver below this many coarse edges")
    ap.add_argument("--master", default=None)
    ap.add_argument("--quiet", action="store_true")
    args = ap.parse_args(argv)
    from partition.spark.engine import run_spark

    def progress(row):
        if not args.quiet:
            print("shardline: " + json.dumps(row), file=sys.stderr, flush=True)

    try:
        rep = run_spark(args.graph, args.k, args.imbalance, args.seed, affinity=args.affinity,
                        linkage=args.linkage, hub_cap=args.hub_cap, mode=args.mode, weighted=args.weighted,
                        node_weights=args.node_weights, allow_isolated=args.allow_isolated, master=args.master,
                        output=args.output, output_format="csv" if args.csv else "parquet",
                        report=args.report or args.output.rstrip("/") + ".report.json", work_dir=args.work_dir,
                        resume=args.resume, collect_edges=args.collect_edges, progress=progress,
                        fmt=args.graph_format, source_column=args.source_column, target_column=args.target_column,
                        weight_column=args.weight_column, header=args.header, delimiter=args.delimiter)
    except ShardlineError as exc:
        print(f"spark_partition: error: {exc}", file=sys.stderr)
        return 2
    print(json.dumps({"cut": rep["cut"], "balanced": rep["balance"]["balanced"], "output": rep["output"]}))
    return 0


if __name__ == "__main__":
    sys.exit(main())
