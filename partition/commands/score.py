"""``shardline score``: check a node→shard file against its graph and measure it.

``shardline score GRAPH ASSIGNMENT [-k K] [--imbalance EPS] [--json]`` reads
the graph and the assignment (every node once, shard ids in ``[0, k)``), then
prints the cut, balance, communication volume, boundary nodes and fanout of
:func:`partition.score.score` as tables — the per-shard table and the
shard×shard cut matrix only for ``k <= 16`` — or, with ``--json``, the whole
:meth:`partition.score.Score.to_dict` as JSON. With ``--imbalance`` it also
says whether the balance rule holds, with ``--capacity W`` whether every shard
weighs at most W. Exit status: 0 when every check asked for holds, 3
(:data:`CHECK_FAILED`) when one is broken — so a pipeline can gate on it — and
2 for an error (bad file, bad option), as everywhere.
"""

from __future__ import annotations

import json

from partition.commands.common import add_graph_arguments, add_shared, graph_from_args
from partition.errors import ParameterError, check_imbalance, check_parts

NAME = "score"
HELP = "validate a node→shard file against the graph and report cut, balance, volume and fanout"
EXAMPLE = "shardline score rides.csv.gz --weight-column rides docks-to-shards.csv --imbalance 0.03"

CHECK_FAILED = 3
"""Exit status when the assignment is valid but breaks ``--imbalance`` or ``--capacity``."""

TABLE_MAX_K = 16
"""Largest k for which the per-shard table and the cut matrix are printed."""


def add_arguments(parser):
    add_graph_arguments(parser)
    parser.add_argument("assignment", metavar="ASSIGNMENT",
                        help="node→shard file: node,shard rows (CSV/TSV/whitespace, .gz) or Parquet")
    add_shared(parser, "shards_from_file", "imbalance_check")
    parser.add_argument("--capacity", type=float, metavar="W",
                        help="also check that no shard weighs more than W (default: no check)")
    parser.add_argument("--node-column", metavar="NAME",
                        help="ASSIGNMENT's node column (default: by header name node/id/key/…, else the first)")
    parser.add_argument("--shard-column", metavar="NAME",
                        help="ASSIGNMENT's shard column (default: by header name shard/part/…, else the second)")
    add_shared(parser, "json", "quiet")


def run(args) -> int:
    from partition.assignment import read_assignment
    from partition.score import score

    eps = None if args.imbalance is None else check_imbalance(args.imbalance)
    k = None if args.k is None else check_parts(args.k)
    if args.capacity is not None and not args.capacity >= 0:
        raise ParameterError(f"--capacity must be a number >= 0, got {args.capacity}")
    graph = graph_from_args(args)
    parts = read_assignment(args.assignment, graph, k=k, node_column=args.node_column,
                            shard_column=args.shard_column)
    result = score(graph, parts, k=k, eps=eps)
    checks = _checks(result, args.capacity)
    published = _published(args.graph, result)
    if args.json:
        figures = result.to_dict()
        figures.update({"graph": str(args.graph), "assignment": str(args.assignment), "published": published,
                        "checks": checks})
        print(json.dumps(figures, indent=2, sort_keys=True))
    elif not args.quiet:  # with --quiet only the exit status and any error tell
        _print_tables(result, args)
        _print_published(published, result)
    return CHECK_FAILED if any(not c["holds"] for c in checks.values()) else 0


def _checks(s, capacity):
    """The checks asked for: the balance rule (``--imbalance``) and the capacity (``--capacity``)."""
    out = {}
    if s.eps is not None:
        out["imbalance"] = {"holds": bool(s.balanced), "imbalance_allowed": s.eps, "cap": int(s.cap),
                            "violations": list(s.violations)}
    if capacity is not None:
        over = [int(i) for i in (s.shard_weights > capacity).nonzero()[0]]
        out["capacity"] = {"holds": not over, "capacity": capacity, "shards_over": over}
    return out


def _published(graph_path, s):
    """Published figures for this graph and k when it is a catalog graph (:mod:`partition.report.references`)."""
    from partition.report.references import find_catalog_entry, reference_rows

    entry = find_catalog_entry(graph_path)
    rows = reference_rows(entry, s.k, s.cut_edges, s.n_edges, s.eps)
    return {"graph": entry["name"], "matched_by": entry["matched_by"], "rows": rows} if rows else None


def _print_published(published, s):
    if not published:
        return
    from rich.console import Console
    from rich.table import Table

    console = Console()
    table = Table(title=f"published figures for {published['graph']}, k = {s.k} (ours / best published)")
    for name in ("ε", "figure", "ours", "published", "ours / published", "from memory"):
        table.add_column(name, justify="right")
    for r in published["rows"]:
        fmt = (lambda v: f"{v:,.0f}") if r["metric"] == "cut_edges" else (lambda v: f"{v:.4f}")
        table.add_row(f"{r['imbalance']:g}" + (" *" if r["same_eps"] else ""), r["metric"].replace("_", " "),
                      fmt(r["ours"]), fmt(r["published"]), "—" if r["ratio"] is None else f"{r['ratio']:.3f}",
                      "yes" if r["from_memory"] else "no")
    console.print(table)
    if any(r["same_eps"] for r in published["rows"]):
        console.print("* the ε given with --imbalance")
    if any(r["from_memory"] for r in published["rows"]):
        console.print("from memory: the value was recalled, not checked against the source")
    for source in dict.fromkeys(r["citation"] for r in published["rows"]):
        console.print(f"source: {source}")
    for note in dict.fromkeys(r["note"] for r in published["rows"] if r.get("note")):
        console.print(f"note: {note}")


def _number(x):
    """Whole numbers without decimals, others with four significant decimals."""
    return f"{int(x):,}" if float(x).is_integer() else f"{x:,.4f}"


def _print_tables(s, args):
    from rich.console import Console
    from rich.table import Table

    console = Console()
    table = Table(title=f"score of {args.assignment}, k = {s.k}")
    table.add_column("figure")
    table.add_column("value", justify="right")
    rows = [
        ("nodes", f"{s.n_nodes:,}"),
        ("edges", f"{s.n_edges:,}"),
        ("cut edges", f"{s.cut_edges:,}"),
        ("cut weight / total", f"{_number(s.cut_weight)} / {_number(s.total_edge_weight)}"),
        ("cut fraction", f"{s.cut_fraction:.4f}"),
        ("imbalance", f"{s.imbalance:.4f}"),
        ("lightest / heaviest shard", f"{int(s.shard_weights.min()):,} / {int(s.shard_weights.max()):,}"),
        ("communication volume", f"{s.communication_volume:,}"),
        ("boundary nodes", f"{s.boundary_nodes:,} ({s.boundary_nodes / s.n_nodes:.1%})"),
        ("fanout (mean shards per neighbourhood)", f"{s.fanout:.4f}"),
        ("shard pairs with cut edges", f"{s.cut_matrix.nnz // 2:,}"),
    ]
    if s.eps is not None:
        verdict = "holds" if s.balanced else f"broken ({len(s.violations)} shard(s))"
        rows.append((f"balance rule, ε = {s.eps:g}", f"cap {s.cap:,}: {verdict}"))
    if args.capacity is not None:
        over = int((s.shard_weights > args.capacity).sum())
        rows.append((f"capacity {args.capacity:g}", "holds" if not over else f"broken ({over} shard(s))"))
    for name, value in rows:
        table.add_row(name, value)
    console.print(table)
    if s.k > TABLE_MAX_K:
        return
    shards = Table(title="shards")
    for name in ("shard", "nodes", "weight", "cut weight"):
        shards.add_column(name, justify="right")
    for i in range(s.k):
        shards.add_row(str(i), f"{int(s.shard_sizes[i]):,}", f"{int(s.shard_weights[i]):,}",
                       _number(s.shard_cut_weights[i]))
    console.print(shards)
    matrix = Table(title="cut weight between shards")
    matrix.add_column("", justify="right")
    for j in range(s.k):
        matrix.add_column(str(j), justify="right")
    dense = s.cut_matrix.toarray()
    for i in range(s.k):
        matrix.add_row(str(i), *("·" if i == j else _number(dense[i, j]) for j in range(s.k)))
    console.print(matrix)
