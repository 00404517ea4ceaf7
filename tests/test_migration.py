"""Tests of partition/placement/migration.py and of the ``shardline diff`` command."""

from __future__ import annotations

import json
from collections import Counter

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from partition.cli import main
from partition.errors import ParameterError
from partition.placement.migration import align_placements, migration_plan, write_plan

SETTINGS = settings(max_examples=50, deadline=None, suppress_health_check=[HealthCheck.too_slow])


def _rows(plan):
    return [(r["from_shard"], r["to_shard"], r["nodes"], r["weight"]) for r in plan.moves.to_pylist()]


def test_hand_worked_plan():
    # old: 1→0 2→0 3→1 4→1 5→2        new: 2→0 3→0 4→1 5→0 6→2
    # in both: 2 (0→0 kept), 3 (1→0 moved), 4 (1→1 kept), 5 (2→0 moved)
    # moved 2 of 4 common nodes: fraction 2/4 = 0.5; node 6 added on shard 2; node 1 removed from 0
    plan = migration_plan([1, 2, 3, 4, 5], [0, 0, 1, 1, 2], [2, 3, 4, 5, 6], [0, 0, 1, 0, 2])
    assert _rows(plan) == [(1, 0, 1, 1), (2, 0, 1, 1), (None, 2, 1, 1), (0, None, 1, 1)]
    t = plan.totals
    assert (t["old_nodes"], t["new_nodes"], t["common_nodes"]) == (5, 5, 4)
    assert (t["moved_nodes"], t["kept_nodes"], t["added_nodes"], t["removed_nodes"]) == (2, 2, 1, 1)
    assert t["moved_fraction"] == 0.5 and (t["k_old"], t["k_new"]) == (3, 3)


def test_hand_worked_weighted_plan_with_string_ids():
    # weights a=2, b=3, c=5, d=7, e=11
    # old: a→0 b→0 c→1 d→1     new: a→1 b→1 c→1 e→0
    # moves 0→1: a, b = 2 nodes, weight 2 + 3 = 5; c kept (weight 5); d removed (7); e added (11)
    # moved weight fraction 5 / (2 + 3 + 5) = 0.5; moved node fraction 2/3
    ids = np.array(list("abcde"), dtype=object)
    plan = migration_plan(ids[:4], [0, 0, 1, 1], np.array(["a", "b", "c", "e"], dtype=object), [1, 1, 1, 0],
                          weights=(ids, np.array([2, 3, 5, 7, 11])))
    assert _rows(plan) == [(0, 1, 2, 5), (None, 0, 1, 11), (1, None, 1, 7)]
    t = plan.totals
    assert t["moved_weight"] == 5 and t["common_weight"] == 10 and t["moved_weight_fraction"] == 0.5
    assert t["moved_fraction"] == pytest.approx(2 / 3) and t["added_weight"] == 11 and t["removed_weight"] == 7
    assert plan.moves.column("weight").type == pa.int64()


def test_integer_ids_match_their_decimal_text():
    # old ids are integers, new ids are strings: 7 and "7" are the same node
    plan = migration_plan([7, 8], [0, 1], np.array(["7", "x"], dtype=object), [1, 1])
    t = plan.totals
    assert (t["common_nodes"], t["moved_nodes"], t["added_nodes"], t["removed_nodes"]) == (1, 1, 1, 1)


@SETTINGS
@given(st.dictionaries(st.integers(0, 60), st.integers(0, 4), max_size=50),
       st.dictionaries(st.integers(0, 60), st.integers(0, 4), max_size=50))
def test_plan_matches_direct_recount(old, new):
    # reference: counting moves with a Python Counter over the two dicts
    plan = migration_plan(list(old), list(old.values()), list(new), list(new.values()))
    moves = Counter((old[x], new[x]) for x in old if x in new and old[x] != new[x])
    added = Counter(new[x] for x in new if x not in old)
    removed = Counter(old[x] for x in old if x not in new)
    expect = sorted((a, b, c, c) for (a, b), c in moves.items())
    expect += sorted((None, b, c, c) for b, c in added.items())
    expect += [(a, None, c, c) for a, c in sorted(removed.items())]
    assert _rows(plan) == expect
    common = sum(1 for x in old if x in new)
    moved = sum(moves.values())
    assert plan.totals["moved_fraction"] == pytest.approx(moved / common if common else 0.0)
    assert plan.totals["moved_nodes"] == moved and plan.totals["kept_nodes"] == common - moved


def test_align_and_errors():
    ids, old_of, new_of, _ = align_placements([3, 1], [0, 1], [1, 2], [2, 2])
    assert ids.tolist() == [1, 2, 3] and old_of.tolist() == [1, -1, 0] and new_of.tolist() == [2, 2, -1]
    with pytest.raises(ParameterError, match="appears twice in the new"):
        migration_plan([1], [0], [2, 2], [0, 1])
    with pytest.raises(ParameterError, match="non-negative"):
        migration_plan([1], [-1], [1], [0])
    with pytest.raises(ParameterError, match="no weight"):
        migration_plan([1, 2], [0, 0], [1], [1], weights=([1], [4]))
    with pytest.raises(ParameterError, match="twice among the extra ids"):
        migration_plan([1, 2], [0, 0], [1], [1], weights=([1, 2, 1], [4, 5, 6]))
    with pytest.raises(ParameterError, match="non-negative"):
        migration_plan([1], [0], [1], [1], weights=([1], [-2.0]))


@pytest.mark.parametrize("suffix", [".csv", ".tsv", ".parquet"])
def test_write_plan_round_trip(tmp_path, suffix):
    plan = migration_plan([1, 2, 3], [0, 1, 1], [2, 3, 4], [0, 1, 1])
    path = tmp_path / f"plan{suffix}"
    write_plan(path, plan)
    if suffix == ".parquet":
        back = pq.read_table(path)
    else:
        import pyarrow.csv as pacsv

        back = pacsv.read_csv(path, parse_options=pacsv.ParseOptions(delimiter="\t" if suffix == ".tsv" else ","))
        assert path.read_text().splitlines()[0] == ("\t" if suffix == ".tsv" else ",").join(
            ["from_shard", "to_shard", "nodes", "weight"])
    assert back.to_pylist() == plan.moves.to_pylist()
    with pytest.raises(ParameterError, match="must end in"):
        write_plan(tmp_path / "plan.txt", plan)


# --- the diff command ----------------------------------------------------------


def _files(tmp_path):
    old = tmp_path / "old.csv"
    new = tmp_path / "new.tsv"
    old.write_text("node,shard\n1,0\n2,0\n3,1\n4,1\n5,2\n")
    new.write_text("node\tshard\n2\t0\n3\t0\n4\t1\n5\t0\n6\t2\n")
    return old, new


def test_diff_command_json_and_plan_file(tmp_path, capsys):
    old, new = _files(tmp_path)
    out = tmp_path / "plan.csv"
    moves = tmp_path / "moves.csv"
    assert main(["diff", str(old), str(new), "-o", str(moves), "--pairs", str(out), "--json"]) == 0
    got = json.loads(capsys.readouterr().out)
    assert got["totals"]["moved_nodes"] == 2 and got["totals"]["moved_fraction"] == 0.5  # hand count above
    assert out.read_text().splitlines() == ["from_shard,to_shard,nodes,weight", "1,0,1,1", "2,0,1,1", ",2,1,1", "0,,1,1"]
    # the per-node move list, by hand from the two files: 1 removed from 0, 3 1→0, 5 2→0, 6 added on 2
    assert moves.read_text().splitlines() == ["node,from,to", "1,0,", "3,1,0", "5,2,0", "6,,2"]
    assert main(["diff", str(old), str(new)]) == 0
    assert "moved fraction" in capsys.readouterr().out


def test_diff_match_labels_removes_renaming_moves(tmp_path, capsys):
    # NEW is OLD with shards 0 and 1 swapped: after renaming nothing moves
    old = tmp_path / "old.csv"
    new = tmp_path / "new.csv"
    old.write_text("node,shard\n" + "".join(f"{i},{i % 2}\n" for i in range(10)))
    new.write_text("node,shard\n" + "".join(f"{i},{1 - i % 2}\n" for i in range(10)))
    assert main(["diff", str(old), str(new), "--json"]) == 0
    assert json.loads(capsys.readouterr().out)["totals"]["moved_nodes"] == 10
    assert main(["diff", str(old), str(new), "--json", "--match-labels"]) == 0
    got = json.loads(capsys.readouterr().out)
    assert got["totals"]["moved_nodes"] == 0 and got["label_mapping"] == [1, 0]


def test_diff_weights_file(tmp_path, capsys):
    old, new = _files(tmp_path)
    weights = tmp_path / "w.txt"
    weights.write_text("".join(f"{i} {10 * i}\n" for i in range(1, 7)))
    assert main(["diff", str(old), str(new), "--node-weights", str(weights), "--json"]) == 0
    t = json.loads(capsys.readouterr().out)["totals"]
    # moved: node 3 (30) and node 5 (50) = 80 of common weight 20 + 30 + 40 + 50 = 140
    assert t["moved_weight"] == 80 and t["moved_weight_fraction"] == pytest.approx(80 / 140)
    weights.write_text("1 1\n2 1\n")
    assert main(["diff", str(old), str(new), "--node-weights", str(weights)]) == 2
    assert str(weights) in capsys.readouterr().err


@pytest.mark.parametrize(
    "text, fragment",
    [
        ("node,shard\n1,0\n2,1\n1,1\n", "line 4: node 1 is listed twice (first on line 2)"),
        ("node,shard\n1,0\n2,x\n", "line 3: shard 'x' is not an integer"),
        ("node,shard\n1,0\n2,1.5\n", "line 3: shard '1.5' is not an integer"),
    ],
)
def test_diff_bad_files_exit_2_without_output(tmp_path, capsys, text, fragment):
    old, new = _files(tmp_path)
    bad = tmp_path / "bad.csv"
    bad.write_text(text)
    out = tmp_path / "plan.csv"
    assert main(["diff", str(old), str(bad), "-o", str(out)]) == 2
    err = capsys.readouterr().err
    assert f"{bad}, {fragment}" in err
    assert not out.exists() and not list(tmp_path.glob(".plan.csv*"))
    assert main(["diff", str(tmp_path / "nope.csv"), str(new), "-o", str(out)]) == 2
    assert "no such file" in capsys.readouterr().err and not out.exists()
