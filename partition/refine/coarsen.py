"""Coarse levels that respect a partition, by size-constrained label propagation, for V-cycles.

A V-cycle (multilevel refinement started again from a refined partition)
needs coarse levels whose clusters never straddle two shards, so that the
partition is exactly representable on every level and no refinement is lost
on the way down. :func:`partition_levels` builds them: each level clusters the
nodes of the level below by size-constrained label propagation (Meyerhenke,
Sanders & Schulz, "Parallel graph partitioning for complex networks", IPDPS
2015, after Raghavan, Albert & Kumara 2007 for label propagation), where a
node may only join a cluster of its own shard, then contracts the clusters
(:func:`partition.contract.contract`); it stops when a level has at most
``min_nodes`` nodes or shrinks by less than ``1 − min_shrink``.

Label propagation, as done here (rules that fix the result):

* every node starts as its own cluster (label = its index); a node's cluster
  weighs the sum of its members' node weights;
* nodes are visited in increasing degree, ties by the seeded hash
  ``pair_hash(v, v, round_seed(seed, level))`` of :mod:`partition.rules`,
  then by index (low-degree nodes first, as in the paper);
* a visited node adds up its integer edge weight to each cluster of its own
  shard among its neighbours, and joins the one with the largest sum whose
  weight plus its own stays within ``cap``; it stays when its own cluster ties
  the best, other ties go to the smaller label;
* a sweep over all nodes is repeated ``iterations`` times or until a sweep
  moves no node.

Units: a node reads only neighbours of its own shard and joins only clusters
of its own shard, so the clustering of one shard does not depend on any other
shard — each shard is an independent unit (a Spark task per shard, given the
shard's induced subgraph, computes the same labels), and interleaving the
shards' nodes in one sweep, as :func:`cluster_within` does, changes nothing.
"""

from __future__ import annotations

import numba
import numpy as np

from partition.contract import contract
from partition.errors import ParameterError
from partition.refine.units import check_partition, fixed_point_weights
from partition.rules import pair_hash, round_seed

__all__ = ["cluster_within", "visit_order", "partition_levels"]


@numba.njit(cache=True, nogil=True)
def cluster_within(indptr, indices, weights, node_weights, parts, order, cap, iterations):
    """Size-constrained label propagation inside shards (numba kernel).

    Parameters
    ----------
    indptr, indices : ndarray
        Symmetric CSR.
    weights : ndarray of int64, shape (len(indices),)
        Integer edge weight per CSR entry.
    node_weights : ndarray of int64, shape (n,)
    parts : ndarray of int, shape (n,)
        Shard of every node; clusters never cross shards.
    order : ndarray of int64, shape (n,)
        Visiting order (:func:`visit_order`).
    cap : int
        Largest cluster weight a node may join (a node alone may weigh more).
    iterations : int
        Most sweeps.

    Returns
    -------
    ndarray of int64, shape (n,)
        Cluster label of every node: the index of one of its members.

    References
    ----------
    H. Meyerhenke, P. Sanders and C. Schulz, "Parallel graph partitioning for
    complex networks", IEEE IPDPS 2015.
    U. N. Raghavan, R. Albert and S. Kumara, "Near linear time algorithm to
    detect community structures in large-scale networks", Phys. Rev. E 76, 2007.
    """
    n = indptr.shape[0] - 1
    lab = np.arange(n)
    size = node_weights.astype(np.int64).copy()
    conn = np.zeros(n, dtype=np.int64)
    seen = np.zeros(n, dtype=np.bool_)
    touched = np.empty(n, dtype=np.int64)
    for _ in range(iterations):
        moved = 0
        for t in range(n):
            v = order[t]
            pv = parts[v]
            nt = 0
            for q in range(indptr[v], indptr[v + 1]):
                u = indices[q]
                if parts[u] != pv or u == v:
                    continue
                c = lab[u]
                if not seen[c]:
                    seen[c] = True
                    touched[nt] = c
                    nt += 1
                conn[c] += weights[q]
            own = lab[v]
            best = own
            best_w = conn[own]
            wv = node_weights[v]
            for r in range(nt):
                c = touched[r]
                if c == own or size[c] + wv > cap:
                    continue
                if conn[c] > best_w or (conn[c] == best_w and best != own and c < best):
                    best = c
                    best_w = conn[c]
            for r in range(nt):
                conn[touched[r]] = 0
                seen[touched[r]] = False
            if best != own:
                size[own] -= wv
                size[best] += wv
                lab[v] = best
                moved += 1
        if moved == 0:
            break
    return lab


def visit_order(degrees, seed, level):
    """Nodes by increasing degree, ties by the seeded hash of rule 2, then by index.

    Parameters
    ----------
    degrees : ndarray of int, shape (n,)
    seed : int
    level : int
        The level being built (1 for the first coarse level); hashed with
        ``round_seed(seed, level)`` so every level visits in a fresh order.

    Returns
    -------
    ndarray of int64, shape (n,)
    """
    n = degrees.shape[0]
    idx = np.arange(n, dtype=np.int64)
    h = pair_hash(idx, idx, round_seed(seed, level))
    return np.lexsort((idx, h, np.asarray(degrees, dtype=np.int64))).astype(np.int64)


def partition_levels(graph, parts, k, seed=0, factor=16, iterations=3, min_nodes=None, min_shrink=0.1,
                     max_levels=16, weights=None):
    """Nested coarse levels whose clusters lie inside the shards of ``parts``.

    Parameters
    ----------
    graph : Graph
    parts : ndarray of int, shape (n,)
    k : int
        Number of shards.
    seed : int
        Seeds the visiting order (:func:`visit_order`).
    factor : float, default 16
        Clusters weigh at most ``max(⌈W / (factor · k)⌉, w_max)`` on every level
        (``W`` the total node weight, ``w_max`` the heaviest node).
    iterations : int, default 3
        Label-propagation sweeps per level.
    min_nodes : int, optional
        Stop once a level has at most this many nodes (default ``max(20 k, 200)``).
    min_shrink : float, default 0.1
        Stop (dropping the level) when a level keeps more than ``1 − min_shrink``
        of the nodes of the level below.
    max_levels : int
        Most coarse levels.
    weights : ndarray of int64, optional
        The rating label propagation sums, one non-negative integer per CSR
        entry and symmetric: the integer edge weights (default,
        :func:`fixed_point_weights`) or, say, fixed-point edge affinities
        (:func:`partition.affinity.edge_affinity`). Only the clustering reads
        it; contracted levels keep no weights (refinement contracts the true
        weights itself).

    Returns
    -------
    list of ndarray of int64
        ``levels[0] = arange(n)``; ``levels[r][v]`` is the level-``r`` cluster of
        node ``v`` (``0..c_r − 1``, numbered by smallest member). The levels are
        nested and every cluster lies in one shard, the form
        :func:`partition.refine.multilevel.refine_multilevel` takes.

    Raises
    ------
    ParameterError
        For a malformed partition, ``factor <= 0``, ``iterations < 1`` or
        ``min_shrink`` outside ``[0, 1)``.

    References
    ----------
    H. Meyerhenke, P. Sanders and C. Schulz, "Parallel graph partitioning for
    complex networks", IEEE IPDPS 2015.
    """
    parts = check_partition(graph, parts, k)
    if not factor > 0 or int(iterations) < 1 or not 0 <= min_shrink < 1:
        raise ParameterError(f"need factor > 0, iterations >= 1 and 0 <= min_shrink < 1, got "
                             f"{factor!r}, {iterations!r}, {min_shrink!r}")
    n = graph.n
    min_nodes = max(20 * k, 200) if min_nodes is None else int(min_nodes)
    w = fixed_point_weights(graph)[0] if weights is None else np.asarray(weights, dtype=np.int64)
    nw = graph.node_weight_array().astype(np.int64)
    total = int(nw.sum())
    cap = max(-(-total // max(int(np.ceil(factor * k)), 1)), int(nw.max(initial=1)))
    levels = [np.arange(n, dtype=np.int64)]
    g_ptr, g_idx, g_w, g_nw, g_parts = graph.indptr, graph.indices, w, nw, parts
    fine_to = levels[0]
    while g_nw.shape[0] > min_nodes and len(levels) <= max_levels:
        c_n = g_nw.shape[0]
        order = visit_order(np.diff(g_ptr), seed, len(levels))
        lab = cluster_within(g_ptr, g_idx, g_w, g_nw, g_parts, order, cap, int(iterations))
        # number the clusters by their smallest member (np.unique sorts the leader ids; leaders are members)
        first = np.full(c_n, c_n, dtype=np.int64)
        np.minimum.at(first, lab, np.arange(c_n, dtype=np.int64))
        used = np.flatnonzero(first < c_n)
        rank = np.empty(c_n, dtype=np.int64)
        rank[used[np.argsort(first[used], kind="stable")]] = np.arange(used.shape[0], dtype=np.int64)
        lab = rank[lab]
        c = int(used.shape[0])
        if c > (1 - min_shrink) * c_n:
            break
        from partition.graph import Graph

        coarse = contract(Graph(g_ptr, g_idx, g_w.astype(np.float64), g_nw, None), lab, c)
        g_ptr, g_idx = coarse.indptr, coarse.indices
        g_w, g_nw = coarse.edge_weights.astype(np.int64), coarse.node_weights.astype(np.int64)
        new_parts = np.empty(c, dtype=np.int64)
        new_parts[lab] = g_parts
        g_parts = new_parts
        fine_to = lab[fine_to]
        levels.append(fine_to)
    return levels
