"""Subcommands of the ``shardline`` command line, one module each."""

COMMANDS = [
    "baseline",
    "datasets",
    "diff",
    "ring",
    "score",
]
