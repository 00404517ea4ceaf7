"""``shardline place``: put arriving nodes on shards at once, never above a shard's capacity.

``shardline place PLACEMENT ARRIVALS -o OUT`` reads the current placement (a
``node,shard`` file) and a stream of arrivals: an edge list whose lines
``new_node neighbour`` (``new_node neighbour weight`` with ``--weighted``) are
grouped by arrival — the consecutive lines of one new node are its edges to
nodes already placed (current nodes or earlier arrivals); a line
``new_node new_node`` announces an arrival without edges. Each arrival is
placed in turn by the chosen rule (:mod:`partition.placement.online`) and
``OUT`` gets the ``node,shard`` rows of the placed arrivals, in arrival order;
``--merged FILE`` also writes the placement to deploy: every current node
(in PLACEMENT's order) followed by the placed arrivals. A JSON report
(``OUT.report.json`` unless ``--report``) holds the figures; all outputs are
written atomically, together. The capacity of a shard is the balance rule's cap for the
final node count (placed plus arriving, ``--imbalance``), or ``--capacity``.
Arrivals that fit nowhere are left out of ``OUT``, counted, and listed in
``--rejected FILE`` if given.
"""

from __future__ import annotations

import bz2
import gzip
import json
import os

from partition.commands.common import add_shared
from partition.errors import InputError, ParameterError, check_imbalance

NAME = "place"
HELP = "place arriving nodes on shards one at a time, never above capacity"
EXAMPLE = ("shardline place docks-to-shards.csv new-docks.txt -o new-docks-to-shards.csv "
           "--merged all-docks-to-shards.csv")


def add_arguments(parser):
    """Add the ``place`` arguments to ``parser``."""
    from partition.outputs import REPORT, TABLE, declare_outputs

    declare_outputs(parser, output=TABLE, merged=TABLE, report=REPORT)
    from partition.placement.online import RULES

    parser.add_argument("placement", metavar="PLACEMENT", help="current node→shard file (header node,shard; or Parquet)")
    parser.add_argument("arrivals", metavar="ARRIVALS",
                        help="edge list 'new_node neighbour' grouped by new node, in arrival order (text; .gz/.bz2)")
    parser.add_argument("-o", "--output", required=True, help="node→shard file of the arrivals (.csv, .tsv, .parquet)")
    parser.add_argument("--merged", metavar="FILE",
                        help="also write the merged placement to deploy: PLACEMENT's rows, then the placed arrivals")
    parser.add_argument("--report", help="JSON report path (default: OUTPUT.report.json)")
    add_shared(parser, "shards_from_file")
    parser.add_argument("--rule", choices=RULES, default="discount",
                        help="discount: affinity × (1 − e^(fill−1)); ldg: affinity × (1 − fill); "
                             "greedy: affinity; hash: bounded-load consistent hashing (default discount)")
    parser.add_argument("--mix", type=float, default=0.0, metavar="MU",
                        help="weight in [0, 1] of the score against the forecast's projected fill (default 0)")
    add_shared(parser, "imbalance")
    parser.add_argument("--capacity", type=int,
                        help="capacity of every shard (instead of the balance rule's cap for the final node count)")
    parser.add_argument("--weighted", action="store_true", help="the third field of an arrival line is the edge weight")
    parser.add_argument("--ignore-unplaced", action="store_true",
                        help="drop edges to nodes not placed yet (default: an error naming the line)")
    add_shared(parser, "seed")
    parser.add_argument("--rejected", metavar="FILE", help="also write the ids of rejected arrivals here")
    add_shared(parser, "json", "quiet")


def _text_lines(path):
    """1-based line number of every data row of a text edge list (comments and blank lines skipped)."""
    import numpy as np

    with open(path, "rb") as fh:
        raw = fh.read()
    if raw[:2] == b"\x1f\x8b":
        raw = gzip.decompress(raw)
    elif raw[:3] == b"BZh":
        raw = bz2.decompress(raw)
    if b"\r" in raw:
        raw = raw.replace(b"\r\n", b"\n").replace(b"\r", b"\n")
    buf = np.frombuffer(raw, dtype=np.uint8)
    nl = np.flatnonzero(buf == 10)
    starts = np.concatenate(([0], nl + 1))
    ends = np.concatenate((nl, [buf.size]))
    if starts[-1] == buf.size:
        starts, ends = starts[:-1], ends[:-1]
    solid = np.flatnonzero((buf != 32) & (buf != 9) & (buf != 10))
    first = np.searchsorted(solid, starts)
    has = first < solid.size
    pos = np.where(has, solid[np.minimum(first, max(solid.size - 1, 0))] if solid.size else 0, 0)
    has &= pos < ends
    lead = buf[np.where(has, pos, 0)] if buf.size else np.zeros(0, dtype=np.uint8)
    data = has & (lead != 35) & (lead != 37)
    return np.flatnonzero(data) + 1


def run(args) -> int:
    """Place the arrivals and write their shards."""
    import numpy as np
    import pyarrow as pa

    from partition import __version__
    from partition.atomic import atomic_paths
    from partition.edgelist import read_edges
    from partition.node_shards import read_node_shards
    from partition.placement.online import LATER, UNKNOWN
    from partition.placement.online import OnlinePlacer, final_capacity
    from partition.tables import write_table

    eps = check_imbalance(args.imbalance)
    if args.capacity is not None and args.capacity < 0:
        raise ParameterError(f"--capacity must be >= 0, got {args.capacity}")
    placed = read_node_shards(args.placement)
    ids, shards = placed.ids, placed.shards
    k = int(shards.max()) + 1 if args.k is None else args.k
    if k < 1:
        raise ParameterError(f"k must be at least 1, got {k}")
    if int(shards.max()) >= k:
        raise InputError(args.placement, f"uses shard {int(shards.max())} but k = {k} (shard ids run 0..{k - 1})")
    src, dst, w = read_edges(args.arrivals, fmt="text", weighted=args.weighted)
    if len(src) == 0:
        raise InputError(args.arrivals, "holds no arrivals")
    lines = _text_lines(args.arrivals)

    def line(row):
        return int(lines[row]) if row < lines.shape[0] else None

    # one id type for both files: integers only when both are integer
    if ids.dtype.kind in "iu" and src.dtype.kind not in "iu":
        ids = ids.astype(str).astype(object)
    if ids.dtype.kind not in "iu" and src.dtype.kind in "iu":
        src, dst = src.astype(str).astype(object), dst.astype(str).astype(object)
    first_rows = np.concatenate(([0], np.flatnonzero(src[1:] != src[:-1]) + 1))
    arrivals = src[first_rows]
    ptr = np.concatenate((first_rows, [src.shape[0]])).astype(np.int64)
    order = np.argsort(arrivals, kind="stable")
    again = np.flatnonzero(arrivals[order][1:] == arrivals[order][:-1])
    if again.size:
        a, b = int(order[again[0]]), int(order[again[0] + 1])
        raise InputError(args.arrivals, f"arrival {arrivals[b]} comes again after other arrivals "
                                        f"(its lines must be consecutive; first at line {line(first_rows[a])})",
                         line(first_rows[b]))
    placed = np.isin(arrivals, ids)
    if placed.any():
        i = int(np.flatnonzero(placed)[0])
        raise InputError(args.arrivals, f"arrival {arrivals[i]} is already placed in {args.placement}",
                         line(first_rows[i]))
    cap = args.capacity if args.capacity is not None else final_capacity(k, eps, final_nodes=ids.shape[0] + arrivals.shape[0])
    placer = OnlinePlacer(ids, shards, k, cap, rule=args.rule, mu=args.mix, seed=args.seed)
    _, _, status = placer.resolve(arrivals, ptr, dst)
    bad = np.flatnonzero((status == LATER) | (status == UNKNOWN))
    if bad.size and not args.ignore_unplaced:
        row = int(bad[0])
        arrival = src[row]
        why = "arrives later" if status[row] == LATER else f"is not in {args.placement} and not an earlier arrival"
        raise InputError(args.arrivals, f"neighbour {dst[row]} of arrival {arrival} is not placed yet: it {why} "
                                        "(use --ignore-unplaced to drop such edges)", line(row))
    loads_before = placer.loads
    out = placer.place_many(arrivals, ptr, dst, weights=w, unplaced="ignore")
    ok = out >= 0
    node_type = pa.int64() if arrivals.dtype.kind in "iu" else pa.string()
    report_path = args.report or f"{args.output}.report.json"
    loads = placer.loads
    figures = {
        "tool": f"shardline {__version__}",
        "placement": str(args.placement), "arrivals_file": str(args.arrivals), "output": str(args.output),
        "merged": args.merged, "report": str(report_path), "imbalance_allowed": eps if args.capacity is None else None,
        "merged_nodes": int(ids.shape[0] + ok.sum()) if args.merged else None,
        "k": k, "rule": args.rule, "mix": args.mix, "capacity": int(placer.capacity.max()),
        "arrivals": int(arrivals.shape[0]), "placed": int(ok.sum()), "rejected": int((~ok).sum()),
        "dropped_edges": int(bad.size), "no_edge_arrivals": int(np.sum(np.diff(ptr) == 0)),
        "max_load_before": int(loads_before.max()), "max_load": int(loads.max()),
        "max_load_over_capacity": float(loads.max() / max(int(placer.capacity.max()), 1)),
        "per_shard_new": [int(x) for x in np.bincount(out[ok], minlength=k)],
        "per_shard_after": [int(x) for x in loads],
    }
    with atomic_paths([args.output, report_path, args.rejected, args.merged]) as tmp:
        write_table(tmp[0], pa.table({"node": pa.array(arrivals[ok], type=node_type),
                                      "shard": pa.array(out[ok], type=pa.int64())}))
        with open(tmp[1], "w", encoding="utf-8") as fh:
            fh.write(json.dumps(figures, indent=2, sort_keys=True) + "\n")
        if tmp[2] is not None:
            write_table(tmp[2], pa.table({"node": pa.array(arrivals[~ok], type=node_type)}))
        if tmp[3] is not None:
            write_table(tmp[3], pa.table({
                "node": pa.concat_arrays([pa.array(ids, type=node_type), pa.array(arrivals[ok], type=node_type)]),
                "shard": pa.array(np.concatenate((shards, out[ok])), type=pa.int64())}))
    if args.json:
        print(json.dumps(figures, indent=2, sort_keys=True))
        return 0
    if args.quiet:
        return 0
    from rich.console import Console
    from rich.table import Table

    table = Table(title=f"{os.path.basename(str(args.arrivals))} → {k} shards ({args.rule}, mix {args.mix})")
    table.add_column("figure")
    table.add_column("value", justify="right")
    for a, b in [
        ("arrivals / placed / rejected", f"{figures['arrivals']:,} / {figures['placed']:,} / {figures['rejected']:,}"),
        ("capacity per shard", f"{figures['capacity']:,}"),
        ("largest load: before → after", f"{figures['max_load_before']:,} → {figures['max_load']:,}"),
        ("edges to unplaced nodes dropped", f"{figures['dropped_edges']:,}"),
        ("written", str(args.output) + (f" and the merged placement {args.merged}" if args.merged else "")),
    ]:
        table.add_row(a, b)
    Console().print(table)
    return 0
