"""Published partition figures for catalog graphs, set beside a run's own figures.

Every entry of ``datasets/catalog.json`` has a ``reference`` list of published
figures for that graph. One figure is a dict with

``metric``
    ``"cut_edges"`` (number of cut edges) or ``"cut_fraction"`` (cut edges /
    edges);
``k``, ``imbalance``
    the number of parts and the allowed imbalance ε it was published for;
``value``
    the published figure;
``citation``
    where it was published;
``from_memory``
    ``true`` when the value was recalled from memory and not checked against
    the source (shown as such wherever it is displayed);
``note`` (optional)
    how the source's balance rule differs from ours, and the like.

A graph is matched to its catalog entry by the SHA-256 of its file (the
catalog's ``file_sha256``, as recorded in a run report's ``input.sha256``) or,
failing that, by its file name (the catalog's ``file``). This module does not
import matplotlib, so ``shardline score`` can use it.
"""

from __future__ import annotations

import os

from partition.catalog import load_catalog

__all__ = ["find_catalog_entry", "reference_rows"]


def find_catalog_entry(graph_path=None, sha256=None, catalog=None):
    """The catalog entry of a graph file, or ``None``.

    Parameters
    ----------
    graph_path : str or path-like or None
        The graph file as the user named it.
    sha256 : str or None
        The file's SHA-256 when already known (a run report's
        ``input.sha256``); otherwise it is computed from ``graph_path`` when
        the file exists.
    catalog : see :func:`partition.catalog.load_catalog`

    Returns
    -------
    dict or None
        The entry, with an extra key ``matched_by`` (``"sha256"`` or
        ``"file name"``).
    """
    entries = load_catalog(catalog)
    if sha256 is None and graph_path is not None and os.path.isfile(graph_path):
        from partition.catalog import file_sha256

        sha256 = file_sha256(graph_path)
    if sha256:
        for entry in entries:
            if entry["file_sha256"] == sha256:
                return dict(entry, matched_by="sha256")
    if graph_path is not None:
        base = os.path.basename(os.fspath(graph_path))
        for entry in entries:
            if entry["file"] == base:
                return dict(entry, matched_by="file name")
    return None


def reference_rows(entry, k, cut_edges, edges, eps=None):
    """Our figure beside every published one for ``k`` parts.

    Parameters
    ----------
    entry : dict or None
        A catalog entry (:func:`find_catalog_entry`).
    k : int
        Number of shards of the run.
    cut_edges : int
        Our number of cut edges.
    edges : int
        Number of edges of the graph (to compare cut fractions).
    eps : float or None
        Our allowed imbalance; rows for the same ε are flagged ``same_eps``.

    Returns
    -------
    list of dict
        One row per published figure for ``k``, sorted by ε: ``imbalance``,
        ``metric``, ``published``, ``ours`` (in the same metric), ``ratio``
        (ours / published; ``None`` when the published value is 0),
        ``same_eps``, ``citation``, ``from_memory``, ``note``.
    """
    if not entry:
        return []
    rows = []
    for ref in entry.get("reference") or []:
        if int(ref.get("k", -1)) != int(k):
            continue
        metric = ref.get("metric", "cut_edges")
        ours = float(cut_edges) if metric == "cut_edges" else (cut_edges / edges if edges else 0.0)
        value = float(ref["value"])
        rows.append({
            "imbalance": float(ref.get("imbalance", 0.0)),
            "metric": metric,
            "published": value,
            "ours": ours,
            "ratio": ours / value if value else None,
            "same_eps": eps is not None and abs(float(ref.get("imbalance", 0.0)) - float(eps)) < 1e-12,
            "citation": ref.get("citation", ""),
            "from_memory": bool(ref.get("from_memory", False)),
            "note": ref.get("note"),
        })
    return sorted(rows, key=lambda r: (r["imbalance"], r["metric"]))
