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

    Notes
    -----
    Non-negative integer ids below ``max(4 · entries, 2^24)`` are mapped with a
    presence array (linear time); other ids by hashing (:func:`_factorize`)
    and sorting the distinct ids only.
    """
    sizes = [len(c) for c in columns]
    allv = np.concatenate(columns) if columns else np.empty(0, dtype=np.int64)
    if allv.size == 0:
        return allv, [np.empty(0, dtype=np.int64) for _ in columns]
    if allv.dtype.kind in "iu" and allv.min() >= 0 and allv.max() < max(4 * allv.size, 1 << 24):
        present = np.zeros(int(allv.max()) + 1, dtype=bool)
        present[allv] = True
        remap = np.cumsum(present, dtype=np.int64) - 1
        ids = np.flatnonzero(present).astype(np.int64)
        return ids, [remap[c] for c in columns]
    codes, uniques = _factorize(allv)
    order = np.argsort(uniques, kind="stable")
    rank = np.empty(order.size, dtype=np.int64)
    rank[order] = np.arange(order.size, dtype=np.int64)
    inverse = rank[codes]
    ids = uniques[order]
    out, start = [], 0
    for s in sizes:
        out.append(inverse[start : start + s])
        start += s
    return ids, out


def _factorize(values):
    """Codes and distinct values of ``values`` in first-seen order, by hashing.

    ``pandas.factorize`` when pandas is installed (it comes with the Spark
    extra and is the faster of the two), else pyarrow's ``dictionary_encode``;
    the caller sorts the distinct values, so the result does not depend on which.
    """
    try:
        import pandas as pd
    except ImportError:
        return _factorize_arrow(values)
    codes, uniques = pd.factorize(values, sort=False)
    return codes, np.asarray(uniques, dtype=values.dtype)


def _factorize_arrow(values):
    """:func:`_factorize` with pyarrow alone (the base install has no pandas)."""
    import pyarrow as pa

    encoded = pa.array(values, from_pandas=False).dictionary_encode()
    codes = encoded.indices.to_numpy(zero_copy_only=False).astype(np.int64, copy=False)
    return codes, np.asarray(encoded.dictionary.to_numpy(zero_copy_only=False), dtype=values.dtype)


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

    w = None if weights is None else np.asarray(weights, dtype=np.float64)
    indptr, indices, ew = _csr_kernel(n, u, v, w)

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


def _csr_kernel(n, u, v, w):
    """Symmetric CSR of the pairs (u, v): self-loops dropped, duplicates merged.

    Rows are sorted; with weights ``w`` the weights of repeated pairs are summed
    (in the order of the input, so sums of integers are exact and sums of
    floats are the same for the same input), without weights each distinct pair
    counts once.
    """
    from partition._csr_kernels import build_symmetric_csr

    u = np.ascontiguousarray(u, dtype=np.int64)
    v = np.ascontiguousarray(v, dtype=np.int64)
    if w is None:
        indptr, indices, _ = build_symmetric_csr(n, u, v, np.empty(0, dtype=np.float64), False)
        return indptr, indices, None
    return build_symmetric_csr(n, u, v, np.ascontiguousarray(w, dtype=np.float64), True)
