"""Options shared by the subcommands: one definition of each, and how to read the input graph.

Every option that means the same thing in several commands (``-k/--shards``,
``--imbalance``, ``--seed``, ``--move-cost``, ``--json``, ``--quiet``) is
defined once in :data:`SHARED_OPTIONS` and added with :func:`add_shared`, so
its flags, default and help text are the same wherever it appears
(``tests/test_cli_options.py`` walks every parser to check it). This module
imports nothing heavy: the command line builds its parsers before it knows
which command runs.
"""

from __future__ import annotations

IMBALANCE_HELP = (
    "allowed imbalance ε >= 0: no shard may weigh more than ⌈(1+ε)·W/K⌉ + w_max − 1 "
    "(⌈(1+ε)·n/K⌉ for unit weights); default 0: exact balance"
)

SHARED_OPTIONS = {
    "shards": (("-k", "--shards"), dict(
        dest="k", type=int, required=True, metavar="K", help="number of shards K (named 0..K-1)")),
    "shards_from_file": (("-k", "--shards"), dict(
        dest="k", type=int, default=None, metavar="K",
        help="number of shards K (named 0..K-1; default: the largest shard id in the file + 1)")),
    "shards_planted": (("-k", "--shards"), dict(
        dest="k", type=int, default=8, metavar="K", help="number of shards K of the planted table (default 8)")),
    "imbalance": (("--imbalance",), dict(type=float, default=0.0, metavar="EPS", help=IMBALANCE_HELP)),
    "imbalance_load": (("--imbalance",), dict(
        type=float, default=0.03, metavar="EPS",
        help="allowed load imbalance ε >= 0: no shard's load above the strict cap ⌈(1+ε)·W/K⌉ (at least the "
             "largest key's load); default 0.03, because exact balance of skewed access counts is rarely "
             "reachable")),
    "imbalance_check": (("--imbalance",), dict(
        type=float, default=None, metavar="EPS",
        help="also check the balance rule for this allowed imbalance ε (default: no check)")),
    "seed": (("--seed",), dict(
        type=int, default=0, metavar="S",
        help="seed of every random choice, hash and tie-break; same seed, same output (default 0)")),
    "move_cost": (("--move-cost",), dict(
        type=float, default=1.0, metavar="LAMBDA",
        help="with --previous: cut weight that moving one unit of node weight costs; 0 only renames shards "
             "to match OLD, larger values move fewer nodes (default 1: one moved node costs one cut edge)")),
    "json": (("--json",), dict(action="store_true", help="print the summary as JSON on standard output")),
    "quiet": (("--quiet",), dict(
        action="store_true",
        help="print no progress lines and no summary table (errors and --json output still appear)")),
}
"""Each shared option: its flags and the keyword arguments of ``add_argument``."""


def add_shared(parser, *names):
    """Add the shared options ``names`` (keys of :data:`SHARED_OPTIONS`) to ``parser``."""
    for name in names:
        flags, kwargs = SHARED_OPTIONS[name]
        parser.add_argument(*flags, **kwargs)
    return parser


def add_graph_arguments(parser, positional=True):
    """Add the positional ``GRAPH`` and the input-format options to ``parser``."""
    if positional:
        parser.add_argument("graph", metavar="GRAPH", help="edge list: text, CSV/TSV (header), or Parquet; .gz/.bz2 allowed")
    g = parser.add_argument_group("graph input")
    g.add_argument("--format", dest="graph_format", default="auto", choices=["auto", "text", "csv", "tsv", "parquet"],
                   help="input format (default: by file name; text unless .csv/.tsv/.parquet)")
    g.add_argument("--weighted", action="store_true",
                   help="read edge weights (text: the third field); repeated pairs have their weights summed")
    g.add_argument("--source-column", help="CSV/TSV/Parquet: column of the first endpoint (default: first column)")
    g.add_argument("--target-column", help="CSV/TSV/Parquet: column of the second endpoint (default: second column)")
    g.add_argument("--weight-column", help="CSV/TSV/Parquet: column of the edge weight (implies --weighted)")
    g.add_argument("--node-weights", metavar="FILE", help="file of 'id weight' rows (non-negative whole numbers)")
    g.add_argument("--allow-isolated", action="store_true",
                   help="ids in the node-weights file without edges become isolated nodes (default: an error)")
    g.add_argument("--delimiter", help="field delimiter: one character, or \\t, tab, comma, semicolon, space "
                                       "(default: detected)")
    head = g.add_mutually_exclusive_group()
    head.add_argument("--header", dest="header", action="store_const", const=True, default=None,
                      help="the first line names the columns (default: CSV/TSV yes, text no)")
    head.add_argument("--no-header", dest="header", action="store_const", const=False,
                      help="the first line is data, not a header")
    return parser


def read_options(args):
    """The input options of :func:`add_graph_arguments` as keywords, the same for both engines' readers."""
    return {"fmt": args.graph_format, "weighted": args.weighted, "source_column": args.source_column,
            "target_column": args.target_column, "weight_column": args.weight_column,
            "node_weights": args.node_weights, "header": args.header, "delimiter": args.delimiter,
            "allow_isolated": args.allow_isolated}


def graph_from_args(args):
    """Read the graph named by the options of :func:`add_graph_arguments`."""
    from partition.edgelist import read_graph

    return read_graph(args.graph, **read_options(args))
