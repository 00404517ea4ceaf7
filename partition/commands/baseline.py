"""``shardline baseline``: partition a graph with one of the baseline methods.

Writes the node→shard file (``node,shard`` rows, see
:func:`partition.assignment.write_assignment`) and a JSON report beside it
(``OUTPUT.report.json``), and prints the cut fraction and imbalance of the
result, as a table or, with ``--json``, as JSON. A streaming method (LDG,
Fennel, label propagation's LDG start) runs in the ``--order`` given
(breadth-first unless told otherwise) and its report states that order and
gives the cut under every other order beside it. Parameters
are checked before the graph is read where possible, and always before
anything is written.
"""

from __future__ import annotations

import json
import time

from partition.commands.common import add_graph_arguments, add_shared, graph_from_args

NAME = "baseline"
HELP = "partition with a baseline method (hash, range, random, ldg, fennel, labelprop)"
EXAMPLE = ("shardline baseline ldg rides.csv.gz --weight-column rides -k 8 -o ldg.csv\n"
           "  (LDG in breadth-first order; the report ldg.csv.report.json also gives the cut of every other order)")

METHOD_NAMES = ("hash", "range", "random", "ldg", "fennel", "labelprop")
"""The keys of :data:`partition.baselines.METHODS` (kept here so the parser needs no numba)."""


def add_arguments(parser):
    from partition.outputs import REPORT, TABLE, declare_outputs

    declare_outputs(parser, output=TABLE, report=REPORT)
    from partition.baselines import DEFAULT_ORDER, ORDERS

    parser.add_argument("method", metavar="METHOD", choices=METHOD_NAMES, help="one of: " + ", ".join(METHOD_NAMES))
    add_graph_arguments(parser)
    add_shared(parser, "shards", "imbalance", "seed")
    parser.add_argument("--order", choices=ORDERS, default=DEFAULT_ORDER,
                        help=f"node order of the streaming methods (ldg, fennel, labelprop's start); default "
                             f"{DEFAULT_ORDER}, the order the published evaluations found strongest; the report "
                             "also gives the cut under every other order")
    parser.add_argument("-o", "--output", required=True, help="node→shard file to write (.csv, .tsv, .parquet)")
    parser.add_argument("--report", help="JSON report path (default: OUTPUT.report.json)")
    add_shared(parser, "json", "quiet")


def run(args) -> int:
    from partition import __version__
    from partition.assignment import write_assignment
    from partition.atomic import atomic_paths
    from partition.baselines import ORDERS, STREAMING, run_baseline
    from partition.baselines.repair import check_seed
    from partition.errors import check_imbalance, check_parts

    eps = check_imbalance(args.imbalance)
    k = check_parts(args.k)
    seed = check_seed(args.seed)
    from partition.progress import progress_for

    progress = progress_for(args.quiet)
    report_path = args.report or f"{args.output}.report.json"
    started = time.perf_counter()
    graph = graph_from_args(args)
    check_parts(k, graph.n)
    if progress:
        progress.line(f"read {graph.n:,} nodes, {graph.m:,} edges in {time.perf_counter() - started:.2f} s")

    started = time.perf_counter()
    try:
        if progress:
            progress.task(f"{args.method} baseline, k = {k}")
        parts = run_baseline(args.method, graph, k, eps=eps, seed=seed, order=args.order, progress=progress)
        seconds = time.perf_counter() - started
        if progress:
            progress.done()
    finally:
        if progress:
            progress.close()
    streaming = args.method in STREAMING
    figures = _figures(graph, parts, k, eps)
    others = None
    if streaming:  # the same method under every other stream order, beside the chosen one
        others = {}
        for order in ORDERS:
            other = parts if order == args.order else run_baseline(args.method, graph, k, eps=eps, seed=seed,
                                                                    order=order)
            got = _figures(graph, other, k, eps)
            others[order] = {"cut_fraction": got["cut_fraction"], "cut_edges": got["cut_edges"],
                             "imbalance": got["imbalance"]}
    figures.update({
        "tool": f"shardline {__version__}",
        "method": args.method,
        "k": k,
        "imbalance_allowed": eps,
        "seed": seed,
        "order": args.order if streaming else None,
        "orders": others,
        "graph": str(args.graph),
        "nodes": graph.n,
        "edges": graph.m,
        "seconds": round(seconds, 4),
        "output": str(args.output),
        "report": str(report_path),
    })
    with atomic_paths([args.output, report_path]) as tmp:
        write_assignment(tmp[0], graph, parts)
        with open(tmp[1], "w", encoding="utf-8") as fh:
            fh.write(json.dumps(figures, indent=2, sort_keys=True) + "\n")
    if args.json:
        print(json.dumps(figures, indent=2, sort_keys=True))
    elif not args.quiet:
        _print_table(figures)
    return 0


def _figures(graph, parts, k, eps):
    """Cut and balance figures (from :func:`partition.score.score` when available)."""
    import numpy as np

    from partition.balance import balance_rule, imbalance

    w = graph.node_weight_array()
    loads = np.bincount(parts, weights=w, minlength=k)
    rule = balance_rule(graph.node_weights, k, eps, graph.n)
    out = {"balanced": bool(rule.check(loads)), "max_shard_weight": int(loads.max()), "cap": int(rule.cap)}
    try:
        from partition.score import score
    except ImportError:
        score = None
    if score is not None:
        measured = score(graph, parts, k)
        out["cut_edges"] = int(measured.cut_edges)
        out["cut_weight"] = float(measured.cut_weight)
        out["cut_fraction"] = float(measured.cut_fraction)
        out["imbalance"] = float(measured.imbalance)
        return out
    src = graph.rows()
    crossing = parts[src] != parts[graph.indices]
    cut = float(graph.edge_weight_array()[crossing].sum() / 2.0)
    total = graph.total_edge_weight()
    out["cut_edges"] = int(np.count_nonzero(crossing) // 2)
    out["cut_weight"] = cut
    out["cut_fraction"] = cut / total if total > 0 else 0.0
    out["imbalance"] = imbalance(loads, graph.total_node_weight(), k)
    return out


def _print_table(fig):
    from rich.console import Console
    from rich.table import Table

    table = Table(title=f"{fig['method']} baseline, k = {fig['k']}" + (f", {fig['order']} order" if fig["order"] else ""))
    table.add_column("figure")
    table.add_column("value", justify="right")
    rows = [
        ("nodes", f"{fig['nodes']:,}"),
        ("edges", f"{fig['edges']:,}"),
        ("cut edges", f"{fig['cut_edges']:,}"),
        ("cut fraction", f"{fig['cut_fraction']:.4f}"),
        ("imbalance (allowed)", f"{fig['imbalance']:.4f} ({fig['imbalance_allowed']:g})"),
        ("heaviest shard / cap", f"{fig['max_shard_weight']:,} / {fig['cap']:,}"),
        ("seed", str(fig["seed"])),
    ]
    if fig["order"] is not None:
        rows.append(("stream order", fig["order"]))
        rows.append(("cut fraction by order", ", ".join(
            f"{o}: {v['cut_fraction']:.4f}" for o, v in fig["orders"].items())))
    rows += [("seconds", f"{fig['seconds']:.3f}"), ("written to", f"{fig['output']} and its report")]
    for name, value in rows:
        table.add_row(name, value)
    Console().print(table)
