"""The in-memory graph: an undirected graph in compressed sparse row (CSR) form.

Normalisation rules (the ones the public collections use to count edges):

* edges are undirected: ``u v`` and ``v u`` are the same edge;
* self-loops are dropped, but their endpoint stays a node (it may be isolated);
* unweighted input: an undirected pair is one edge of weight 1 however often it
  appears; weighted input: the weights of repeated pairs are summed;
* node ids of any type are mapped to dense integers ``0..n-1`` in sorted id
  order, so the mapping does not depend on the order of the input lines;
  ``Graph.ids[i]`` is the user's id of dense node ``i``.

Memory: ``indices`` is int32 (two entries per undirected edge, 8 bytes), edge
weights, when given, are float64 (16 bytes per edge); ``indptr`` and integer
``ids`` are 8 bytes per node each. That is at most 24 bytes per undirected edge
plus 16 per node (node weights, when given, add 8 per node).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from partition.errors import InputError

__all__ = ["Graph", "build_graph", "dense_ids"]


@dataclass(eq=False)
class Graph:
    """An undirected graph with optional edge and node weights.

    Attributes
    ----------
    indptr : ndarray of int64, shape (n + 1,)
        Row pointers: the neighbours of node ``i`` are
        ``indices[indptr[i]:indptr[i + 1]]``, sorted ascending.
    indices : ndarray of int32, shape (2 m,)
        Neighbour lists; every undirected edge appears once in each direction.
    edge_weights : ndarray of float64, shape (2 m,), or None
        Weight of each CSR entry (``None`` means every edge weighs 1).
    node_weights : ndarray of int64, shape (n,), or None
        Non-negative integer node weights (``None`` means every node weighs 1).
    ids : ndarray, shape (n,)
        The user's id of each dense node: int64 when every id in the input is an
        integer, otherwise an array of Python strings (dtype object).
    """

    indptr: np.ndarray
    indices: np.ndarray
    edge_weights: np.ndarray | None = None
    node_weights: np.ndarray | None = None
    ids: np.ndarray | None = None
    source: str | None = field(default=None)

    def __post_init__(self):
        if self.ids is None:
            self.ids = np.arange(self.n, dtype=np.int64)

    # --- sizes -------------------------------------------------------------
    @property
    def n(self) -> int:
        """Number of nodes."""
        return int(self.indptr.shape[0] - 1)

    @property
    def m(self) -> int:
        """Number of undirected edges."""
        return int(self.indices.shape[0] // 2)

    @property
    def weighted(self) -> bool:
        return self.edge_weights is not None

    def degrees(self) -> np.ndarray:
        """Number of neighbours of each node (int64)."""
        return np.diff(self.indptr)

    def node_weight_array(self) -> np.ndarray:
        """Node weights as int64 (ones when the graph has none)."""
        if self.node_weights is None:
            return np.ones(self.n, dtype=np.int64)
        return self.node_weights

    def edge_weight_array(self) -> np.ndarray:
        """Weight of each CSR entry as float64 (ones when unweighted)."""
        if self.edge_weights is None:
            return np.ones(self.indices.shape[0], dtype=np.float64)
        return self.edge_weights

    def total_node_weight(self) -> int:
        return int(self.n if self.node_weights is None else self.node_weights.sum())

    def total_edge_weight(self) -> float:
        """Sum of the weights of the undirected edges."""
        if self.edge_weights is None:
            return float(self.m)
        return float(self.edge_weights.sum() / 2.0)

    def rows(self) -> np.ndarray:
        """Source node of each CSR entry (int32 array of length 2 m)."""
        return np.repeat(np.arange(self.n, dtype=np.int32), np.diff(self.indptr))

    def edges(self):
        """Each undirected edge once, as ``(u, v, w)`` arrays with ``u < v``.

        ``w`` is float64 (ones when unweighted).
        """
        src = self.rows()
        keep = src < self.indices
        w = self.edge_weight_array()[keep]
        return src[keep], self.indices[keep], w

    def neighbours(self, i):
        return self.indices[self.indptr[i] : self.indptr[i + 1]]

    def to_scipy(self):
        """The symmetric adjacency matrix as ``scipy.sparse.csr_matrix`` (float64)."""
        import scipy.sparse as sp

        return sp.csr_matrix(
            (self.edge_weight_array(), self.indices, self.indptr), shape=(self.n, self.n)
        )

    def nbytes(self) -> int:
        """Bytes held by the graph's arrays (string ids counted as pointers only)."""
        total = self.indptr.nbytes + self.indices.nbytes + self.ids.nbytes
        for arr in (self.edge_weights, self.node_weights):
            if arr is not None:
                total += arr.nbytes
        return int(total)

    def id_index(self):
        """A function mapping an array of user ids to dense indices (-1 when unknown)."""
        return IdIndex(self.ids)

    def __repr__(self):
        kind = "weighted" if self.weighted else "unweighted"
        return f"Graph(n={self.n}, m={self.m}, {kind}, source={self.source!r})"


class IdIndex:
    """Look up dense node indices from user ids (sorted-array binary search)."""

    def __init__(self, ids):
        self.ids = ids
        self.integer = ids.dtype.kind in "iu"

    def lookup(self, keys):
        """Dense index of each key, ``-1`` where the key is not a node."""
        keys = np.asarray(keys)
        if self.integer:
            if keys.dtype.kind not in "iu":
                return np.full(keys.shape[0], -1, dtype=np.int64)
            pos = np.searchsorted(self.ids, keys)
        else:
            if keys.dtype.kind in "iu":
                keys = keys.astype(str).astype(object)
            pos = np.searchsorted(self.ids, keys)
        pos = np.minimum(pos, max(len(self.ids) - 1, 0))
        found = self.ids[pos] == keys if len(self.ids) else np.zeros(keys.shape[0], bool)
        return np.where(found, pos, -1).astype(np.int64)


def dense_ids(columns):
    """Map several id columns to dense integers in sorted id order.

    Parameters
    ----------
    columns : list of ndarray
        Id arrays, all integer (int64) or all strings (dtype object).

    Returns
    -------
    ids : ndarray
        Sorted unique ids.
    codes : list of ndarray of int64
        The dense index of each entry of each column.
    """
    sizes = [len(c) for c in columns]
    allv = np.concatenate(columns) if columns else np.empty(0, dtype=np.int64)
    ids, inverse = np.unique(allv, return_inverse=True)
    inverse = inverse.astype(np.int64, copy=False)
    out, start = [], 0
    for s in sizes:
        out.append(inverse[start : start + s])
        start += s
    return ids, out


def build_graph(src, dst, weights=None, node_ids=None, node_weights=None, source=None, ids=None):
    """Normalise an edge list into a :class:`Graph`.

    Parameters
    ----------
    src, dst : ndarray
        Endpoints: user ids (int64 or strings), or dense int codes when ``ids``
        is given.
    weights : ndarray of float64 or None
        Edge weights (finite, >= 0); repeated pairs are summed. ``None``: each
        distinct pair is one edge of weight 1.
    node_ids, node_weights : ndarray or None
        Ids listed in a node-weights file and their non-negative integer
        weights. Every listed id is a node (it may have no edges). When a
        node-weights file is given, every node must be listed in it.
    ids : ndarray or None
        When given, ``src``/``dst`` are already dense codes into ``ids``.
    """
    if ids is None:
        cols = [np.asarray(src), np.asarray(dst)]
        if node_ids is not None:
            cols.append(np.asarray(node_ids))
        cols = _common_id_type(cols)
        ids, codes = dense_ids(cols)
        u, v = codes[0], codes[1]
        nw_codes = codes[2] if node_ids is not None else None
    else:
        u = np.asarray(src, dtype=np.int64)
        v = np.asarray(dst, dtype=np.int64)
        nw_codes = None
    n = int(len(ids))
    if n == 0:
        raise InputError(source, "the graph is empty: no nodes were found")
    if n >= 2**31 - 1:
        raise InputError(source, f"{n} nodes is more than the in-memory engine holds (2^31 - 1)")

    keep = u != v
    lo = np.minimum(u, v)[keep]
    hi = np.maximum(u, v)[keep]
    key = lo * np.int64(n) + hi
    if weights is None:
        key = np.unique(key)
        w = None
    else:
        wk = np.asarray(weights, dtype=np.float64)[keep]
        order = np.argsort(key, kind="stable")
        key = key[order]
        wk = wk[order]
        if key.size:
            first = np.flatnonzero(np.concatenate(([True], key[1:] != key[:-1])))
            w = np.add.reduceat(wk, first)
            key = key[first]
        else:
            w = np.empty(0, dtype=np.float64)
    lo = key // n
    hi = key - lo * n
    indptr, indices, ew = _symmetric_csr(n, lo, hi, w)

    nweights = None
    if node_weights is not None:
        nweights = np.zeros(n, dtype=np.int64)
        seen = np.zeros(n, dtype=bool)
        nweights[nw_codes] = np.asarray(node_weights, dtype=np.int64)
        seen[nw_codes] = True
        if not seen.all():
            missing = ids[np.flatnonzero(~seen)[:5]]
            raise InputError(
                source,
                f"{int((~seen).sum())} node(s) of the edge list have no weight in the "
                f"node-weights file (first: {', '.join(map(str, missing))})",
            )
    return Graph(indptr, indices, ew, nweights, ids, source=None if source is None else str(source))


def _common_id_type(cols):
    """All-integer id columns stay int64; otherwise every id becomes a string."""
    if all(c.dtype.kind in "iu" for c in cols):
        return [c.astype(np.int64, copy=False) for c in cols]
    out = []
    for c in cols:
        if c.dtype.kind in "iu":
            c = c.astype(str)
        out.append(np.asarray(c, dtype=object))
    return out


def _symmetric_csr(n, lo, hi, w):
    """CSR of the symmetric matrix with entries (lo, hi) and (hi, lo), rows sorted.

    ``(lo, hi)`` must be sorted by ``lo * n + hi`` and distinct.
    """
    # Counting sort by row; within a row the entries from the (lo, hi) half are
    # already in increasing ``hi`` order, those of the (hi, lo) half in
    # increasing ``lo`` order, and every lo-neighbour of a row is smaller than
    # every hi-neighbour, so a stable sort by row keeps each row sorted when the
    # second half comes first.
    row = np.concatenate((hi, lo))
    col = np.concatenate((lo, hi))
    order = _stable_argsort_small(row, n)
    indices = col[order].astype(np.int32)
    counts = np.bincount(row, minlength=n)
    indptr = np.zeros(n + 1, dtype=np.int64)
    np.cumsum(counts, out=indptr[1:])
    ew = None
    if w is not None:
        ew = np.concatenate((w, w))[order]
    return indptr, indices, ew


def _stable_argsort_small(keys, n):
    """Stable argsort of integer keys in ``[0, n)``."""
    if n < 2**15:
        return np.argsort(keys.astype(np.int16), kind="stable")
    return np.argsort(keys, kind="stable")
