"""``shardline baseline``: partition a graph with one of the baseline methods.

Writes the node→shard file (``node,shard`` rows, see
:func:`partition.assignment.write_assignment`) and prints the cut fraction and
imbalance of the result, as a table or, with ``--json``, as JSON. Parameters
are checked before the graph is read where possible, and always before
anything is written.
"""

from __future__ import annotations

import json
import time

import numpy as np

from partition.balance import balance_rule, imbalance
from partition.baselines import METHODS, ORDERS, STREAMING, run_baseline
from partition.baselines.repair import check_seed
from partition.commands.common import add_graph_arguments, graph_from_args
from partition.errors import check_imbalance, check_parts

NAME = "baseline"
HELP = "partition with a baseline method (hash, range, random, ldg, fennel, labelprop)"


def add_arguments(parser):
    parser.add_argument("method", metavar="METHOD", choices=list(METHODS),
                        help="one of: " + ", ".join(METHODS))
    add_graph_arguments(parser)
    parser.add_argument("-k", "--shards", dest="k", type=int, required=True, help="number of shards")
    parser.add_argument("--imbalance", type=float, default=0.0,
                        help="allowed imbalance ε: a shard may weigh up to ⌈(1+ε)W/k⌉ (default 0)")
    parser.add_argument("--seed", type=int, default=0, help="seed of every random choice (default 0)")
    parser.add_argument("--order", choices=ORDERS, default="random",
                        help="node order of the streaming methods (default random)")
    parser.add_argument("-o", "--output", required=True, help="node→shard file to write (.csv, .tsv, .parquet)")
    parser.add_argument("--json", action="store_true", help="print the figures as JSON")


def run(args) -> int:
    eps = check_imbalance(args.imbalance)
    k = check_parts(args.k)
    seed = check_seed(args.seed)
    from partition.progress import progress_for

    progress = progress_for(getattr(args, "quiet", False))
    started = time.perf_counter()
    graph = graph_from_args(args)
    check_parts(k, graph.n)
    if progress:
        progress.line(f"read {graph.n:,} nodes, {graph.m:,} edges in {time.perf_counter() - started:.2f} s")
    from partition.assignment import write_assignment

    started = time.perf_counter()
    try:
        if progress:
            progress.task(f"{args.method} baseline, k = {k}")
        parts = run_baseline(args.method, graph, k, eps=eps, seed=seed, order=args.order, progress=progress)
        seconds = time.perf_counter() - started
        if progress:
            progress.done()
            progress.task(f"writing {args.output}")
        write_assignment(args.output, graph, parts)
    finally:
        if progress:
            progress.close()

    figures = _figures(graph, parts, k, eps)
    figures.update({
        "method": args.method,
        "k": k,
        "allowed_imbalance": eps,
        "seed": seed,
        "order": args.order if args.method in STREAMING else None,
        "nodes": graph.n,
        "edges": graph.m,
        "seconds": round(seconds, 4),
        "output": str(args.output),
    })
    if args.json:
        print(json.dumps(figures, indent=2, sort_keys=True))
    else:
        _print_table(figures)
    return 0


def _figures(graph, parts, k, eps):
    """Cut and balance figures (from :func:`partition.score.score` when available)."""
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

    table = Table(title=f"{fig['method']} baseline, k = {fig['k']}")
    table.add_column("figure")
    table.add_column("value", justify="right")
    rows = [
        ("nodes", f"{fig['nodes']:,}"),
        ("edges", f"{fig['edges']:,}"),
        ("cut edges", f"{fig['cut_edges']:,}"),
        ("cut fraction", f"{fig['cut_fraction']:.4f}"),
        ("imbalance", f"{fig['imbalance']:.4f} (allowed {fig['allowed_imbalance']:g})"),
        ("heaviest shard / cap", f"{fig['max_shard_weight']:,} / {fig['cap']:,}"),
        ("seed", str(fig["seed"])),
    ]
    if fig["order"] is not None:
        rows.append(("order", fig["order"]))
    rows += [("seconds", f"{fig['seconds']:.3f}"), ("written to", fig["output"])]
    for name, value in rows:
        table.add_row(name, value)
    Console().print(table)
