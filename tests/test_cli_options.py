"""One vocabulary for every command: tests of partition/cli.py and partition/commands/common.py.

The test walks every subcommand's parser (and the actions of ``ring`` and
``datasets``) as argparse built it and checks that each option meaning the
same thing — ``-k/--shards``, ``--imbalance``, ``--seed``, ``--move-cost``,
``--json``, ``--quiet`` — has the same flags, destination, type, default,
metavar and help text wherever it appears, that every command prints a worked
example in its ``--help``, and that bad parameters give the same error prefix
and exit status everywhere.
"""

from __future__ import annotations

import argparse
import subprocess
import sys

import pytest

from partition.cli import build_parser, main
from partition.commands import COMMANDS
from partition.commands.common import SHARED_OPTIONS

SHARED_FLAGS = {flag for flags, _ in SHARED_OPTIONS.values() for flag in flags}
FIELDS = ("option_strings", "dest", "type", "default", "required", "help", "metavar", "nargs", "const", "choices")


def _leaves(parser, path=()):
    """(command path, parser) of every parser that runs something."""
    subs = [a for a in parser._actions if isinstance(a, argparse._SubParsersAction)]
    if not subs:
        yield path, parser
        return
    for sub in subs:
        for name, child in sub.choices.items():
            yield from _leaves(child, (*path, name))


LEAVES = dict(_leaves(build_parser()))


def _variants():
    """Each shared option as the action argparse makes of it."""
    out = {}
    for name, (flags, kwargs) in SHARED_OPTIONS.items():
        action = argparse.ArgumentParser().add_argument(*flags, **kwargs)
        out[name] = {f: getattr(action, f) for f in FIELDS}
    return out


VARIANTS = _variants()


def _shared_actions(parser):
    return [a for a in parser._actions if set(a.option_strings) & SHARED_FLAGS]


def test_every_command_is_walked():
    assert {path[0] for path in LEAVES} == set(COMMANDS)
    assert {("ring", "assign"), ("ring", "moves"), ("datasets", "list"), ("datasets", "fetch")} <= set(LEAVES)


@pytest.mark.parametrize("path", sorted(LEAVES), ids=lambda p: " ".join(p))
def test_shared_options_are_identical_where_they_appear(path):
    for action in _shared_actions(LEAVES[path]):
        got = {f: getattr(action, f) for f in FIELDS}
        matches = [name for name, want in VARIANTS.items() if want == got]
        assert matches, f"shardline {' '.join(path)}: {action.option_strings} differs from every shared definition: {got}"


def _options(path):
    return {s for a in LEAVES[path]._actions for s in a.option_strings}


def test_each_option_has_one_meaning_across_commands():
    # the same flag in two commands carries the same help text unless a named variant says otherwise
    seen = {}
    for path, parser in LEAVES.items():
        for action in _shared_actions(parser):
            variant = next(name for name, want in VARIANTS.items() if want["help"] == action.help)
            seen.setdefault(action.option_strings[-1], set()).add(variant)
    assert seen["--shards"] == {"shards", "shards_from_file", "shards_planted"}  # planted: workload synth
    # check-only: score; the strict load cap of the workload actions (default 0.03, see its help)
    assert seen["--imbalance"] == {"imbalance", "imbalance_check", "imbalance_load"}
    for flag in ("--seed", "--move-cost", "--json", "--quiet"):
        assert len(seen[flag]) == 1, (flag, seen[flag])


def test_vocabulary_is_everywhere():
    for path in LEAVES:
        opts = _options(path)
        assert "--json" in opts, path  # every command prints a summary
        if path != ("datasets", "list"):  # the list is the output itself
            assert "--quiet" in opts, path
        if "--shards" in opts:
            assert "-k" in opts, path
    takes_k = {p for p in LEAVES if "--shards" in _options(p)}
    workload = {("workload", a) for a in ("partition", "route", "replay", "synth")}
    assert {("run",), ("baseline",), ("recut",), ("score",), ("place",), ("ring", "assign"), ("ring", "moves"),
            *workload} == takes_k
    seeded = {p for p in LEAVES if "--seed" in _options(p)}
    assert {("run",), ("baseline",), ("recut",), ("place",), ("ring", "assign"), ("ring", "moves"),
            ("workload", "coaccess"), *workload} == seeded
    move = [next(a for a in LEAVES[p]._actions if "--move-cost" in a.option_strings) for p in (("run",), ("recut",))]
    assert move[0].default == move[1].default == 1.0
    for p in LEAVES:
        for a in LEAVES[p]._actions:
            if "--imbalance" in a.option_strings and p != ("score",) and p[0] != "workload":
                assert a.default == 0.0, p  # one default story: exact balance unless asked


@pytest.mark.parametrize("path", sorted(LEAVES), ids=lambda p: " ".join(p))
def test_help_ends_with_a_worked_example_of_that_command(path):
    epilog = LEAVES[path].epilog or ""
    assert epilog.startswith("example:\n  shardline " + " ".join(path)), epilog


def test_lazy_parser_builds_only_the_chosen_command():
    lean = build_parser(["ring", "assign"])
    subs = next(a for a in lean._actions if isinstance(a, argparse._SubParsersAction))
    assert len(subs.choices["run"]._actions) == 1  # -h only
    assert len(subs.choices["ring"]._actions) > 1


def test_version_and_help_import_no_numeric_stack():
    code = ("import sys; from partition.cli import main\n"
            "try:\n    main(['--help'])\nexcept SystemExit:\n    pass\n"
            "print(sorted(m for m in ('numpy', 'numba', 'scipy', 'pyarrow', 'pandas', 'pyspark') if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True, timeout=120)
    assert out.stdout.strip().splitlines()[-1] == "[]"


@pytest.fixture()
def files(tmp_path):
    graph = tmp_path / "g.txt"
    graph.write_text("1 2\n2 3\n3 1\n")
    assignment = tmp_path / "a.csv"
    assignment.write_text("node,shard\n1,0\n2,0\n3,1\n")
    keys = tmp_path / "keys.txt"
    keys.write_text("a\nb\n")
    order = tmp_path / "order.csv"
    order.write_text("node,position\n1,0\n2,1\n3,2\n")
    arrivals = tmp_path / "arr.txt"
    arrivals.write_text("4 1\n")
    return {"g": str(graph), "a": str(assignment), "keys": str(keys), "order": str(order), "arr": str(arrivals),
            "out": str(tmp_path / "out.csv"), "dir": tmp_path}


@pytest.mark.parametrize("argv", [
    ["run", "{g}", "-k", "0", "-o", "{out}", "--quiet"],
    ["baseline", "ldg", "{g}", "-k", "0", "-o", "{out}"],
    ["recut", "{order}", "{g}", "-k", "0", "-o", "{out}"],
    ["score", "{g}", "{a}", "-k", "0"],
    ["place", "{a}", "{arr}", "-k", "0", "-o", "{out}"],
    ["ring", "assign", "{keys}", "-k", "0", "-o", "{out}"],
    ["ring", "moves", "{keys}", "-k", "0", "--add"],
])
def test_bad_shard_count_same_prefix_and_status_everywhere(files, capsys, argv):
    status = main([a.format(**files) for a in argv])
    err = capsys.readouterr().err
    assert status == 2
    assert err.startswith("shardline: error: k must be at least 1, got 0"), err
    assert sorted(p.name for p in files["dir"].iterdir()) == ["a.csv", "arr.txt", "g.txt", "keys.txt", "order.csv"]


def test_spark_job_takes_every_option_of_run():
    """jobs/spark_partition.py is `shardline run` with the Spark engine: the same options in its --help."""
    import re
    from pathlib import Path

    job = Path(__file__).resolve().parents[1] / "jobs" / "spark_partition.py"
    helps = []
    for cmd in ([sys.executable, str(job), "--help"], [sys.executable, "-m", "partition.cli", "run", "--help"]):
        out = subprocess.run(cmd, capture_output=True, text=True, timeout=120)
        assert out.returncode == 0, out.stderr
        helps.append(set(re.findall(r"(?<![\w-])--[a-z][a-z-]+", out.stdout)))
    assert helps[0] == helps[1]
    assert {"--starts", "--refine", "--order-output", "--collect-edges", "--mode", "--resume"} <= helps[0]
