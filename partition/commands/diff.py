"""``shardline diff``: the migration plan between two node→shard files.

``shardline diff OLD NEW`` reads two ``node,shard`` files (CSV/TSV with a
header, or Parquet), prints how many nodes move between each pair of shards,
how many are added and removed, and the moved fraction; ``-o MOVES`` writes
the per-node move list that drives a migration (``node,from,to``, the columns
``shardline ring moves`` writes; an empty ``from`` for an added node, an empty
``to`` for a removed one) and ``--pairs PLAN`` the per-pair table
(``from_shard,to_shard,nodes,weight``), both atomically (``.csv``, ``.tsv``,
``.parquet``). With
``--match-labels`` the shards of NEW are first renamed to keep the most nodes
in place (optimal assignment, see :mod:`partition.placement.relabel`).
"""

from __future__ import annotations

import json

from partition.commands.common import add_shared
from partition.errors import InputError, ParameterError

NAME = "diff"
HELP = "compare two node→shard files: the node,from,to move list, moves per shard pair, added and removed nodes"
EXAMPLE = "shardline diff docks-to-shards.csv docks-to-shards-v2.csv --match-labels -o moves.csv --pairs pairs.csv"
_TABLE_EXTENSIONS = (".csv", ".tsv", ".parquet", ".pq")


def add_arguments(parser):
    """Add the ``diff`` arguments to ``parser``."""
    from partition.outputs import TABLE, declare_outputs

    declare_outputs(parser, output=TABLE, pairs=TABLE)
    parser.add_argument("old", metavar="OLD", help="current node→shard file (header node,shard; or Parquet)")
    parser.add_argument("new", metavar="NEW", help="next node→shard file")
    parser.add_argument("-o", "--output", metavar="MOVES",
                        help="write the per-node move list here: node,from,to rows (.csv, .tsv, .parquet)")
    parser.add_argument("--pairs", metavar="PLAN",
                        help="write the per-pair table here: from_shard,to_shard,nodes,weight rows")
    parser.add_argument("--node-weights", metavar="FILE",
                        help="'id weight' rows (text, CSV or Parquet) for every node of OLD and NEW")
    parser.add_argument("--match-labels", action="store_true",
                        help="rename NEW's shards to keep the most nodes (or weight) in place before comparing")
    parser.add_argument("--rows", type=int, default=20, metavar="N",
                        help="table rows to print, largest moves first (default 20; the file has all)")
    add_shared(parser, "json", "quiet")


def run(args) -> int:
    """Compare the two files, print the plan, and write it when ``-o`` is given."""
    from partition.atomic import atomic_paths
    from partition.node_shards import read_node_shards
    from partition.placement.migration import migration_plan, node_moves, write_plan, write_table_file

    if args.rows < 0:
        raise ParameterError(f"--rows must be at least 0, got {args.rows}")
    for path in (args.output, args.pairs):
        if path is not None and not path.lower().endswith(_TABLE_EXTENSIONS):
            raise ParameterError(f"{path}: the plan file must end in .csv, .tsv, .parquet or .pq")
    old, new = read_node_shards(args.old), read_node_shards(args.new)
    old_ids, old_shards, new_ids, new_shards = old.ids, old.shards, new.ids, new.shards
    weights = None
    if args.node_weights is not None:
        from partition.edgelist import read_node_weights

        w_ids, w, _ = read_node_weights(args.node_weights)
        weights = (w_ids, w)
    mapping = None
    if args.match_labels:
        new_shards, mapping = _match(old_ids, old_shards, new_ids, new_shards, weights)
    try:
        plan = migration_plan(old_ids, old_shards, new_ids, new_shards, weights=weights)
    except ParameterError as exc:
        if weights is not None and "weight" in str(exc):
            raise InputError(args.node_weights, str(exc)) from None
        raise
    moves = node_moves(old_ids, old_shards, new_ids, new_shards) if args.output is not None else None
    with atomic_paths([args.output, args.pairs]) as tmp:
        if tmp[0] is not None:
            write_table_file(tmp[0], moves)
        if tmp[1] is not None:
            write_plan(tmp[1], plan)
    if args.json:
        out = plan.to_dict()
        out.update({"old": str(args.old), "new": str(args.new), "output": args.output, "pairs": args.pairs,
                    "label_mapping": None if mapping is None else [int(x) for x in mapping]})
        print(json.dumps(out, indent=2, sort_keys=True))
    elif not args.quiet:
        _print(plan, args, mapping)
    return 0


def _match(old_ids, old_shards, new_ids, new_shards, weights):
    """Rename NEW's shards by optimal assignment on the nodes both files hold."""
    import numpy as np

    from partition.placement.migration import align_placements
    from partition.placement.relabel import relabel_to_match

    extra = None if weights is None else weights[0]
    _, old_of, new_of, w_codes = align_placements(old_ids, old_shards, new_ids, new_shards, extra)
    both = (old_of >= 0) & (new_of >= 0)
    w = None
    if weights is not None:
        full = np.full(old_of.shape[0], np.nan)
        full[w_codes] = weights[1]
        w = np.nan_to_num(full[both], nan=0.0)  # a missing weight is reported by the plan
    k_old = int(old_shards.max()) + 1
    k_new = int(new_shards.max()) + 1
    mapping, _ = relabel_to_match(old_of[both], new_of[both], k_old, k_new, weights=w)
    return mapping[new_shards], mapping


def _print(plan, args, mapping):
    import numpy as np
    from rich.console import Console
    from rich.table import Table

    t = plan.totals
    console = Console()
    summary = Table(title=f"Migration from {args.old} to {args.new}")
    summary.add_column("figure")
    summary.add_column("value", justify="right")
    rows = [
        ("nodes in old / new", f"{t['old_nodes']:,} / {t['new_nodes']:,}"),
        ("shards in old / new", f"{t['k_old']:,} / {t['k_new']:,}"),
        ("nodes in both", f"{t['common_nodes']:,}"),
        ("moved", f"{t['moved_nodes']:,}"),
        ("moved fraction", f"{t['moved_fraction']:.4f}"),
        ("added (only in new)", f"{t['added_nodes']:,}"),
        ("removed (only in old)", f"{t['removed_nodes']:,}"),
    ]
    if t["weighted"]:
        rows += [("moved weight", f"{t['moved_weight']:,}"),
                 ("moved weight fraction", f"{t['moved_weight_fraction']:.4f}")]
    if mapping is not None:
        shown = ", ".join(f"{j}→{int(m)}" for j, m in enumerate(mapping[:16]))
        rows.append(("new shard renamed", shown + (" …" if mapping.size > 16 else "")))
    if args.output is not None:
        rows.append(("node,from,to moves written to", str(args.output)))
    if args.pairs is not None:
        rows.append(("per-pair table written to", str(args.pairs)))
    for name, value in rows:
        summary.add_row(name, value)
    console.print(summary)

    moves = plan.moves
    if moves.num_rows == 0 or args.rows == 0:
        return
    nodes = moves.column("nodes").to_numpy()
    order = np.argsort(-nodes, kind="stable")[: args.rows]
    table = Table(title=f"Largest moves ({order.size} of {moves.num_rows} rows)")
    for head in ("from shard", "to shard", "nodes", "weight"):
        table.add_column(head, justify="right")
    src, dst, weight = (moves.column(c).to_pylist() for c in ("from_shard", "to_shard", "weight"))
    for i in order:
        table.add_row("(added)" if src[i] is None else str(src[i]), "(removed)" if dst[i] is None else str(dst[i]),
                      f"{int(nodes[i]):,}", f"{weight[i]:,}")
    console.print(table)
