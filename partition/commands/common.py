"""Options shared by the subcommands: how to read the input graph."""

from __future__ import annotations

from partition.edgelist import read_graph


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


def graph_from_args(args):
    """Read the graph named by the options of :func:`add_graph_arguments`."""
    return read_graph(
        args.graph,
        fmt=args.graph_format,
        weighted=args.weighted,
        source_column=args.source_column,
        target_column=args.target_column,
        weight_column=args.weight_column,
        node_weights=args.node_weights,
        header=args.header,
        delimiter=args.delimiter,
        allow_isolated=args.allow_isolated,
    )
