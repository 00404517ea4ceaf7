"""``shardline ring``: place loose keys on shards by bounded-load consistent hashing.

``shardline ring assign KEYS -k K -o OUT`` reads keys (one per line, or a
column of a CSV/TSV file with ``--column``), places them on shards ``0..K−1``
with at most ``⌈(1+ε)·m/K⌉`` keys each, and writes ``node,shard`` rows
atomically (a key is a node without edges; the columns are those of every
other node→shard file). ``shardline ring moves KEYS -k K --add`` (or
``--remove S``) tells how many keys change shard when one shard joins or
leaves, next to plain consistent hashing and ``hash mod K`` for the same
change, and can write the moved keys (``node,from,to``, as ``shardline diff``
writes). Keys are hashed as text (their UTF-8 bytes) unless ``--integer-keys``
is given.

Defaults: ε = 0 as in every command (``--imbalance inf`` is plain consistent
hashing) and :data:`DEFAULT_POINTS` ring points per shard. With 10,000 keys on
8 shards at ε = 0.25, one point per shard left the smallest shard 372 keys
against a largest of 1,563; 1,000 points gave 1,177 against 1,284, and 1,115
keys moved when a 9th shard joined (ideal m/9 ≈ 1,111;
``jobs/bench_ring_points.py`` prints the table). When the smallest shard
holds fewer than ``⌊(1 − min(ε, ½))·m/K⌋`` keys a warning goes to standard
error.
"""

from __future__ import annotations

import csv
import gzip
import io
import json
import math
import sys
import time

from partition.commands.common import add_shared
from partition.errors import InputError, ParameterError, check_parts

NAME = "ring"
HELP = "place keys outside the graph on shards by consistent hashing with bounded loads"
EXAMPLE = "shardline ring assign session-ids.txt -k 8 -o sessions-to-shards.csv"
EXAMPLES = {
    "assign": "shardline ring assign session-ids.txt -k 8 -o sessions-to-shards.csv",
    "moves": "shardline ring moves session-ids.txt -k 8 --add -o moved-sessions.csv",
}

DEFAULT_POINTS = 1000
"""Ring points per shard: the most even split of the table in ``jobs/bench_ring_points.py`` at a small cost."""


def add_arguments(parser):
    """Add the ``assign`` and ``moves`` actions to ``parser``."""
    from partition.cli import command_parser
    from partition.outputs import TABLE, declare_outputs

    actions = parser.add_subparsers(dest="ring_action", metavar="ACTION")
    actions.required = True
    assign = command_parser(actions, None, "assign", "place every key on a shard and write node,shard rows",
                            EXAMPLES["assign"])
    moves = command_parser(actions, None, "moves",
                           "count (and optionally write) the keys whose shard changes when one shard is added "
                           "or removed, beside plain consistent hashing and hash-mod-K for the same change",
                           EXAMPLES["moves"])
    for p in (assign, moves):
        p.add_argument("keys", metavar="KEYS", help="keys, one per line, or a CSV/TSV file with --column; .gz allowed")
        add_shared(p, "shards", "imbalance", "seed")
        p.add_argument("--points", type=int, default=DEFAULT_POINTS, metavar="P",
                       help=f"ring points per shard (default {DEFAULT_POINTS}: an even split; 1 is the case the "
                            "bounded-load analysis is written for); --imbalance inf: plain consistent hashing")
        p.add_argument("--column", help="read keys from this column of a CSV/TSV file with a header")
        p.add_argument("--delimiter", help="CSV delimiter (default: tab for .tsv, else comma)")
        p.add_argument("--integer-keys", action="store_true",
                       help="keys are 64-bit integers, hashed as numbers rather than as text")
        add_shared(p, "json", "quiet")
    assign.add_argument("-o", "--output", required=True, help="node,shard rows to write (.csv, .tsv, .parquet)")
    change = moves.add_mutually_exclusive_group(required=True)
    change.add_argument("--add", action="store_true", help="add shard K")
    change.add_argument("--remove", type=int, metavar="S", help="remove shard S")
    moves.add_argument("-o", "--output", help="node,from,to rows of the moved keys (.csv, .tsv, .parquet)")
    declare_outputs(assign, output=TABLE)
    declare_outputs(moves, output=TABLE)


def run(args) -> int:
    """Carry out ``ring assign`` or ``ring moves``; returns the exit status."""
    args.shards = check_parts(args.k)
    if args.imbalance != args.imbalance or args.imbalance < 0:
        raise ParameterError(f"imbalance must be a number >= 0 (or inf for no bound), got {args.imbalance}")
    if args.points < 1:
        raise ParameterError(f"--points must be at least 1, got {args.points}")
    if not 0 <= args.seed < 2**64:
        raise ParameterError(f"--seed must be in [0, 2**64), got {args.seed}")
    if args.ring_action == "moves" and args.remove is not None:
        if not 0 <= args.remove < args.shards:
            raise ParameterError(f"--remove must name a shard in 0..{args.shards - 1}, got {args.remove}")
        if args.shards == 1:
            raise ParameterError("cannot remove the only shard")
    keys = read_keys(args.keys, column=args.column, delimiter=args.delimiter, integer=args.integer_keys)
    if args.ring_action == "assign":
        return _assign(args, keys)
    return _moves(args, keys)


def read_keys(path, column=None, delimiter=None, integer=False):
    """Read distinct keys from a file; bad, blank or repeated keys raise :class:`InputError`.

    Parameters
    ----------
    path : str
        Text file with one key per line, or a CSV/TSV file with a header when
        ``column`` is given; ``.gz`` files are decompressed.
    column : str, optional
        Header name of the key column.
    delimiter : str, optional
        CSV delimiter (default tab for ``.tsv``, otherwise comma).
    integer : bool
        Parse keys as 64-bit integers.

    Returns
    -------
    ndarray
        int64 keys, or an object array of str.

    Raises
    ------
    InputError
        Naming the file and line of the first bad, blank or repeated key.
    """
    import numpy as np

    try:
        opener = gzip.open if str(path).endswith(".gz") else open
        with opener(path, "rb") as fh:
            text = fh.read().decode("utf-8")
    except (OSError, EOFError) as exc:
        raise InputError(path, f"cannot read keys: {exc}") from None
    except UnicodeDecodeError as exc:
        raise InputError(path, f"not UTF-8 text ({exc.reason} at byte {exc.start})") from None
    if column is None:
        values = text.split("\n")
        if values and values[-1] == "":
            values.pop()
        values = [v[:-1] if v.endswith("\r") else v for v in values]
        lines = np.arange(1, len(values) + 1)
    else:
        values, lines = _column(path, text, column, delimiter)
    if not values:
        raise InputError(path, "no keys found")
    for v, line in zip(values, lines.tolist()):
        if v == "":
            raise InputError(path, "empty key", line)
    if integer:
        try:
            keys = np.array(values).astype(np.int64)
        except (ValueError, OverflowError):
            for v, line in zip(values, lines.tolist()):
                try:
                    if not -2**63 <= int(v) < 2**63:
                        raise ValueError
                except ValueError:
                    raise InputError(path, f"key {v!r} is not a 64-bit integer", line) from None
            raise InputError(path, "keys are not all 64-bit integers") from None
    else:
        keys = np.empty(len(values), dtype=object)
        keys[:] = values
    _, first, counts = np.unique(keys, return_index=True, return_counts=True)
    if (counts > 1).any():
        seen = np.zeros(len(values), dtype=bool)
        seen[first] = True
        i = int(np.flatnonzero(~seen)[0])
        raise InputError(path, f"key {values[i]!r} appears more than once", int(lines[i]))
    return keys


def _column(path, text, column, delimiter):
    import numpy as np

    if delimiter is None:
        delimiter = "\t" if str(path).removesuffix(".gz").endswith(".tsv") else ","
    reader = csv.reader(io.StringIO(text, newline=""), delimiter=delimiter)
    header = next(reader, None)
    if header is None:
        raise InputError(path, "empty file; expected a header row", 1)
    if column not in header:
        raise InputError(path, f"no column {column!r} in the header {header!r}", 1)
    c = header.index(column)
    values, lines = [], []
    for row in reader:
        if not row:
            continue
        if len(row) <= c:
            raise InputError(path, f"row has {len(row)} fields, expected at least {c + 1}", reader.line_num)
        values.append(row[c])
        lines.append(reader.line_num)
    return values, np.array(lines, dtype=np.int64)


def _write_rows(path, header, columns):
    """Write the columns as a table (CSV, TSV or Parquet by the name), atomically; keys exactly as read."""
    import numpy as np
    import pyarrow as pa

    from partition.tables import write_table

    write_table(path, pa.table({name: pa.array(c.tolist() if c.dtype == object else c)
                                for name, c in zip(header, map(np.asarray, columns))}))


def uneven_floor(m, k, eps):
    """Fewest keys a shard may hold before the split counts as uneven: ``⌊(1 − min(ε, ½))·m/k⌋``."""
    e = 0.5 if not math.isfinite(eps) else min(float(eps), 0.5)
    return math.floor((1.0 - e) * m / k)


def _warn_uneven(loads, m, k, eps, points):
    floor = uneven_floor(m, k, eps)
    if int(loads.min()) < floor:
        print(f"shardline: warning: uneven split: the smallest shard holds {int(loads.min()):,} keys, the largest "
              f"{int(loads.max()):,} (mean {m / k:,.1f}; below {floor:,} counts as uneven); more ring points per "
              f"shard (--points, now {points}) or a smaller --imbalance even it out", file=sys.stderr)


def _assign(args, keys):
    import numpy as np

    from partition.placement.bounded_hash import BoundedLoadRing

    started = time.perf_counter()
    ring = BoundedLoadRing(np.arange(args.shards), args.imbalance, seed=args.seed,
                           points_per_shard=args.points, keys=keys)
    k, s = ring.assignment()
    seconds = time.perf_counter() - started
    _write_rows(args.output, ("node", "shard"), (k, s))
    loads = np.array(list(ring.loads().values()))
    _warn_uneven(loads, k.size, args.shards, args.imbalance, args.points)
    fig = {"keys": int(k.size), "shards": args.shards, "imbalance_allowed": args.imbalance,
           "capacity": ring.capacity, "max_load": int(loads.max()), "min_load": int(loads.min()),
           "mean_load": k.size / args.shards, "points_per_shard": args.points, "seed": args.seed,
           "seconds": round(seconds, 4), "output": str(args.output)}
    if args.json:
        print(json.dumps(fig, indent=2, sort_keys=True))
        return 0
    if args.quiet:
        return 0
    rows = [("keys", f"{fig['keys']:,}"), ("shards", str(fig["shards"])),
            ("capacity ⌈(1+ε)m/n⌉", f"{fig['capacity']:,} (ε = {args.imbalance:g})"),
            ("largest / smallest shard", f"{fig['max_load']:,} / {fig['min_load']:,}"),
            ("mean load m/n", f"{fig['mean_load']:,.1f}"), ("points per shard", str(args.points)),
            ("seed", str(args.seed)), ("seconds", f"{seconds:.3f}"), ("written to", fig["output"])]
    _table("bounded-load ring placement", ("figure", "value"), rows)
    return 0


def _moves(args, keys):
    import numpy as np

    from partition.placement.bounded_hash import BoundedLoadRing, capacity, consistent_assign, mod_assign

    shards = np.arange(args.shards)
    ring = BoundedLoadRing(shards, args.imbalance, seed=args.seed, points_per_shard=args.points, keys=keys)
    if args.add:
        after, change = np.arange(args.shards + 1), f"add shard {args.shards}"
        moved = ring.add_shard(args.shards)
    else:
        after, change = shards[shards != args.remove], f"remove shard {args.remove}"
        moved = ring.remove_shard(args.remove)
    m, share = keys.size, keys.size / args.shards
    plain = int((consistent_assign(keys, shards, args.seed, args.points)
                 != consistent_assign(keys, after, args.seed, args.points)).sum())
    modk = int((mod_assign(keys, shards, args.seed) != mod_assign(keys, after, args.seed)).sum())
    if args.output:
        _write_rows(args.output, ("node", "from", "to"), (moved.keys, moved.before, moved.after))
    methods = {"bounded": len(moved), "consistent": plain, "mod": modk}
    fig = {"change": change, "keys": int(m), "shards_before": args.shards, "shards_after": int(after.size),
           "imbalance_allowed": args.imbalance, "points_per_shard": args.points, "seed": args.seed,
           "capacity_before": capacity(m, args.shards, args.imbalance),
           "capacity_after": capacity(m, after.size, args.imbalance),
           "moved": methods, "output": args.output}
    if args.json:
        print(json.dumps(fig, indent=2, sort_keys=True))
        return 0
    if args.quiet:
        return 0
    labels = {"bounded": f"bounded loads (ε = {args.imbalance:g})", "consistent": "plain consistent hashing",
              "mod": f"hash mod n ({args.shards} → {after.size})"}
    rows = [(labels[name], f"{v:,}", f"{v / m:.4f}", f"{v / share:.3f}") for name, v in methods.items()]
    _table(f"keys moved by '{change}' ({m:,} keys, {args.points} point(s) per shard)",
           ("method", "keys moved", "fraction of keys", "per m/n"), rows)
    if args.output:
        print(f"moved keys written to {args.output}")
    return 0


def _table(title, heads, rows):
    from rich.console import Console
    from rich.table import Table

    table = Table(title=title)
    for i, h in enumerate(heads):
        table.add_column(h, justify="left" if i == 0 else "right")
    for r in rows:
        table.add_row(*r)
    Console().print(table)
