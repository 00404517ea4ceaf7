"""Assembling a run's report: figures from the run report JSON, the graph, baselines and a workload replay.

:func:`build_report` takes what ``shardline run`` (either engine) wrote — the
JSON report, and optionally the graph with the node→shard array and a node
order — plus optional baseline assignments and a workload replay summary
(:mod:`partition.report.workload`), and returns a :class:`Report`: the figures
(matplotlib) and the figures' numbers. :mod:`partition.report.html` turns it
into one self-contained page. Everything the summary table shows is read from
the run report as it is; the baselines are measured here with
:func:`partition.score.score` on the same graph.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from partition.errors import ParameterError
from partition.report import figures as F
from partition.report.references import find_catalog_entry, reference_rows

__all__ = ["Report", "build_report", "summary_rows", "refinement_series", "start_rows"]


@dataclass(eq=False)
class Report:
    """A built report.

    Attributes
    ----------
    run : dict
        The run report as read.
    summary : list of (key, label, value text)
        The summary table; ``key`` names the report field it shows.
    figures : dict
        ``{name: (title, matplotlib Figure, caption)}`` in page order.
    baselines : list of dict
        ``name``, ``cut_fraction``, ``imbalance``, ``cut_edges``, ``ours``.
    references : list of dict
        Published figures beside ours (:func:`partition.report.references.reference_rows`).
    catalog_entry : dict or None
    notes : list of str
        What was left out and why.
    """

    run: dict
    summary: list
    figures: dict = field(default_factory=dict)
    baselines: list = field(default_factory=list)
    references: list = field(default_factory=list)
    catalog_entry: dict | None = None
    notes: list = field(default_factory=list)


def _result(run):
    res = run.get("result")
    if not isinstance(res, dict) or "cut_fraction" not in res:
        raise ParameterError("the run report has no 'result' figures (cut, balance); is it a 'shardline run' "
                             "report?")
    return res


def _weight(x):
    """Whole numbers with thousands separators, others with four decimals."""
    x = float(x)
    return f"{int(x):,}" if x.is_integer() else f"{x:,.4f}"


def summary_rows(run):
    """The summary table: ``(key, label, text)`` rows, the numbers as the report holds them."""
    res = _result(run)
    inp = run.get("input") or {}
    opts = run.get("options") or {}
    rows = [
        ("input.graph", "graph", str(inp.get("graph", "?"))),
        ("input.nodes", "nodes", f"{inp.get('nodes', res.get('nodes', 0)):,}"),
        ("input.edges", "edges", f"{inp.get('edges', res.get('edges', 0)):,}"),
        ("k", "shards (k)", f"{run['k']:,}"),
        ("result.cut_edges", "cut edges", f"{res['cut_edges']:,}"),
        ("result.cut_weight", "cut weight", _weight(res["cut_weight"])),
        ("result.cut_fraction", "cut fraction", f"{res['cut_fraction']:.6f}"),
        ("result.imbalance", "imbalance", f"{res['imbalance']:.6f}"),
        ("imbalance_allowed", "allowed imbalance ε", f"{run.get('imbalance_allowed', 0)}"),
        ("result.communication_volume", "communication volume",
         f"{res['communication_volume']:,}" if "communication_volume" in res else "—"),
        ("result.fanout", "fanout", f"{res['fanout']:.6f}" if "fanout" in res else "—"),
        ("engine", "engine", str(run.get("engine", "?")) + (f" ({run['mode']} mode)" if run.get("mode") else "")),
        ("seconds", "seconds (partition)", f"{run.get('seconds', 0):.2f}"),
        ("seed", "seed", str(run.get("seed"))),
        ("chosen_start", "start chosen", str(run.get("chosen_start", "?"))),
        ("options", "options", ", ".join(f"{key}={','.join(map(str, v)) if isinstance(v, list) else v}"
                                         for key, v in sorted(opts.items()))),
    ]
    return rows


def _total(run):
    res = _result(run)
    return float(res.get("total_edge_weight") or 0.0)


def start_rows(run):
    """Every start's raw and final cut fraction (either engine's report)."""
    total = _total(run)
    out = []
    for s in run.get("starts") or []:
        if "raw_cut_fraction" in s:
            out.append({"start": s["start"], "raw": float(s["raw_cut_fraction"]), "final": float(s["cut_fraction"])})
        elif "raw_cut" in s and total:
            out.append({"start": s["start"], "raw": s["raw_cut"] / total, "final": s["cut"] / total})
    return out


def refinement_series(run):
    """``{start: [(stage label, cut fraction), ...]}`` from the report's stage rows (line cut first)."""
    series = {}
    for row in run.get("stages") or []:
        stage = str(row.get("stage", ""))
        if ": " not in stage or "cut_after" not in row:
            continue
        start, _, step = stage.partition(": ")
        points = series.setdefault(start, [])
        label = step
        count = sum(1 for p in points if p[0] == step or p[0].startswith(step + " "))
        if count:
            label = f"{step} {count + 1}"
        points.append((label, float(row["cut_after"])))
    return {name: pts for name, pts in series.items() if pts}


def _baseline_rows(run, graph, baselines, k, eps):
    from partition.score import score

    res = _result(run)
    rows = [{"name": "shardline (this run)", "cut_fraction": float(res["cut_fraction"]),
             "imbalance": float(res["imbalance"]), "cut_edges": int(res["cut_edges"]), "ours": True}]
    for name, parts in (baselines or {}).items():
        s = score(graph, parts, k=k, eps=eps)
        rows.append({"name": name, "cut_fraction": float(s.cut_fraction), "imbalance": float(s.imbalance),
                     "cut_edges": int(s.cut_edges), "ours": False, "balanced": s.balanced})
    return rows


def build_report(run, graph=None, parts=None, order=None, baselines=None, workload=None, catalog=None,
                 progress=None):
    """Build the figures and tables of a run's report.

    Parameters
    ----------
    run : dict
        The JSON report of ``shardline run`` (in-memory or Spark engine).
    graph : partition.graph.Graph or None
        The input graph; needed for the adjacency picture and the baselines.
    parts : ndarray or None
        The run's shard of every dense node of ``graph``.
    order : ndarray or None
        The run's linear order (``order[p]`` = node at position ``p``); without
        it the adjacency picture orders the nodes by shard, then id.
    baselines : dict or None
        ``{name: parts}`` of baseline assignments of the same graph.
    workload : dict or None
        A checked workload replay summary (:func:`partition.report.workload.read_workload`).
    catalog : see :func:`partition.catalog.load_catalog`
    progress : partition.progress.Progress or None
        Gets one counted stage over the figures.

    Returns
    -------
    Report

    Raises
    ------
    ParameterError
        A report without result figures, or baselines without a graph.
    ShardlineError
        matplotlib is not installed (the message tells how to install it).
    """
    F.require_matplotlib()
    res = _result(run)
    k = int(run["k"])
    eps = run.get("imbalance_allowed")
    if baselines and graph is None:
        raise ParameterError("baselines are measured on the graph: give the graph too")
    measured = []
    if graph is not None and parts is not None:  # figures an engine's report may lack (the Spark engine's)
        from partition.score import score

        wanted = ("communication_volume", "fanout", "cut_matrix", "shard_weights")
        missing = [key for key in wanted if key not in res]
        if missing:
            full = score(graph, np.asarray(parts, dtype=np.int64), k=k, eps=eps).to_dict()
            res = dict(res, **{key: full[key] for key in missing})
            run = dict(run, result=res)
            measured = [key.replace("_", " ") for key in missing]
    rep = Report(run=run, summary=summary_rows(run))
    if measured:
        rep.notes.append(f"{', '.join(measured)}: measured here from the graph and the assignment (the run's "
                         "report does not hold them)")
    inp = run.get("input") or {}
    rep.catalog_entry = find_catalog_entry(inp.get("graph"), inp.get("sha256"), catalog)
    rep.references = reference_rows(rep.catalog_entry, k, res["cut_edges"], inp.get("edges") or res["edges"], eps)
    plan = ["loads", "cut matrix", "adjacency", "hierarchy", "refinement", "starts", "baselines", "workload"]
    if progress is not None:
        progress.task("report: drawing figures", total=len(plan))

    def add(name, title, fig, caption):
        rep.figures[name] = (title, fig, caption)

    def step():
        if progress is not None:
            progress.advance()

    unit = "node weight" if inp.get("weighted_nodes") else "nodes"
    balance = run.get("balance") or {}
    cap = balance.get("cap") or (res.get("balance") or {}).get("cap") or max(res["shard_weights"])
    add("loads", "Shard loads", F.load_bars(res["shard_weights"], cap, balance.get("floor"), unit),
        f"Every shard's load; the cap of the balance rule is {cap:,} ({unit}).")
    step()
    ew = "edge weight" if inp.get("weighted_edges") else "edges"
    if res.get("cut_matrix") is not None:
        add("cut_matrix", "Cut between shard pairs", F.cut_heatmap(res["cut_matrix"], ew),
            "Cell (a, b): the cut between shards a and b; bright cells are the pairs that carry the cut.")
    else:
        rep.notes.append(f"cut matrix: not drawn for k = {k} (the report lists shard pairs only up to k = 256)")
    step()
    if graph is not None and parts is not None:
        parts = np.asarray(parts, dtype=np.int64)
        if order is None:
            seq = np.lexsort((np.arange(graph.n), parts))
            name = "order by shard (no linear order kept)"
        else:
            seq = np.asarray(order, dtype=np.int64)
            name = "linear order"
        position = np.empty(graph.n, dtype=np.int64)
        position[seq] = np.arange(graph.n)
        fig, drawn = F.spy_plot(graph.indptr, graph.indices, position, parts[seq], seed=int(run.get("seed") or 0),
                                order_name=name)
        add("adjacency", "Adjacency matrix in the linear order", fig,
            f"Nodes in the {name}; a dot for every edge (u, v) at (position of v, position of u): "
            f"{drawn:,} entries drawn. "
            "Blocks along the diagonal mean related nodes sit next to each other; orange lines separate shards "
            "when the shards are (nearly) contiguous runs of the order.")
    else:
        rep.notes.append("adjacency: not drawn (give the graph)")
    step()
    hier = run.get("hierarchy") or {}
    if hier.get("clusters"):
        add("hierarchy", "Hierarchy rounds", F.hierarchy_rounds(hier["clusters"], hier.get("edges")),
            f"{hier.get('rounds', len(hier['clusters']) - 1)} rounds of Borůvka-style affinity clustering.")
    step()
    series = refinement_series(run)
    if series:
        add("refinement", "Refinement stages", F.refinement_cuts(series),
            "The cut fraction after each stage, per start; after 'pick' only the chosen start goes on.")
    else:
        rep.notes.append("refinement: the report's stages carry no cut figures")
    step()
    starts = start_rows(run)
    if starts:
        add("starts", "Starts", F.start_cuts(starts, run.get("chosen_start")),
            "Each linear order's plain line cut and its cut after refinement.")
    step()
    rep.baselines = _baseline_rows(run, graph, baselines, k, eps)
    if baselines:
        add("baselines", "Baselines", F.baseline_bars(rep.baselines),
            "The same graph, k and ε partitioned by the baselines, measured by shardline score's figures.")
    step()
    if workload:
        add("fanout", "Fan-out of the workload", F.fanout_histogram(workload),
            "Share of the replayed requests that reached each number of shards, per routing policy.")
        if any(p["hit_rate"] for p in workload.values()):
            add("hit_rate", "Cache hit rate", F.hit_rate_curves(workload),
                "Hit rate of the replayed lookups for each cache size, per routing policy.")
    step()
    if progress is not None:
        progress.done()
    return rep
