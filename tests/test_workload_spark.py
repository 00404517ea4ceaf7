"""The Spark co-access build (partition.spark.coaccess) equals the in-memory one."""

import gzip
from pathlib import Path

import pytest

from partition.workload.coaccess import coaccess_pairs
from partition.workload.readers import read_log
from partition.workload.synthetic import library_workload, write_log

from conftest import shared_missing  # noqa: E402

pytestmark = pytest.mark.spark
SHARED = Path(__file__).resolve().parents[2] / "shared" / "datasets"


@pytest.fixture(scope="module")
def spark(tmp_path_factory):
    from partition.spark.session import spark_session

    # small input splits, so that the slice spans several partitions and the request numbering is tested
    s = spark_session(work_dir=tmp_path_factory.mktemp("spark"), extra_conf={"spark.sql.files.maxPartitionBytes": "16384"})
    s.conf.set("spark.sql.files.maxPartitionBytes", "16384")
    yield s
    s.stop()


def _compare(spark, path, **opts):
    from partition.spark.coaccess import coaccess_frames

    log = read_log(path)
    train = log.split(train_fraction=opts["train_fraction"])[0] if opts.get("train_fraction") else log
    u, v, w, rep = coaccess_pairs(train, opts["max_keys"], opts["large"], opts["seed"])
    edges, nodes, srep = coaccess_frames(spark, str(path), **opts)
    e, n = edges.toPandas(), nodes.toPandas()
    assert set(zip(train.keys[u].tolist(), train.keys[v].tolist(), w.tolist())) == \
        set(zip(e.source.tolist(), e.target.tolist(), e.weight.tolist()))
    counts = train.access_counts()
    seen = counts > 0
    assert set(zip(train.keys[seen].tolist(), counts[seen].tolist())) == set(zip(n.id.tolist(), n.weight.tolist()))
    for key in ("requests", "accesses", "large_requests", "pairs_emitted"):
        assert srep[key] == rep[key]
    return srep


def test_spark_equals_memory_on_a_retail_slice(spark, tmp_path):
    """Brijs, Swinnen, Vanhoof & Wets, KDD 1999 (FIMI retail.dat): the first 4,000 baskets."""
    src = SHARED / "retail-baskets.dat.gz"
    if not src.exists():
        pytest.skip(shared_missing("retail-baskets.dat.gz"))
    lines = gzip.open(src, "rt").read().split("\n")[:4000]
    path = tmp_path / "slice.dat"
    path.write_text("\n".join(lines) + "\n")
    assert spark.read.text(str(path)).rdd.getNumPartitions() > 1
    rep = _compare(spark, path, max_keys=15, large="sample", seed=3, train_fraction=0.7)
    assert rep["large_requests"] > 0  # the sampled cliques are compared too


def test_spark_equals_memory_on_string_keys(spark, tmp_path):
    w = library_workload(n_requests=3000, n_keys=400, n_topics=8, seed=1)
    path = tmp_path / "lib.dat"
    write_log(path, w.log)
    text = path.read_text().split("\n")
    path.write_text("\n".join(" ".join(f"b{t}" for t in line.split()) for line in text))  # keys "b123"
    _compare(spark, path, max_keys=5, large="skip", seed=0, train_fraction=None)
