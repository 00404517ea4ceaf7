"""Linear embedding: put every node at a position on a line, related nodes close.

:func:`linear_order` lays out the leaves of the affinity hierarchy, so every
cluster of every level occupies a contiguous range of positions. Bottom-up, the
children of each merged cluster are placed side by side in the order of a walk
of the tree of edges picked when they merged (rule 8 of :mod:`partition.rules`:
from one end of a longest path, shallow branches first), each turned end for
end when needed so that the node anchoring it to its tree parent faces that
parent. Given the graph, clusters are then turned once more, top level first,
to face the neighbours they have edges to (rule 10). Components come in the
order of rule 7. Cutting this line into ``k`` pieces of equal weight is the
balanced partition of Aydin, Bateni & Mirrokni (WSDM 2016). The walks are numba
kernels over each round's picked-edge forest; the layout is array work over
the nodes per level, O(n log n) in all.

:func:`spectral_order` is a second embedding for graphs that fit one machine:
within each component, nodes sorted by the Fiedler vector of the normalised
Laplacian (Pothen, Simon & Liou 1990; the random-walk scaling ``D^{-1/2} y`` of
Shi & Malik 2000), with the sign and tie rules of rule 9. Large components start
LOBPCG from the Fiedler vector of a coarse level of their affinity hierarchy
(a multilevel start, Barnard & Simon 1994) plus a seeded random vector.
"""

from __future__ import annotations

import warnings

import numba
import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import connected_components

from partition.errors import ParameterError
from partition.rules import canonical_labels

__all__ = ["linear_order", "orient_clusters", "orient_levels", "orientation_scores", "positions", "forest_walk",
           "spectral_order"]

_DENSE_LIMIT = 300  # components up to this size use a dense eigensolver
_COARSE_LIMIT = 800  # largest coarse problem solved densely
_LOBPCG_ITERS = 60


def linear_order(hierarchy, graph=None, orient=True):
    """The leaf order of ``hierarchy``: ``order[p]`` is the node at position ``p``.

    Parameters
    ----------
    hierarchy : partition.hierarchy.Hierarchy
    graph : partition.graph.Graph or None
        When given (and ``orient``), clusters are turned end for end to face
        their neighbours (:func:`orient_clusters`, rule 10).
    orient : bool
        Whether to orient the clusters when ``graph`` is given.

    Returns
    -------
    ndarray of int64, shape (n,)
        A permutation of ``0..n−1``. Every cluster of every level occupies a
        contiguous range of positions.

    Raises
    ------
    ParameterError
        If ``graph`` does not match the hierarchy.

    References
    ----------
    K. Aydin, M. Bateni and V. Mirrokni, "Distributed balanced partitioning
    via linear embedding", WSDM 2016.
    """
    n = hierarchy.n
    if graph is not None and graph.n != n:
        raise ParameterError(f"the graph has {graph.n} nodes but the hierarchy {n}")
    # Bottom-up: rel[v] is v's place inside its level-(r−1) cluster, size the
    # sizes of those clusters; each round lays the children of a cluster side
    # by side in walk order, each turned so that its anchor faces its tree parent.
    rel = np.zeros(n, dtype=np.int64)
    size = np.ones(n, dtype=np.int64)
    for r in range(1, hierarchy.rounds + 1):
        parent = hierarchy.parents[r - 1]
        c = parent.shape[0]
        pk = hierarchy.picked[r - 1]
        rank, tpar, tedge = _walk(c, pk.a, pk.b)
        turn = _turns(c, rank, tpar, tedge, pk, rel, size)
        seq = np.argsort(parent * np.int64(c) + rank, kind="stable")
        ends = np.cumsum(size[seq])
        excl = ends - size[seq]
        starts = np.flatnonzero(np.concatenate(([True], parent[seq][1:] != parent[seq][:-1])))
        base = np.repeat(excl[starts], np.diff(np.append(starts, c)))
        off = np.empty(c, dtype=np.int64)
        off[seq] = excl - base
        child = hierarchy.labels[r - 1]
        rel = off[child] + np.where(turn[child], size[child] - 1 - rel, rel)
        size = np.bincount(parent, weights=size, minlength=hierarchy.sizes[r]).astype(np.int64)
    # rule 7: top clusters (components) in id order
    top_off = np.cumsum(size) - size
    pos = top_off[hierarchy.labels[hierarchy.rounds]] + rel
    if graph is not None and orient:
        pos = orient_clusters(hierarchy, graph, pos)
    order = np.empty(n, dtype=np.int64)
    order[pos] = np.arange(n, dtype=np.int64)
    return order


def _turns(c, rank, tpar, tedge, picked, rel, size):
    """Which children to reverse: the anchor towards the tree parent goes first;
    a root's anchor towards its first child goes last (rule 8)."""
    turn = np.zeros(c, dtype=bool)
    kids = np.flatnonzero(tpar >= 0)
    e = tedge[kids]
    anchor = np.where(picked.a[e] == kids, picked.anchor_a[e], picked.anchor_b[e])
    turn[kids] = 2 * rel[anchor] > size[kids] - 1
    first = kids[rank[kids] == 1]
    roots = tpar[first]
    e = tedge[first]
    anchor = np.where(picked.a[e] == roots, picked.anchor_a[e], picked.anchor_b[e])
    turn[roots] = 2 * rel[anchor] < size[roots] - 1
    return turn


def orient_clusters(hierarchy, graph, pos):
    """Turn clusters end for end so that each faces its neighbours (rule 10).

    From the level below the top down to level 1, every cluster ``X`` at
    positions ``s..s+z−1`` scores each edge from a member ``u`` to a node
    outside ``X`` by ``t = 2(pos[u] − s) − (z − 1)`` (negative near the start):
    ``+t`` when the outside end lies to the left of ``X``, ``−t`` when to the
    right. A positive total means the edges leave from the wrong ends, and all
    such clusters of the level are reversed at once (their ranges are
    disjoint, so a leaf order stays a leaf order). Integer arithmetic, one
    O(m) pass per level.

    Parameters
    ----------
    hierarchy : partition.hierarchy.Hierarchy
    graph : partition.graph.Graph
    pos : ndarray of int64
        Position of each node (a leaf order of ``hierarchy``).

    Returns
    -------
    ndarray of int64
        The new positions.

    References
    ----------
    K. Aydin, M. Bateni and V. Mirrokni, "Distributed balanced partitioning
    via linear embedding", WSDM 2016 (leaf orders of the hierarchy; turning
    a subtree over keeps one).
    """
    rows = graph.rows().astype(np.int64)
    cols = graph.indices.astype(np.int64)

    def level_scores(r, lab, c, pos, start, size):
        score = np.zeros(c, dtype=np.int64)
        orientation_scores(lab, pos, start, size, rows, cols, score)  # CSR: both directions of every edge
        return score

    return orient_levels(hierarchy, pos, level_scores)


def orient_levels(hierarchy, pos, level_scores):
    """The level loop of :func:`orient_clusters`, for both engines.

    ``level_scores(r, labels, clusters, pos, start, size)`` returns every
    level-``r`` cluster's total score (:func:`orientation_scores` over the
    directed edges, in memory or as a Spark job); clusters with a positive
    score are turned end for end, from the level below the top down to level 1.
    """
    n = pos.shape[0]
    for r in range(hierarchy.rounds - 1, 0, -1):
        lab, c = hierarchy.labels[r], hierarchy.sizes[r]
        start = np.full(c, n, dtype=np.int64)
        np.minimum.at(start, lab, pos)
        size = np.bincount(lab, minlength=c).astype(np.int64)
        turn = (level_scores(r, lab, c, pos, start, size) > 0)[lab]
        pos = np.where(turn, 2 * start[lab] + size[lab] - 1 - pos, pos)
    return pos


def orientation_scores(lab, pos, start, size, x, y, acc):
    """Add to ``acc`` the rule-10 score of every directed edge ``x → y`` that leaves its cluster (in place)."""
    lx = lab[x]
    out = lx != lab[y]
    lx = lx[out]
    st = start[lx]
    t = 2 * (pos[x[out]] - st) - (size[lx] - 1)
    np.add.at(acc, lx, np.where(pos[y[out]] < st, t, -t))


def positions(order):
    """Inverse of an order: ``positions(order)[order[p]] == p``.

    Parameters
    ----------
    order : ndarray of int
        A permutation of ``0..n−1``.

    Returns
    -------
    ndarray of int64

    Raises
    ------
    ParameterError
        If ``order`` is not a permutation.
    """
    order = np.asarray(order)
    n = order.shape[0]
    if order.ndim != 1 or (n and (order.min() < 0 or order.max() >= n)):
        raise ParameterError("order must be a permutation of 0..n-1")
    pos = np.full(n, -1, dtype=np.int64)
    pos[order] = np.arange(n, dtype=np.int64)
    if (pos < 0).any():
        raise ParameterError("order must be a permutation of 0..n-1 (repeated entries)")
    return pos


def forest_walk(c, a, b):
    """Position of each vertex in the walk of its tree (rule 8).

    Parameters
    ----------
    c : int
        Number of vertices.
    a, b : ndarray of int
        The edges of a forest on ``0..c−1``.

    Returns
    -------
    ndarray of int64, shape (c,)
        ``0`` for the walk's start (one end of a longest path of the tree),
        then ``1, 2, ...`` in depth-first preorder, shallower subtrees first.
    """
    return _walk(c, a, b)[0]


def _walk(c, a, b):
    """Walk ranks, tree parent (−1 at roots) and the index of the edge to it."""
    a = np.asarray(a, dtype=np.int64)
    b = np.asarray(b, dtype=np.int64)
    src = np.concatenate((a, b))
    dst = np.concatenate((b, a))
    o = np.lexsort((dst, src))
    ptr = np.zeros(c + 1, dtype=np.int64)
    np.cumsum(np.bincount(src, minlength=c), out=ptr[1:])
    par, height = _root_trees(c, ptr, dst[o])
    kids = np.flatnonzero(par >= 0)
    k = kids[np.lexsort((kids, height[kids], par[kids]))]
    kptr = np.zeros(c + 1, dtype=np.int64)
    np.cumsum(np.bincount(par[kids], minlength=c), out=kptr[1:])
    rank = _preorder(c, par, kptr, k)
    key = np.minimum(a, b) * np.int64(c) + np.maximum(a, b)
    by_key = np.argsort(key, kind="stable")
    want = np.minimum(kids, par[kids]) * np.int64(c) + np.maximum(kids, par[kids])
    edge = np.full(c, -1, dtype=np.int64)
    edge[kids] = by_key[np.searchsorted(key[by_key], want)]
    return rank, par, edge


@numba.njit(cache=True, nogil=True)
def _bfs(start, ptr, nbr, stamp, mark, queue, dist, par):
    """BFS of one tree; fills queue[0:size], dist and par; returns size."""
    queue[0] = start
    stamp[start] = mark
    dist[start] = 0
    par[start] = -1
    head, tail = 0, 1
    while head < tail:
        v = queue[head]
        head += 1
        for p in range(ptr[v], ptr[v + 1]):
            w = nbr[p]
            if stamp[w] != mark:
                stamp[w] = mark
                dist[w] = dist[v] + 1
                par[w] = v
                queue[tail] = w
                tail += 1
    return tail


@numba.njit(cache=True, nogil=True)
def _root_trees(c, ptr, nbr):
    par = np.full(c, -1, dtype=np.int64)
    height = np.zeros(c, dtype=np.int64)
    stamp = np.zeros(c, dtype=np.int64)
    dist = np.zeros(c, dtype=np.int64)
    queue = np.empty(c, dtype=np.int64)
    for s in range(c):
        if stamp[s] != 0:
            continue
        size = _bfs(s, ptr, nbr, stamp, 1, queue, dist, par)
        far = s
        for i in range(size):
            v = queue[i]
            if dist[v] > dist[far] or (dist[v] == dist[far] and v < far):
                far = v
        _bfs(far, ptr, nbr, stamp, 2, queue, dist, par)
        for i in range(size - 1, -1, -1):
            v = queue[i]
            p = par[v]
            if p >= 0 and height[v] + 1 > height[p]:
                height[p] = height[v] + 1
    return par, height


@numba.njit(cache=True, nogil=True)
def _preorder(c, par, kptr, kids):
    rank = np.zeros(c, dtype=np.int64)
    stack = np.empty(c, dtype=np.int64)
    for root in range(c):
        if par[root] >= 0:
            continue
        stack[0] = root
        top = 1
        nxt = 0
        while top > 0:
            top -= 1
            v = stack[top]
            rank[v] = nxt
            nxt += 1
            for i in range(kptr[v + 1] - 1, kptr[v] - 1, -1):
                stack[top] = kids[i]
                top += 1
    return rank


def spectral_order(graph, seed=0):
    """Nodes sorted by the Fiedler vector of each connected component.

    Parameters
    ----------
    graph : partition.graph.Graph
        Edge weights, when present, weigh the Laplacian.
    seed : int
        Seed of the start vector of the iterative eigensolver.

    Returns
    -------
    ndarray of int64, shape (n,)
        ``order[p]`` = node at position ``p``; components in the order of
        rule 7, each contiguous, its nodes by ascending Fiedler value (rule 9).

    Raises
    ------
    ParameterError
        If the seed is not a whole number.

    References
    ----------
    A. Pothen, H. D. Simon and K.-P. Liou, "Partitioning sparse matrices with
    eigenvectors of graphs", SIAM J. Matrix Anal. Appl. 11(3), 1990.
    J. Shi and J. Malik, "Normalized cuts and image segmentation", IEEE Trans.
    PAMI 22(8), 2000.
    S. T. Barnard and H. D. Simon, "Fast multilevel implementation of recursive
    spectral bisection for partitioning unstructured problems", Concurrency:
    Practice and Experience 6(2), 1994.
    A. V. Knyazev, "Toward the optimal preconditioned eigensolver: locally
    optimal block preconditioned conjugate gradient method", SIAM J. Sci.
    Comput. 23(2), 2001.
    """
    if isinstance(seed, bool) or int(seed) != seed:
        raise ParameterError(f"seed must be a whole number, got {seed!r}")
    rng = np.random.default_rng(int(seed))
    n = graph.n
    adj = graph.to_scipy()
    _, comp = connected_components(adj, directed=False)
    comp, ncomp = canonical_labels(comp)
    by_comp = np.argsort(comp, kind="stable")  # nodes grouped by component, ids ascending
    start = np.zeros(ncomp + 1, dtype=np.int64)
    np.cumsum(np.bincount(comp, minlength=ncomp), out=start[1:])
    value = np.zeros(n, dtype=np.float64)
    for ci in np.flatnonzero(np.diff(start) > 2):
        nodes = by_comp[start[ci] : start[ci + 1]]
        value[nodes] = _fiedler(adj[nodes][:, nodes], rng)
    # sort by (component, value, id)
    return np.lexsort((np.arange(n), value, comp)).astype(np.int64)


def _fiedler(a, rng):
    """Fiedler vector ``D^{-1/2} y`` of one connected component, sign by rule 9.

    Small components: dense ``eigh``. Larger ones: the coarse Fiedler vector of
    an affinity-hierarchy level with at most ``_COARSE_LIMIT`` clusters (the
    Galerkin projection ``P^T L P x = λ P^T D P x``, dense), spread to the nodes
    and polished by LOBPCG (Knyazev 2001) with the trivial eigenvector
    ``sqrt(d)`` as a constraint — the multilevel scheme of Barnard & Simon
    (1994) in place of a cold start, which on road networks needs thousands of
    iterations.
    """
    import scipy.linalg  # here, not at import: only the spectral start needs it
    from scipy.sparse.linalg import lobpcg

    nc = a.shape[0]
    d = np.asarray(a.sum(axis=1)).ravel()
    d[d <= 0] = 1.0  # zero-weight edges only: treat the node as weakly attached
    s = 1.0 / np.sqrt(d)
    norm = (sp.diags(s) @ a @ sp.diags(s)).tocsr()
    if nc <= _DENSE_LIMIT:
        _, vec = scipy.linalg.eigh(norm.toarray(), subset_by_index=[nc - 2, nc - 1])
        x = vec[:, 0] * s
    else:
        start = _coarse_start(a, d)
        noise = rng.standard_normal(nc)
        block = np.column_stack((noise if start is None else start / s, rng.standard_normal(nc)))
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # a loose stop is fine for an order
            vals, vec = lobpcg(norm, block, Y=np.sqrt(d)[:, None], largest=True, tol=1e-7, maxiter=_LOBPCG_ITERS)
        x = vec[:, int(np.argmax(vals))] * s
    big = np.abs(x) > 1e-9 * np.abs(x).max()
    if big.any() and x[np.argmax(big)] < 0:
        x = -x
    return x


def _coarse_start(a, d):
    """Coarse Fiedler vector of the component, one value per node."""
    import scipy.linalg

    from partition.affinity import edge_affinity
    from partition.graph import Graph
    from partition.hierarchy import build_hierarchy

    nc = a.shape[0]
    a = a.tocsr()
    a.sort_indices()
    sub = Graph(a.indptr.astype(np.int64), a.indices.astype(np.int32))
    hier = build_hierarchy(sub, edge_affinity(sub, "jaccard"))
    level = next(r for r in range(1, hier.rounds + 1) if hier.sizes[r] <= _COARSE_LIMIT)
    lab, c = hier.labels[level], hier.sizes[level]
    if c < 2:
        return None
    proj = sp.csr_matrix((np.ones(nc), (np.arange(nc), lab)), shape=(nc, c))
    ac = (proj.T @ a @ proj).toarray()
    np.fill_diagonal(ac, 0.0)
    lc = np.diag(ac.sum(axis=1)) - ac
    _, vec = scipy.linalg.eigh(lc, np.diag(proj.T @ d), subset_by_index=[1, 1])
    return vec[lab, 0]
