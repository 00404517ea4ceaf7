"""Affinity hierarchy on Spark: Borůvka rounds on DataFrames, finished on the driver when small.

Each round does what :func:`partition.hierarchy.boruvka_round` does, with the
same rules of :mod:`partition.rules`, on DataFrames:

1. the linkage value of every coarse edge (rule 6) and its seeded pair hash
   (rules 2–3, computed by :func:`partition.rules.pair_hash` in ``mapInPandas``;
   stored as the signed int64 ``hash XOR 2**63`` so signed order is unsigned order);
2. every cluster's best incident edge (rule 4): the largest
   ``(value, hash, −other end)`` by a ``groupBy`` over both directions;
3. the clusters of the picked forest: each tree holds exactly one mutual pick,
   whose smaller end becomes the root, and pointer jumping (``p ← p[p]``)
   reaches it in ``O(log depth)`` joins — no label propagation, whose
   iterations grow with the diameter;
4. new ids by the smallest member (rule 5, a range-partitioned dense rank);
5. contraction: parallel edges merged by ``groupBy`` (integer sums and max).

Every DataFrame that feeds the next iteration is written to Parquet and read
back (:func:`partition.spark.frames.materialise`), which cuts the plan and the
inherited statistics that otherwise stall the planner. A finished round is a
checkpoint (parent table, picked edges, coarse edges, and a JSON marker) under
the work directory; a resumed run starts after the last marked round. Once the
coarse graph has at most ``collect_edges`` edges it is collected and the
remaining rounds run in :func:`partition.hierarchy.boruvka_round` — the same
rules, so the same result. GraphFrames is not used (its JVM package is not
needed for pointer jumping on a forest).
"""

from __future__ import annotations

import json
import shutil
import time
from pathlib import Path

import numpy as np

from partition.atomic import write_text
from partition.errors import ParameterError
from partition.hierarchy import CoarseEdges, Hierarchy, Picked, driver_rounds, hierarchy_rounds
from partition.rules import LINKAGES, pair_hash, round_seed
from partition.spark.frames import dense_rank, materialise, to_numpy
from partition.spark.session import describe

__all__ = ["build_hierarchy_df", "COLLECT_EDGES"]

COLLECT_EDGES = 2_000_000  # coarse graphs this small finish on the driver
_SIGN = np.uint64(1 << 63)


def _hash_fn(hseed):
    def fn(batches):
        for pdf in batches:
            h = pair_hash(pdf["a"].to_numpy(np.int64), pdf["b"].to_numpy(np.int64), hseed)
            yield pdf.assign(hs=(h ^ _SIGN).view(np.int64))

    return fn


def _value(linkage):
    from pyspark.sql import functions as F

    if linkage == "sum":
        return F.col("total")
    if linkage == "average":
        return F.expr("total div cnt")
    return F.col("best")


def _round_dir(work, r):
    return Path(work) / "hierarchy" / f"round_{r:03d}"


def _marker(work, r):
    return _round_dir(work, r) / "done.json"


def last_round(work):
    """Number of the last checkpointed hierarchy round under ``work`` (−1 when none)."""
    base = Path(work) / "hierarchy"
    if not base.exists():
        return -1
    done = [int(p.parent.name.split("_")[1]) for p in base.glob("round_*/done.json")]
    r = -1
    while r + 1 in done:  # rounds are only trusted as an unbroken prefix
        r += 1
    return r


def _jump(ptr, rd):
    """Pointer jumping ``p ← p[p]`` until no pointer moves; returns ``(roots, iterations)``."""
    from pyspark.sql import functions as F

    jumps = 0
    while True:
        jumps += 1
        nxt = ptr.alias("x").join(ptr.alias("y"), F.col("x.p") == F.col("y.s")).select(
            F.col("x.s").alias("s"), F.col("y.p").alias("p"), (F.col("x.p") != F.col("y.p")).alias("moved"))
        nxt = materialise(nxt, rd / f"ptr_{jumps % 2 + 1}.parquet")
        if nxt.filter("moved").limit(1).count() == 0:
            return nxt.select("s", "p"), jumps
        ptr = nxt.select("s", "p")


def spark_round(spark, edges, c, r, seed, linkage, work):
    """One Borůvka round on Spark (round ``r``, 1-based) over ``c`` clusters.

    Returns
    -------
    parent : DataFrame
        ``s`` (cluster of level ``r − 1``), ``parent`` (its level-``r`` cluster), all ``c`` rows.
    picked : DataFrame
        ``a < b``, ``val``: the distinct picked edges.
    coarse : DataFrame
        ``a < b, total, cnt, best`` of the contracted graph.
    c_new : int
    jumps : int
        Pointer-jumping iterations.
    """
    from pyspark.sql import functions as F

    rd = _round_dir(work, r)
    rd.mkdir(parents=True, exist_ok=True)
    hseed = round_seed(seed, r)
    e = edges.withColumn("val", _value(linkage).cast("long")).select("a", "b", "val")
    e = e.mapInPandas(_hash_fn(hseed), "a long, b long, val long, hs long")
    both = e.select(F.col("a").alias("s"), F.col("b").alias("t"), "val", "hs").unionByName(
        e.select(F.col("b").alias("s"), F.col("a").alias("t"), "val", "hs"))
    best = both.groupBy("s").agg(F.max(F.struct("val", "hs", (-F.col("t")).alias("nt"))).alias("m"))
    picks = materialise(best.select("s", (-F.col("m.nt")).alias("t"), F.col("m.val").alias("val")),
                        rd / "picks.parquet")
    picked = picks.select(F.least("s", "t").alias("a"), F.greatest("s", "t").alias("b"), "val").distinct()
    picked = picked.join(edges.select("a", "b", "xa", "xb"), ["a", "b"])
    # each tree has one mutual pick; its smaller end is the root
    back = picks.select(F.col("s").alias("t"), F.col("t").alias("back"))
    ptr = picks.join(back, "t", "left").select(
        "s", F.when((F.col("back") == F.col("s")) & (F.col("s") < F.col("t")), F.col("s"))
        .otherwise(F.col("t")).alias("p"))
    ptr = materialise(ptr, rd / "ptr_0.parquet")
    roots, jumps = _jump(ptr, rd)
    comp = spark.range(c).withColumnRenamed("id", "s").join(roots, "s", "left").select(
        "s", F.coalesce("p", "s").alias("comp"))
    firsts = comp.groupBy("comp").agg(F.min("s").alias("first"))
    ranked = dense_rank(firsts, "first", "parent")
    parent = materialise(comp.join(ranked.select("comp", "parent"), "comp").select("s", "parent"),
                         rd / "parent.parquet")
    c_new = int(ranked.count())
    pa = parent.select(F.col("s").alias("a"), F.col("parent").alias("na"))
    pb = parent.select(F.col("s").alias("b"), F.col("parent").alias("nb"))
    x = edges.join(pa, "a").join(pb, "b").filter(F.col("na") != F.col("nb"))
    sw = F.col("na") > F.col("nb")
    x = x.select(F.least("na", "nb").alias("a"), F.greatest("na", "nb").alias("b"), "total", "cnt", "best",
                 F.when(sw, F.col("xb")).otherwise(F.col("xa")).alias("xlo"),
                 F.when(sw, F.col("xa")).otherwise(F.col("xb")).alias("xhi"))
    # rule 6: the anchor is the merged edge of largest affinity, then smaller anchors
    coarse = x.groupBy("a", "b").agg(
        F.sum("total").alias("total"), F.sum("cnt").alias("cnt"),
        F.max(F.struct("best", (-F.col("xlo")).alias("nlo"), (-F.col("xhi")).alias("nhi"))).alias("m"))
    coarse = coarse.select("a", "b", "total", "cnt", F.col("m.best").alias("best"),
                           (-F.col("m.nlo")).alias("xa"), (-F.col("m.nhi")).alias("xb"))
    coarse = materialise(coarse, rd / "edges.parquet")
    picked = materialise(picked, rd / "picked.parquet")
    return parent, picked, coarse, c_new, jumps


def build_hierarchy_df(spark, aff, n, seed=0, linkage="sum", work=None, resume=False,
                       collect_edges=COLLECT_EDGES, progress=None):
    """The affinity hierarchy of the graph, computed on Spark (see the module docstring).

    Parameters
    ----------
    spark : pyspark.sql.SparkSession
    aff : DataFrame
        ``u < v``, ``aff`` (fixed-point long), each edge once.
    n : int
        Number of nodes (dense ids ``0..n−1``).
    seed : int
    linkage : {"sum", "average", "max"}
    work : str or path-like
        Work directory for the round checkpoints.
    resume : bool
        Continue after the last checkpointed round found under ``work``.
    collect_edges : int
        Finish on the driver once at most this many coarse edges remain.
    progress : callable or None
        Called with one dict per round (``round``, ``clusters``, ``edges``,
        ``seconds``, ``where``).

    Returns
    -------
    partition.hierarchy.Hierarchy
        Equal, array for array, to :func:`partition.hierarchy.build_hierarchy`
        on the same graph and affinities.

    Raises
    ------
    ParameterError
        Unknown linkage, seed not a whole number.

    References
    ----------
    M. Bateni, S. Behnezhad, M. Derakhshan, M. Hajiaghayi, R. Kiveris,
    S. Lattanzi and V. Mirrokni, "Affinity clustering: hierarchical clustering
    at scale", NIPS 2017.
    """
    from pyspark.sql import functions as F

    if linkage not in LINKAGES:
        raise ParameterError(f"linkage must be one of {', '.join(LINKAGES)}, got {linkage!r}")
    if isinstance(seed, bool) or int(seed) != seed:
        raise ParameterError(f"seed must be a whole number, got {seed!r}")
    seed = int(seed)
    work = Path(work)
    h = Hierarchy(seed=seed, linkage=linkage)
    h.labels.append(np.arange(n, dtype=np.int64))
    h.sizes.append(n)
    if not resume and (work / "hierarchy").exists():
        shutil.rmtree(work / "hierarchy")  # a fresh run never trusts an older run's rounds
    start = last_round(work) if resume else -1
    if start < 0:
        t = time.perf_counter()
        describe(spark, "hierarchy: edges")
        rd = _round_dir(work, 0)
        rd.mkdir(parents=True, exist_ok=True)
        edges = materialise(aff.select(F.col("u").alias("a"), F.col("v").alias("b"),
                                       F.col("aff").alias("total"), F.lit(1).cast("long").alias("cnt"),
                                       F.col("aff").alias("best"), F.col("u").alias("xa"),
                                       F.col("v").alias("xb")), rd / "edges.parquet")
        m = edges.count()
        write_text(_marker(work, 0), json.dumps({"round": 0, "clusters": n, "edges": int(m)}))
        start = 0
        if progress is not None:  # round 0: the edge affinities computed and written (triangle tasks)
            progress({"stage": "hierarchy round 0", "clusters": n, "edges": int(m),
                      "seconds": round(time.perf_counter() - t, 3), "where": "spark: edge affinities"})
    info = json.loads(_marker(work, 0).read_text())
    h.edges.append(int(info["edges"]))
    c = n
    for r in range(1, start + 1):  # replay the checkpointed rounds
        info = json.loads(_marker(work, r).read_text())
        par = to_numpy(spark.read.parquet(str(_round_dir(work, r) / "parent.parquet")), ["s", "parent"],
                       sort=["s"])["parent"].astype(np.int64)
        pk = spark.read.parquet(str(_round_dir(work, r) / "picked.parquet"))
        h.append(par, _picked(pk), int(info["clusters"]), int(info["edges"]))
        c = int(info["clusters"])
    edges = [spark.read.parquet(str(_round_dir(work, start) / "edges.parquet"))]

    def step(c, r):
        describe(spark, f"hierarchy: round {r}")
        parent, picked, coarse, c_new, jumps = spark_round(spark, edges[0], c, r, seed, linkage, work)
        m = int(coarse.count())
        par = to_numpy(parent, ["s", "parent"], sort=["s"])["parent"].astype(np.int64)
        write_text(_marker(work, r), json.dumps({"round": r, "clusters": c_new, "edges": m, "jumps": jumps}))
        edges[0] = coarse
        return par, _picked(picked), c_new, m, {"jumps": jumps}

    c, r = hierarchy_rounds(h, c, start, step, lambda m: m <= collect_edges, progress, "spark")
    if h.edges[-1]:
        describe(spark, "hierarchy: collect")
        cols = ["a", "b", "total", "cnt", "best", "xa", "xb"]
        got = to_numpy(edges[0], cols, sort=["a", "b"])
        driver_rounds(h, c, r, CoarseEdges(*(got[x].astype(np.int64) for x in cols)), progress)
    return h


def _picked(df):
    got = to_numpy(df, ["a", "b", "val", "xa", "xb"], sort=["a", "b"])
    return Picked(*(got[x].astype(np.int64) for x in ("a", "b", "val", "xa", "xb")))
