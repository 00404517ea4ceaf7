"""Tests of partition.api.shard_graph: the README's examples run, tables in every layout give one answer.

Outside references: networkx (the cut of the returned assignment recounted
with ``networkx.cut_size``) and the README's own printed claims (every dock
placed, ids as given, only the quiet street cut).
"""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np
import pytest

from partition.api import shard_graph
from partition.errors import ParameterError

ROOT = Path(__file__).resolve().parents[1]


def _readme_blocks():
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    section = text[text.index("## Python API"):text.index("## Engines")]
    return re.findall(r"```python\n(.*?)```", section, re.S)


def test_readme_memory_example_runs(tmp_path, monkeypatch, capsys):
    import networkx as nx

    monkeypatch.chdir(tmp_path)
    scope = {}
    exec(compile(_readme_blocks()[0], "README.md (Python API)", "exec"), scope)  # noqa: S102
    run, rides, docks = scope["run"], scope["rides"], scope["docks"]
    assert set(run.assignment) == set(docks["id"])  # every dock, the isolated spare too, ids as given
    G = nx.Graph()
    G.add_nodes_from(docks["id"])
    for a, b, w in rides.itertuples(index=False):
        G.add_edge(a, b, weight=w)
    side = {x for x, s in run.assignment.items() if s == 0}
    assert nx.cut_size(G, side, weight="weight") == run.report["result"]["cut_weight"] == 2.0  # networkx recount
    loads = {s: sum(b for i, b in docks.itertuples(index=False) if run.assignment[i] == s) for s in (0, 1)}
    assert max(loads.values()) <= 1.1 * docks["bikes"].sum() / 2  # the ε = 0.1 rule on loads
    assert (tmp_path / "out/api/docks-to-depots.csv").is_file()
    assert (tmp_path / "out/api/docks-to-depots.csv.report.json").is_file()
    assert "2.0" in capsys.readouterr().out


def test_every_table_layout_gives_the_same_assignment():
    import pandas as pd
    import pyarrow as pa

    rng = np.random.default_rng(4)
    src, dst = rng.integers(0, 60, 300), rng.integers(0, 60, 300)
    ref = shard_graph((src, dst), 4, seed=2).assignment
    assert shard_graph(np.column_stack((src, dst)), 4, seed=2).assignment == ref
    assert shard_graph(pd.DataFrame({"src": src, "dst": dst}), 4, seed=2).assignment == ref
    assert shard_graph(pa.table({"src": src, "dst": dst}), 4, seed=2).assignment == ref
    text = {str(k): v for k, v in ref.items()}
    got = shard_graph(pa.table({"src": src.astype(str), "dst": dst.astype(str)}), 4, seed=2).assignment
    assert set(got) == set(text)  # text ids stay text (their order, hence ties, may differ from integers)


def test_bad_tables_are_refused_with_the_column_named():
    import pandas as pd

    with pytest.raises(ParameterError, match="no column 'dst'"):
        shard_graph(pd.DataFrame({"src": [1], "to": [2]}), 2)
    with pytest.raises(ParameterError, match="floating-point"):
        shard_graph(pd.DataFrame({"src": [1.0, 2.0], "dst": [2.0, 3.0]}), 2)
    with pytest.raises(ParameterError, match="mixes id types"):
        shard_graph(pd.DataFrame({"src": [1, "b"], "dst": ["a", 2]}, dtype=object), 2)
    with pytest.raises(ParameterError, match="unknown affinity"):
        shard_graph(pd.DataFrame({"src": [1, 2], "dst": [2, 3]}), 2, affinity="cosine")


@pytest.mark.spark
def test_readme_spark_example_equals_the_memory_engine(tmp_path, monkeypatch):
    """The README's Spark example: the same assignment as the in-memory run of the distributed plan."""
    pytest.importorskip("pyspark")
    from partition.spark.session import spark_session

    monkeypatch.chdir(tmp_path)
    spark_session(work_dir=tmp_path / "spark")  # the session getOrCreate() then finds, with the project's settings
    blocks = _readme_blocks()
    scope = {}
    exec(compile(blocks[0], "README.md (Python API)", "exec"), scope)  # noqa: S102
    try:
        exec(compile(blocks[1], "README.md (Python API, Spark)", "exec"), scope)  # noqa: S102
        srun = scope["srun"]
        got = {r["id"]: r["shard"] for r in srun.frame.collect()}
        ref = shard_graph(scope["rides"], 2, scope["docks"], weight="rides", node_weight="bikes", imbalance=0.1,
                          seed=1, starts="hierarchy", refine="window,fm,swaps").assignment
        assert got == ref  # ids come back as given, and the engines agree
        assert srun.report["result"]["cut_weight"] == 2.0
    finally:
        scope["spark"].stop()
