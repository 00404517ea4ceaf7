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


# Awkward ids for the id-fidelity tests (tests/test_ids.py, tests/test_spark_engine.py).
from hypothesis import strategies as st  # noqa: E402

INT64_MIN, INT64_MAX = -(2**63), 2**63 - 1
AWKWARD = st.one_of(
    st.integers(INT64_MIN, INT64_MAX).map(str),                        # canonical
    st.integers(0, 10**6).map(lambda v: "0" + str(v)),                 # leading zero: 007
    st.integers(0, 10**6).map(lambda v: "+" + str(v)),                 # explicit plus
    st.just("-0"),
    st.integers(2**63, 2**70).map(str),                                # past int64 (unsigned hashes)
    st.integers(INT64_MIN - 2**10, INT64_MIN - 1).map(str),
    st.floats(allow_nan=False, allow_infinity=False).map(repr),        # 1.0, 1e+20
    st.sampled_from(["NaN", "nan", "null", "NULL", "None", "inf", "-inf", "N/A", "-", '""', "TRUE"]),  # empty-looking
    st.text(st.characters(codec="utf-8", categories=("L", "N", "P", "S"), include_characters=" "), min_size=1,
            max_size=6).filter(lambda t: t.strip() == t),  # inner blanks, quotes, commas
)
"""Ids that are easy to merge by accident: zip codes, signs, 64-bit hashes, float-looking text, any script."""
