"""The result-affecting conventions both engines share: fixed point, hashing, ties.

Every choice that can change a partition is written here once, as a numbered
rule, and implemented by a small numpy function that the in-memory engine calls
directly and a Spark task calls on its slice of the data. Each function works on
whole arrays with integer (or correctly rounded IEEE) arithmetic, so the same
inputs give the same bits on any machine and in any order of evaluation.

Rules
-----
1. **Fixed point.** Affinities are int64 multiples of ``1 / AFFINITY_SCALE``
   (``AFFINITY_SCALE = 2**20``). A float ``x`` becomes ``quantise(x) =
   round_half_even(x · 2**20)``; multiplying by a power of two is exact, so the
   only rounding is the documented one. An exact ratio of integers ``p / q``
   becomes ``quantise_ratio(p, q) = floor(p · 2**20 / q)`` in integer arithmetic.
   Sums of fixed-point values are integer sums, hence independent of order.
2. **Pair hash.** ``pair_hash(u, v, seed)`` is symmetric in ``u`` and ``v``:
   with ``lo = min(u, v)``, ``hi = max(u, v)`` it is
   ``mix(mix(mix(seed) ^ lo) + hi)`` in wrapping uint64 arithmetic, where ``mix``
   is the splitmix64 finaliser (Steele, Lea & Flood 2014).
3. **Round seeds.** Round ``r`` (1-based) of the hierarchy hashes pairs of the
   cluster ids of level ``r − 1`` with ``round_seed(seed, r) = mix(mix(seed) + r)``.
4. **Best edge.** Edges are compared by larger affinity first, then larger pair
   hash, then smaller ``(min, max)`` endpoint ids. For one cluster ``s`` the
   last key reduces to the smaller other endpoint ``t`` (every ``t < s`` gives
   ``(t, s)``, which precedes every ``(s, t')`` with ``t' > s``). The order is
   total, so the picked edges of a round form a forest (plus one mutual pick
   per tree, which is one edge).
5. **Cluster ids.** After a contraction the new clusters are numbered
   ``0..c−1`` by the smallest member: a cluster's id is the rank of its smallest
   member cluster of the previous level. By induction this is also the rank of
   its smallest member node.
6. **Linkage.** Parallel coarse edges keep the integer sum of the fixed-point
   affinities of the input edges they merge and their count. The affinity used
   for picking is the sum (``"sum"``, default), ``floor(sum / count)``
   (``"average"``), or the largest merged affinity (``"max"``, single linkage).
   Each coarse edge also keeps an *anchor*: the two end nodes of the merged
   input edge with the largest affinity, ties by the smaller end node in the
   lower-numbered cluster, then in the other.
7. **Line order of components.** Connected components (the top clusters) are
   placed on the line in increasing order of their smallest node id, i.e. by
   top-level cluster id (rule 5).
8. **Walk of a picked-edge tree.** The children of a merged cluster are the
   vertices of a tree (its picked edges). The walk starts at a far end found by
   one sweep: from the tree's smallest id, the farthest vertex (most edges
   away, ties by smaller id). From that root it is a depth-first preorder that
   visits each vertex's children by smaller subtree height first, ties by
   smaller id, so the deepest branch — the longest path — comes last and
   consecutive clusters on it stay next to each other. The children are laid
   side by side in walk order, each turned end for end when needed so that the
   anchor node of the picked edge to its tree parent lies in its first half
   (strictly past the middle → reverse); the walk's start instead puts the
   anchor towards its first child in its second half.
9. **Spectral order.** Within a component nodes are sorted by the Fiedler value
   (smaller first), ties by node id; the vector's sign is fixed so that its
   first entry of magnitude above ``1e-9 · max |x|`` is positive.
10. **Orientation.** With the graph at hand, from the level below the top
    down to level 1, a cluster at positions ``s..s+z−1`` is reversed when
    ``Σ ±(2(pos[u] − s) − (z − 1)) > 0`` over its edges ``(u, v)`` leaving it,
    ``+`` when ``v`` lies left of the cluster, ``−`` when right (integer sum;
    a zero total keeps the cluster as it is). All clusters of a level are
    decided on the positions at the start of that level.
11. **Wedge weights.** Sums over common neighbours ``w`` of ``1 / d_w`` (the
    PageRank affinity) add ``floor(2**WEDGE_BITS / d_w)`` with
    ``WEDGE_BITS = 32`` as integers, so their value does not depend on the
    order in which the triangles are found.

References
----------
G. L. Steele Jr., D. Lea and C. H. Flood, "Fast splittable pseudorandom number
generators", OOPSLA 2014 (the splitmix64 finaliser constants).
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "AFFINITY_SCALE",
    "MAX_EXACT_WEIGHT",
    "weights_kept",
    "AFFINITY_BITS",
    "WEDGE_BITS",
    "LINKAGES",
    "quantise",
    "quantise_ratio",
    "mix64",
    "SPLITMIX_GAMMA",
    "SPLITMIX_M1",
    "SPLITMIX_M2",
    "pair_hash",
    "round_seed",
    "edge_order",
    "canonical_labels",
    "combine_linkage",
]

AFFINITY_BITS = 20
AFFINITY_SCALE = 1 << AFFINITY_BITS
WEDGE_BITS = 32
LINKAGES = ("sum", "average", "max")
AFFINITIES = ("jaccard", "ppr", "weights", "unit")
"""The edge affinities (:mod:`partition.affinity`); here so that the command line needs no numba to list them."""
DEFAULT_HUB_CAP = 1000
"""Nodes of higher degree credit no common neighbour (:mod:`partition.affinity`)."""

# splitmix64 (Steele, Lea & Flood 2014; the constants of S. Vigna's public-domain splitmix64.c): every
# 64-bit mix of the project uses these, compiled kernels included
SPLITMIX_GAMMA = np.uint64(0x9E3779B97F4A7C15)
SPLITMIX_M1 = np.uint64(0xBF58476D1CE4E5B9)
SPLITMIX_M2 = np.uint64(0x94D049BB133111EB)
_GOLDEN, _M1, _M2 = SPLITMIX_GAMMA, SPLITMIX_M1, SPLITMIX_M2


MAX_EXACT_WEIGHT = 2**53  # integral float64 weights below this convert exactly


def weights_kept(kind, fractional, top, total):
    """Whether integral edge weights are counted as they are (scale 1) rather than put in fixed point (rule 1).

    One test for both engines; they differ only in how they find its inputs
    (array reductions in memory, aggregates on Spark).

    Parameters
    ----------
    kind : {"fm", "cut"}
        ``"fm"``: the pairwise moves' weights (total below ``2**53``);
        ``"cut"``: the cut, swap and window weights (largest below
        :data:`MAX_EXACT_WEIGHT`, total below ``2**62``).
    fractional : bool
        Some weight has a fraction part.
    top, total : float
        Largest weight, and the total over both directions of every edge.
    """
    if fractional:
        return False
    if kind == "fm":
        return total < 2.0**53
    return top < MAX_EXACT_WEIGHT and total < 2.0**62


def quantise(x):
    """Fixed-point value of floats: ``round_half_even(x · AFFINITY_SCALE)`` (rule 1).

    Parameters
    ----------
    x : array_like of float
        Finite values; affinities are in ``[0, 1]`` but any finite value works
        as long as the result fits int64.

    Returns
    -------
    ndarray of int64

    Raises
    ------
    ValueError
        If ``x`` holds NaN or infinite values.
    """
    x = np.asarray(x, dtype=np.float64)
    if not np.isfinite(x).all():
        raise ValueError("cannot quantise NaN or infinite values")
    return np.rint(x * float(AFFINITY_SCALE)).astype(np.int64)


def quantise_ratio(num, den):
    """Fixed-point value of exact ratios: ``floor(num · AFFINITY_SCALE / den)`` (rule 1).

    Parameters
    ----------
    num, den : array_like of int
        Non-negative numerators and positive denominators with
        ``num < 2**(63 − AFFINITY_BITS)``.

    Returns
    -------
    ndarray of int64

    Raises
    ------
    ValueError
        If a denominator is not positive.
    """
    num = np.asarray(num, dtype=np.int64)
    den = np.asarray(den, dtype=np.int64)
    if (den <= 0).any():
        raise ValueError("denominators must be positive")
    return (num << AFFINITY_BITS) // den


def mix64(z):
    """The splitmix64 finaliser on uint64 arrays (wrapping arithmetic).

    ``z += 0x9E3779B97F4A7C15; z = (z ^ z>>30)·0xBF58476D1CE4E5B9;
    z = (z ^ z>>27)·0x94D049BB133111EB; return z ^ z>>31``.

    Parameters
    ----------
    z : array_like of uint64

    Returns
    -------
    ndarray of uint64
        Same shape as ``z`` (a 0-d array for a scalar).

    References
    ----------
    G. L. Steele Jr., D. Lea and C. H. Flood, "Fast splittable pseudorandom
    number generators", OOPSLA 2014.
    """
    z = np.array(z, dtype=np.uint64, copy=True)
    with np.errstate(over="ignore"):
        z += _GOLDEN
        z = (z ^ (z >> np.uint64(30))) * _M1
        z = (z ^ (z >> np.uint64(27))) * _M2
        z ^= z >> np.uint64(31)
    return z


def _as_u64(x):
    """Non-negative integers (or a Python int seed) as uint64, wrapping negatives."""
    x = np.asarray(x)
    if x.dtype == np.uint64:
        return x
    return x.astype(np.int64).view(np.uint64) if x.ndim else np.uint64(int(x) & 0xFFFFFFFFFFFFFFFF)


def pair_hash(u, v, seed=0):
    """Seeded hash of unordered pairs, symmetric in ``u`` and ``v`` (rule 2).

    Parameters
    ----------
    u, v : array_like of int
        Non-negative ids (broadcast together).
    seed : int or uint64

    Returns
    -------
    ndarray of uint64
        ``mix(mix(mix(seed) ^ min(u, v)) + max(u, v))``.

    References
    ----------
    G. L. Steele Jr., D. Lea and C. H. Flood, "Fast splittable pseudorandom
    number generators", OOPSLA 2014.
    """
    u = np.asarray(u, dtype=np.int64)
    v = np.asarray(v, dtype=np.int64)
    lo = np.minimum(u, v).astype(np.uint64)
    hi = np.maximum(u, v).astype(np.uint64)
    s = mix64(_as_u64(seed))
    with np.errstate(over="ignore"):
        return mix64(mix64(s ^ lo) + hi)


def round_seed(seed, r):
    """The hash seed of hierarchy round ``r``: ``mix(mix(seed) + r)`` (rule 3).

    Parameters
    ----------
    seed : int
    r : int
        1-based round number.

    Returns
    -------
    numpy.uint64
    """
    with np.errstate(over="ignore"):
        return np.uint64(mix64(mix64(_as_u64(seed)) + np.uint64(r)))


def edge_order(a, b, affinity, hashes):
    """Indices of edges sorted best first by rule 4.

    Parameters
    ----------
    a, b : ndarray of int
        Endpoints.
    affinity : ndarray of int64
    hashes : ndarray of uint64
        ``pair_hash`` of the endpoints.

    Returns
    -------
    ndarray of int64
        A permutation: larger affinity, then larger hash, then smaller
        ``(min, max)`` first.
    """
    a = np.asarray(a, dtype=np.int64)
    b = np.asarray(b, dtype=np.int64)
    lo, hi = np.minimum(a, b), np.maximum(a, b)
    return np.lexsort((hi, lo, ~np.asarray(hashes, dtype=np.uint64), -np.asarray(affinity, dtype=np.int64)))


def canonical_labels(labels):
    """Renumber labels ``0..c−1`` by their smallest member index (rule 5).

    Parameters
    ----------
    labels : ndarray of int
        Any label per item (item ``i`` is a member of ``labels[i]``).

    Returns
    -------
    new_labels : ndarray of int64
        ``new_labels[i]`` is the rank of ``min{j : labels[j] == labels[i]}``.
    count : int
        Number of distinct labels.
    """
    labels = np.asarray(labels)
    uniq, first, inverse = np.unique(labels, return_index=True, return_inverse=True)
    rank = np.empty(uniq.shape[0], dtype=np.int64)
    rank[np.argsort(first, kind="stable")] = np.arange(uniq.shape[0], dtype=np.int64)
    return rank[inverse.reshape(-1)], int(uniq.shape[0])


def combine_linkage(total, count, best, linkage="sum"):
    """The affinity used for picking, from merged-edge statistics (rule 6).

    Parameters
    ----------
    total : ndarray of int64
        Sum of the fixed-point affinities of the merged input edges.
    count : ndarray of int64
        How many input edges were merged (positive).
    best : ndarray of int64
        Largest merged affinity.
    linkage : {"sum", "average", "max"}

    Returns
    -------
    ndarray of int64

    Raises
    ------
    ValueError
        If ``linkage`` is unknown.
    """
    if linkage == "sum":
        return np.asarray(total, dtype=np.int64)
    if linkage == "average":
        return np.asarray(total, dtype=np.int64) // np.asarray(count, dtype=np.int64)
    if linkage == "max":
        return np.asarray(best, dtype=np.int64)
    raise ValueError(f"linkage must be one of {', '.join(LINKAGES)}, got {linkage!r}")
