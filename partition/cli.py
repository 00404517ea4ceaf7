"""The ``shardline`` command line: a thin layer over the library.

Every subcommand is a module in :mod:`partition.commands` with ``NAME``,
``HELP``, ``EXAMPLE`` (the worked example of its ``--help``), ``add_arguments``
and ``run``; those modules import nothing heavy at module level, and only the
command being run gets its options added, so ``--version`` and ``--help``
start without numpy, numba, scipy or pyspark. Bad input or bad parameters
print ``shardline: error: ...`` and exit with status 2; nothing is written in
that case (outputs are written atomically).
"""

from __future__ import annotations

import argparse
import importlib
import sys

from partition import __version__
from partition.commands import COMMANDS
from partition.errors import ShardlineError
from partition.outputs import check_outputs

EXAMPLE = """example:
  shardline run rides.csv.gz --weight-column rides -k 8 --imbalance 0.03 -o docks-to-shards.csv
  shardline COMMAND --help     (each command's options and a worked example)"""


def command_parser(sub, mod, name=None, help=None, example=None):
    """Add the sub-parser of one command (or action) with its worked example as the epilog."""
    name = name or mod.NAME
    help = help or mod.HELP
    example = example if example is not None else getattr(mod, "EXAMPLE", None)
    return sub.add_parser(name, help=help, description=help,
                          epilog=None if example is None else f"example:\n  {example}",
                          formatter_class=argparse.RawDescriptionHelpFormatter)


def build_parser(argv=None):
    """The ``shardline`` parser.

    Parameters
    ----------
    argv : list of str or None
        With ``None`` every command's options are added (for tests and
        documentation); otherwise only those of the command ``argv`` names, so
        that start-up imports one command's dependencies at most.

    Returns
    -------
    argparse.ArgumentParser
    """
    parser = argparse.ArgumentParser(
        prog="shardline",
        description="Balanced graph partitioning: place related items on k shards with few cut edges.",
        epilog=EXAMPLE, formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    parser.add_argument("--version", action="version", version=f"shardline {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    sub.required = True
    chosen = None if argv is None else next((a for a in argv if not a.startswith("-")), "")
    for name in COMMANDS:
        mod = importlib.import_module(f"partition.commands.{name}")
        p = command_parser(sub, mod)
        if chosen is None or chosen == mod.NAME:
            mod.add_arguments(p)
        p.set_defaults(_run=mod.run)
    return parser


def main(argv=None) -> int:
    argv = list(sys.argv[1:] if argv is None else argv)
    parser = build_parser(argv)
    args = parser.parse_args(argv)
    try:
        check_outputs(args)
        return int(args._run(args) or 0)
    except ShardlineError as exc:
        print(f"shardline: error: {exc}", file=sys.stderr)
        return exc.exit_status
    except KeyboardInterrupt:
        print("shardline: interrupted", file=sys.stderr)
        return 130


if __name__ == "__main__":
    sys.exit(main())
