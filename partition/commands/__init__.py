"""Subcommands of the ``shardline`` command line, one module each."""

COMMANDS = [
    "run",
    "baseline",
    "datasets",
    "diff",
    "ring",
    "score",
    "export",
    "recut",
    "place",
    "report",
    "workload",
]
