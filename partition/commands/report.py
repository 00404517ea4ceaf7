"""``shardline report``: a run's figures as one self-contained HTML page.

``shardline report RUN_OUTPUT -o PAGE.html`` reads the node→shard file of
``shardline run`` and its JSON report (``RUN_OUTPUT.report.json`` unless
``--report``), the input graph the report names (``--graph FILE`` and the
usual input options to give it explicitly; its checksum must match the
report's), the linear order when the run kept one (``--order``, default the
report's ``outputs.order``), baseline assignments (``--baseline [NAME=]FILE``,
repeatable) or baselines to run here (``--run-baselines ldg,fennel``), and a
workload replay summary (``--workload FILE``, keys in
:mod:`partition.report.workload`). It writes the page atomically, never over
an input, and with ``--png-dir DIR`` also every figure as a PNG file. See
:mod:`partition.report` for the figures.
"""

from __future__ import annotations

import json
import os

from partition.commands.common import add_graph_arguments, add_shared
from partition.errors import InputError, ParameterError

NAME = "report"
EXAMPLE = ("shardline report docks-to-shards.csv --weight-column rides --run-baselines hash,ldg -o report.html\n"
           "  (the graph is the one the run's report names; its checksum must match)")
HELP = "draw a run's figures into one self-contained HTML page (loads, cut matrix, adjacency, stages, baselines)"


def add_arguments(parser):
    """Add the ``report`` arguments to ``parser``."""
    from partition.outputs import FOLDER, HTML, declare_outputs

    declare_outputs(parser, output=HTML, png_dir=FOLDER)
    parser.add_argument("source", metavar="RUN_OUTPUT", help="node→shard file written by 'shardline run'")
    parser.add_argument("-o", "--output", required=True, help="HTML page to write")
    parser.add_argument("--report", help="the run's JSON report (default: RUN_OUTPUT.report.json)")
    parser.add_argument("--graph", metavar="FILE",
                        help="the input graph (default: the file the report names); its SHA-256 must match")
    parser.add_argument("--no-graph", action="store_true",
                        help="draw only what the JSON report holds (no adjacency picture, no baselines)")
    parser.add_argument("--order", metavar="FILE",
                        help="the run's node,position order (default: the report's --order-output file, if any)")
    parser.add_argument("--baseline", action="append", default=[], metavar="[NAME=]FILE",
                        help="a baseline's node→shard file (from 'shardline baseline'); repeatable")
    parser.add_argument("--run-baselines", metavar="LIST",
                        help="comma list of baseline methods to run here on the same graph, k, ε and seed")
    parser.add_argument("--workload", metavar="FILE",
                        help="workload replay summary JSON: per routing policy a fan-out histogram and hit rates")
    parser.add_argument("--png-dir", metavar="DIR", help="also write every figure as DIR/<name>.png")
    parser.add_argument("--dpi", type=int, default=100, help="resolution of the figures (default 100)")
    add_graph_arguments(parser, positional=False)
    add_shared(parser, "json", "quiet")


def _read_json(path, what):
    from partition.jsonfile import read_json

    data = read_json(path, what)
    if not isinstance(data, dict) or "k" not in data or not isinstance(data.get("result"), dict):
        raise InputError(path, "is not a 'shardline run' report: it lacks 'k' or 'result'")
    return data


def _baseline_specs(specs):
    out = []
    for spec in specs:
        name, sep, path = spec.partition("=")
        if not sep or os.path.exists(spec) or "/" in name:
            name, path = os.path.basename(spec).split(".")[0], spec
        out.append((name, path))
    return out


def _locate_graph(args, run, report_path):
    from partition.placement.export import file_sha256, find_input_graph

    recorded = (run.get("input") or {}).get("sha256")
    if args.graph is None:
        located, tried = find_input_graph(run, report_path)
        if located is None:
            return None, f"graph: {run['input']['graph']!r} not found (looked at {', '.join(tried)}); give --graph"
        path = located
    else:
        path = args.graph
    digest = file_sha256(path)
    if recorded and digest != recorded:
        raise InputError(path, f"SHA-256 {digest} differs from the {recorded} recorded in {report_path}: "
                               "not the graph this run partitioned")
    return path, None


def run(args) -> int:
    """Build and write the page; print its path and size."""
    from partition.report.figures import require_matplotlib

    require_matplotlib()  # before any work: a clear message when the optional dependency is missing
    if args.dpi < 20 or args.dpi > 600:
        raise ParameterError(f"--dpi must lie in [20, 600], got {args.dpi}")
    report_path = args.report or str(args.source).rstrip("/") + ".report.json"
    run_rep = _read_json(report_path, "the run's JSON report; give it with --report")
    from partition.placement.export import check_pairing

    check_pairing(run_rep, report_path, str(args.source))
    specs = _baseline_specs(args.baseline)
    methods = [m.strip() for m in (args.run_baselines or "").split(",") if m.strip()]
    from partition.baselines import METHODS

    for m in methods:
        if m not in METHODS:
            raise ParameterError(f"unknown baseline {m!r}; choose from {', '.join(METHODS)}")
    from partition.outputs import refuse_inputs

    # the command line checked the arguments as given; the files of NAME=FILE baselines are derived from them
    refuse_inputs("-o", args.output, [(f"baseline {n}", p) for n, p in specs])

    from partition.progress import progress_for

    progress = progress_for(getattr(args, "quiet", False))
    notes = []
    graph = parts = order = None
    baselines = {}
    try:
        graph_path = None
        if not args.no_graph:
            graph_path, note = _locate_graph(args, run_rep, report_path)
            if note:
                notes.append(note)
        if graph_path is None and (specs or methods):
            raise ParameterError("baselines are measured on the graph: the graph was not found (give --graph)")
        if graph_path is not None:
            graph, parts, order = _read_inputs(args, run_rep, graph_path, progress)
            k, eps, seed = int(run_rep["k"]), float(run_rep.get("imbalance_allowed") or 0.0), \
                int(run_rep.get("seed") or 0)
            from partition.assignment import read_assignment

            for name, path in specs:
                baselines[name] = read_assignment(path, graph, k=k)
            from partition.baselines import run_baseline

            for m in methods:
                if progress:
                    progress.task(f"baseline {m}, k = {k}")
                baselines[m] = run_baseline(m, graph, k, eps=eps, seed=seed, progress=progress)
                if progress:
                    progress.done()
        workload = None
        if args.workload:
            from partition.report.workload import read_workload

            workload = read_workload(args.workload)
        from partition.report import build_report, write_report

        rep = build_report(run_rep, graph=graph, parts=parts, order=order, baselines=baselines, workload=workload,
                           progress=progress)
        rep.notes[:0] = notes
        size = write_report(rep, args.output, png_dir=args.png_dir, dpi=args.dpi)
    finally:
        if progress:
            progress.close()
    if args.json:
        print(json.dumps({"output": args.output, "bytes": size, "figures": len(rep.figures),
                          "png_dir": args.png_dir, "notes": list(rep.notes)}, indent=2, sort_keys=True))
    elif not args.quiet:
        print(f"wrote {args.output}: {size:,} bytes, {len(rep.figures)} figures"
              + (f" (and {len(rep.figures)} PNG files in {args.png_dir})" if args.png_dir else ""))
    return 0


def _read_inputs(args, run_rep, graph_path, progress):
    import time

    from partition.assignment import read_assignment
    from partition.commands.common import graph_from_args

    started = time.perf_counter()
    args.graph = graph_path
    graph = graph_from_args(args)
    inp = run_rep.get("input") or {}
    if inp.get("weighted_edges") and not graph.weighted:
        raise ParameterError(f"the run read edge weights from {graph_path}: give --weight-column (or --weighted) "
                             "as the run did")
    if inp.get("nodes") is not None and int(inp["nodes"]) != graph.n:
        raise InputError(graph_path, f"has {graph.n} nodes but the run's report says {inp['nodes']}: "
                                     "read it with the options the run used")
    parts = read_assignment(args.source, graph, k=int(run_rep["k"]))
    order_path = args.order or (run_rep.get("outputs") or {}).get("order")
    order = None
    if order_path and os.path.exists(order_path):
        from partition.placement.recut import read_order

        order = read_order(order_path, graph)
    elif args.order:
        raise InputError(args.order, "no such file (the run's node,position order)")
    if progress:
        progress.line(f"read {graph.n:,} nodes, {graph.m:,} edges and the assignment in "
                      f"{time.perf_counter() - started:.2f} s")
    return graph, parts, order
