"""The ``shardline`` command line: a thin layer over the library.

Every subcommand is a module in :mod:`partition.commands`. Bad input or bad
parameters print ``shardline: error: ...`` and exit with status 2; nothing is
written in that case (outputs are written atomically).
"""

from __future__ import annotations

import argparse
import importlib
import sys

from partition import __version__
from partition.commands import COMMANDS
from partition.errors import ShardlineError


def build_parser():
    parser = argparse.ArgumentParser(
        prog="shardline",
        description="Balanced graph partitioning: place related items on k shards with few cut edges.",
    )
    parser.add_argument("--version", action="version", version=f"shardline {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    sub.required = True
    for name in COMMANDS:
        mod = importlib.import_module(f"partition.commands.{name}")
        p = sub.add_parser(mod.NAME, help=mod.HELP, description=mod.HELP)
        mod.add_arguments(p)
        p.set_defaults(_run=mod.run)
    return parser


def main(argv=None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        return int(args._run(args) or 0)
    except ShardlineError as exc:
        print(f"shardline: error: {exc}", file=sys.stderr)
        return exc.exit_status
    except KeyboardInterrupt:
        print("shardline: interrupted", file=sys.stderr)
        return 130


if __name__ == "__main__":
    sys.exit(main())
