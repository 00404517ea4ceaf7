"""Shared test fixtures: the public graphs beside the repository and their catalog counts.

``../shared/datasets`` (beside the repository root) holds public graphs and a
CATALOG.md naming each file's source with its node and edge counts (counted
after symmetrising and dropping self-loops) and a SHA-256 prefix. Tests that
need these files skip, with that reason, when the folder is absent.
"""

from __future__ import annotations

from pathlib import Path

SHARED = Path(__file__).resolve().parents[2] / "shared" / "datasets"
SHARED_MISSING = f"the public graphs of {SHARED} are not present (they sit beside the repository, not in it)"


def shared_graph_rows():
    """``file → (nodes, undirected edges, sha256 prefix)`` from the graph table of CATALOG.md.

    Only the first table (the graphs) is read: later sections, such as the
    request logs, are not graphs.
    """
    path = SHARED / "CATALOG.md"
    if not path.is_file():
        return {}
    rows = {}
    for line in path.read_text(encoding="utf-8").splitlines():
        if line.startswith("## "):
            break
        cells = [c.strip() for c in line.strip().strip("|").split("|")]
        if len(cells) == 7 and cells[3].isdigit() and cells[4].isdigit():
            rows[cells[0]] = (int(cells[3]), int(cells[4]), cells[6])
    return rows
