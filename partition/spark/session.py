"""Spark session set-up for Shardline jobs on one machine or a standalone cluster.

One function builds (or joins) the session with the settings every Shardline
job needs: the driver's own Python for the workers, loopback binding, no web UI,
a small shuffle width for local runs, a checkpoint folder under the work
directory. GraphFrames is optional: :func:`graphframes_available` tells whether
its JVM classes are on the classpath (the engine does not need them; its
connected components run on plain DataFrames by pointer jumping).
"""

from __future__ import annotations

import os
import sys
from pathlib import Path

__all__ = ["spark_session", "graphframes_available", "describe"]


def spark_session(master=None, work_dir=None, app_name="shardline", shuffle_partitions=4,
                  driver_memory="4g", extra_conf=None):
    """Build or join the Spark session used by the engine.

    Parameters
    ----------
    master : str or None
        Spark master URL; ``None`` keeps the one set by ``spark-submit`` or
        falls back to ``local[2]``.
    work_dir : str or path-like or None
        Folder for the RDD checkpoint directory (``<work_dir>/spark-checkpoints``).
    app_name : str
    shuffle_partitions : int
        ``spark.sql.shuffle.partitions`` (4 suits a 2-core machine).
    driver_memory : str
        ``spark.driver.memory``; only effective when this call starts the JVM.
    extra_conf : dict or None
        More ``key: value`` settings.

    Returns
    -------
    pyspark.sql.SparkSession
    """
    os.environ.setdefault("PYSPARK_PYTHON", sys.executable)
    os.environ.setdefault("PYSPARK_DRIVER_PYTHON", sys.executable)
    os.environ.setdefault("SPARK_LOCAL_IP", "127.0.0.1")
    from pyspark.sql import SparkSession

    active = SparkSession.getActiveSession()
    builder = SparkSession.builder.appName(app_name)
    if active is None:
        launched = "PYSPARK_GATEWAY_PORT" in os.environ  # spark-submit already chose the master
        if master is None and not launched:
            master = "local[2]"
        if master is not None:
            builder = builder.master(master)
        conf = {
            "spark.ui.enabled": "false",
            "spark.ui.showConsoleProgress": "false",
            "spark.sql.shuffle.partitions": str(int(shuffle_partitions)),
            "spark.driver.memory": driver_memory,
            "spark.driver.host": "127.0.0.1",
            "spark.driver.bindAddress": "127.0.0.1",
            "spark.sql.execution.arrow.pyspark.enabled": "true",
            "spark.sql.adaptive.enabled": "false",
            "spark.python.worker.reuse": "true",
        }
        conf.update(extra_conf or {})
        for key, value in conf.items():
            builder = builder.config(key, value)
    spark = builder.getOrCreate()
    spark.conf.set("spark.sql.shuffle.partitions", str(int(shuffle_partitions)))
    if work_dir is not None:
        ck = Path(work_dir) / "spark-checkpoints"
        ck.mkdir(parents=True, exist_ok=True)
        spark.sparkContext.setCheckpointDir(str(ck))
    spark.sparkContext.setLogLevel("ERROR")
    return spark


def graphframes_available(spark):
    """Whether GraphFrames' JVM classes are on the session's classpath.

    Parameters
    ----------
    spark : pyspark.sql.SparkSession

    Returns
    -------
    bool
        ``False`` when ``org.graphframes.GraphFramePythonAPI`` cannot be loaded
        (the Python wrapper alone is not enough).
    """
    try:
        jvm = spark.sparkContext._jvm
        jvm.java.lang.Class.forName("org.graphframes.GraphFramePythonAPI", True,
                                     jvm.Thread.currentThread().getContextClassLoader())
        return True
    except Exception:  # noqa: BLE001 - any failure means "not available"
        return False


def describe(spark, stage):
    """Label the Spark jobs of a stage (``shardline: <stage>``)."""
    spark.sparkContext.setJobDescription(f"shardline: {stage}")
