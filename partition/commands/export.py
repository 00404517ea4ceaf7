"""``shardline export``: a run's placement as a folder with per-shard node lists and a checksummed manifest.

``shardline export RUN_OUTPUT -o DIR [--format parquet|csv|jsonl]`` reads the
node→shard file of ``shardline run`` (or ``recut``) and its report
(``RUN_OUTPUT.report.json`` unless ``--report``), checks that the input graph
the report names exists (``--graph FILE`` gives it explicitly; its checksum
must match), and writes ``DIR`` atomically: ``assignment.<ext>``,
``shards/shard-NNNNN.<ext>`` and ``manifest.json`` (see
:mod:`partition.placement.export`). An existing ``DIR`` is replaced only with
``--force``. ``shardline export --verify DIR [--graph FILE]`` checks a written
folder: every file against its manifest checksum, and the graph file against
the manifest's input checksum.
"""

from __future__ import annotations

import json

from partition.commands.common import add_shared
from partition.errors import ParameterError

NAME = "export"
HELP = "write a run's placement as a folder: node→shard table, per-shard node lists, checksummed manifest"
EXAMPLE = "shardline export docks-to-shards.csv -o placement/ --format csv"


def add_arguments(parser):
    """Add the ``export`` arguments to ``parser``."""
    from partition.outputs import FOLDER, declare_outputs

    declare_outputs(parser, output=FOLDER)
    from partition.placement.export import FORMATS

    parser.add_argument("source", metavar="RUN_OUTPUT",
                        help="node→shard file written by 'shardline run' (with --verify: an export folder)")
    parser.add_argument("-o", "--output", metavar="DIR", help="folder to create")
    parser.add_argument("--report", help="the run's JSON report (default: RUN_OUTPUT.report.json)")
    parser.add_argument("--format", dest="export_format", choices=FORMATS, default="parquet",
                        help="file format of the tables (default parquet)")
    parser.add_argument("--graph", metavar="FILE",
                        help="the input graph file; its SHA-256 must match the graph the report names")
    parser.add_argument("--force", action="store_true", help="replace DIR if it exists")
    parser.add_argument("--verify", action="store_true",
                        help="check the export folder RUN_OUTPUT against its manifest (and --graph)")
    add_shared(parser, "json", "quiet")
    parser.add_argument("--engine", choices=("memory", "spark"), default="memory",
                        help="memory (default): one file per table; spark: the tables are written by Spark as "
                             "dataset folders, for placements too large for one machine")
    parser.add_argument("--master", help="--engine spark: Spark master URL (default local[2])")


def run(args) -> int:
    """Export (or verify) and print a short summary."""
    from partition.placement.export import export_run, verify_export

    if args.verify:
        if args.output is not None:
            raise ParameterError("--verify checks a folder; it takes no -o")
        result = verify_export(args.source, graph=args.graph)
        if args.json:
            print(json.dumps(result, indent=2, sort_keys=True))
        elif not args.quiet:
            _table(f"{args.source}: checks out", [
                ("files checked", f"{result['files']:,}"),
                ("input SHA-256", result["input_sha256"]),
                ("graph file checked", "yes" if result["graph_checked"] else "no (give --graph)"),
            ])
        return 0
    if args.output is None:
        raise ParameterError("give the folder to create with -o DIR")
    if args.engine == "spark":
        import tempfile

        from partition.spark.export import export_run_spark
        from partition.spark.session import spark_session

        spark = spark_session(master=args.master, work_dir=tempfile.mkdtemp(prefix="shardline-export-"))
        try:
            manifest = export_run_spark(spark, args.source, args.output, fmt=args.export_format,
                                        report=args.report, graph=args.graph, force=args.force)
        finally:
            spark.stop()
    else:
        from partition.progress import progress_for

        progress = progress_for(getattr(args, "quiet", False))
        try:
            manifest = export_run(args.source, args.output, fmt=args.export_format, report=args.report,
                                  graph=args.graph, force=args.force, progress=progress)
        finally:
            if progress:
                progress.close()
    if args.json:
        print(json.dumps(manifest, indent=2, sort_keys=True))
        return 0
    if args.quiet:
        return 0
    metrics = manifest["metrics"]
    rows = [
        ("input graph", manifest["input"]["graph"]),
        ("input SHA-256", manifest["input"]["sha256"]),
        ("shards", f"{manifest['k']:,}"),
        ("nodes", f"{manifest['files'][0]['rows']:,}"),
        ("files written", f"{len(manifest['files']) + 1:,} ({manifest['format']})"),
    ]
    if "cut_fraction" in metrics:
        rows.append(("cut fraction", f"{metrics['cut_fraction']:.4f}"))
    if "imbalance" in metrics:
        rows.append(("imbalance", f"{metrics['imbalance']:.4f}"))
    rows.append(("created (UTC)", manifest["created_utc"]))
    _table(f"{args.source} → {args.output}", rows)
    return 0


def _table(title, rows):
    from rich.console import Console
    from rich.table import Table

    table = Table(title=title)
    table.add_column("figure")
    table.add_column("value", justify="right")
    for a, b in rows:
        table.add_row(a, b)
    Console().print(table)
