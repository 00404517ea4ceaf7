"""spark-submit entry point of the Spark engine: ``shardline run --engine spark``, option for option.

Usage::

    spark-submit jobs/spark_partition.py GRAPH -k K -o OUT [every option of shardline run]

The options are not declared here: the parser is the one of ``shardline run``
(:func:`partition.commands.run.add_arguments`), so every option of the
command — input options, ``--starts``, ``--refine``, ``--order-output``,
``--mode``, ``--work-dir``/``--resume``, ``--collect-edges``, ``--json``,
``--quiet`` — is available here with the same meaning and default, and the
output checks, error messages and exit statuses are the command's. The one
difference: the engine is Spark unless ``--engine`` says otherwise. ``OUT``
without an extension (or ending in ``.parquet``) is a Parquet folder, ``.csv``
a CSV folder. Progress goes to standard error, one line per stage.
"""

from __future__ import annotations

import sys


def main(argv=None):
    """Run ``shardline run`` with ``--engine spark`` unless the arguments name an engine; returns the exit status."""
    from partition.cli import main as shardline

    argv = list(sys.argv[1:] if argv is None else argv)
    if not any(a == "--engine" or a.startswith("--engine=") for a in argv):
        argv += ["--engine", "spark"]
    return shardline(["run", *argv])


if __name__ == "__main__":
    sys.exit(main())
