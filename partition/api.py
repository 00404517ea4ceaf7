"""Python entry point: partition an edge list (a file or arrays) and get the assignment and the run's report.

:func:`shard_graph` takes the graph as tables in the usual layout (edges
``src``, ``dst``, optional weight; vertices ``id``, optional load) — pandas,
Arrow, numpy, or Spark DataFrames, which it partitions with the Spark engine
(:mod:`partition.spark.engine`) and returns as a Spark DataFrame of
``id, shard``.

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

__all__ = ["Partitioned", "SparkPartitioned", "partition_edges", "shard_graph"]


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


def _column(table, name, what):
    """One column of a pandas DataFrame, an Arrow table or a mapping of arrays, as a numpy array."""
    from partition.errors import ParameterError

    names = list(table.column_names) if hasattr(table, "column_names") else list(table.keys())
    if name not in names:
        raise ParameterError(f"the {what} table has no column {name!r} (columns: {', '.join(map(str, names))})")
    col = table.column(name) if hasattr(table, "column_names") else table[name]
    if hasattr(col, "to_numpy") and not isinstance(col, np.ndarray):
        col = col.to_numpy(zero_copy_only=False) if hasattr(col, "combine_chunks") else col.to_numpy()
    return np.asarray(col)


def _ids(col, what):
    """A column of node ids by the id rule of :mod:`partition.ids`: integers stay integers, text stays text."""
    from partition.errors import ParameterError

    if col.dtype.kind == "f":
        raise ParameterError(f"the {what} column holds floating-point numbers; ids must be integers or text")
    if col.dtype.kind == "u" and col.size and int(col.max()) > 2**63 - 1:
        return np.asarray([str(int(x)) for x in col], dtype=object)  # past int64: kept exactly, as text
    if col.dtype.kind in "iu":
        return col.astype(np.int64, copy=False)
    kinds = {type(x) for x in col.tolist()}
    if kinds <= {str}:
        return np.asarray(col, dtype=object)
    if kinds <= {int}:
        return np.asarray(col.tolist(), dtype=np.int64)
    raise ParameterError(f"the {what} column mixes id types ({', '.join(sorted(t.__name__ for t in kinds))}); "
                         "give one type per column")


def _is_spark_frame(obj):
    return type(obj).__module__.startswith("pyspark.sql") and hasattr(obj, "sparkSession")


def shard_graph(edges, k, vertices=None, *, imbalance=0.0, seed=0, weight=None, node_weight=None, progress=None,
                work_dir=None, **options):
    """Balanced ``k``-way partition of a graph given as tables or arrays; the Python entry of both engines.

    Parameters
    ----------
    edges : table, array or Spark DataFrame
        The edges, in the usual graph-table layout: columns ``src`` and ``dst``
        (and the column ``weight`` names, if any) of a pandas DataFrame, a
        pyarrow Table, a mapping of arrays, or a Spark DataFrame; or an
        ``(m, 2)`` array of endpoint ids; or a ``(src, dst)`` pair of arrays.
        Ids are integers or text (:mod:`partition.ids`); floating-point id
        columns are refused.
    k : int
    vertices : table or Spark DataFrame, optional
        Column ``id`` (and the column ``node_weight`` names, if any): every id
        is a node, isolated ones too, and every edge end must be listed.
    imbalance : float
        Allowed imbalance ε (:mod:`partition.balance`).
    seed : int
    weight, node_weight : str or None
        Column of the edge weights in ``edges`` / of the node weights (loads)
        in ``vertices``.
    progress : callable or None
    work_dir : str or None
        Spark only: the folder for checkpoints and the staged input (a
        temporary folder by default).
    **options
        Plan options of :func:`partition.plan.make_plan` (``affinity``,
        ``linkage``, ``hub_cap``, ``starts``, ``refine``; for Spark ``mode``).

    Returns
    -------
    Partitioned
        For a Spark DataFrame: :class:`SparkPartitioned`, whose ``frame`` is a
        Spark DataFrame of ``id, shard`` (the user's ids, as given).

    Raises
    ------
    ParameterError
        Missing columns, floating-point ids, bad options.

    Examples
    --------
    >>> import pandas as pd
    >>> from partition.api import shard_graph
    >>> rides = pd.DataFrame({"src": ["dock-a", "dock-b", "dock-c", "dock-d"],
    ...                       "dst": ["dock-b", "dock-c", "dock-d", "dock-a"]})
    >>> run = shard_graph(rides, k=2, seed=0)
    >>> sorted(run.assignment.values()).count(0)
    2
    """
    from partition.graph import build_graph

    if _is_spark_frame(edges):
        return _shard_spark(edges, k, vertices, imbalance, seed, weight, node_weight, progress, work_dir, options)
    if isinstance(edges, tuple) and len(edges) == 2:
        src, dst, w = _ids(np.asarray(edges[0]), "src"), _ids(np.asarray(edges[1]), "dst"), None
    elif isinstance(edges, np.ndarray):
        if edges.ndim != 2 or edges.shape[1] != 2:
            from partition.errors import ParameterError

            raise ParameterError(f"an edge array must have shape (m, 2), got {edges.shape}")
        src, dst, w = _ids(edges[:, 0], "src"), _ids(edges[:, 1], "dst"), None
    else:
        src, dst = _ids(_column(edges, "src", "edge"), "src"), _ids(_column(edges, "dst", "edge"), "dst")
        w = None if weight is None else _column(edges, weight, "edge").astype(np.float64)
    node_ids = node_weights = None
    if vertices is not None:
        node_ids = _ids(_column(vertices, "id", "vertex"), "id")
        node_weights = (np.ones(node_ids.shape[0], dtype=np.int64) if node_weight is None
                        else _column(vertices, node_weight, "vertex"))
    graph = build_graph(src, dst, weights=w, node_ids=node_ids, node_weights=node_weights, source="<table>")
    return partition_edges(graph, k, imbalance, seed, progress=progress, **options)


@dataclass(eq=False)
class SparkPartitioned:
    """What :func:`shard_graph` returns for a Spark DataFrame.

    Attributes
    ----------
    frame : pyspark.sql.DataFrame
        ``id, shard``: every node in the user's ids, as given.
    parts : ndarray of int64
        Shard of every dense node.
    report : dict
        The run report (the keys of ``shardline run --engine spark``'s report).
    """

    frame: object
    parts: np.ndarray
    report: dict


def _shard_spark(edges, k, vertices, imbalance, seed, weight, node_weight, progress, work_dir, options):
    import tempfile
    from pathlib import Path

    import pandas as pd
    from pyspark.sql import functions as F

    from partition import __version__
    from partition.errors import InputError, ParameterError
    from partition.plan import make_plan
    from partition.spark.engine import partition_spark
    from partition.spark.figures import result_figures
    from partition.spark.io import read_graph_df

    spark = edges.sparkSession
    plan = make_plan(k, imbalance, seed, engine="spark", **options)
    for name, frame, cols in (("edge", edges, ["src", "dst"] + ([weight] if weight else [])),
                              ("vertex", vertices, ["id"] + ([node_weight] if node_weight else []))):
        if frame is None:
            continue
        missing = [c for c in cols if c not in frame.columns]
        if missing:
            raise ParameterError(f"the {name} DataFrame has no column {missing[0]!r} "
                                 f"(columns: {', '.join(frame.columns)})")
        types = dict(frame.dtypes)
        for c in cols[:2] if name == "edge" else cols[:1]:
            if types[c] in ("float", "double") or types[c].startswith("decimal"):
                raise ParameterError(f"the {name} column {c!r} holds numbers with a fraction part ({types[c]}); "
                                     "ids must be integers or text")
    work = Path(work_dir or tempfile.mkdtemp(prefix="shardline-api-"))
    staged = work / "input"
    edges.select("src", "dst", *([F.col(weight).alias("weight")] if weight else [])).write.mode("overwrite") \
        .parquet(str(staged / "edges"))
    nw_path = None
    if vertices is not None:
        wcol = F.col(node_weight) if node_weight else F.lit(1)
        vertices.select("id", wcol.alias("weight")).write.mode("overwrite").parquet(str(staged / "vertices"))
        nw_path = str(staged / "vertices")
    try:
        sg = read_graph_df(spark, str(staged / "edges"), fmt="parquet", source_column="src", target_column="dst",
                           weight_column="weight" if weight else None, node_weights=nw_path,
                           allow_isolated=True)
    except InputError as err:  # name the user's table and its row, not the staged copy
        table = "<vertices DataFrame>" if nw_path and (err.path or "").startswith(nw_path) else "<edges DataFrame>"
        raise InputError(table, err.detail.replace("line", "row")) from err
    parts, _, report = partition_spark(spark, sg, plan, work_dir=work / "run", progress=progress)
    report["tool"] = f"shardline {__version__}"
    report["input"] = {"graph": "<Spark DataFrame>", "nodes": sg.n, "edges": sg.m, "weighted_edges": sg.weighted,
                       "weighted_nodes": sg.node_weights is not None}
    report["result"] = result_figures(spark, sg, parts, plan.k)
    sh = spark.createDataFrame(pd.DataFrame({"node": np.arange(len(parts), dtype=np.int64),
                                             "shard": np.asarray(parts, dtype=np.int64)}))
    frame = sg.nodes.join(sh, "node").orderBy("node").select("id", "shard")
    return SparkPartitioned(frame=frame, parts=parts, report=report)
