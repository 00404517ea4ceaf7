"""Tests of partition.spark.triangles: colour-triple triangle listing credits every triangle once.

Reference: networkx's common neighbours (``nx.common_neighbors``) on random
graphs from ``nx.gnm_random_graph`` and ``nx.powerlaw_cluster_graph`` (many
triangles, a few hubs), with the hub cap applied to the common neighbour's
whole-graph degree as partition.affinity documents.
"""

from __future__ import annotations

from itertools import combinations

import networkx as nx
import numpy as np
import pytest

from partition.rules import WEDGE_BITS
from partition.spark.triangles import _routes, colour_count, owner, task_credits


def _colour(nodes, rho, seed):
    return np.random.default_rng(seed).integers(0, rho, size=nodes)


def _credits(G, rho, cap, seed=0):
    """Run every task of ``rho`` colours on G and add up the partial credits per edge."""
    n = G.number_of_nodes()
    col = _colour(n, rho, seed) if rho > 1 else np.zeros(n, dtype=np.int64)
    deg = np.array([G.degree(i) for i in range(n)], dtype=np.int64)
    e = np.array(sorted((min(a, b), max(a, b)) for a, b in G.edges()), dtype=np.int64)
    rows, want_of = _routes(rho)
    tasks = {}
    for a, b, t in rows:
        tasks.setdefault(t, set()).add((a, b))
    total = {}
    for t, pairs in tasks.items():
        sel = np.array([(col[u], col[v]) in pairs for u, v in e], dtype=bool)
        u, v = e[sel, 0], e[sel, 1]
        got = task_credits(u, v, deg[u], deg[v], col[u], col[v], want_of[t], rho, cap)
        for a, b, c, s in zip(*got):
            pc, ps = total.get((a, b), (0, 0))
            total[(a, b)] = (pc + int(c), ps + int(s))
    return total, deg


@pytest.mark.parametrize("rho", [1, 4, 5, 7])
@pytest.mark.parametrize("graph", ["gnm", "powerlaw"])
def test_credits_equal_networkx_common_neighbours(rho, graph):
    G = nx.gnm_random_graph(300, 2400, seed=3) if graph == "gnm" else nx.powerlaw_cluster_graph(400, 6, 0.5, seed=5)
    cap = 40
    total, deg = _credits(G, rho, cap, seed=rho)
    for a, b in G.edges():
        common = [w for w in nx.common_neighbors(G, a, b) if deg[w] <= cap]
        want = (len(common), sum((1 << WEDGE_BITS) // int(deg[w]) for w in common))
        assert total.get((min(a, b), max(a, b)), (0, 0)) == want


def test_owner_is_a_task_and_contains_the_colours():
    # every colour multiset has exactly one owning triple of distinct colours, and it contains them
    for rho in (4, 5, 9):
        codes = {t[0] * rho * rho + t[1] * rho + t[2]: set(t) for t in combinations(range(rho), 3)}
        for a in range(rho):
            for b in range(rho):
                for c in range(rho):
                    got = owner(a, b, c, rho)
                    assert got in codes and {a, b, c} <= codes[got]


def test_colour_count_keeps_tasks_small():
    assert colour_count(1000, 8_000_000) == 1
    for m in (8_000_001, 16_000_000, 67_000_000, 1_000_000_000):
        rho = colour_count(m, 8_000_000)
        assert rho >= 4 and (3 / rho) ** 2 * m <= 8_000_000
