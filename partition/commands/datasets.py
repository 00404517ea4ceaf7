"""``shardline datasets``: list the catalog of public graphs and fetch one.

``shardline datasets list [--json]`` prints the catalog (name, collection,
kind, nodes, edges, file); ``shardline datasets fetch NAME [--from DIR] [-o DIR]``
downloads a graph (or copies it from a local folder with ``--from``), verifies
its checksum and writes it atomically into the output folder.
"""

from __future__ import annotations

import json

from partition.catalog import fetch, list_datasets

NAME = "datasets"
HELP = "list the catalog of public graphs, or fetch and verify one"


def add_arguments(parser):
    """Add the ``list`` and ``fetch`` actions to ``parser``."""
    actions = parser.add_subparsers(dest="datasets_action", metavar="ACTION")
    actions.required = True
    show = actions.add_parser("list", help="show the catalog", description="Show the catalog of public graphs.")
    show.add_argument("--json", action="store_true", help="print the catalog entries as JSON")
    get = actions.add_parser(
        "fetch",
        help="download (or copy with --from) one graph and verify it",
        description="Download one catalog graph, convert it to an edge list when needed, verify its "
        "checksum and write it atomically. Without internet, copy it from a folder with --from.",
    )
    get.add_argument("name", metavar="NAME", help="catalog name (see 'shardline datasets list')")
    get.add_argument("--from", dest="from_dir", metavar="DIR",
                     help="copy the file from this folder instead of downloading it (checked against file_sha256)")
    get.add_argument("-o", "--output-dir", default=".", metavar="DIR", help="folder to write into (default: .)")
    get.add_argument("--timeout", type=float, default=30.0, metavar="SECONDS",
                     help="network time-out in seconds (default: 30)")
    get.add_argument("--json", action="store_true", help="print what was written as JSON")


def run(args) -> int:
    """Carry out ``datasets list`` or ``datasets fetch``; returns the exit status."""
    if args.datasets_action == "list":
        return _list(args)
    return _fetch(args)


def _list(args) -> int:
    entries = list_datasets()
    if args.json:
        print(json.dumps(entries, indent=2, sort_keys=True, ensure_ascii=False))
        return 0
    from rich.console import Console
    from rich.table import Table

    table = Table(title="Public graphs in the catalog")
    for head, justify in (("name", "left"), ("collection", "left"), ("kind", "left"),
                          ("nodes", "right"), ("edges", "right"), ("file", "left")):
        table.add_column(head, justify=justify)
    for e in entries:
        table.add_row(e["name"], e["collection"].split()[0], e["kind"],
                      f"{e['nodes']:,}", f"{e['edges']:,}", e["file"])
    Console().print(table)
    return 0


def _fetch(args) -> int:
    got = fetch(args.name, args.output_dir, from_dir=args.from_dir, timeout=args.timeout)
    if args.json:
        print(json.dumps({"path": str(got.path), "source": got.source, "checked": got.checked},
                         indent=2, sort_keys=True))
    else:
        print(f"wrote {got.path} from {got.source} (checked: {got.checked})")
    return 0
