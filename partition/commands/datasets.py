"""``shardline datasets``: list the catalog of public graphs and fetch one.

``shardline datasets list [--json]`` prints the catalog (name, collection,
kind, nodes, edges, file); ``shardline datasets fetch NAME [--from DIR] [-o DIR]``
downloads a graph (or copies it from a local folder with ``--from``), verifies
its checksum and writes it atomically into the output folder.
"""

from __future__ import annotations

import json

from partition.commands.common import add_shared

NAME = "datasets"
HELP = "list the catalog of public graphs, or fetch and verify one"
EXAMPLE = "shardline datasets list && shardline datasets fetch USPowerGrid -o data/"
EXAMPLES = {
    "list": "shardline datasets list",
    "fetch": "shardline datasets fetch USPowerGrid -o data/   (or --from DIR to copy a local file)",
}


def add_arguments(parser):
    """Add the ``list`` and ``fetch`` actions to ``parser``."""
    from partition.cli import command_parser
    from partition.outputs import FOLDER, declare_outputs

    actions = parser.add_subparsers(dest="datasets_action", metavar="ACTION")
    actions.required = True
    show = command_parser(actions, None, "list", "show the catalog of public graphs (names in full)",
                          EXAMPLES["list"])
    add_shared(show, "json")
    get = command_parser(
        actions, None, "fetch",
        "download one catalog graph, convert it to an edge list when needed, verify its checksum and write it "
        "atomically; without internet, copy it from a folder with --from",
        EXAMPLES["fetch"],
    )
    get.add_argument("name", metavar="NAME", help="catalog name (see 'shardline datasets list')")
    get.add_argument("--from", dest="from_dir", metavar="DIR",
                     help="copy the file from this folder instead of downloading it (checked against file_sha256)")
    get.add_argument("-o", "--output-dir", default=".", metavar="DIR", help="folder to write into (default: .)")
    get.add_argument("--timeout", type=float, default=30.0, metavar="SECONDS",
                     help="network time-out in seconds (default: 30)")
    add_shared(get, "json", "quiet")
    declare_outputs(get, output_dir=FOLDER)


def run(args) -> int:
    """Carry out ``datasets list`` or ``datasets fetch``; returns the exit status."""
    if args.datasets_action == "list":
        return _list(args)
    return _fetch(args)


def _list(args) -> int:
    from partition.catalog import list_datasets

    entries = list_datasets()
    if args.json:
        print(json.dumps(entries, indent=2, sort_keys=True, ensure_ascii=False))
        return 0
    from rich.console import Console
    from rich.table import Table

    table = Table(title="Public graphs in the catalog")
    for head, justify in (("name", "left"), ("collection", "left"), ("kind", "left"),
                          ("nodes", "right"), ("edges", "right"), ("file", "left")):
        # names and files are never cut or wrapped: a name is what 'datasets fetch' takes
        wide = head in ("name", "file")
        table.add_column(head, justify=justify, no_wrap=wide, overflow="ignore" if wide else "ellipsis",
                         min_width=max((len(e[head]) for e in entries), default=0) if wide else None)
    for e in entries:
        table.add_row(e["name"], e["collection"].split()[0], e["kind"],
                      f"{e['nodes']:,}", f"{e['edges']:,}", e["file"])
    Console(width=max(80, _table_width(entries))).print(table)
    return 0


def _table_width(entries):
    """Columns the table needs so that no name or file is cut (borders and padding included)."""
    longest = [max((len(str(e[c])) for e in entries), default=0) for c in ("name", "file")]
    others = max((len(e["collection"].split()[0]) + len(e["kind"]) + 24 for e in entries), default=0)
    return sum(longest) + others + 19


def _fetch(args) -> int:
    from partition.catalog import fetch

    got = fetch(args.name, args.output_dir, from_dir=args.from_dir, timeout=args.timeout)
    if args.json:
        print(json.dumps({"path": str(got.path), "source": got.source, "checked": got.checked},
                         indent=2, sort_keys=True))
    elif not args.quiet:
        print(f"wrote {got.path} from {got.source} (checked: {got.checked})")
    return 0
