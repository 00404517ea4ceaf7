"""Standalone-cluster check of the Spark engine: master and worker on 127.0.0.1, job by spark-submit.

The cluster is started with ``sbin/spark-daemon.sh`` from the pyspark package
(``SPARK_HOME`` = that folder), bound to the loopback address on free ports,
and both daemons are stopped by their process ids in the fixture's teardown.
The reference is the in-memory engine on the same edge list: the shards must
be identical.
"""

from __future__ import annotations

import os
import signal
import socket
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

pytest.importorskip("pyspark")

from partition.edgelist import read_graph  # noqa: E402
from partition.partitioner import partition_graph  # noqa: E402

pytestmark = pytest.mark.spark
ROOT = Path(__file__).resolve().parents[1]


def _free_port():
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _wait_port(port, timeout):
    end = time.time() + timeout
    while time.time() < end:
        with socket.socket() as s:
            if s.connect_ex(("127.0.0.1", port)) == 0:
                return True
        time.sleep(0.5)
    return False


@pytest.fixture(scope="module")
def cluster(tmp_path_factory):
    import pyspark

    home = Path(pyspark.__file__).parent
    tmp = tmp_path_factory.mktemp("cluster")
    env = dict(os.environ, SPARK_HOME=str(home), SPARK_PID_DIR=str(tmp / "pid"), SPARK_LOG_DIR=str(tmp / "log"),
               SPARK_WORKER_DIR=str(tmp / "worker"), SPARK_LOCAL_IP="127.0.0.1",
               PYSPARK_PYTHON=sys.executable, PYSPARK_DRIVER_PYTHON=sys.executable,
               SPARK_IDENT_STRING="shardline-test")
    port, ui, wui = _free_port(), _free_port(), _free_port()
    daemon = str(home / "sbin" / "spark-daemon.sh")
    pids = []
    try:
        subprocess.run(["bash", daemon, "start", "org.apache.spark.deploy.master.Master", "1", "--host", "127.0.0.1",
                        "--port", str(port), "--webui-port", str(ui)], env=env, check=True, capture_output=True)
        pids += sorted((tmp / "pid").glob("*Master*.pid"))
        assert _wait_port(port, 120), "the master did not start"
        url = f"spark://127.0.0.1:{port}"
        subprocess.run(["bash", daemon, "start", "org.apache.spark.deploy.worker.Worker", "1", "--host", "127.0.0.1",
                        "--cores", "2", "--memory", "3g", "--webui-port", str(wui), "--work-dir",
                        str(tmp / "worker"), url], env=env, check=True, capture_output=True)
        pids += sorted((tmp / "pid").glob("*Worker*.pid"))
        time.sleep(3)
        yield url, env, tmp
    finally:
        for f in sorted((tmp / "pid").glob("*.pid")):
            try:
                os.kill(int(f.read_text().strip()), signal.SIGTERM)
            except (ProcessLookupError, ValueError):
                pass


def test_spark_submit_on_standalone_cluster_matches_memory(cluster, tmp_path):
    import pyarrow.parquet as pq
    import pyspark

    url, env, _ = cluster
    # a made-up campus: 10×10 grid of rooms plus a detached 5-room annex
    idx = np.arange(100).reshape(10, 10)
    a = list(idx[:, :-1].ravel()) + list(idx[:-1, :].ravel()) + [200, 201, 202, 203]
    b = list(idx[:, 1:].ravel()) + list(idx[1:, :].ravel()) + [201, 202, 203, 204]
    path = tmp_path / "campus.txt"
    path.write_text("".join(f"{x} {y}\n" for x, y in zip(a, b)))
    out = tmp_path / "out"
    submit = str(Path(pyspark.__file__).parent / "bin" / "spark-submit")
    cmd = [submit, "--master", url, "--conf", "spark.driver.host=127.0.0.1", "--conf",
           "spark.driver.bindAddress=127.0.0.1", "--conf", "spark.ui.enabled=false",
           "--conf", "spark.sql.shuffle.partitions=4", "--conf", "spark.executor.memory=2g",
           str(ROOT / "jobs" / "spark_partition.py"), str(path), "-k", "3", "--seed", "7", "-o", str(out),
           "--work-dir", str(tmp_path / "work"), "--quiet"]
    done = subprocess.run(cmd, env=env, capture_output=True, text=True, timeout=900)
    assert done.returncode == 0, done.stderr[-3000:]
    table = pq.read_table(out).to_pandas().sort_values("node")
    g = read_graph(str(path))
    ref = partition_graph(g, 3, 0.0, 7, starts=("hierarchy",), refine=("window", "fm", "swaps"))
    assert np.array_equal(table["node"].to_numpy(), g.ids)
    assert np.array_equal(table["shard"].to_numpy(), ref.parts)
