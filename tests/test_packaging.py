"""Tests of the package as a user installs it: the wheel, its dependencies and its package data.

The wheel is built from a copy of the sources with ``pip wheel --no-deps``
(setuptools comes from pip's cache or PyPI, as for any build) and installed
with ``--no-deps`` into a fresh virtual environment made without pip. The base
dependencies are then the closure of the wheel's own ``Requires-Dist`` lines
without an extra (their markers evaluated for this Python), each resolved to
the distribution already installed here and linked into the new environment
file by top-level entry; nothing is downloaded for them, so the test takes
seconds rather than the minutes a full install would. What it shows: the
metadata a ``pip install shardline`` resolves pulls no pyspark, pandas or
GraphFrames wrapper, the installed package runs ``shardline datasets list``
from its own package data with those base dependencies alone, and the Spark
engine then stops with the advice to install the ``spark`` extra.
"""

from __future__ import annotations

import email
import importlib.metadata as md
import json
import os
import re
import shutil
import subprocess
import sys
import zipfile
from pathlib import Path

import pytest

try:
    from packaging.markers import default_environment
    from packaging.requirements import Requirement
except ImportError:  # pip always carries a copy
    from pip._vendor.packaging.markers import default_environment
    from pip._vendor.packaging.requirements import Requirement

ROOT = Path(__file__).resolve().parents[1]
BASE = {"numpy", "numba", "scipy", "pyarrow", "rich"}
"""The in-memory tool's dependencies (pyproject.toml); the Spark stack is the extra ``spark``."""
SPARK_ONLY = {"pyspark", "pandas", "py4j", "graphframes-py", "graphframes"}


def _norm(name):
    return re.sub(r"[-_.]+", "-", name).lower()


def _requirements(lines, extras=()):
    """Requirements among ``lines`` that apply to this Python with ``extras`` requested."""
    env = default_environment()
    out = []
    for line in lines or []:
        req = Requirement(line)
        if req.marker is None or any(req.marker.evaluate({**env, "extra": e}) for e in ("", *extras)):
            out.append(req)
    return out


def _closure(reqs):
    """Installed distributions needed by ``reqs`` and (recursively) by theirs, extras left out."""
    todo, seen = [_norm(r.name) for r in reqs], {}
    while todo:
        name = todo.pop()
        if name in seen:
            continue
        dist = md.distribution(name)
        seen[name] = dist
        todo += [_norm(r.name) for r in _requirements(dist.requires)]
    return seen


@pytest.fixture(scope="module")
def wheel(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("wheel")
    src = tmp / "src"
    src.mkdir()
    for name in ("pyproject.toml", "README.md"):
        shutil.copy(ROOT / name, src / name)
    shutil.copytree(ROOT / "partition", src / "partition", ignore=shutil.ignore_patterns("__pycache__", "*.pyc"))
    proc = subprocess.run([sys.executable, "-m", "pip", "wheel", "--no-deps", "--quiet", "-w", str(tmp / "dist"),
                           str(src)], capture_output=True, text=True, timeout=300)
    if proc.returncode != 0 and "setuptools" in proc.stderr and "Could not" in proc.stderr:
        pytest.skip(f"setuptools for the build could not be fetched: {proc.stderr.strip()[-300:]}")
    assert proc.returncode == 0, proc.stderr
    (path,) = (tmp / "dist").glob("shardline-*.whl")
    return path


def test_wheel_metadata_keeps_the_spark_stack_in_an_extra(wheel):
    with zipfile.ZipFile(wheel) as zf:
        names = zf.namelist()
        meta_name = next(n for n in names if n.endswith(".dist-info/METADATA"))
        meta = email.message_from_bytes(zf.read(meta_name))
        catalog = json.loads(zf.read("partition/data/catalog.json"))
    assert catalog == json.loads((ROOT / "partition" / "data" / "catalog.json").read_text(encoding="utf-8"))
    requires = meta.get_all("Requires-Dist")
    base = {_norm(r.name) for r in _requirements(requires)}
    assert base == BASE, base
    spark = {_norm(r.name) for r in _requirements(requires, ("spark",))} - base
    assert spark == {"pyspark", "pandas"}, spark
    assert "spark" in meta.get_all("Provides-Extra")
    everything = {_norm(Requirement(r).name) for r in requires}
    assert not everything & {"graphframes-py", "typing-extensions"}  # neither is imported by the code
    closure = _closure(_requirements(requires))
    assert not set(closure) & SPARK_ONLY, sorted(closure)  # what `pip install shardline` pulls in


def test_installed_wheel_lists_datasets_without_spark(wheel, tmp_path):
    env = {key: value for key, value in os.environ.items() if key not in ("PYTHONPATH", "PYTHONHOME")}
    env["HOME"] = str(tmp_path)  # no user site-packages from the real home
    venv = tmp_path / "venv"
    subprocess.run([sys.executable, "-m", "venv", "--without-pip", str(venv)], check=True, timeout=120, env=env)
    py = venv / "bin" / "python"
    site = Path(subprocess.run([str(py), "-c", "import sysconfig; print(sysconfig.get_paths()['purelib'])"],
                               capture_output=True, text=True, check=True, env=env).stdout.strip())
    proc = subprocess.run([sys.executable, "-m", "pip", "--python", str(py), "install", "--no-deps", "--no-index",
                           "--quiet", str(wheel)], capture_output=True, text=True, timeout=300, env=env,
                          cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    with zipfile.ZipFile(wheel) as zf:
        meta = email.message_from_bytes(zf.read(next(n for n in zf.namelist() if n.endswith("METADATA"))))
    for dist in _closure(_requirements(meta.get_all("Requires-Dist"))).values():
        top = {f.parts[0] for f in dist.files if f.parts[0] != ".."}
        for entry in top:
            target = Path(dist.locate_file(entry))
            if target.exists() and not (site / entry).exists():
                (site / entry).symlink_to(target)
    shardline = venv / "bin" / "shardline"

    def run(*argv, cwd=tmp_path):
        return subprocess.run([str(shardline), *argv], capture_output=True, text=True, env=env, cwd=cwd,
                              timeout=300)

    out = run("datasets", "list", "--json")
    assert out.returncode == 0, out.stderr
    names = [e["name"] for e in json.loads(out.stdout)]
    source = json.loads((ROOT / "partition" / "data" / "catalog.json").read_text(encoding="utf-8"))["datasets"]
    assert names == sorted((e["name"] for e in source), key=str.lower)
    where = subprocess.run([str(py), "-c", "import partition, pathlib; print(pathlib.Path(partition.__file__))"],
                           capture_output=True, text=True, env=env, cwd=tmp_path, check=True).stdout.strip()
    assert where.startswith(str(venv)), where  # the installed copy, not the source tree
    for module in ("pyspark", "pandas"):
        probe = subprocess.run([str(py), "-c", f"import {module}"], capture_output=True, text=True, env=env,
                               cwd=tmp_path)
        assert probe.returncode != 0, f"{module} is importable in the base install"
    graph = tmp_path / "g.txt"
    graph.write_text("1 2\n2 3\n")
    out = run("run", str(graph), "-k", "2", "--engine", "spark", "-o", str(tmp_path / "x.csv"), "--quiet")
    assert out.returncode == 2
    assert out.stderr.startswith("shardline: error:") and "pip install 'shardline[spark]'" in out.stderr, out.stderr
    assert not (tmp_path / "x.csv").exists()
