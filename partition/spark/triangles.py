"""Common-neighbour counts on Spark by colour-triple subproblems (no wedge table).

A wedge self-join materialises every pair of out-neighbours: about 33 M rows
for a 1 M-edge R-MAT graph but 1.2 G rows at 16 M edges, more than a small
cluster shuffles in reasonable time. Instead the nodes get one of ``ρ``
colours (a hash of the id) and every triple of distinct colours ``{a < b < c}``
is one task that receives the edges with both ends coloured in the triple and
lists the triangles of that subgraph in memory (degree-ordered, each triangle
once from its lowest vertex, as :func:`partition.affinity.wedge_sums`). A
triangle is credited by exactly one task: the one of its colour set when it has
three colours; otherwise the first triple (in colour order) that contains its
colours. Each task adds, to each of its triangles' edges, the opposite vertex's
values (``1`` and ``⌊2**32 / d⌋`` when its whole-graph degree ``d`` is at most
the hub cap); a ``groupBy`` sums the tasks' partial counts per edge.

With ``ρ`` colours a task holds about ``(3/ρ)²`` of the edges and lists about
``(3/ρ)³`` of the wedges; all ``C(ρ, 3)`` tasks together list about
``4.5 (1 − 1/ρ)(1 − 2/ρ)`` times the wedges a single pass lists, and each edge
is sent to ``ρ − 2`` tasks (more when both ends share a colour). ``ρ`` is the
smallest value that keeps a task under ``task_edges`` edges; graphs below it
are one task (``ρ = 1``).

References
----------
S. Suri and S. Vassilvitskii, "Counting triangles and the curse of the last
reducer", WWW 2011 (the graph-partition algorithm).
N. Chiba and T. Nishizeki, "Arboricity and subgraph listing algorithms",
SIAM J. Comput. 14(1), 1985.
"""

from __future__ import annotations

import math
from itertools import combinations

import numba
import numpy as np

from partition.rules import WEDGE_BITS

__all__ = ["colour_count", "triangle_credits_df", "owner", "TASK_EDGES"]

TASK_EDGES = 8_000_000  # edges one task may hold (about 1.5 GB of Python memory at peak)


def colour_count(m, task_edges=TASK_EDGES):
    """Number of colours ``ρ``: 1 when the graph fits one task, else ``≥ 4`` with ``(3/ρ)² m ≤ task_edges``."""
    if m <= task_edges:
        return 1
    return max(4, math.ceil(3.0 * math.sqrt(m / float(task_edges))))


@numba.njit(cache=True, nogil=True)
def _sort3(a, b, c):
    if a > b:
        a, b = b, a
    if b > c:
        b, c = c, b
    if a > b:
        a, b = b, a
    return a, b, c


@numba.njit(cache=True, nogil=True)
def owner(a, b, c, rho):
    """Code ``x ρ² + y ρ + z`` of the triple ``x < y < z`` that credits a triangle coloured ``a, b, c``."""
    a, b, c = _sort3(a, b, c)
    if a == b and b == c:  # one colour: the two smallest other colours
        y = 0 if a != 0 else 1
        z = y + 1
        if z == a:
            z += 1
        x, y, z = _sort3(a, y, z)
    elif a == b or b == c:  # two colours: the smallest third colour
        z = 0
        while z == a or z == c:
            z += 1
        x, y, z = _sort3(a, c, z)
    else:
        x, y, z = a, b, c
    return x * rho * rho + y * rho + z


@numba.njit(cache=True, nogil=True)
def _owned_pass(n, optr, oind, colour, want, rho, vc, vs):
    # As partition.affinity._triangle_pass, on oriented entries q: triangle
    # u < v < w (rank) adds w's values to (u, v), v's to (u, w), u's to (v, w);
    # only triangles whose owner is ``want`` (want < 0: all) count.
    size = oind.shape[0]
    cnt = np.zeros(size, dtype=np.int64)
    sm = np.zeros(size, dtype=np.int64)
    mark = np.full(n, -1, dtype=np.int64)
    for u in range(n):
        for q in range(optr[u], optr[u + 1]):
            mark[oind[q]] = q
        for q in range(optr[u], optr[u + 1]):
            v = oind[q]
            for r in range(optr[v], optr[v + 1]):
                w = oind[r]
                p = mark[w]
                if p < 0:
                    continue
                if want >= 0 and owner(colour[u], colour[v], colour[w], rho) != want:
                    continue
                cnt[q] += vc[w]
                sm[q] += vs[w]
                cnt[p] += vc[v]
                sm[p] += vs[v]
                cnt[r] += vc[u]
                sm[r] += vs[u]
        for q in range(optr[u], optr[u + 1]):
            mark[oind[q]] = -1
    return cnt, sm


def task_credits(u, v, du, dv, cu, cv, want, rho, hub_cap):
    """One task: per edge ``(u, v)`` of its subgraph, the credited count and wedge sum (non-zero rows)."""
    ids, inv = np.unique(np.concatenate((u, v)), return_inverse=True)
    m = u.shape[0]
    lu, lv = inv[:m], inv[m:]
    n = ids.shape[0]
    deg = np.zeros(n, dtype=np.int64)
    deg[lu], deg[lv] = du, dv
    col = np.zeros(n, dtype=np.int64)
    col[lu], col[lv] = cu, cv
    # orientation of partition.affinity.wedge_sums: lower (degree, id) first (local ids keep id order)
    fwd = (dv > du) | ((dv == du) & (lv > lu))
    x = np.where(fwd, lu, lv)
    y = np.where(fwd, lv, lu)
    o = np.argsort(x, kind="stable")
    x, y = x[o], y[o]
    optr = np.zeros(n + 1, dtype=np.int64)
    np.cumsum(np.bincount(x, minlength=n), out=optr[1:])
    small = deg <= hub_cap
    vc = small.astype(np.int64)
    vs = np.where(small, (np.int64(1) << WEDGE_BITS) // np.maximum(deg, 1), 0)
    cnt, sm = _owned_pass(n, optr, y.astype(np.int64), col, int(want), int(rho), vc, vs)
    keep = cnt > 0
    gx, gy = ids[x[keep]], ids[y[keep]]
    return np.minimum(gx, gy), np.maximum(gx, gy), cnt[keep], sm[keep]


def _routes(rho):
    """Rows ``(cu, cv, task)``: every task (colour triple) that an edge coloured ``cu, cv`` goes to."""
    if rho == 1:
        return [(0, 0, 0)], {0: -1}
    triples = list(combinations(range(rho), 3))
    code = {t: t[0] * rho * rho + t[1] * rho + t[2] for t in triples}
    rows = []
    for a in range(rho):
        for b in range(rho):
            for t in triples:
                if a in t and b in t:
                    rows.append((a, b, code[t]))
    return rows, {c: c for c in code.values()}


def triangle_credits_df(e, hub_cap, rho):
    """Per edge with a credited triangle: ``u, v, c, s`` (count and wedge sum), from ``e`` = ``u, v, du, dv``.

    Parameters
    ----------
    e : DataFrame
        Every edge once (``u < v``) with whole-graph degrees ``du``, ``dv``.
    hub_cap : int
    rho : int
        Number of colours (:func:`colour_count`).

    Returns
    -------
    DataFrame
    """
    import pandas as pd
    from pyspark.sql import functions as F

    spark = e.sparkSession
    rows, want_of = _routes(int(rho))
    route = spark.createDataFrame(rows, "cu long, cv long, task long")
    colour = (lambda c: F.lit(0).cast("long")) if rho == 1 else (
        lambda c: F.pmod(F.xxhash64(F.col(c)), F.lit(int(rho))).cast("long"))
    routed = (e.select("u", "v", "du", "dv", colour("u").alias("cu"), colour("v").alias("cv"))
               .join(F.broadcast(route), ["cu", "cv"]))
    cap = int(hub_cap)

    def kernel(pdf):
        if len(pdf) == 0:
            return pd.DataFrame({"u": [], "v": [], "c": [], "s": []}, dtype=np.int64)
        task = int(pdf["task"].iloc[0])
        a, b, c, s = task_credits(*(pdf[k].to_numpy(np.int64) for k in ("u", "v", "du", "dv", "cu", "cv")),
                                  want_of[task], rho, cap)
        return pd.DataFrame({"u": a, "v": b, "c": c, "s": s})

    credits = routed.groupBy("task").applyInPandas(kernel, "u long, v long, c long, s long")
    if rho == 1:
        return credits
    return credits.groupBy("u", "v").agg(F.sum("c").alias("c"), F.sum("s").alias("s"))
