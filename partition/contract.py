"""Contract a graph by a labelling of its nodes, and project coarse partitions back.

Contraction merges every group of nodes with the same label into one coarse
node: the coarse node weighs the sum of its members' weights, the coarse edge
between two groups weighs the sum of the fine edge weights between them, and
edges inside a group disappear (no self-loops). It is the quotient graph of the
partition of the nodes by label, with weights summed (the construction used by
every multilevel partitioning scheme; see e.g. Hendrickson & Leland, "A
multilevel algorithm for partitioning graphs", Supercomputing 1995). In matrix
form, with the ``n × c`` indicator matrix ``P`` (``P[v, labels[v]] = 1``), the
coarse adjacency is ``Pᵀ A P`` with its diagonal removed. The work is one sort
of the ``2 m`` CSR entries by coarse ``(row, column)`` key and a segmented sum,
so contraction is ``O(m log m)`` and does not loop in Python.

A cut is preserved exactly: for any coarse partition ``q``, the cut of ``q`` on
the coarse graph equals the cut of ``project(q, labels)`` on the fine graph.
"""

from __future__ import annotations

import numpy as np

from partition.errors import ParameterError
from partition.graph import Graph

__all__ = ["contract", "project", "dense_labels"]


def _check_labels(labels, n):
    labels = np.asarray(labels)
    if labels.ndim != 1 or labels.shape[0] != n:
        raise ParameterError(f"labels must be a 1-d array of length {n}, got shape {labels.shape}")
    if labels.dtype.kind not in "iu":
        raise ParameterError(f"labels must be integers, got dtype {labels.dtype}")
    if n and labels.min() < 0:
        raise ParameterError("labels must be non-negative")
    return labels.astype(np.int64, copy=False)


def dense_labels(*columns):
    """Number the distinct tuples of several integer label columns ``0..c-1``.

    Tuples are numbered in lexicographic order of ``(columns[0], columns[1], ...)``,
    so the numbering does not depend on the order of the nodes.

    Parameters
    ----------
    *columns : ndarray of int, all of the same length n
        Non-negative integer labels.

    Returns
    -------
    labels : ndarray of int64, shape (n,)
        Dense label of each row's tuple.
    count : int
        Number of distinct tuples.
    """
    if not columns:
        raise ParameterError("dense_labels needs at least one column")
    cols = [np.asarray(c, dtype=np.int64) for c in columns]
    n = cols[0].shape[0]
    if any(c.shape != (n,) for c in cols):
        raise ParameterError("dense_labels: all columns must have the same length")
    if n == 0:
        return np.empty(0, dtype=np.int64), 0
    order = np.lexsort(cols[::-1])
    new = np.zeros(n, dtype=bool)
    new[0] = True
    for c in cols:
        s = c[order]
        new[1:] |= s[1:] != s[:-1]
    ranks = np.cumsum(new) - 1
    out = np.empty(n, dtype=np.int64)
    out[order] = ranks
    return out, int(ranks[-1] + 1)


def contract(graph: Graph, labels, n_clusters=None) -> Graph:
    """The quotient graph of ``graph`` by ``labels``, with summed weights.

    Parameters
    ----------
    graph : Graph
        The fine graph.
    labels : ndarray of int, shape (n,)
        Coarse node of each fine node, in ``[0, n_clusters)``. Labels that no
        node uses give coarse nodes of weight 0 with no edges.
    n_clusters : int, optional
        Number of coarse nodes (default ``labels.max() + 1``).

    Returns
    -------
    Graph
        The coarse graph: ``node_weights`` (int64) are the sums of the members'
        weights, ``edge_weights`` (float64, always present) the sums of the fine
        edge weights between two groups; ``ids`` are ``0..n_clusters-1``.
        Edges inside a group are dropped.

    Raises
    ------
    ParameterError
        When ``labels`` has the wrong length, is not integer, is negative or
        reaches ``n_clusters``.

    References
    ----------
    B. Hendrickson and R. Leland, "A multilevel algorithm for partitioning
    graphs", Proc. Supercomputing 1995 (contraction by a node grouping).
    """
    labels = _check_labels(labels, graph.n)
    top = int(labels.max()) + 1 if graph.n else 0
    c = top if n_clusters is None else int(n_clusters)
    if c < top:
        raise ParameterError(f"labels reach {top - 1} but n_clusters is {c}")
    if graph.node_weights is None:
        node_w = np.bincount(labels, minlength=c).astype(np.int64)
    else:
        node_w = _exact_group_sums(labels, graph.node_weights, c)
    rows = labels[graph.rows()]
    cols = labels[graph.indices]
    keep = rows != cols
    key = rows[keep] * np.int64(c) + cols[keep]
    w = graph.edge_weight_array()[keep]
    order = np.argsort(key, kind="stable")
    key = key[order]
    w = w[order]
    if key.size:
        first = np.flatnonzero(np.concatenate(([True], key[1:] != key[:-1])))
        w = np.add.reduceat(w, first)
        key = key[first]
    else:
        w = np.empty(0, dtype=np.float64)
    crow = key // c if c else key
    ccol = (key - crow * c).astype(np.int32)
    indptr = np.zeros(c + 1, dtype=np.int64)
    np.cumsum(np.bincount(crow, minlength=c), out=indptr[1:])
    return Graph(indptr, ccol, w.astype(np.float64), node_w, np.arange(c, dtype=np.int64))


def _exact_group_sums(labels, values, c):
    order = np.argsort(labels, kind="stable")
    lab = labels[order]
    out = np.zeros(c, dtype=np.int64)
    if lab.size:
        first = np.flatnonzero(np.concatenate(([True], lab[1:] != lab[:-1])))
        out[lab[first]] = np.add.reduceat(values[order].astype(np.int64), first)
    return out


def project(coarse_parts, labels):
    """Give every fine node the shard of its coarse node.

    Parameters
    ----------
    coarse_parts : ndarray of int, shape (c,)
        Shard of each coarse node.
    labels : ndarray of int, shape (n,)
        Coarse node of each fine node, in ``[0, c)``.

    Returns
    -------
    ndarray, shape (n,)
        ``coarse_parts[labels]`` (same dtype as ``coarse_parts``).

    Raises
    ------
    ParameterError
        When a label is negative or not below ``len(coarse_parts)``.
    """
    coarse_parts = np.asarray(coarse_parts)
    labels = np.asarray(labels)
    if labels.dtype.kind not in "iu":
        raise ParameterError(f"labels must be integers, got dtype {labels.dtype}")
    if labels.size and (labels.min() < 0 or labels.max() >= coarse_parts.shape[0]):
        raise ParameterError(
            f"labels must lie in [0, {coarse_parts.shape[0]}) to index the coarse partition"
        )
    return coarse_parts[labels]
