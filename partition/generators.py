"""Synthetic graphs with known answers: grids, planted partitions and R-MAT.

Each generator returns edge endpoints ``(src, dst)`` as int64 arrays over node
ids ``0..n-1`` (the planted-partition generator also returns the planted
parts). Grids have exactly known cuts, a planted partition carries a balanced
partition whose cut bounds the optimum from above, and R-MAT gives the skewed
degree distributions of web and social graphs at any size. Every random
generator takes a ``seed`` and draws only from ``numpy.random.default_rng(seed)``,
so the same seed gives the same graph. :func:`write_edgelist` writes any of them
as a ``u v`` text edge list (gzip when the name ends in ``.gz``).
"""

from __future__ import annotations

import gzip
import os

import numpy as np
import pyarrow as pa
import pyarrow.csv as pacsv

from partition.atomic import atomic_path
from partition.errors import ParameterError

__all__ = ["edgelist_bytes", "grid2d", "grid3d", "planted_partition", "rmat", "write_edgelist"]


def _positive_int(value, name, minimum=1):
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or value < minimum:
        raise ParameterError(f"{name} must be a whole number >= {minimum}, got {value!r}")
    return int(value)


def _probability(value, name):
    try:
        p = float(value)
    except (TypeError, ValueError):
        raise ParameterError(f"{name} must be a probability in [0, 1], got {value!r}") from None
    if not (0.0 <= p <= 1.0):
        raise ParameterError(f"{name} must be a probability in [0, 1], got {value!r}")
    return p


# ----------------------------------------------------------------------------
# grids
# ----------------------------------------------------------------------------
def grid2d(a, b):
    """The a × b grid graph (4-neighbour lattice).

    Node ``(i, j)`` with ``0 <= i < a``, ``0 <= j < b`` has id ``i * b + j``
    (row-major). The graph has ``a (b − 1) + b (a − 1)`` edges.

    For ``a <= b`` and ``b`` even the minimum bisection (two halves of
    ``a b / 2`` nodes) cuts exactly ``a`` edges: the straight cut across the
    longer side, between columns ``b/2 − 1`` and ``b/2``. This is a classical
    consequence of the edge-isoperimetric inequalities for grids
    (Bollobás & Leader 1991; quoted from memory).

    Parameters
    ----------
    a, b : int
        Number of rows and columns (each >= 1).

    Returns
    -------
    src, dst : ndarray of int64
        One entry per undirected edge, ``src < dst``: first the edges along
        rows, then the edges along columns.

    Raises
    ------
    ParameterError
        When ``a`` or ``b`` is not a whole number >= 1.

    References
    ----------
    B. Bollobás and I. Leader, "Edge-isoperimetric inequalities in the grid",
    Combinatorica 11(4), 299–314, 1991.
    """
    return _grid((_positive_int(a, "a"), _positive_int(b, "b")))


def grid3d(a, b, c):
    """The a × b × c grid graph (6-neighbour lattice).

    Node ``(i, j, l)`` has id ``(i * b + j) * c + l`` (row-major). The graph has
    ``a b (c − 1) + a (b − 1) c + (a − 1) b c`` edges. With ``c`` the longest
    side and even, the straight cut between layers ``c/2 − 1`` and ``c/2`` is a
    bisection of ``a b`` edges, an upper bound on the minimum bisection; for
    the cube ``a = b = c = k`` (``k`` even) it is optimal, ``k²`` edges
    (Bollobás & Leader 1991; quoted from memory).

    Parameters
    ----------
    a, b, c : int
        Side lengths (each >= 1).

    Returns
    -------
    src, dst : ndarray of int64
        One entry per undirected edge, ``src < dst``.

    Raises
    ------
    ParameterError
        When a side is not a whole number >= 1.

    References
    ----------
    B. Bollobás and I. Leader, "Edge-isoperimetric inequalities in the grid",
    Combinatorica 11(4), 299–314, 1991.
    """
    return _grid((_positive_int(a, "a"), _positive_int(b, "b"), _positive_int(c, "c")))


def _grid(shape):
    """Edges of the lattice with the given shape, node ids row-major."""
    ids = np.arange(int(np.prod(shape)), dtype=np.int64).reshape(shape)
    srcs, dsts = [], []
    for axis in reversed(range(len(shape))):
        lo = [slice(None)] * len(shape)
        hi = [slice(None)] * len(shape)
        lo[axis] = slice(0, -1)
        hi[axis] = slice(1, None)
        srcs.append(ids[tuple(lo)].ravel())
        dsts.append(ids[tuple(hi)].ravel())
    return np.concatenate(srcs), np.concatenate(dsts)


# ----------------------------------------------------------------------------
# planted partition
# ----------------------------------------------------------------------------
def planted_partition(k, size, p_in, p_out, seed=0):
    """A planted-partition (stochastic block) graph with ``k`` equal blocks.

    Each of the ``k`` blocks has ``size`` nodes; every pair of nodes in the
    same block is an edge with probability ``p_in`` and every pair in
    different blocks with probability ``p_out``, independently. Node ids are
    shuffled with a seeded permutation, so the blocks are not ranges of ids.

    The planted parts are exactly balanced, so their cut (the number of
    between-block edges) is an upper bound on the minimum cut of any exactly
    balanced ``k``-way partition of the graph.

    Pairs are drawn by geometric skipping over the pair indices (Batagelj &
    Brandes 2005): time and memory grow with the number of edges, not pairs.

    Parameters
    ----------
    k : int
        Number of blocks (>= 1).
    size : int
        Nodes per block (>= 1).
    p_in, p_out : float
        Edge probabilities within and between blocks, in [0, 1].
    seed : int
        Seed for ``numpy.random.default_rng``.

    Returns
    -------
    src, dst : ndarray of int64
        One entry per undirected edge (no duplicates, no self-loops).
    parts : ndarray of int64, shape (k * size,)
        The planted block of each node.

    Raises
    ------
    ParameterError
        When ``k`` or ``size`` is not a whole number >= 1, or a probability is
        outside [0, 1].

    References
    ----------
    A. Condon and R. M. Karp, "Algorithms for graph partitioning on the planted
    partition model", Random Structures & Algorithms 18(2), 116–140, 2001.
    V. Batagelj and U. Brandes, "Efficient generation of large random
    networks", Physical Review E 71, 036113, 2005.
    """
    k = _positive_int(k, "k")
    size = _positive_int(size, "size")
    p_in = _probability(p_in, "p_in")
    p_out = _probability(p_out, "p_out")
    rng = np.random.default_rng(seed)
    n = k * size
    per_block = size * (size - 1) // 2

    idx = _bernoulli_indices(rng, k * per_block, p_in)
    block, local = np.divmod(idx, per_block) if per_block else (idx, idx)
    i, j = _pair_from_index(local)
    src_in, dst_in = block * size + i, block * size + j

    idx = _bernoulli_indices(rng, n * (n - 1) // 2, p_out)
    i, j = _pair_from_index(idx)
    between = (i // size) != (j // size)
    src_out, dst_out = i[between], j[between]

    perm = rng.permutation(n).astype(np.int64)
    src = perm[np.concatenate((src_in, src_out))]
    dst = perm[np.concatenate((dst_in, dst_out))]
    parts = np.empty(n, dtype=np.int64)
    parts[perm] = np.arange(n, dtype=np.int64) // size
    return src, dst, parts


def _bernoulli_indices(rng, total, p):
    """Sorted indices in ``[0, total)``, each present independently with probability ``p``."""
    if total <= 0 or p <= 0.0:
        return np.empty(0, dtype=np.int64)
    if p >= 1.0:
        return np.arange(total, dtype=np.int64)
    chunks, last = [], -1
    while True:
        expect = (total - 1 - last) * p
        draw = int(expect + 6.0 * np.sqrt(expect) + 16)
        pos = last + np.cumsum(rng.geometric(p, size=draw), dtype=np.int64)
        if pos[-1] >= total:
            chunks.append(pos[pos < total])
            break
        chunks.append(pos)
        last = int(pos[-1])
    return np.concatenate(chunks)


def _pair_from_index(idx):
    """Map pair indices ``t = j (j − 1) / 2 + i`` back to ``(i, j)`` with ``i < j``."""
    idx = np.asarray(idx, dtype=np.int64)
    j = ((1.0 + np.sqrt(1.0 + 8.0 * idx.astype(np.float64))) / 2.0).astype(np.int64)
    j -= (j * (j - 1) // 2) > idx  # float rounding, at most one step each way
    j += ((j + 1) * j // 2) <= idx
    i = idx - j * (j - 1) // 2
    return i, j


# ----------------------------------------------------------------------------
# R-MAT / Kronecker
# ----------------------------------------------------------------------------
def rmat(scale, edge_factor=16, a=0.57, b=0.19, c=0.19, seed=0):
    """An R-MAT (Kronecker) edge list as specified by the Graph500 benchmark.

    ``n = 2**scale`` nodes and ``M = edge_factor * n`` generated edges. Each
    edge picks, at every one of the ``scale`` bit levels, one quadrant of the
    adjacency matrix with probabilities ``a, b, c, d = 1 − a − b − c`` (one
    uniform draw per edge and level; the reference code's two conditional
    draws give the same distribution); all edges are advanced one bit level
    at a time, so the work is vectorised over the edges. As in the Graph500 reference generator, node ids are then
    relabelled by a seeded random permutation (so the hubs are not the low
    ids) and the edge order is shuffled. The defaults are the Graph500
    parameters (a, b, c) = (0.57, 0.19, 0.19) and edge factor 16.

    The result is the raw generated list: it contains duplicates and
    self-loops, exactly ``edge_factor * 2**scale`` entries; normalise it with
    :func:`partition.graph.build_graph`.

    Parameters
    ----------
    scale : int
        log2 of the number of nodes (1 to 40).
    edge_factor : int
        Generated edges per node (>= 1).
    a, b, c : float
        Quadrant probabilities (each > 0, ``a + b + c < 1``).
    seed : int
        Seed for ``numpy.random.default_rng``.

    Returns
    -------
    src, dst : ndarray of int64, shape (edge_factor * 2**scale,)

    Raises
    ------
    ParameterError
        For a scale outside 1..40, a non-positive edge factor, or quadrant
        probabilities that do not leave ``d > 0``.

    References
    ----------
    D. Chakrabarti, Y. Zhan and C. Faloutsos, "R-MAT: A recursive model for
    graph mining", SIAM International Conference on Data Mining (SDM), 2004.
    Graph500 Steering Committee, "Graph500 benchmark specification", Kronecker
    generator (reference implementation), graph500.org.
    """
    scale = _positive_int(scale, "scale")
    if scale > 40:
        raise ParameterError(f"scale must be at most 40, got {scale}")
    edge_factor = _positive_int(edge_factor, "edge_factor")
    a, b, c = (float(x) for x in (a, b, c))
    if min(a, b, c) <= 0.0 or a + b + c >= 1.0:
        raise ParameterError(
            f"R-MAT probabilities must be > 0 with a + b + c < 1, got a={a}, b={b}, c={c}"
        )
    rng = np.random.default_rng(seed)
    n = 1 << scale
    m = edge_factor * n
    ab, abc = a + b, a + b + c
    src = np.zeros(m, dtype=np.int64)
    dst = np.zeros(m, dtype=np.int64)
    for bit in range(scale):
        # One uniform draw picks the quadrant: [0, a) top-left, [a, a+b)
        # top-right, [a+b, a+b+c) bottom-left, the rest bottom-right.
        u = rng.random(m)
        row_bit = u >= ab
        col_bit = (u >= a) ^ row_bit ^ (u >= abc)
        src |= row_bit.astype(np.int64) << bit
        dst |= col_bit.astype(np.int64) << bit
    perm = rng.permutation(n).astype(np.int64)
    order = rng.permutation(m)
    return perm[src[order]], perm[dst[order]]


# ----------------------------------------------------------------------------
# output
# ----------------------------------------------------------------------------
def edgelist_bytes(src, dst, weights=None, comment=None):
    """The text of an edge list: comment lines, a ``# u v`` line, then one edge a line.

    Parameters
    ----------
    src, dst : array_like of int
        Edge endpoints, same length.
    weights : array_like of float or None
        Optional third column.
    comment : str or None
        Text for the header lines (each line is prefixed with ``# ``).

    Returns
    -------
    bytes
        UTF-8 text, fields separated by one space, one line per edge.

    Raises
    ------
    ParameterError
        When the columns differ in length or the ids are not integers.
    """
    src = np.asarray(src)
    dst = np.asarray(dst)
    if src.shape != dst.shape or src.ndim != 1:
        raise ParameterError(f"src and dst must be 1-d arrays of one length, got {src.shape} and {dst.shape}")
    if src.dtype.kind not in "iu" or dst.dtype.kind not in "iu":
        raise ParameterError("edge lists are written with integer node ids only")
    cols = {"u": src.astype(np.int64, copy=False), "v": dst.astype(np.int64, copy=False)}
    header = [] if comment is None else [f"# {line}".rstrip() for line in str(comment).splitlines()]
    if weights is not None:
        weights = np.asarray(weights, dtype=np.float64)
        if weights.shape != src.shape:
            raise ParameterError(f"weights must have one entry per edge, got {weights.shape} for {src.shape}")
        cols["w"] = weights
    header.append("# " + " ".join(cols))
    sink = pa.BufferOutputStream()
    pacsv.write_csv(
        pa.table(cols), sink, pacsv.WriteOptions(include_header=False, delimiter=" ", quoting_style="none")
    )
    return ("\n".join(header) + "\n").encode() + sink.getvalue().to_pybytes()


def write_edgelist(path, src, dst, weights=None, comment=None):
    """Write :func:`edgelist_bytes` to ``path``, gzip-compressed when it ends in ``.gz``.

    The file is written atomically; gzip output has a zero timestamp and no
    stored name, so the same edges give the same bytes.

    Parameters
    ----------
    path : str or path-like
        Output file.
    src, dst, weights, comment
        As for :func:`edgelist_bytes`.

    Returns
    -------
    str
        The path written.

    Raises
    ------
    ParameterError
        When the columns differ in length or the ids are not integers.
    """
    body = edgelist_bytes(src, dst, weights, comment)
    path = os.fspath(path)
    with atomic_path(path) as tmp:
        with open(tmp, "wb") as fh:
            if path.endswith(".gz"):
                with gzip.GzipFile(filename="", mode="wb", fileobj=fh, mtime=0) as gz:
                    gz.write(body)
            else:
                fh.write(body)
    return path
