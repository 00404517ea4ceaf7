"""Quality of a partition: cut, balance, communication volume and fanout.

Every figure comes from vectorised passes over the CSR arrays (linear in the
number of edges, plus a per-row sort of the cut entries by shard):

* **cut edges / cut weight** — edges whose endpoints lie in different shards,
  counted once each, and the sum of their weights; the **cut fraction** is the
  cut weight over the total edge weight (0 for a graph without edges);
* **shard weights and sizes** — node weight and node count of each shard, and
  **imbalance** ``max shard weight / (W / k) − 1`` (:func:`partition.balance.imbalance`);
* **communication volume** — the sum over nodes of the number of distinct
  shards other than its own among its neighbours (Hendrickson & Kolda 2000);
* **boundary nodes** — nodes with at least one neighbour in another shard;
* **fanout** — the mean over nodes of the number of distinct shards among the
  node and its neighbours, i.e. how many shards a query reading a node and its
  neighbourhood must reach. Query fan-out is a common-practice measure for
  sharded stores; this one-hop form is Shardline's own definition. It equals
  ``1 + volume / n``;
* **cut matrix** — ``C[a, b]`` is the weight of the edges between shards ``a``
  and ``b`` (symmetric, zero diagonal), kept as a sparse matrix.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import scipy.sparse as sp

from partition.balance import balance_rule, imbalance
from partition.errors import ParameterError, check_parts

__all__ = ["Score", "score", "DENSE_MATRIX_MAX_K", "CUT_PAIRS_LIMIT"]

DENSE_MATRIX_MAX_K = 256
"""Up to this many shards :meth:`Score.to_dict` writes the whole k×k cut matrix."""

CUT_PAIRS_LIMIT = 100_000
"""Above :data:`DENSE_MATRIX_MAX_K` shards, :meth:`Score.to_dict` lists at most this many shard pairs."""


@dataclass(frozen=True, eq=False)
class Score:
    """The quality figures of one partition (see the module docstring).

    Attributes
    ----------
    k, n_nodes, n_edges : int
    cut_edges : int
    cut_weight, total_edge_weight, cut_fraction : float
    shard_sizes, shard_weights : ndarray of int64, shape (k,)
    shard_cut_weights : ndarray of float64, shape (k,)
        Weight of the cut edges with an endpoint in each shard.
    total_node_weight : int
    imbalance : float
    communication_volume, boundary_nodes : int
    fanout : float
    cut_matrix : scipy.sparse.csr_matrix, shape (k, k)
    eps : float or None
        The allowed imbalance the balance rule was checked for, if any.
    cap : int or None
        Largest shard weight the rule allows.
    balanced : bool or None
        Whether every shard keeps the rule.
    violations : tuple of str
        The shards that break the rule.
    """

    k: int
    n_nodes: int
    n_edges: int
    cut_edges: int
    cut_weight: float
    total_edge_weight: float
    cut_fraction: float
    shard_sizes: np.ndarray
    shard_weights: np.ndarray
    shard_cut_weights: np.ndarray
    total_node_weight: int
    imbalance: float
    communication_volume: int
    boundary_nodes: int
    fanout: float
    cut_matrix: sp.csr_matrix = field(repr=False)
    eps: float | None = None
    cap: int | None = None
    balanced: bool | None = None
    violations: tuple = ()

    def cut_pairs(self):
        """Shard pairs with a nonzero cut weight: ``(a, b, weight)`` arrays, ``a < b``, sorted."""
        upper = sp.triu(self.cut_matrix, k=1).tocoo()
        order = np.lexsort((upper.col, upper.row))
        return upper.row[order].astype(np.int64), upper.col[order].astype(np.int64), upper.data[order]

    def to_dict(self, pairs_limit=CUT_PAIRS_LIMIT) -> dict:
        """The figures as plain JSON-ready values.

        ``cut_matrix`` is the dense k×k list for ``k <= DENSE_MATRIX_MAX_K``
        and ``None`` above. ``cut_pairs`` lists ``[a, b, weight]`` (``a < b``,
        sorted) for ``k > DENSE_MATRIX_MAX_K`` when there are at most
        ``pairs_limit`` such pairs, and is ``None`` otherwise;
        ``cut_pair_count`` always says how many shard pairs have a nonzero
        cut weight between them.
        """
        n_pairs = self.cut_matrix.nnz // 2
        dense = self.cut_matrix.toarray().tolist() if self.k <= DENSE_MATRIX_MAX_K else None
        listed = None
        if self.k > DENSE_MATRIX_MAX_K and n_pairs <= pairs_limit:
            listed = [[int(x), int(y), float(z)] for x, y, z in zip(*self.cut_pairs())]
        balance = None
        if self.eps is not None:
            balance = {
                "imbalance_allowed": self.eps,
                "cap": self.cap,
                "holds": self.balanced,
                "violations": list(self.violations),
            }
        return {
            "shards": self.k,
            "nodes": self.n_nodes,
            "edges": self.n_edges,
            "cut_edges": self.cut_edges,
            "cut_weight": self.cut_weight,
            "total_edge_weight": self.total_edge_weight,
            "cut_fraction": self.cut_fraction,
            "total_node_weight": self.total_node_weight,
            "imbalance": self.imbalance,
            "communication_volume": self.communication_volume,
            "boundary_nodes": self.boundary_nodes,
            "fanout": self.fanout,
            "shard_sizes": self.shard_sizes.tolist(),
            "shard_weights": self.shard_weights.tolist(),
            "shard_cut_weights": self.shard_cut_weights.tolist(),
            "cut_pair_count": int(n_pairs),
            "cut_matrix": dense,
            "cut_pairs": listed,
            "balance": balance,
        }


def score(graph, parts, k=None, eps=None) -> Score:
    """Measure a partition of ``graph`` into ``k`` shards.

    Parameters
    ----------
    graph : partition.graph.Graph
    parts : array_like of int, shape (graph.n,)
        The shard of each dense node, in ``[0, k)``.
    k : int or None
        Number of shards (empty shards count towards the balance). ``None``:
        the largest shard id plus one.
    eps : float or None
        When given, also check the balance rule
        (:func:`partition.balance.balance_rule`) for this allowed imbalance.

    Returns
    -------
    Score

    Raises
    ------
    ParameterError
        ``parts`` is not one integer per node, a shard id lies outside
        ``[0, k)``, ``k`` is not in ``[1, n]``, or ``eps`` is not a finite
        number ``>= 0``.

    References
    ----------
    .. [1] B. Hendrickson and T. G. Kolda, "Graph partitioning models for
       parallel computing", Parallel Computing 26(12), 2000, 1519–1534
       (communication volume as the partitioning objective).
    """
    n = graph.n
    parts = np.asarray(parts)
    if parts.ndim != 1 or parts.shape[0] != n:
        raise ParameterError(f"parts must hold one shard per node ({n}), got shape {parts.shape}")
    if parts.dtype.kind not in "iu":
        raise ParameterError(f"parts must be integers, got dtype {parts.dtype}")
    lo, hi = (int(parts.min()), int(parts.max())) if n else (0, 0)
    if k is None and hi >= n:
        raise ParameterError(f"shard id {hi} is not below the number of nodes ({n}); k is at most n")
    k = check_parts(hi + 1 if k is None else k, n)
    if lo < 0 or hi >= k:
        bad = lo if lo < 0 else hi
        raise ParameterError(f"shard id {bad} is outside [0, {k}) (k = {k})")
    parts = parts.astype(np.int32, copy=False)  # k <= n < 2^31

    src = graph.rows()
    dst = graph.indices
    ps = np.repeat(parts, graph.degrees())
    pd = parts[dst]
    cross = ps != pd
    weights = graph.edge_weight_array()

    # Each undirected edge once (u < v): cut, totals and the cut matrix.
    half = src < dst
    w_half = weights[half]
    cut_half = cross[half]
    a, b = ps[half][cut_half], pd[half][cut_half]
    w_cut = w_half[cut_half]
    total_ew = float(w_half.sum())
    cut_w = float(w_cut.sum())
    cut_matrix = _cut_matrix(np.minimum(a, b), np.maximum(a, b), w_cut, k)
    shard_cut = np.bincount(a, weights=w_cut, minlength=k) + np.bincount(b, weights=w_cut, minlength=k)

    per_node = _other_shards(src[cross], pd[cross], n, k)
    volume = int(per_node.sum())

    sizes = np.bincount(parts, minlength=k).astype(np.int64)
    if graph.node_weights is None:
        loads = sizes.copy()
    else:
        loads = np.zeros(k, dtype=np.int64)
        np.add.at(loads, parts, graph.node_weights)
    total_nw = int(loads.sum())

    cap = balanced = None
    violations = ()
    if eps is not None:
        rule = balance_rule(graph.node_weights, k, eps, n_nodes=n)
        eps, cap = rule.eps, rule.cap
        balanced = rule.check(loads)
        violations = tuple(rule.violations(loads))

    return Score(
        k=k,
        n_nodes=n,
        n_edges=graph.m,
        cut_edges=int(cut_half.sum()),
        cut_weight=cut_w,
        total_edge_weight=total_ew,
        cut_fraction=cut_w / total_ew if total_ew > 0 else 0.0,
        shard_sizes=sizes,
        shard_weights=loads,
        shard_cut_weights=shard_cut,
        total_node_weight=total_nw,
        imbalance=imbalance(loads, total_nw, k),
        communication_volume=volume,
        boundary_nodes=int(np.count_nonzero(per_node)),
        fanout=1.0 + volume / n if n else 0.0,
        cut_matrix=cut_matrix,
        eps=eps,
        cap=cap,
        balanced=balanced,
        violations=violations,
    )


def _cut_matrix(lo, hi, w, k):
    """Symmetric k×k matrix of the weights of edges between shards ``lo < hi``."""
    if k <= 1024:  # dense accumulation is cheaper than a sparse conversion
        upper = np.bincount(lo.astype(np.int64) * k + hi, weights=w, minlength=k * k).reshape(k, k)
        matrix = sp.csr_matrix(upper + upper.T)
    else:
        upper = sp.coo_matrix((w, (lo, hi)), shape=(k, k)).tocsr()
        matrix = (upper + upper.T).tocsr()
    matrix.eliminate_zeros()  # pairs joined only by zero-weight edges
    return matrix


def _other_shards(rows, shards, n, k):
    """Number of distinct values of ``shards`` in each row (``rows`` sorted ascending).

    The entries form an n×k sparse matrix whose duplicate entries are merged
    (a sort within each row); the entries left per row are the distinct shards.
    """
    counts = np.bincount(rows, minlength=n)
    indptr = np.zeros(n + 1, dtype=np.int64)
    np.cumsum(counts, out=indptr[1:])
    seen = sp.csr_matrix((np.ones(rows.size, dtype=np.int32), shards, indptr), shape=(n, k))
    seen.sum_duplicates()
    return np.diff(seen.indptr).astype(np.int64)
