"""``shardline recut``: cut the stored linear order of a run into a new number of shards.

``shardline recut ORDER_FILE GRAPH -k K2 -o OUT [--previous OLD]`` reads the
``node,position`` order written by ``shardline run --order-output``, cuts it
into ``K2`` pieces of equal weight, refines the cut (window DP, then pairwise
rounds, keeping every shard between the band floor and the cap unless
``--floor rule``), and with ``--previous`` renames the shards to match the current
placement and lets the rounds weigh each move at ``--move-cost`` (see
:mod:`partition.placement.recut` and :mod:`partition.placement.stable`).
Writes ``OUT`` (node→shard) and ``OUT.report.json`` atomically and prints the
cut and, with ``--previous``, the moved fraction.
"""

from __future__ import annotations

import json

from partition import __version__
from partition.commands.common import add_graph_arguments, add_shared, graph_from_args
from partition.errors import check_imbalance, check_parts

NAME = "recut"
HELP = "cut a run's stored linear order into a new number of shards, moving few nodes"
EXAMPLE = ("shardline recut order.csv rides.csv.gz --weight-column rides -k 9 --previous docks-to-shards.csv "
           "-o docks-to-9-shards.csv")


def add_arguments(parser):
    """Add the ``recut`` arguments to ``parser``."""
    from partition.outputs import REPORT, TABLE, declare_outputs

    declare_outputs(parser, output=TABLE, report=REPORT)
    parser.add_argument("order", metavar="ORDER_FILE", help="node,position file from 'shardline run --order-output'")
    add_graph_arguments(parser)
    add_shared(parser, "shards", "imbalance")
    parser.add_argument("--previous", metavar="OLD",
                        help="current node→shard file: rename shards to it and weigh moves (shard ids may be ≥ K)")
    add_shared(parser, "move_cost", "seed")
    parser.add_argument("--floor", choices=("band", "rule"), default="band",
                        help="band: keep every shard at least ⌊(1−ε)W/k⌋ − w_max + 1 so new shards fill up; "
                             "rule: bound only the largest shard, as the balance rule does (default band)")
    parser.add_argument("--no-refine", action="store_true", help="plain line cut (and renaming) only")
    parser.add_argument("-o", "--output", required=True, help="node→shard file to write (.csv, .tsv, .parquet)")
    parser.add_argument("--report", help="JSON report path (default: OUTPUT.report.json)")
    add_shared(parser, "json", "quiet")
    parser.add_argument("--engine", choices=("memory", "spark"), default="memory",
                        help="memory (default) or spark: the edges stay in Spark, the output is a Parquet folder "
                             "(CSV parts for a .csv name); --previous needs memory for now")
    parser.add_argument("--master", help="--engine spark: Spark master URL (default local[2])")


def run(args) -> int:
    """Re-cut, write the assignment and the report, print a summary."""
    from partition.assignment import read_assignment, write_assignment
    from partition.placement.recut import read_order, recut
    from partition.errors import check_move_cost
    from partition.score import score

    eps = check_imbalance(args.imbalance)
    k = check_parts(args.k)
    check_move_cost(args.move_cost)
    report_path = args.report or f"{args.output}.report.json"
    if args.engine == "spark":
        return _run_spark(args, k, eps, report_path)
    graph = graph_from_args(args)
    check_parts(k, graph.n)
    order = read_order(args.order, graph)
    previous = read_assignment(args.previous, graph) if args.previous else None
    parts, stats = recut(graph, order, k, eps=eps, previous=previous, move_cost=args.move_cost,
                         seed=args.seed, refine=not args.no_refine, floor=args.floor)
    figures = score(graph, parts, k=k, eps=eps).to_dict()
    report = {
        "tool": f"shardline {__version__}",
        "input": {"graph": str(args.graph), "nodes": graph.n, "edges": graph.m,
                  "weighted_edges": graph.weighted, "weighted_nodes": graph.node_weights is not None,
                  "order": str(args.order), "previous": args.previous},
        "engine": "memory",
        "k": k,
        "imbalance_allowed": eps,
        "seed": args.seed,
        "options": {"method": "recut", "move_cost": args.move_cost if args.previous else None,
                    "refine": not args.no_refine, "floor": args.floor},
        "recut": {key: value for key, value in stats.items() if key != "stability"},
        "stability": stats.get("stability"),  # where run's report has it
        "result": figures,
        "outputs": {"assignment": str(args.output), "report": str(report_path)},
    }
    from partition.atomic import atomic_paths
    from partition.placement.export import file_sha256

    with atomic_paths([args.output, report_path]) as tmp:  # both or neither
        write_assignment(tmp[0], graph, parts)
        report["outputs"]["sha256"] = {"assignment": file_sha256(tmp[0])}
        with open(tmp[1], "w", encoding="utf-8") as fh:
            fh.write(json.dumps(report, indent=2, sort_keys=True) + "\n")
    if args.json:
        print(json.dumps(report, indent=2, sort_keys=True))
        return 0
    if args.quiet:
        return 0
    from rich.console import Console
    from rich.table import Table

    table = Table(title=f"{args.order} → {k} shards")
    table.add_column("figure")
    table.add_column("value", justify="right")
    rows = [
        ("nodes / edges", f"{graph.n:,} / {graph.m:,}"),
        ("cut fraction: line → window → final", " → ".join(
            f"{c / max(graph.total_edge_weight(), 1e-300):.4f}" for c in (stats["cut_line"], stats["cut_window"], stats["cut"]))),
        ("imbalance (allowed)", f"{figures['imbalance']:.4f} ({eps})"),
        ("smallest / largest shard", f"{stats['min_load']:,} / {stats['max_load']:,} (floor {stats['floor']:,})"),
    ]
    st = stats.get("stability")
    if st is not None:
        rows += [
            ("previous shards", f"{st['previous_k']:,}" + (f" ({len(st['drained_shards'])} drained)" if st["drained_shards"] else "")),
            ("moved fraction: renamed → final", f"{st['moved_fraction_renamed']:.4f} → {st['moved_fraction']:.4f}"),
            ("moved nodes", f"{st['moved_nodes']:,}"),
            ("move cost", f"{st['move_cost']}"),
        ]
    rows.append(("written", str(args.output)))
    for a, b in rows:
        table.add_row(a, b)
    Console().print(table)
    return 0


def _run_spark(args, k, eps, report_path):
    """The Spark path: read the graph and the order with Spark, re-cut, write the folder and the report."""
    import tempfile

    from partition.atomic import write_text
    from partition.errors import ParameterError
    from partition.placement.export import file_sha256
    from partition.spark.figures import result_figures
    from partition.spark.io import read_graph_df
    from partition.spark.recut import read_order_df, recut_spark
    from partition.spark.session import spark_session
    from partition.spark.tables import write_assignment
    import os

    if args.previous:
        raise ParameterError("--previous needs --engine memory for now (its move-cost rounds run in memory only)")
    spark = spark_session(master=args.master, work_dir=tempfile.mkdtemp(prefix="shardline-recut-"))
    sg = read_graph_df(spark, args.graph, fmt=args.graph_format, weighted=args.weighted,
                       source_column=args.source_column, target_column=args.target_column,
                       weight_column=args.weight_column, node_weights=args.node_weights,
                       allow_isolated=args.allow_isolated, header=args.header, delimiter=args.delimiter)
    check_parts(k, sg.n)
    order = read_order_df(spark, args.order, sg)
    parts, stats = recut_spark(spark, sg, order, k, eps=eps, seed=args.seed, refine=not args.no_refine,
                               floor=args.floor)
    figures = result_figures(spark, sg, parts, k)
    report = {
        "tool": f"shardline {__version__}",
        "input": {"graph": str(args.graph), "nodes": sg.n, "edges": sg.m, "weighted_edges": sg.weighted,
                  "weighted_nodes": sg.node_weights is not None, "order": str(args.order), "previous": None,
                  "sha256": file_sha256(args.graph) if os.path.isfile(args.graph) else None},
        "engine": "spark",
        "k": k,
        "imbalance_allowed": eps,
        "seed": args.seed,
        "options": {"method": "recut", "move_cost": None, "refine": not args.no_refine, "floor": args.floor},
        "recut": stats,
        "result": figures,
        "outputs": {"assignment": str(args.output), "report": str(report_path)},
    }
    write_assignment(spark, sg, parts, args.output, "csv" if str(args.output).lower().endswith(".csv") else "parquet")
    if os.path.exists(args.output):  # the driver can read it: record its checksum, as the in-memory path does
        report["outputs"]["sha256"] = {"assignment": file_sha256(args.output)}
    write_text(report_path, json.dumps(report, indent=2, sort_keys=True) + "\n")  # after the output it describes
    spark.stop()
    if args.json:
        print(json.dumps(report, indent=2, sort_keys=True))
        return 0
    if args.quiet:
        return 0
    total = max(figures["total_edge_weight"], 1e-300)
    print(f"{args.order} → {k} shards (Spark engine): cut fraction line {stats['cut_line'] / total:.4f} → window "
          f"{stats['cut_window'] / total:.4f} → final {stats['cut'] / total:.4f}; imbalance {figures['imbalance']:.4f} "
          f"({eps}); smallest / largest shard {stats['min_load']:,} / {stats['max_load']:,}; written {args.output}")
    return 0
