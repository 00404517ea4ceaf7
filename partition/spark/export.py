"""Export a placement with Spark: the bulk path of ``shardline export`` for node→shard tables of any size.

:func:`export_run_spark` writes the folder of
:func:`partition.placement.export.export_run` — ``assignment.<ext>``,
``shards/shard-NNNNN.<ext>`` (one per shard, empty shards included) and a
``manifest.json`` with the same keys — but every table is a Spark dataset
folder (part files) instead of one file, so nothing of size n passes through
the driver: the rows are sorted by node id in Spark, the per-shard lists come
from one ``partitionBy("shard")`` write, and the manifest's checksum of each
table is :func:`partition.placement.export.file_sha256` of its folder (SHA-256
over the data files in path order). The report, the input-graph checks and the
manifest's fields are those of the in-memory export; ``tables`` in the
manifest says ``"spark-folders"``. The folder is built as a hidden temporary
sibling and renamed into place; an existing folder is replaced only with
``force``.

Reference: NIST, "Secure Hash Standard (SHS)", FIPS PUB 180-4, 2015 (SHA-256).
"""

from __future__ import annotations

import os
import shutil

from partition.errors import InputError
from partition.placement.export import (EXTENSIONS, check_export, data_files, file_sha256, manifest_head,
                                        publish_export)

__all__ = ["export_run_spark"]


def _read_assignment(spark, path):
    from pyspark.sql import functions as F

    from partition.spark.io import detect_format

    name = os.fspath(path)
    if not os.path.exists(name):
        raise InputError(name, "no such file or folder")
    try:
        if detect_format(name) == "parquet":
            df = spark.read.parquet(name)
        else:
            df = spark.read.option("header", True).option("sep", "\t" if name.lower().endswith(".tsv") else ",") \
                .csv(name)
    except Exception as exc:  # noqa: BLE001 - Spark's analysis errors
        raise InputError(name, f"cannot be read as a node,shard table ({str(exc).splitlines()[0]})") from None
    if "node" not in df.columns or "shard" not in df.columns:
        raise InputError(name, f"needs columns node and shard, has {df.columns}")
    return df.select("node", F.expr("try_cast(shard as bigint)").alias("shard"), F.col("shard").alias("raw"))


def _write(df, path, fmt):
    w = df.write
    if fmt == "parquet":
        w.parquet(path)
    elif fmt == "csv":
        w.option("header", True).csv(path)
    else:
        w.json(path)


def _empty_table(spark, schema, path, fmt):
    _write(spark.createDataFrame([], schema).coalesce(1), path, fmt)


def _entry(folder, rel, rows, shard=None):
    path = os.path.join(folder, *rel.split("/"))
    size = sum(os.path.getsize(os.path.join(path, f)) for f in data_files(path))
    return {"path": rel, "sha256": file_sha256(path), "bytes": size, "rows": int(rows), "shard": shard}


def export_run_spark(spark, assignment, out_dir, fmt="parquet", report=None, graph=None, force=False,
                     created=None):
    """Write a run's placement, per-shard node lists and a manifest with Spark.

    Parameters
    ----------
    spark : SparkSession
    assignment : str or os.PathLike
        Node→shard table (Parquet file or folder, or CSV/TSV with a header)
        on a file system the driver and executors share.
    out_dir, fmt, report, graph, force, created
        As :func:`partition.placement.export.export_run`.

    Returns
    -------
    dict
        The manifest.

    Raises
    ------
    ParameterError
        Unknown format; the folder exists (without ``force``) or is a file.
    InputError
        Missing or malformed assignment or report, a missing input graph, a
        checksum mismatch, an assignment that does not fit the report (node
        count, a shard id that is not an integer in ``[0, k)``, a node listed
        twice). Nothing is written in these cases.
    """
    from pyspark.sql import functions as F

    assignment, out_dir, report_path, rep, graph_path, graph_sum = check_export(
        assignment, out_dir, fmt, report, graph, force)
    k = int(rep["k"])
    df = _read_assignment(spark, assignment).localCheckpoint()
    bad = df.filter(F.col("shard").isNull() | (F.col("shard") < 0) | (F.col("shard") >= k)).limit(1).collect()
    if bad:
        raise InputError(assignment, f"node {bad[0]['node']!r} has shard {bad[0]['raw']!r}; "
                                     f"shards must be whole numbers in [0, {k})")
    twice = df.groupBy("node").count().filter(F.col("count") > 1).limit(1).collect()
    if twice:
        raise InputError(assignment, f"node {twice[0]['node']!r} is listed {twice[0]['count']} times")
    df = df.select("node", "shard")
    counts = {int(r["shard"]): int(r["count"]) for r in df.groupBy("shard").count().collect()}
    n = sum(counts.values())
    nodes = rep["input"].get("nodes")
    if nodes is not None and n != int(nodes):
        raise InputError(assignment, f"holds {n} nodes but the report's graph has {nodes}")
    manifest = manifest_head(rep, fmt, graph_path, graph_sum, assignment, report_path, created)
    manifest["tables"] = "spark-folders"
    ext = EXTENSIONS[fmt]
    width = max(5, len(str(k - 1)))

    def fill(tmp):
        _write(df.orderBy("node"), os.path.join(tmp, f"assignment.{ext}"), fmt)
        by_shard = os.path.join(tmp, "_by_shard")
        writer = df.repartition("shard").sortWithinPartitions("shard", "node").write.partitionBy("shard")
        if fmt == "csv":
            writer = writer.option("header", True)
        writer.format({"parquet": "parquet", "csv": "csv", "jsonl": "json"}[fmt]).save(by_shard)
        os.makedirs(os.path.join(tmp, "shards"))
        files = [_entry(tmp, f"assignment.{ext}", n)]
        schema = df.select("node").schema
        for s in range(k):
            rel = f"shards/shard-{s:0{width}d}.{ext}"
            src = os.path.join(by_shard, f"shard={s}")
            if os.path.isdir(src):
                os.rename(src, os.path.join(tmp, *rel.split("/")))
            else:
                _empty_table(spark, schema, os.path.join(tmp, *rel.split("/")), fmt)
            files.append(_entry(tmp, rel, counts.get(s, 0), shard=s))
        shutil.rmtree(by_shard)
        return files

    return publish_export(out_dir, manifest, fill)
