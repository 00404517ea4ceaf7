"""Subcommands of the ``shardline`` command line, one module each."""

COMMANDS = [
    "baseline",
    "datasets",
    "ring",
    "score",
]
