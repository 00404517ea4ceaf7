"""``shardline run``: the main job — a balanced k-way partition by linear embedding."""

from __future__ import annotations

import json
import os
import sys
import time

from partition import __version__
from partition.commands.common import add_graph_arguments, add_shared, graph_from_args
from partition.errors import ParameterError, check_parts

NAME = "run"
HELP = "partition a graph into k balanced shards with few cut edges (the main job)"
EXAMPLE = ("shardline run rides.csv.gz --weight-column rides -k 8 --imbalance 0.03 --seed 1 -o docks-to-shards.csv\n"
           "  (writes docks-to-shards.csv, node,shard rows, and docks-to-shards.csv.report.json)")


def add_arguments(parser):
    from partition.outputs import REPORT, TABLE, TABLE_OR_FOLDER, declare_outputs
    from partition.rules import AFFINITIES, DEFAULT_HUB_CAP, LINKAGES

    declare_outputs(parser, output=TABLE_OR_FOLDER, report=REPORT, order_output=TABLE_OR_FOLDER,
                    hierarchy_output=TABLE)

    add_graph_arguments(parser)
    add_shared(parser, "shards", "imbalance", "seed")
    parser.add_argument("-o", "--output", required=True,
                        help="node→shard file to write (.csv, .tsv, .parquet; .gz for text)")
    parser.add_argument("--report", help="JSON report path (default: OUTPUT.report.json)")
    parser.add_argument("--order-output", help="also write the linear order (node, position)")
    parser.add_argument("--hierarchy-output", help="also write the hierarchy (node, level, cluster)")
    parser.add_argument("--previous", metavar="OLD",
                        help="current node→shard file: rename the new shards to keep the most nodes in place "
                             "(shard ids ≥ K are drained)")
    add_shared(parser, "move_cost")
    algo = parser.add_argument_group("method")
    algo.add_argument("--affinity", choices=AFFINITIES, default="jaccard",
                      help="edge affinity for the hierarchy (default jaccard)")
    algo.add_argument("--linkage", choices=LINKAGES, default="sum", help="how merged edges combine (default sum)")
    algo.add_argument("--hub-cap", type=int, default=DEFAULT_HUB_CAP,
                      help=f"nodes of larger degree add no common-neighbour wedges (default {DEFAULT_HUB_CAP})")
    algo.add_argument("--starts", default="auto",
                      help="linear orders to cut and refine: auto, or a comma list of hierarchy,spectral")
    algo.add_argument("--refine", default="default",
                      help="refinement steps: default, none, or a comma list of window,multilevel,fm,swaps,kway")
    spark = parser.add_argument_group("engine")
    spark.add_argument("--engine", choices=["auto", "memory", "spark"], default="auto",
                       help="where to run (default auto: in memory when the graph fits this machine, else Spark)")
    spark.add_argument("--master", help="Spark master URL (default local[2]; spark://HOST:PORT, yarn, ...)")
    spark.add_argument("--mode", choices=["distributed", "full"], default="distributed",
                       help="Spark engine: distributed (edges stay in Spark) or full (the in-memory plan on the "
                            "driver after a distributed read)")
    spark.add_argument("--work-dir", help="Spark engine: checkpoint folder (needed for --resume)")
    spark.add_argument("--resume", action="store_true", help="Spark engine: continue an interrupted run")
    spark.add_argument("--collect-edges", type=int, metavar="M",
                       help="Spark engine: finish the hierarchy on the driver once at most M coarse edges are left "
                            "(default: the engine's budget)")
    add_shared(parser, "json", "quiet")


def run(args) -> int:
    from partition.assignment import write_assignment
    from partition.partitioner import run_memory
    from partition.score import score
    from partition.placement.export import file_sha256
    from partition.outputs import TABLE
    from partition.tables import hierarchy_table, order_table, write_table

    from partition.errors import check_move_cost

    check_move_cost(args.move_cost)
    if args.hub_cap < 1:
        raise ParameterError(f"--hub-cap must be at least 1, got {args.hub_cap}")
    report_path = args.report or f"{args.output}.report.json"
    from partition.progress import progress_for

    progress = progress_for(args.quiet)
    engine = args.engine
    if engine == "auto":
        from partition.sizing import fits_driver

        # a missing local file goes to the in-memory reader, which names it in its error
        engine = "memory" if not os.path.exists(args.graph) or fits_driver(args.graph) else "spark"
        if progress and engine == "spark":
            progress.line("engine auto: Spark (the graph is too large for this machine's memory)")
    plan = plan_from_args(args, engine)
    k = plan.k
    if engine == "spark":
        return _run_spark(args, plan, report_path, progress)
    for flag, path in (("-o", args.output), ("--order-output", args.order_output)):
        if path is not None and os.path.isdir(path):
            raise ParameterError(f"{flag} {path} is an existing directory; the in-memory engine writes a table file")
        if path is not None and not str(path).lower().endswith(TABLE.extensions):
            raise ParameterError(f"{flag} {path}: the in-memory engine writes a table file, so the name must end "
                                 f"in {', '.join(TABLE.extensions)} (a name without one is a Parquet folder of the "
                                 "Spark engine)")
    t0 = time.perf_counter()
    graph = graph_from_args(args)
    read_seconds = time.perf_counter() - t0
    check_parts(k, graph.n)
    if progress:
        progress.line(f"read {graph.n:,} nodes, {graph.m:,} edges in {read_seconds:.2f} s; engine: in memory")
    try:
        result = run_memory(graph, plan, progress)
    finally:
        if progress:
            progress.close()
    t_out = time.perf_counter()
    stability = None
    if args.previous:
        from partition.assignment import read_assignment
        from partition.balance import balance_rule
        from partition.placement.stable import stabilise

        old = read_assignment(args.previous, graph)
        rule = balance_rule(graph.node_weights, k, args.imbalance, n_nodes=graph.n)
        result.parts, stability = stabilise(graph, result.parts, old, k, rule, move_cost=args.move_cost,
                                            seed=args.seed)
    figures = score(graph, result.parts, k=k, eps=args.imbalance).to_dict()
    report = {
        "tool": f"shardline {__version__}",
        "input": {"graph": str(args.graph), "nodes": graph.n, "edges": graph.m,
                  "weighted_edges": graph.weighted, "weighted_nodes": graph.node_weights is not None,
                  "sha256": file_sha256(args.graph), "read_seconds": round(read_seconds, 4)},
        **result.report,
        "result": figures,
        "stability": stability,
        "outputs": {"assignment": str(args.output), "report": str(report_path),
                    "order": args.order_output, "hierarchy": args.hierarchy_output},
    }
    from partition.atomic import atomic_paths

    # Every output is written to a temporary file first; all are renamed into
    # place only after all of them were written (no partial output on error).
    with atomic_paths([args.output, report_path, args.order_output, args.hierarchy_output]) as tmp:
        write_assignment(tmp[0], graph, result.parts)
        if tmp[2] is not None:
            write_table(tmp[2], order_table(graph, result.order))
        if tmp[3] is not None:
            write_table(tmp[3], hierarchy_table(graph, result.hierarchy))
        # the report names its outputs' checksums: a reader never pairs this report with another run's output
        report["outputs"]["sha256"] = {name: None if path is None else file_sha256(path)
                                       for name, path in (("assignment", tmp[0]), ("order", tmp[2]),
                                                          ("hierarchy", tmp[3]))}
        with open(tmp[1], "w", encoding="utf-8") as fh:
            fh.write(json.dumps(report, indent=2, sort_keys=True) + "\n")
    if progress:
        progress.line(f"scored and wrote {args.output} in {time.perf_counter() - t_out:.2f} s")
    if args.json:
        print(json.dumps(report, indent=2, sort_keys=True))
    elif not args.quiet:
        _summary(report)
    return 0


def plan_from_args(args, engine):
    """The run's :class:`~partition.plan.Plan` from its options (checked before anything is read)."""
    from partition.plan import make_plan

    return make_plan(args.k, args.imbalance, args.seed, affinity=args.affinity, linkage=args.linkage,
                     hub_cap=args.hub_cap, starts=args.starts, refine=args.refine, engine=engine, mode=args.mode,
                     collect_edges=args.collect_edges)


def _run_spark(args, plan, report_path, progress):
    from partition.commands.common import read_options
    from partition.spark.engine import run_spark

    if args.previous or args.hierarchy_output:
        raise ParameterError("--previous and --hierarchy-output need --engine memory for now")
    lower = str(args.output).lower()
    try:
        rep = run_spark(args.graph, plan, read_options(args), output=args.output,
                        output_format="csv" if lower.endswith(".csv") else "parquet",
                        order_output=args.order_output, report=report_path, work_dir=args.work_dir,
                        resume=args.resume, master=args.master, progress=progress)
    finally:
        if progress:
            progress.close()
    if args.json:
        print(json.dumps(rep, indent=2, sort_keys=True, default=str))
    elif not args.quiet:
        _summary(rep)
    return 0


def _summary(report):
    """The run's summary table, the same for both engines (one report schema: ``input``, ``result``, ``starts``)."""
    from rich.console import Console
    from rich.table import Table

    res = report["result"]
    title = f"{report['input']['graph']} → {report['k']} shards"
    if report.get("engine") == "spark":
        title += f" (Spark engine, {report['mode']} mode)"
    table = Table(title=title, show_header=True)
    table.add_column("figure")
    table.add_column("value", justify="right")
    rows = [
        ("nodes / edges", f"{report['input']['nodes']:,} / {report['input']['edges']:,}"),
        ("cut edges", f"{res['cut_edges']:,}"),
        ("cut fraction", f"{res['cut_fraction']:.4f}"),
        ("imbalance (allowed)", f"{res['imbalance']:.4f} ({report['imbalance_allowed']})"),
        ("communication volume", f"{res['communication_volume']:,}"),
        ("fanout", f"{res['fanout']:.3f}"),
        ("start chosen", report["chosen_start"]),
        ("raw line cut → final", ", ".join(f"{s['start']}: {s['raw_cut_fraction']:.4f} → {s['cut_fraction']:.4f}"
                                           for s in report["starts"])),
        ("hierarchy rounds", str(report["hierarchy"]["rounds"])),
        ("seconds", f"{report['seconds']:.2f}"),
        ("written", report["outputs"]["assignment"]),
    ]
    if report.get("stability"):
        rows.insert(-1, ("moved vs --previous", f"{report['stability']['moved_fraction']:.4f}"))
    for a, b in rows:
        table.add_row(a, b)
    Console().print(table)
    sys.stdout.flush()
