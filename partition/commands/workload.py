"""``shardline workload``: from a request log to shards, routing tables and a held-out replay.

Actions: ``coaccess`` (write the co-access graph as an edge list and a
node-weights file that ``shardline run`` reads), ``partition`` (key → shard
table for the workload), ``route`` (request → replica table), ``replay``
(held-out fan-out, load and cache hits of every routing policy) and ``synth``
(a seeded synthetic log of an invented scenario).
"""

from __future__ import annotations

import json
import sys
import time

from partition.commands.common import add_shared
from partition.errors import ParameterError

NAME = "workload"
HELP = "request logs: co-access graphs, workload partitions, routing tables and held-out replay"
EXAMPLE = "shardline workload replay baskets.dat.gz -k 8 --train-fraction 0.7 -o replay.json"
EXAMPLES = {
    "coaccess": "shardline workload coaccess baskets.dat.gz -o coaccess.csv --node-weights-output loads.csv",
    "partition": "shardline workload partition baskets.dat.gz -k 8 --imbalance 0.03 -o keys-to-shards.csv",
    "route": "shardline workload route baskets.dat.gz --table keys-to-shards.csv -k 8 -o requests-to-shards.csv",
    "replay": EXAMPLE,
    "synth": "shardline workload synth -o reading-sessions.dat.gz --planted-output planted.csv",
}


def _log_arguments(p, split=True):
    p.add_argument("log", metavar="LOG", help="request log: basket text (one request per line), CSV/TSV long rows "
                   "(request,key[,time]), Parquet (long rows or a list column) or JSONL; .gz/.bz2 allowed")
    g = p.add_argument_group("log input")
    g.add_argument("--log-format", default="auto", choices=["auto", "basket", "long", "parquet", "jsonl"],
                   help="input format (default: by file name; basket unless .csv/.tsv/.parquet/.jsonl)")
    g.add_argument("--request-column", help="long rows: the request column (default: the first)")
    g.add_argument("--key-column", help="long rows: the key column (default: the second); list formats: the "
                   "list column")
    g.add_argument("--time-column", help="the time column (default: a column named 'time', else file order)")
    g.add_argument("--delimiter", help="long rows: field delimiter (default: tab for .tsv, else comma)")
    if split:
        s = g.add_mutually_exclusive_group()
        s.add_argument("--train-fraction", type=float, help="build on the first FRACTION of the requests "
                       "(in time order)")
        s.add_argument("--split-time", type=float, help="build on the requests before this time")


def _build_arguments(p):
    g = p.add_argument_group("building the co-access graph")
    g.add_argument("--max-request-keys", type=int, default=100,
                   help="requests with more keys are sampled or skipped (default 100)")
    g.add_argument("--large", choices=["sample", "skip"], default="sample",
                   help="what happens to a request above the limit (default sample: a seeded sample of the "
                        "limit's size forms its clique; both count in the report)")
    g.add_argument("--load-half-life", type=float,
                   help="balance on recency-weighted loads with this half-life (in requests, or time units when "
                        "the log has times); default: plain access counts")


def _partition_arguments(p):
    add_shared(p, "shards", "imbalance_load", "seed")
    g = p.add_argument_group("method")
    g.add_argument("--starts", default="hierarchy", help="partitioner starts (default hierarchy; see shardline run)")
    g.add_argument("--refine", default="default", help="partitioner refinement steps (default: its default plan)")
    g.add_argument("--no-net-refine", action="store_true",
                   help="skip the request-net (connectivity − 1) refinement and its strict load cap")
    _build_arguments(p)


def _action(acts, name, help, description):
    from partition.cli import command_parser

    p = command_parser(acts, None, name, help, EXAMPLES[name])
    p.description = description
    return p


def add_arguments(parser):
    """Add the ``coaccess``, ``partition``, ``route``, ``replay`` and ``synth`` actions."""
    from partition.outputs import JSON, LOG, REPORT, TABLE, declare_outputs

    acts = parser.add_subparsers(dest="workload_action", metavar="ACTION")
    acts.required = True
    co = _action(acts, "coaccess", help="write the co-access graph: edge list + node-weights file",
                         description="Keys become nodes weighted by their access count; two keys of a request of "
                         "s keys are joined with weight 1/(s-1) (in integer units of 1/720720).")
    _log_arguments(co)
    co.add_argument("-o", "--output", required=True, help="edge list to write (source,target,weight; "
                    ".parquet keeps key types, else CSV)")
    co.add_argument("--node-weights-output", required=True, help="node-weights file to write (id,weight)")
    co.add_argument("--engine", choices=["memory", "spark"], default="memory",
                    help="memory (default) or spark (a Spark job for large logs; basket text or Parquet)")
    co.add_argument("--master", help="Spark master URL (default local[2])")
    add_shared(co, "seed", "json", "quiet")
    declare_outputs(co, output=TABLE, node_weights_output=TABLE)
    _build_arguments(co)

    pa_ = _action(acts, "partition", help="a key → shard table for the workload (balanced on load)",
                          description="Build the co-access graph of the (training part of the) log, partition it "
                          "with node weights = load, refine on the requests' fan-out, write key,shard rows.")
    _log_arguments(pa_)
    _partition_arguments(pa_)
    pa_.add_argument("-o", "--output", required=True, help="key→shard file (.csv, .tsv, .parquet; .gz for text)")
    pa_.add_argument("--report", help="JSON report path (default: OUTPUT.report.json)")
    add_shared(pa_, "json", "quiet")
    declare_outputs(pa_, output=TABLE, report=REPORT)

    ro = _action(acts, "route", help="the replica that serves each request (request,shard rows)",
                         description="Route every request of the log (or of its held-out part) by a policy.")
    _log_arguments(ro)
    ro.add_argument("--table", help="key→shard file (needed by the partition policy)")
    add_shared(ro, "shards")
    ro.add_argument("--policy", default="partition", choices=["random", "request-hash", "key-hash", "partition"],
                    help="routing policy (default partition: the shard holding most of the request's keys)")
    add_shared(ro, "seed")
    ro.add_argument("-o", "--output", required=True, help="request→shard file to write")
    add_shared(ro, "json", "quiet")
    declare_outputs(ro, output=TABLE)

    re_ = _action(acts, "replay", help="held-out replay: fan-out, load and LRU hit rates per policy",
                          description="Build a key table on the first part of the log (or read --table), replay "
                          "the rest: fan-out and load for sharded data, per-replica LRU hit rates for replicated "
                          "data, and the keys never seen in the training part.")
    _log_arguments(re_)
    _partition_arguments(re_)
    re_.add_argument("--table", help="use this key→shard file instead of building one")
    re_.add_argument("--cache-fractions", default="0.005,0.01,0.02,0.05",
                     help="cache sizes per replica as fractions of the distinct keys (default 0.005,0.01,0.02,0.05)")
    re_.add_argument("--table-output", help="also write the key→shard table (built plus online-placed keys)")
    re_.add_argument("-o", "--output", help="JSON report to write")
    add_shared(re_, "json", "quiet")
    declare_outputs(re_, output=JSON, table_output=TABLE)

    sy = _action(acts, "synth", help="write a seeded synthetic log (an invented library's reading sessions)",
                         description="Topics with Zipf popularity, slow drift and one burst; also writes the "
                         "planted key→shard table, the known best routing.")
    sy.add_argument("-o", "--output", required=True, help="log to write (basket text, .gz, or .jsonl)")
    sy.add_argument("--planted-output", help="key→shard file of the planted routing")
    sy.add_argument("--requests", type=int, default=20000, help="number of requests (default 20000)")
    sy.add_argument("--keys", type=int, default=5000, help="number of keys (default 5000)")
    sy.add_argument("--topics", type=int, default=40, help="number of topics (default 40)")
    add_shared(sy, "shards_planted")
    sy.add_argument("--mean-size", type=float, default=6.0, help="mean request size (default 6)")
    add_shared(sy, "seed", "json", "quiet")
    declare_outputs(sy, output=LOG, planted_output=TABLE)


def run(args) -> int:
    """Carry out one ``workload`` action; returns the exit status."""
    return {"coaccess": _coaccess, "partition": _partition, "route": _route, "replay": _replay,
            "synth": _synth}[args.workload_action](args)


def _read(args):
    from partition.workload.readers import read_log

    return read_log(args.log, fmt=args.log_format, request_column=args.request_column, key_column=args.key_column,
                    time_column=args.time_column, delimiter=args.delimiter)


def _train_part(args, log, required=False):
    frac, when = getattr(args, "train_fraction", None), getattr(args, "split_time", None)
    if frac is None and when is None:
        if required:
            frac = 0.7
        else:
            return log, None
    return log.split(train_fraction=frac, split_time=when)


def _check_k(args):
    if args.k < 1:
        raise ParameterError(f"k must be at least 1, got {args.k}")


class _Lines:
    """Progress on standard error: one line per finished stage or refinement pass."""

    def __call__(self, row):
        if "plan" in row:
            return
        rest = "  ".join(f"{k} {v:,}" if isinstance(v, int) else f"{k} {v}" for k, v in row.items()
                         if k not in ("stage", "seconds") and not isinstance(v, (list, dict)))
        took = f"{row['seconds']:8.2f} s  " if "seconds" in row else " " * 12
        print(f"shardline {row.get('stage', ''):<28} {took}{rest}", file=sys.stderr, flush=True)

    def close(self):
        pass


def _progress(args):
    return None if getattr(args, "quiet", False) else _Lines()


def _coaccess(args):
    from partition.atomic import atomic_paths

    if args.engine == "spark":
        from partition.spark.coaccess import spark_coaccess

        if args.load_half_life is not None:
            raise ParameterError("--load-half-life needs --engine memory for now")
        frac = args.train_fraction
        if args.split_time is not None:
            raise ParameterError("--split-time needs --engine memory for now; use --train-fraction")
        report = spark_coaccess(args.log, args.output, args.node_weights_output, max_keys=args.max_request_keys,
                                large=args.large, seed=args.seed, train_fraction=frac, master=args.master)
    else:
        from partition.workload.coaccess import coaccess_graph, write_coaccess

        train, _ = _train_part(args, _read(args))
        ca = coaccess_graph(train, max_keys=args.max_request_keys, large=args.large, seed=args.seed,
                            half_life=args.load_half_life)
        with atomic_paths([args.output, args.node_weights_output]) as tmp:
            write_coaccess(ca.graph, tmp[0], tmp[1])
        report = ca.report
    report["outputs"] = {"edges": args.output, "node_weights": args.node_weights_output}
    if args.json:
        print(json.dumps(report, indent=2, sort_keys=True))
    elif not args.quiet:
        _table("co-access graph of " + str(args.log), [
            ("requests / keys", f"{report['requests']:,} / {report['keys']:,}"),
            ("edges", f"{report['edges']:,}"),
            (f"requests above {report['size_limit']} keys", f"{report['large_requests']:,} ({report['large_policy']})"),
            ("written", f"{args.output}, {args.node_weights_output}"),
            ("next", f"shardline run {args.output} --weight-column weight --node-weights "
                     f"{args.node_weights_output} --allow-isolated -k K -o OUT"),
        ])
    return 0


def _build(args, train, progress):
    from partition.workload.pipeline import partition_workload

    _check_k(args)
    return partition_workload(train, args.k, eps=args.imbalance, seed=args.seed, max_keys=args.max_request_keys,
                              large=args.large, half_life=args.load_half_life, starts=args.starts,
                              refine=args.refine, nets=not args.no_net_refine, progress=progress)


def _partition(args):
    from partition.atomic import atomic_paths
    from partition.workload.tables import write_key_table

    train, _ = _train_part(args, _read(args))
    progress = _progress(args)
    t = time.perf_counter()
    try:
        table, report = _build(args, train, progress)
    finally:
        if progress:
            progress.close()
    report.update({"log": str(args.log), "train_requests": train.n_requests, "seconds_total":
                   round(time.perf_counter() - t, 3), "outputs": {"table": args.output}})
    report_path = args.report or f"{args.output}.report.json"
    with atomic_paths([args.output, report_path]) as tmp:
        write_key_table(tmp[0], train.keys, table)
        with open(tmp[1], "w", encoding="utf-8") as fh:
            fh.write(json.dumps(report, indent=2, sort_keys=True, default=str) + "\n")
    if args.json:
        print(json.dumps(report, indent=2, sort_keys=True, default=str))
    elif not args.quiet:
        nets = report["nets"]
        _table(f"{args.log} → {args.k} shards (workload)", [
            ("requests / keys (training)", f"{train.n_requests:,} / {report['coaccess']['keys']:,}"),
            ("co-access edges", f"{report['coaccess']['edges']:,}"),
            ("Σ(λ−1) partition → nets", f"{nets['connectivity_before']:,} → {nets.get('connectivity_after', '-')}"),
            ("load max/mean (training)", f"{report['train_load_max_over_mean']:.4f}"),
            ("seconds", f"{report['seconds_total']:.2f}"),
            ("written", f"{args.output} and its report"),
        ])
    return 0


def _route(args):
    from partition.workload.routing import place_unseen, route
    from partition.workload.tables import read_key_table, write_routes

    _check_k(args)
    log = _read(args)
    _, part = _train_part(args, log)
    part = part if part is not None else log
    table = None
    if args.policy == "partition":
        if not args.table:
            raise ParameterError("the partition policy needs --table KEYS_TO_SHARDS")
        table, _ = place_unseen(part, read_key_table(args.table, log, args.k), args.k, args.seed)
    write_routes(args.output, route(part, args.policy, args.k, table=table, seed=args.seed))
    if args.json:
        print(json.dumps({"requests": part.n_requests, "policy": args.policy, "k": args.k, "output": args.output},
                         indent=2, sort_keys=True))
    elif not args.quiet:
        print(f"routed {part.n_requests:,} requests by {args.policy} → {args.output}")
    return 0


def _replay(args):
    from partition.workload.replay import replay
    from partition.workload.tables import read_key_table, write_key_table

    log = _read(args)
    train, test = _train_part(args, log, required=True)
    try:
        fractions = [float(x) for x in args.cache_fractions.split(",") if x.strip()]
    except ValueError:
        raise ParameterError(f"--cache-fractions must be numbers, got {args.cache_fractions!r}") from None
    if not fractions or any(not 0 < f < 1 for f in fractions):
        raise ParameterError("every cache fraction must be between 0 and 1")
    progress = _progress(args)
    t0 = time.perf_counter()
    try:
        if args.table:
            _check_k(args)
            table, build = read_key_table(args.table, log, args.k), {"table": args.table}
        else:
            table, build = _build(args, train, progress)
        t1 = time.perf_counter()
        report = replay(train, test, table, args.k, cache_fractions=fractions, seed=args.seed)
    finally:
        if progress:
            progress.close()
    report["build"] = build
    report["seconds"] = {"build": round(t1 - t0, 3), "replay": round(time.perf_counter() - t1, 3)}
    report["log"] = str(args.log)
    from partition.atomic import atomic_paths

    with atomic_paths([args.output, args.table_output]) as tmp:
        if tmp[0]:
            with open(tmp[0], "w", encoding="utf-8") as fh:
                fh.write(json.dumps(report, indent=2, sort_keys=True, default=str) + "\n")
        if tmp[1]:
            from partition.workload.routing import place_unseen

            write_key_table(tmp[1], log.keys, place_unseen(test, table, args.k, args.seed)[0])
    if args.json:
        print(json.dumps(report, indent=2, sort_keys=True, default=str))
    elif not args.quiet:
        print_replay(report)
    return 0


def print_replay(report, file=None):
    """The readable summary of a replay report (sharded and replicated tables, drift)."""
    from rich.console import Console
    from rich.table import Table

    console = Console(file=file or sys.stdout, width=120)
    t = Table(title=f"held-out replay: {report['held_out_requests']:,} requests after {report['train_requests']:,}, "
              f"k = {report['k']} (sharded data)")
    for c in ("key table", "mean fan-out", "p50", "p99", "single-shard", "load max/mean held-out", "(training)"):
        t.add_column(c, justify="right")
    for name, row in report["sharded"].items():
        t.add_row(name, f"{row['mean']:.3f}", f"{row['p50']:.0f}", f"{row['p99']:.0f}", f"{row['single_shard']:.4f}",
                  f"{row['load_max_over_mean']:.3f}", f"{row['train_load_max_over_mean']:.3f}")
    console.print(t)
    sizes = report["cache_sizes"]
    t = Table(title="replicated data: per-replica LRU hit rate (cache = fraction of the distinct keys)")
    t.add_column("routing")
    for frac, cap in sizes.items():
        t.add_column(f"C = {float(frac) * 100:g} % ({cap})", justify="right")
    t.add_column("requests max/mean", justify="right")
    for name, row in report["replicated"].items():
        t.add_row(name, *[f"{row['hit_rate'][f]:.4f}" for f in sizes], f"{row['request_load_max_over_mean']:.3f}")
    console.print(t)
    d = report["drift"]
    console.print(f"drift: {d['unseen_keys']:,} of {d['held_out_keys']:,} held-out keys never seen in training "
                  f"({d['unseen_access_share']:.2%} of accesses, in {d['requests_with_unseen_keys']:.2%} of requests); "
                  f"placed online: {d['rule']}")


def _synth(args):
    from partition.workload.synthetic import library_workload, write_log
    from partition.workload.tables import write_key_table

    from partition.atomic import atomic_paths

    w = library_workload(n_requests=args.requests, n_keys=args.keys, n_topics=args.topics, k=args.k,
                         mean_size=args.mean_size, seed=args.seed)
    with atomic_paths([args.output, args.planted_output]) as tmp:
        write_log(tmp[0], w.log)
        if tmp[1]:
            write_key_table(tmp[1], w.log.keys, w.planted)
    if args.json:
        print(json.dumps({"requests": w.log.n_requests, "keys": w.log.n_keys, "output": args.output,
                          "planted_output": args.planted_output}, indent=2, sort_keys=True))
    elif not args.quiet:
        print(f"wrote {w.log.n_requests:,} requests over {w.log.n_keys:,} keys to {args.output}"
              + (f"; planted table {args.planted_output}" if args.planted_output else ""))
    return 0


def _table(title, rows):
    from rich.console import Console
    from rich.table import Table

    t = Table(title=title)
    t.add_column("figure")
    t.add_column("value", justify="right")
    for a, b in rows:
        t.add_row(a, b)
    Console().print(t)
