"""Python entry point: partition an edge list (a file or arrays) and get the assignment and the run's report.

:func:`partition_edges` is what ``shardline run --engine memory`` does,
without writing files: it reads the graph (:func:`partition.edgelist.read_graph`)
or builds it from arrays (:func:`partition.graph.build_graph`), runs the
in-memory engine (:func:`partition.partitioner.partition_graph`, the linear
embedding of Aydin, Bateni & Mirrokni, WSDM 2016), measures the result
(:func:`partition.score.score`) and returns a :class:`Partitioned` whose
``report`` has the keys of the JSON report ``shardline run`` writes (so
:mod:`partition.report` can draw it) and whose ``assignment`` maps the user's
ids, exactly as given, to shards.
"""

from __future__ import annotations

import os
import time
from dataclasses import dataclass

import numpy as np

__all__ = ["Partitioned", "partition_edges"]


@dataclass(eq=False)
class Partitioned:
    """What :func:`partition_edges` returns.

    Attributes
    ----------
    graph : partition.graph.Graph
    parts : ndarray of int64
        Shard of every dense node (``graph.ids[i]`` is node ``i``'s id).
    order : ndarray of int64
        The linear order of the chosen start (``order[p]`` = node at position ``p``).
    report : dict
        The run report (options, stages, starts, hierarchy, ``result`` figures).
    """

    graph: object
    parts: np.ndarray
    order: np.ndarray
    report: dict

    @property
    def assignment(self):
        """``{id: shard}`` in the user's own ids."""
        return dict(zip(self.graph.ids.tolist(), self.parts.tolist()))

    def write(self, path, report_path=None, order_path=None):
        """Write the node→shard file, its ``.report.json`` and optionally the order, atomically, as ``run`` does."""
        import json

        from partition.assignment import write_assignment
        from partition.atomic import atomic_paths
        from partition.tables import order_table, write_table

        report_path = report_path or f"{path}.report.json"
        report = dict(self.report, outputs={"assignment": str(path), "report": str(report_path),
                                            "order": None if order_path is None else str(order_path),
                                            "hierarchy": None})
        with atomic_paths([path, report_path, order_path]) as tmp:
            write_assignment(tmp[0], self.graph, self.parts)
            if tmp[2] is not None:
                write_table(tmp[2], order_table(self.graph, self.order))
            with open(tmp[1], "w", encoding="utf-8") as fh:
                fh.write(json.dumps(report, indent=2, sort_keys=True) + "\n")
        self.report = report
        return report


def partition_edges(edges, k, imbalance=0.0, seed=0, weights=None, progress=None, read_options=None, **options):
    """Balanced ``k``-way partition of an edge list in memory.

    Parameters
    ----------
    edges : str, path-like, (src, dst) pair of arrays, or partition.graph.Graph
        An edge-list file (any format ``shardline run`` reads), two arrays of
        endpoint ids, or a graph already built.
    k : int
        Number of shards.
    imbalance : float
        Allowed imbalance ε (see :mod:`partition.balance`).
    seed : int
        Seed of every tie-break and random choice; the same seed gives the same result.
    weights : array_like or None
        Edge weights when ``edges`` is a pair of arrays.
    progress : callable or None
        The engine's progress rows (a :class:`partition.progress.Progress` draws them).
    read_options : dict or None
        Keyword arguments of :func:`partition.edgelist.read_graph` for a file
        (``weight_column="rides"``, ``fmt="csv"``, ...).
    **options
        Method options of :func:`partition.partitioner.partition_graph`
        (``affinity``, ``linkage``, ``hub_cap``, ``starts``, ``refine``).

    Returns
    -------
    Partitioned

    Raises
    ------
    InputError
        A file that cannot be read (names the file and line).
    ParameterError
        ``k`` out of range, a negative ε, unknown options.

    Examples
    --------
    >>> from partition.api import partition_edges
    >>> run = partition_edges(([1, 2, 3, 4], [2, 3, 4, 1]), k=2, seed=0)
    >>> sorted(run.assignment.items())
    [(1, 1), (2, 1), (3, 0), (4, 0)]
    """
    from partition import __version__
    from partition.edgelist import read_graph
    from partition.errors import check_imbalance, check_parts
    from partition.graph import Graph, build_graph
    from partition.partitioner import partition_graph
    from partition.score import score

    eps = check_imbalance(imbalance)
    k = check_parts(k)
    started = time.perf_counter()
    source = None
    if isinstance(edges, Graph):
        graph = edges
    elif isinstance(edges, (str, os.PathLike)):
        source = os.fspath(edges)
        graph = read_graph(source, **(read_options or {}))
    else:
        src, dst = edges
        graph = build_graph(np.asarray(src), np.asarray(dst), weights=None if weights is None else
                            np.asarray(weights, dtype=np.float64))
    read_seconds = time.perf_counter() - started
    check_parts(k, graph.n)
    result = partition_graph(graph, k, eps=eps, seed=seed, progress=progress, **options)
    inp = {"graph": source or "<arrays>", "nodes": graph.n, "edges": graph.m, "weighted_edges": graph.weighted,
           "weighted_nodes": graph.node_weights is not None, "read_seconds": round(read_seconds, 4)}
    if source is not None:
        from partition.placement.export import file_sha256

        inp["sha256"] = file_sha256(source)
    report = {"tool": f"shardline {__version__}", "input": inp, **result.report,
              "result": score(graph, result.parts, k=k, eps=eps).to_dict(), "stability": None}
    return Partitioned(graph=graph, parts=result.parts, order=result.order, report=report)
