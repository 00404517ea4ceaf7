"""The co-access graph of a large basket log as a Spark job (same graph as the in-memory build).

The method is that of :mod:`partition.workload.coaccess` (keys weighted by
load; a request of ``s`` keys joins its key pairs with weight ``1/(s−1)``, in
fixed-point units, so sums do not depend on the order Spark adds them in;
Lengauer, "Combinatorial Algorithms for Integrated Circuit Layout", Wiley 1990).

Data movement: the basket text is read by Spark; one small job counts the
non-blank lines of each input partition (the request number of a line is its
partition's offset plus its place inside the partition, so the training cut
and the seeded sample of a large request match the in-memory build) and tells
whether every key is a canonical int64 (the key rule of
:mod:`partition.workload.keys`). Then every partition is parsed in Arrow
batches (``mapInArrow``) by the in-memory kernel, which emits each batch's key
pairs already summed, and Spark sums the pairs and the key loads by key. No
row passes through the driver; the two tables are written as Parquet folders
(temporary sibling, then rename).
"""

from __future__ import annotations

import os
import shutil
import time

import numpy as np

from partition.errors import InputError, ParameterError

__all__ = ["coaccess_frames", "spark_coaccess"]

_BLANKS = "[ \\t\\u000b\\f]+"
_CANONICAL = "^-?(0|[1-9][0-9]{0,18})$"
_STATS = ("requests", "accesses", "large_requests", "large_accesses", "single_key_requests", "pairs_emitted")


def _batch_fn(offsets, cut, limit, large, seed, integer):
    """The per-partition parser: Arrow batches of lines → rows (kind, u, v, w)."""

    def fn(batches):
        import pyarrow as pa
        import pyarrow.compute as pc
        from pyspark import TaskContext

        from partition.workload.coaccess import coaccess_pairs
        from partition.workload.log import assemble_log

        key_type = pa.int64() if integer else pa.large_string()
        schema = pa.schema([("kind", pa.int8()), ("u", key_type), ("v", key_type), ("w", pa.int64())])
        r_next = int(offsets[TaskContext.get().partitionId()])
        for batch in batches:
            trimmed = pc.utf8_trim(batch.column(0), " \t\x0b\x0c")
            trimmed = trimmed.filter(pc.greater(pc.utf8_length(trimmed), 0))
            r0, n = r_next, len(trimmed)
            r_next += n
            take = max(0, min(n, cut - r0))
            if take == 0:
                continue
            lists = pc.split_pattern_regex(trimmed.slice(0, take), "[ \t\x0b\x0c]+")
            sizes = pc.list_value_length(lists).to_numpy(zero_copy_only=False).astype(np.int64)
            tokens = pc.list_flatten(lists)
            values = (pc.cast(tokens, pa.int64()).to_numpy(zero_copy_only=False) if integer
                      else np.asarray(tokens.to_numpy(zero_copy_only=False), dtype=object))
            log = assemble_log(values, sizes, None, None)
            u, v, w, rep = coaccess_pairs(log, limit, large, seed, first_request=r0)
            counts = log.access_counts()
            stats = np.array([rep[s] for s in _STATS], dtype=np.int64)
            kinds = np.concatenate((np.zeros(u.size, np.int8), np.ones(counts.size, np.int8),
                                    np.arange(2, 2 + stats.size, dtype=np.int8)))
            keys, n_e, n_c, n_s = log.keys, u.size, counts.size, stats.size
            if integer:
                u_col = pa.array(np.concatenate((keys[u], keys, np.zeros(n_s, np.int64))), key_type,
                                 mask=np.concatenate((np.zeros(n_e + n_c, bool), np.ones(n_s, bool))))
                v_col = pa.array(np.concatenate((keys[v], np.zeros(n_c + n_s, np.int64))), key_type,
                                 mask=np.concatenate((np.zeros(n_e, bool), np.ones(n_c + n_s, bool))))
            else:
                u_col = pa.array(np.concatenate((keys[u], keys, np.full(n_s, None, object))), key_type,
                                 from_pandas=True)
                v_col = pa.array(np.concatenate((keys[v], np.full(n_c + n_s, None, object))), key_type,
                                 from_pandas=True)
            yield pa.RecordBatch.from_arrays(
                [pa.array(kinds, pa.int8()), u_col, v_col,
                 pa.array(np.concatenate((w, counts, stats)).astype(np.int64), pa.int64())], schema=schema)

    return fn


def coaccess_frames(spark, path, max_keys=100, large="sample", seed=0, train_fraction=None):
    """The co-access graph of a basket log as Spark DataFrames.

    Parameters
    ----------
    spark : pyspark.sql.SparkSession
    path : str
        Basket text (one request per line, keys separated by blanks; gzip allowed).
    max_keys, large, seed
        As in :func:`partition.workload.coaccess.coaccess_pairs`.
    train_fraction : float or None
        Build on the first ``round(fraction · requests)`` requests only.

    Returns
    -------
    edges : DataFrame
        ``source, target, weight`` (``source < target``; weight in units of
        ``1/WEIGHT_UNIT``).
    nodes : DataFrame
        ``id, weight`` (access counts).
    report : dict
        The figures of the in-memory build's report.
    """
    from pyspark.sql import functions as F
    from pyspark.sql import types as T

    from partition.workload.coaccess import LARGE_POLICIES, WEIGHT_UNIT

    if int(max_keys) < 2:
        raise ParameterError(f"the request size limit must be at least 2, got {max_keys}")
    if large not in LARGE_POLICIES:
        raise ParameterError(f"unknown policy {large!r} for large requests; expected sample or skip")
    name = os.fspath(path)
    if not os.path.exists(name) and "://" not in name:
        raise InputError(name, "no such file")
    lines = spark.read.text(name)
    trimmed = F.regexp_replace(F.col("value"), f"^{_BLANKS}|{_BLANKS}$", "")
    per_part = (lines.select(F.spark_partition_id().alias("p"), trimmed.alias("t"))
                .where(F.length("t") > 0).groupBy("p").count().collect())
    n_parts = lines.rdd.getNumPartitions()
    counts = np.zeros(n_parts, dtype=np.int64)
    for row in per_part:
        counts[row["p"]] = row["count"]
    total = int(counts.sum())
    if total == 0:
        raise InputError(name, "the log holds no requests with keys")
    offsets = np.concatenate(([0], np.cumsum(counts)[:-1]))
    cut = total
    if train_fraction is not None:
        if not 0.0 < float(train_fraction) < 1.0:
            raise ParameterError(f"the training fraction must be between 0 and 1, got {train_fraction!r}")
        cut = int(round(float(train_fraction) * total))
    tokens = lines.select(F.explode(F.split(trimmed, _BLANKS)).alias("k")).where(F.length("k") > 0)
    integer = bool(tokens.agg(F.min((F.col("k").rlike(_CANONICAL)
                                     & F.expr("try_cast(k as bigint)").isNotNull()).cast("int"))).first()[0])
    key_type = T.LongType() if integer else T.StringType()
    schema = T.StructType([T.StructField("kind", T.ByteType()), T.StructField("u", key_type),
                           T.StructField("v", key_type), T.StructField("w", T.LongType())])
    rows = lines.mapInArrow(_batch_fn(offsets, cut, int(max_keys), large, int(seed), integer), schema)
    rows = rows.persist()
    stats = dict(rows.where(F.col("kind") >= 2).groupBy("kind").agg(F.sum("w").alias("w"))
                 .rdd.map(lambda r: (int(r["kind"]), int(r["w"]))).collect())
    edges = (rows.where(F.col("kind") == 0).groupBy("u", "v").agg(F.sum("w").alias("weight"))
             .select(F.col("u").alias("source"), F.col("v").alias("target"), "weight"))
    nodes = (rows.where(F.col("kind") == 1).groupBy("u").agg(F.sum("w").alias("weight"))
             .select(F.col("u").alias("id"), "weight"))
    report = {s: int(stats.get(2 + i, 0)) for i, s in enumerate(_STATS)}
    report.update({"size_limit": int(max_keys), "large_policy": large, "weight_unit": WEIGHT_UNIT,
                   "engine": "spark", "load": "counts"})
    return edges, nodes, report


def _write_folder(df, path):
    path = os.fspath(path)
    parent = os.path.dirname(os.path.abspath(path))
    os.makedirs(parent, exist_ok=True)
    tmp = os.path.join(parent, f".shardline-tmp-{os.getpid()}-{os.path.basename(path)}")
    shutil.rmtree(tmp, ignore_errors=True)
    try:
        df.write.parquet(tmp)
        if os.path.isdir(path):
            shutil.rmtree(path)
        elif os.path.exists(path):
            os.unlink(path)
        os.replace(tmp, path)
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise


def spark_coaccess(path, edges_out, weights_out, max_keys=100, large="sample", seed=0, train_fraction=None,
                   master=None, spark=None):
    """Build the co-access graph with Spark and write it as two Parquet folders.

    Parameters
    ----------
    path : str
        Basket log.
    edges_out, weights_out : str
        Folders to write (``source,target,weight`` and ``id,weight``).
    max_keys, large, seed, train_fraction
        As in :func:`coaccess_frames`.
    master : str or None
    spark : SparkSession or None
        An existing session (default: :func:`partition.spark.session.spark_session`).

    Returns
    -------
    dict
        The build report (with ``keys`` and ``edges`` counted in Spark).
    """
    from partition.spark.session import spark_session

    for out in (edges_out, weights_out):
        if os.path.abspath(out) == os.path.abspath(path):
            raise ParameterError(f"{out} would overwrite the input")
    t = time.perf_counter()
    spark = spark or spark_session(master=master)
    edges, nodes, report = coaccess_frames(spark, path, max_keys, large, seed, train_fraction)
    _write_folder(edges.orderBy("source", "target"), edges_out)
    _write_folder(nodes.orderBy("id"), weights_out)
    report["edges"] = int(spark.read.parquet(edges_out).count())
    report["keys"] = int(spark.read.parquet(weights_out).count())
    report["seconds"] = round(time.perf_counter() - t, 3)
    return report
