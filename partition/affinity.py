"""Edge affinity: how strongly the two ends of each edge belong together.

The hierarchy merges clusters along their most affine edges, so affinity is the
first stage of the pipeline. Four measures, each returned in fixed point
(int64, :data:`partition.rules.AFFINITY_SCALE` per unit, see
:mod:`partition.rules`), one value per CSR entry and symmetric (entry ``(u, v)``
equals entry ``(v, u)``):

``jaccard``
    Closed-neighbourhood Jaccard similarity, ``|N[u] ∩ N[v]| / |N[u] ∪ N[v]|``
    with ``N[x] = N(x) ∪ {x}``. For an edge ``(u, v)`` with ``c`` common
    neighbours this is ``(c + 2) / (d_u + d_v − c)`` — an exact ratio of
    integers, quantised by ``floor`` (Jaccard, "Étude comparative de la
    distribution florale dans une portion des Alpes et du Jura", Bull. Soc.
    Vaudoise Sci. Nat., 1901).
``ppr``
    Personalised PageRank truncated after ``T = 2`` steps and evaluated
    exactly (no sampling): ``ppr_u(v) = Σ_{t=1..T} α(1−α)^t P^t[u, v]`` with
    ``P = D⁻¹A`` (Andersen, Chung & Lang, FOCS 2006). For an edge this is
    ``α(1−α)/d_u · (1 + (1−α) S_uv)`` with ``S_uv = Σ_{w ∈ N(u) ∩ N(v)} 1/d_w``.
    It is symmetrised by the smaller direction, ``min(ppr_u(v), ppr_v(u))``
    (an edge is as strong as its weaker direction), and divided by ``α(1−α)``
    so that it lies in ``(0, 1]`` (1 for an isolated edge):
    ``(1 + (1−α) S_uv) / max(d_u, d_v)``. On the shared test graphs this gave
    lower raw line cuts than the geometric or arithmetic mean of the two
    directions or the degree-weighted sum (``jobs/bench_order.py``; e.g.
    ca-HepPh k = 8: 0.28 against 0.43). ``S_uv`` is summed in fixed point
    (``floor(2**32 / d_w)`` per wedge), the rest is a fixed sequence of
    correctly rounded float operations.
``weights``
    The input edge weights divided by the largest one.
``unit``
    Every edge 1.

Both graph measures use the unweighted structure and need the common
neighbours of every edge. They come from one triangle pass: edges are oriented
from lower to higher ``(degree, id)`` rank and every triangle is found once from
its lowest-ranked vertex by marking that vertex's out-neighbours (Chiba &
Nishizeki, SIAM J. Comput. 1985; O(m·sqrt(m)) time, O(n + m) memory).
Hubs are capped: a wedge ``u − w − v`` whose centre ``w`` has degree above
``hub_cap`` does not count as a common neighbour of ``u`` and ``v`` (default
1000: a node with a thousand neighbours says little about any one pair of them;
our choice, not a published constant).
"""

from __future__ import annotations

import numba
import numpy as np

from partition.errors import ParameterError
from partition.rules import AFFINITIES, AFFINITY_SCALE, DEFAULT_HUB_CAP, WEDGE_BITS, quantise, quantise_ratio

__all__ = [
    "edge_affinity",
    "check_affinity_options",
    "weight_value",
    "jaccard_value",
    "ppr_value",
    "common_neighbours",
    "wedge_sums",
    "reverse_entries",
    "METHODS",
    "DEFAULT_HUB_CAP",
]

METHODS = AFFINITIES  # the names of the rule module, where the command line reads them without numba


def edge_affinity(graph, method="jaccard", alpha=0.15, steps=2, hub_cap=DEFAULT_HUB_CAP, seed=0):
    """Fixed-point affinity of every CSR entry of ``graph``.

    Parameters
    ----------
    graph : partition.graph.Graph
    method : {"jaccard", "ppr", "weights", "unit"}
        See the module docstring.
    alpha : float
        Restart probability of the PageRank walk, ``0 < alpha < 1``.
    steps : int
        Walk length ``T`` of the truncated PageRank series; only 1 and 2 are
        supported (2 is the default; 1 ignores common neighbours).
    hub_cap : int
        Wedges through nodes of larger degree are not counted (``jaccard``,
        ``ppr``). Must be at least 1.
    seed : int
        Unused by the exact measures; kept so every stage takes a seed.

    Returns
    -------
    ndarray of int64, shape (2 m,)
        Aligned with ``graph.indices``; equal on ``(u, v)`` and ``(v, u)``.

    Raises
    ------
    ParameterError
        Unknown method, ``alpha`` outside ``(0, 1)``, ``steps`` not 1 or 2,
        ``hub_cap < 1``, or negative/non-finite edge weights with ``weights``.

    References
    ----------
    R. Andersen, F. Chung and K. Lang, "Local graph partitioning using PageRank
    vectors", FOCS 2006.
    P. Jaccard, "Étude comparative de la distribution florale dans une portion
    des Alpes et du Jura", Bull. Soc. Vaudoise Sci. Nat. 37, 1901.
    N. Chiba and T. Nishizeki, "Arboricity and subgraph listing algorithms",
    SIAM J. Comput. 14(1), 1985.
    """
    hub_cap = check_affinity_options(method, alpha, steps, hub_cap)
    size = graph.indices.shape[0]

    if method == "unit":
        return np.full(size, AFFINITY_SCALE, dtype=np.int64)
    if method == "weights":
        w = graph.edge_weight_array()
        if not np.isfinite(w).all() or (w < 0).any():
            raise ParameterError("edge weights must be finite and >= 0 for weight affinity")
        return weight_value(w, float(w.max(initial=0.0)))

    deg = graph.degrees().astype(np.int64)
    rows = graph.rows()
    du, dv = deg[rows], deg[graph.indices]
    if method == "jaccard":
        return jaccard_value(common_neighbours(graph, hub_cap), du, dv)
    if steps == 2:
        inv = (np.int64(1) << WEDGE_BITS) // np.maximum(deg, 1)
        wsum = wedge_sums(graph, inv, hub_cap)
    else:
        wsum = np.zeros(size, dtype=np.int64)
    return ppr_value(wsum, du, dv, alpha)


def check_affinity_options(method, alpha, steps, hub_cap):
    """Check the options of an affinity method (both engines); returns the hub cap as int.

    Raises
    ------
    ParameterError
        Unknown method; ``ppr`` with α outside ``(0, 1)`` or steps not 1 or 2;
        a hub cap that is not a whole number ``>= 1``.
    """
    if method not in METHODS:
        raise ParameterError(f"affinity method must be one of {', '.join(METHODS)}, got {method!r}")
    if method == "ppr":
        if not (0.0 < float(alpha) < 1.0):
            raise ParameterError(f"alpha must lie strictly between 0 and 1, got {alpha!r}")
        if steps not in (1, 2):
            raise ParameterError(f"steps must be 1 or 2, got {steps!r}")
    if isinstance(hub_cap, bool) or int(hub_cap) != hub_cap or hub_cap < 1:
        raise ParameterError(f"hub_cap must be a whole number >= 1, got {hub_cap!r}")
    return int(hub_cap)


def weight_value(w, top):
    """Fixed-point affinity from input weights: ``quantise(w / top)`` with ``top`` the largest weight (0 if none)."""
    w = np.asarray(w, dtype=np.float64)
    if top <= 0.0:
        return np.zeros(w.shape[0], dtype=np.int64)
    return quantise(w / float(top))


def jaccard_value(count, du, dv):
    """Fixed-point closed-neighbourhood Jaccard from common-neighbour counts.

    A kernel shared by both engines: ``floor(2**20 · (c + 2) / (d_u + d_v − c))``.

    Parameters
    ----------
    count : ndarray of int64
        Common neighbours ``c`` of each edge (hubs capped).
    du, dv : ndarray of int64
        Degrees of the two ends.

    Returns
    -------
    ndarray of int64

    References
    ----------
    P. Jaccard, "Étude comparative de la distribution florale dans une portion
    des Alpes et du Jura", Bull. Soc. Vaudoise Sci. Nat. 37, 1901.
    """
    count = np.asarray(count, dtype=np.int64)
    return quantise_ratio(count + 2, np.asarray(du, np.int64) + np.asarray(dv, np.int64) - count)


def ppr_value(wsum, du, dv, alpha=0.15):
    """Fixed-point two-step PageRank affinity from integer wedge sums.

    A kernel shared by both engines: ``quantise((1 + (1 − α) · wsum / 2**32) /
    max(d_u, d_v))``, i.e. ``min(ppr_u(v), ppr_v(u)) / (α(1 − α))``.

    Parameters
    ----------
    wsum : ndarray of int64
        ``Σ floor(2**32 / d_w)`` over the common neighbours (rule 11); zeros
        for the one-step series.
    du, dv : ndarray of int64
        Degrees of the two ends.
    alpha : float
        Restart probability.

    Returns
    -------
    ndarray of int64

    References
    ----------
    R. Andersen, F. Chung and K. Lang, "Local graph partitioning using PageRank
    vectors", FOCS 2006.
    """
    s = np.asarray(wsum, dtype=np.int64).astype(np.float64) / float(1 << WEDGE_BITS)
    top = np.maximum(np.asarray(du, np.int64), np.asarray(dv, np.int64)).astype(np.float64)
    return quantise((1.0 + (1.0 - float(alpha)) * s) / top)


def common_neighbours(graph, hub_cap=DEFAULT_HUB_CAP):
    """Number of common neighbours of the ends of every edge, hubs capped.

    Parameters
    ----------
    graph : partition.graph.Graph
    hub_cap : int
        Common neighbours of degree above ``hub_cap`` are not counted.

    Returns
    -------
    ndarray of int64, shape (2 m,)
        ``|{w ∈ N(u) ∩ N(v) : d_w ≤ hub_cap}|`` for CSR entry ``(u, v)``.

    References
    ----------
    N. Chiba and T. Nishizeki, "Arboricity and subgraph listing algorithms",
    SIAM J. Comput. 14(1), 1985.
    """
    return wedge_sums(graph, np.ones(graph.n, dtype=np.int64), hub_cap)


def wedge_sums(graph, node_value, hub_cap=DEFAULT_HUB_CAP):
    """Sum of ``node_value[w]`` over the common neighbours ``w`` of every edge.

    One pass over the triangles: edges oriented from lower to higher
    ``(degree, id)``, each triangle found once from its lowest vertex, which
    marks its out-neighbours; the sums are integers, so the result does not
    depend on the order in which triangles are found.

    Parameters
    ----------
    graph : partition.graph.Graph
    node_value : ndarray of int64, shape (n,)
        What each common neighbour contributes.
    hub_cap : int
        Common neighbours of degree above ``hub_cap`` contribute nothing.

    Returns
    -------
    ndarray of int64, shape (2 m,)
        ``Σ_{w ∈ N(u) ∩ N(v), d_w ≤ hub_cap} node_value[w]`` for CSR entry ``(u, v)``.

    Raises
    ------
    ParameterError
        If ``node_value`` does not have one integer per node.

    References
    ----------
    N. Chiba and T. Nishizeki, "Arboricity and subgraph listing algorithms",
    SIAM J. Comput. 14(1), 1985.
    """
    n = graph.n
    node_value = np.asarray(node_value)
    if node_value.shape != (n,) or node_value.dtype.kind not in "iu":
        raise ParameterError(f"node_value must hold one integer per node ({n}), got {node_value.shape} {node_value.dtype}")
    deg = graph.degrees().astype(np.int64)
    rows = graph.rows()
    cols = graph.indices
    du, dv = deg[rows], deg[cols]
    up = (dv > du) | ((dv == du) & (cols > rows))
    opos = np.flatnonzero(up).astype(np.int64)
    oind = cols[up].astype(np.int64)
    optr = np.zeros(n + 1, dtype=np.int64)
    np.cumsum(np.bincount(rows[up], minlength=n), out=optr[1:])
    val = np.where(deg <= hub_cap, node_value.astype(np.int64), 0)
    out = _triangle_pass(n, optr, oind, opos, val, cols.shape[0])
    out[reverse_entries(graph)[opos]] = out[opos]
    return out


def reverse_entries(graph):
    """For each CSR entry ``(u, v)``, the position of its twin ``(v, u)``.

    Parameters
    ----------
    graph : partition.graph.Graph

    Returns
    -------
    ndarray of int64, shape (2 m,)
    """
    return _reverse(graph.n, graph.indptr.astype(np.int64), graph.indices)


@numba.njit(cache=True, nogil=True)
def _reverse(n, indptr, indices):
    # Rows are visited in increasing u and row v lists its neighbours in
    # increasing order, so the twins of row v are met in the order they sit.
    nxt = indptr[:-1].copy()
    rev = np.empty(indices.shape[0], dtype=np.int64)
    for u in range(n):
        for p in range(indptr[u], indptr[u + 1]):
            v = indices[p]
            rev[p] = nxt[v]
            nxt[v] += 1
    return rev


@numba.njit(cache=True, nogil=True)
def _triangle_pass(n, optr, oind, opos, val, size):
    # Each triangle u, v, w (u lowest) adds the opposite vertex's value to
    # each of its three oriented edges; (u, v) is accumulated in a register.
    out = np.zeros(size, dtype=np.int64)
    mark = np.full(n, -1, dtype=np.int64)
    for u in range(n):
        for q in range(optr[u], optr[u + 1]):
            mark[oind[q]] = opos[q]
        xu = val[u]
        for q in range(optr[u], optr[u + 1]):
            v = oind[q]
            xv = val[v]
            acc = 0
            for r in range(optr[v], optr[v + 1]):
                p_uw = mark[oind[r]]
                if p_uw < 0:
                    continue
                acc += val[oind[r]]
                out[p_uw] += xv
                out[opos[r]] += xu
            out[opos[q]] += acc
        for q in range(optr[u], optr[u + 1]):
            mark[oind[q]] = -1
    return out
