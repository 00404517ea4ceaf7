"""Tests of partition/placement/recut.py: re-cutting a stored line order into a new shard count."""

from __future__ import annotations

import itertools
import json
from pathlib import Path

import numpy as np
import pytest

from partition.balance import balance_rule
from partition.cli import main
from partition.edgelist import read_graph
from partition.errors import InputError, ParameterError
from partition.generators import grid2d, write_edgelist
from partition.graph import build_graph
from partition.partitioner import partition_graph
from partition.placement.bounded_hash import mod_assign
from partition.placement.recut import band_floor, read_order, recut
from partition.tables import order_table, write_table

from conftest import shared_missing  # noqa: E402

DATASETS = Path(__file__).resolve().parents[2] / "shared" / "datasets"


def _path(n):
    return build_graph(np.arange(n - 1), np.arange(1, n))


def test_line_recut_keeps_the_predicted_share():
    # a path cut into k and k+1 equal pieces, renamed optimally: for k = 2h the kept share is
    # (3h+1)/(2(2h+1)) (derivation in the module docstring), checked here by brute force too
    for k in (2, 4, 6):
        n = k * (k + 1) * 7
        g = _path(n)
        old = np.arange(n) * k // n  # the k equal pieces of the line
        parts, st_ = recut(g, np.arange(n), k + 1, previous=old, refine=False)
        h = k // 2
        predicted = (3 * h + 1) / (2 * (2 * h + 1))
        assert 1 - st_["stability"]["moved_fraction"] == pytest.approx(predicted)
        new = np.arange(n) * (k + 1) // n
        best = max(np.sum(np.array(names)[new] == old) for names in itertools.permutations(range(k + 1)))
        assert np.sum(parts == old) == best  # reference: exhaustive search over namings


def test_band_floor_worked_examples():
    # ⌊(1 − ε)·W/k⌋ − w_max + 1, the mirror image of the cap ⌈(1 + ε)·W/k⌉ + w_max − 1 (hand counts)
    assert band_floor(None, 4, 0.1, 100) == 22  # ⌊0.9 · 25⌋ = ⌊22.5⌋
    assert band_floor(None, 4, 0.0, 10) == 2  # ⌊10/4⌋
    assert band_floor(np.array([5] + [1] * 95), 4, 0.1, 96) == 18  # ⌊0.9 · 100/4⌋ − 5 + 1
    assert band_floor(None, 3, 2.0, 9) == 0  # never negative


def test_floor_rule_bounds_only_the_largest_shard():
    g = build_graph(*grid2d(20, 30))
    old, order = _mesh_case(g, 8)
    for floor in ("band", "rule"):
        parts, st_ = recut(g, order, 9, eps=0.05, previous=old, move_cost=4.0, floor=floor)
        loads = np.bincount(parts, minlength=9)
        assert balance_rule(None, 9, 0.05, g.n).check(loads)
        assert st_["floor"] == (band_floor(None, 9, 0.05, g.n) if floor == "band" else 0)
        assert loads.min() >= st_["floor"]
    with pytest.raises(ParameterError, match="floor"):
        recut(g, order, 9, floor="none")


def test_mod_hash_moved_fraction_formula():
    # h mod k = h mod (k+1) iff h mod k(k+1) < k (Chinese remainder theorem), so for uniform hashes
    # a key stays with probability k / (k(k+1)) = 1/(k+1): moved fraction 1 − 1/(k+1)
    keys = np.arange(200_000)
    for k in (8, 16, 32):
        a = mod_assign(keys, list(range(k)), seed=5)
        b = mod_assign(keys, list(range(k + 1)), seed=5)
        moved = float(np.mean(a != b))
        sd = (1 / (k + 1) * (1 - 1 / (k + 1)) / keys.size) ** 0.5  # binomial standard deviation
        assert abs(moved - (1 - 1 / (k + 1))) < 5 * sd


def _mesh_case(g, k):
    run = partition_graph(g, k, eps=0.03, seed=1, starts="hierarchy")
    return run.parts, run.order


@pytest.mark.parametrize("eps", [0.0, 0.03])
def test_recut_on_a_mesh_moves_far_fewer_nodes_than_rehashing(eps):
    g = build_graph(*grid2d(30, 40))
    k = 8
    old, order = _mesh_case(g, k)
    parts, st_ = recut(g, order, k + 1, eps=eps, previous=old, move_cost=1.0)
    formula = 1 - 1 / (k + 1)  # hash mod k → mod k+1 (see the test above)
    assert st_["stability"]["moved_fraction"] < 0.5 * formula
    rule = balance_rule(None, k + 1, eps, g.n)
    loads = np.bincount(parts, minlength=k + 1)
    assert rule.check(loads), rule.violations(loads)
    assert st_["balanced"] and parts.max() == k  # the new shard is in use
    assert loads.min() >= band_floor(None, k + 1, eps, g.n) == st_["floor"]  # and holds its share
    # the refinement only lowers the cut of the plain line cut
    assert st_["cut"] <= st_["cut_line"]


def test_recut_public_mesh():
    path = DATASETS / "3elt.txt.gz"
    if not path.exists():
        pytest.skip(shared_missing("3elt.txt.gz"))
    # 3elt: Walshaw archive finite-element mesh (CATALOG.md: 4720 nodes, 13722 edges)
    g = read_graph(path)
    assert (g.n, g.m) == (4720, 13722)
    k = 16
    old, order = _mesh_case(g, k)
    parts, st_ = recut(g, order, k + 1, eps=0.03, previous=old)
    assert st_["stability"]["moved_fraction"] < 0.5 * (1 - 1 / (k + 1))
    assert balance_rule(None, k + 1, 0.03, g.n).check(np.bincount(parts, minlength=k + 1))


def test_recut_without_previous_and_shrinking():
    g = build_graph(*grid2d(20, 20))
    old, order = _mesh_case(g, 6)
    parts, st_ = recut(g, order, 5)
    assert "stability" not in st_ and st_["balanced"] and st_["cut"] <= st_["cut_line"]
    parts, st_ = recut(g, order, 4, previous=old)  # old ids 4 and 5 are drained
    assert st_["stability"]["drained_shards"] == [4, 5] and parts.max() == 3
    with pytest.raises(ParameterError):
        recut(g, order, g.n + 1)
    with pytest.raises(ParameterError, match="positions"):
        recut(g, np.arange(g.n - 1), 4)


def test_read_order_round_trip(tmp_path):
    g = build_graph(*grid2d(6, 7))
    order = np.random.default_rng(3).permutation(g.n)
    for name in ("o.csv", "o.parquet", "o.csv.gz"):
        write_table(tmp_path / name, order_table(g, order))
        assert np.array_equal(read_order(tmp_path / name, g), order)


def test_read_order_errors_name_file_and_line(tmp_path):
    g = build_graph(*grid2d(2, 2))  # nodes 0..3
    bad = tmp_path / "o.csv"
    bad.write_text("node,position\n0,0\n1,1\n9,2\n3,3\n")
    with pytest.raises(InputError, match=r"o.csv, line 4: node 9 is not a node of the graph"):
        read_order(bad, g)
    bad.write_text("node,position\n0,0\n1,1\n2,7\n3,3\n")
    with pytest.raises(InputError, match=r"line 4: position 7 is out of range") as info:
        read_order(bad, g)
    assert "shard" not in str(info.value)
    bad.write_text("node,position\n0,0\n1,1\n2,1\n3,3\n")
    with pytest.raises(InputError, match="share position 1"):
        read_order(bad, g)
    bad.write_text("node,position\n0,0\n1,1\n2,2\n")
    with pytest.raises(InputError, match="no position in the file"):
        read_order(bad, g)


def test_recut_command(tmp_path, capsys):
    edges = tmp_path / "grid.txt"
    src, dst = grid2d(12, 12)
    write_edgelist(edges, src, dst)
    run8, order = tmp_path / "run8.csv", tmp_path / "order.csv"
    assert main(["run", str(edges), "-k", "4", "--imbalance", "0.05", "-o", str(run8),
                 "--order-output", str(order), "--quiet", "--starts", "hierarchy"]) == 0
    out = tmp_path / "run5.csv"
    capsys.readouterr()
    assert main(["recut", str(order), str(edges), "-k", "5", "--imbalance", "0.05",
                 "--previous", str(run8), "-o", str(out), "--json"]) == 0
    report = json.loads(capsys.readouterr().out)
    assert report["k"] == 5 and report["result"]["balance"]["holds"]
    assert 0 <= report["stability"]["moved_fraction"] < 0.5 * (1 - 1 / 5)  # top level, as in run's report
    assert "stability" not in report["recut"]
    assert json.loads((tmp_path / "run5.csv.report.json").read_text())["k"] == 5
    assert out.read_text().startswith("node,shard\n")
    # a previous placement naming a node the graph lacks: error with file and line, no output
    bad = tmp_path / "bad.csv"
    bad.write_text(run8.read_text() + "99999,0\n")
    out2 = tmp_path / "x.csv"
    assert main(["recut", str(order), str(edges), "-k", "5", "--previous", str(bad), "-o", str(out2)]) == 2
    err = capsys.readouterr().err
    assert "bad.csv, line 146: node 99999 is not a node of the graph" in err
    assert not out2.exists()
    # the order of another graph
    other = tmp_path / "other.txt"
    write_edgelist(other, *grid2d(5, 5))
    assert main(["recut", str(order), str(other), "-k", "3", "-o", str(out2)]) == 2
    assert "not a node of the graph" in capsys.readouterr().err and not out2.exists()
