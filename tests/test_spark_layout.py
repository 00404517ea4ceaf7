"""The import rules of ``partition/spark/``, read from the source with Python's :mod:`ast`.

The Spark package reuses the in-memory modules through their public names only:

- no module imports a private name (one starting with ``_`` that is not a
  ``__dunder__``) from another module, nor a private module, nor reads a
  private attribute of a module it imported (``edgelist._pick_columns``);
- nothing it imports from ``partition.placement`` is private;
- its modules do not import each other in a circle, counting imports at module
  level and inside functions alike.

The rules are checked on small sources first, so that each check is seen to
fail where it should, then on the package itself.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
PACKAGE = "partition.spark"
FOLDER = ROOT / Path(*PACKAGE.split("."))


def private(name):
    """Whether an identifier is private: a leading ``_``, but not a ``__dunder__``."""
    return name.startswith("_") and not (name.startswith("__") and name.endswith("__"))


def is_module(dotted):
    """Whether ``dotted`` names a module or package of this repository."""
    path = ROOT / Path(*dotted.split("."))
    return path.with_suffix(".py").is_file() or (path / "__init__.py").is_file()


def absolute(node, module):
    """The absolute module an ``ImportFrom`` node reads from, inside ``module`` (a dotted name)."""
    if not node.level:
        return node.module
    # ``module`` is ``package.stem`` (``package.__init__`` for the package itself): level 1 is ``package``
    base = module.split(".")[:-node.level]
    return ".".join(base + ([node.module] if node.module else []))


def imports(tree, module):
    """Every import of a parsed module, anywhere in it: ``(line, source module, name or None)``.

    ``import a.b`` gives ``(line, "a.b", None)``; ``from a import b, c`` gives
    ``(line, "a", "b")`` and ``(line, "a", "c")``.
    """
    found = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            found.extend((node.lineno, alias.name, None) for alias in node.names)
        elif isinstance(node, ast.ImportFrom):
            source = absolute(node, module)
            found.extend((node.lineno, source, alias.name) for alias in node.names)
    return found


def module_names(tree, module):
    """Local names bound to modules by imports: ``{local name: dotted module}``."""
    bound = {}
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            for alias in node.names:
                if alias.asname:
                    bound[alias.asname] = alias.name
                else:
                    top = alias.name.split(".")[0]
                    bound[top] = top
        elif isinstance(node, ast.ImportFrom):
            source = absolute(node, module)
            for alias in node.names:
                if alias.name != "*" and is_module(f"{source}.{alias.name}"):
                    bound[alias.asname or alias.name] = f"{source}.{alias.name}"
    return bound


def private_uses(source, module):
    """The rule breaks of one module's source: a list of ``"line: what"`` strings.

    A private name imported from another module, a private module imported, a
    private attribute read from an imported module, or a private name from
    ``partition.placement``.
    """
    tree = ast.parse(source)
    problems = []
    for line, src, name in imports(tree, module):
        if src == "__future__":
            continue
        parts = src.split(".") + ([] if name is None else [name])
        bad = [p for p in parts if private(p)]
        if bad:
            where = "partition.placement" if src.startswith("partition.placement") else src
            problems.append(f"{line}: private {', '.join(bad)} from {where}")
    bound = module_names(tree, module)
    for node in ast.walk(tree):
        if isinstance(node, ast.Attribute) and private(node.attr):
            chain, value = [node.attr], node.value
            while isinstance(value, ast.Attribute):
                chain.append(value.attr)
                value = value.value
            if isinstance(value, ast.Name) and value.id in bound:
                dotted = ".".join([bound[value.id], *reversed(chain)])
                problems.append(f"{node.lineno}: private attribute {dotted}")
    return problems


def spark_edges(source, module, package=PACKAGE, members=None):
    """The package's modules that ``module`` imports (at any depth of its code), as a set."""
    members = members if members is not None else {p.stem for p in FOLDER.glob("*.py")}
    found = set()
    for _, src, name in imports(ast.parse(source), module):
        if src == package:
            target = name if name in members else "__init__"
        elif src.startswith(package + "."):
            target = src[len(package) + 1:].split(".")[0]
        else:
            continue
        if f"{package}.{target}" != module:
            found.add(target)
    return found


def find_cycle(graph):
    """One import circle of ``graph`` (``{module: set of modules}``) as a list, or ``None``."""
    state, stack = {}, []

    def visit(node):
        state[node] = "open"
        stack.append(node)
        for nxt in sorted(graph.get(node, ())):
            if state.get(nxt) == "open":
                return stack[stack.index(nxt):] + [nxt]
            if nxt not in state:
                cycle = visit(nxt)
                if cycle:
                    return cycle
        stack.pop()
        state[node] = "done"
        return None

    for node in sorted(graph):
        if node not in state:
            cycle = visit(node)
            if cycle:
                return cycle
    return None


def package_sources():
    """``{module stem: source}`` of every ``partition/spark/*.py``."""
    return {p.stem: p.read_text(encoding="utf-8") for p in sorted(FOLDER.glob("*.py"))}


# ---- the checks on small sources: each rule fails where it should ------------------------------------------------


@pytest.mark.parametrize("source", [
    "from partition.partitioner import _resolve_starts\n",
    "from partition.placement.export import EXTENSIONS, _data_files\n",
    "def f():\n    from partition.refine.window_dp import _free_mask\n",
    "from . import _private\n",
    "import partition._csr_kernels\n",
    "from partition import edgelist\nedgelist._pick_columns\n",
    "import partition.edgelist as el\nx = el._pick_columns(1)\n",
    "import partition.edgelist\npartition.edgelist._pick_columns\n",
])
def test_a_private_name_from_another_module_is_caught(source):
    assert private_uses(source, "partition.spark.example")


@pytest.mark.parametrize("source", [
    "from __future__ import annotations\n",
    "from partition import __version__\n",
    "from importlib.util import find_spec as _find_spec\n",
    "from partition.placement.export import file_sha256\n",
    "class A:\n    def f(self):\n        return self._x\n",
    "def f(spark):\n    return spark.sparkContext._jvm\n",
])
def test_public_imports_pass(source):
    assert private_uses(source, "partition.spark.example") == []


def test_a_placement_private_name_is_named_as_such():
    problems = private_uses("from partition.placement.export import _EXT\n", "partition.spark.example")
    assert problems == ["1: private _EXT from partition.placement"]


def test_relative_imports_resolve_against_the_package():
    node = ast.parse("from .engine import x\n").body[0]
    assert absolute(node, "partition.spark.recut") == "partition.spark.engine"
    node = ast.parse("from ..placement import export\n").body[0]
    assert absolute(node, "partition.spark.recut") == "partition.placement"


def test_function_level_imports_count_as_edges():
    members = {"engine", "recut", "tables", "__init__"}
    source = "import os\n\ndef f():\n    from partition.spark.recut import write_order\n"
    assert spark_edges(source, "partition.spark.engine", members=members) == {"recut"}
    source = "from partition.spark import recut, SPARK_EXTRA_HINT\nfrom .tables import write_folder\n"
    assert spark_edges(source, "partition.spark.engine", members=members) == {"recut", "__init__", "tables"}


def test_a_circle_is_found_and_a_tree_is_not():
    assert find_cycle({"engine": {"recut"}, "recut": {"engine"}}) == ["engine", "recut", "engine"]
    assert find_cycle({"a": {"b"}, "b": {"c"}, "c": {"a"}, "d": set()}) == ["a", "b", "c", "a"]
    assert find_cycle({"engine": {"tables", "recut"}, "recut": {"tables"}, "tables": set()}) is None


# ---- the package itself ------------------------------------------------------------------------------------------


def test_the_package_is_found():
    sources = package_sources()
    assert {"__init__", "engine", "recut", "refine", "export"} <= set(sources)


def test_no_private_name_from_another_module():
    problems = [f"partition/spark/{stem}.py:{p}" for stem, source in package_sources().items()
                for p in private_uses(source, f"{PACKAGE}.{stem}")]
    assert problems == [], "\n".join(problems)


def test_no_import_circle_among_the_package_modules():
    sources = package_sources()
    members = set(sources)
    graph = {stem: spark_edges(source, f"{PACKAGE}.{stem}", members=members) for stem, source in sources.items()}
    cycle = find_cycle(graph)
    assert cycle is None, "import circle: " + " -> ".join(cycle)
