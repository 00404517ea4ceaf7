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


def shared_missing(name):
    """The skip reason for a test that needs ``SHARED / name``: SHARED_MISSING when
    the folder is absent, else the one file that is."""
    return SHARED_MISSING if not SHARED.is_dir() else f"{name} is not in {SHARED}"


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


# The cut recounted by networkx, the outside reference for every cut figure.
import networkx as nx  # noqa: E402


def nx_graph(graph):
    """A ``partition.graph.Graph`` as a weighted ``networkx.Graph``: nodes 0..n-1, each
    undirected edge once with its weight under ``"weight"`` (1.0 when unweighted)."""
    G = nx.Graph()
    G.add_nodes_from(range(graph.n))
    u, v, w = graph.edges()
    G.add_weighted_edges_from(zip(u.tolist(), v.tolist(), w.tolist()))
    return G


def nx_cut(G, parts, k=None, weight="weight"):
    """Total weight of the cut edges by ``networkx.cut_size``: half the sum, over the
    shards S, of ``cut_size(G, S, weight=weight)`` (each cut edge leaves two shards).

    ``parts`` gives every node of ``G`` its shard: an array indexed by node, or a
    mapping node → shard. The shards are 0..k-1 when ``k`` is given (a shard outside
    that range is an error), else the shards that occur. Every node must have a
    shard, so the halved sum equals the sum over shard pairs of ``cut_size(G, S_a, S_b)``.
    ``weight=None`` counts the cut edges.
    """
    shard_of = {v: int(parts[v]) for v in G}
    shards = sorted(set(shard_of.values())) if k is None else range(k)
    if k is not None:
        assert all(0 <= s < k for s in shard_of.values()), "a shard outside 0..k-1"
    blocks = {s: set() for s in shards}
    for v, s in shard_of.items():
        blocks[s].add(v)
    return sum(nx.cut_size(G, blocks[s], weight=weight) for s in shards) / 2


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
