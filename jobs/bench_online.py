"""Benchmark: online placement of held-out nodes replayed into a partition of the rest.

For each shared graph a seeded share of the nodes (default 15 %) is held out
— uniformly at random, or (``--holdout-kind regions``) as whole regions:
breadth-first balls of 2 % of the nodes around random starts, so that the
arrivals crowd into the few shards that hold their neighbourhood — and the
rest is partitioned into k shards with ``partition_graph``; then the
held-out nodes arrive one at a time, each with its edges to the nodes placed
before it, and are placed by :class:`partition.placement.online.OnlinePlacer`
under the capacity of the balance rule for the final node count
(``⌈(1+ε)·n/k⌉``). Arrival orders:

(a) random — a seeded permutation of the held-out nodes;
(b) BFS bursts — breadth-first order of the whole graph from a random
    held-out node per component, kept to the held-out nodes: related nodes
    arrive together, one region of the graph after another;
(c) by shard — held-out nodes sorted by the shard holding most of their
    partitioned neighbours (shard 0's first): every burst wants the same
    shard, the usual worst case for a rule that ignores fill.

Rules: discount (ψ(f) = 1 − e^(f−1), μ = 0 and μ = 0.5), greedy, linear
deterministic greedy (ldg), bounded-load hashing (hash). Columns: cut fraction
of the whole graph after the replay (edges at a rejected node count as cut),
largest load over the capacity, largest and smallest load over the average,
rejected arrivals, microseconds per arrival (the whole ``place_many`` call
over the number of arrivals, fastest of three runs, after the compiled kernel
is loaded).
The capacity is never exceeded by construction (rejected nodes are counted,
and with this capacity there is always room: see the module docstring of
:mod:`partition.placement.online`); the benchmark checks it. The reference
rows are the partition of the rest alone and a new partition of the whole
graph.

Usage: python jobs/bench_online.py [--graphs 3elt,ca-CondMat-lcc,email-Enron] [--k 16]
       [--holdout 0.15] [--holdout-kind uniform|regions] [--eps 0.03] [--seed 1]
"""

from __future__ import annotations

import argparse
import time
from pathlib import Path

import numpy as np
import scipy.sparse.csgraph as csg
from rich.console import Console
from rich.table import Table

from partition.edgelist import read_graph
from partition.graph import build_graph
from partition.partitioner import partition_graph
from partition.placement.online import OnlinePlacer, final_capacity
from partition.refine.gains import cut_total, cut_weights

DATASETS = Path(__file__).resolve().parents[2] / "shared" / "datasets"
METHODS = (("discount μ=0", "discount", 0.0), ("discount μ=0.5", "discount", 0.5), ("greedy", "greedy", 0.0),
           ("ldg", "ldg", 0.0), ("bounded hash", "hash", 0.0))


def _base_graph(g, held):
    """The graph on the kept nodes (ids = dense indices of the whole graph; isolated kept nodes stay)."""
    src, dst, w = g.edges()
    keep = ~held[src] & ~held[dst]
    nodes = np.flatnonzero(~held)
    weights = None if g.edge_weights is None else np.concatenate((w[keep], np.ones(nodes.size)))
    return build_graph(np.concatenate((src[keep], nodes)), np.concatenate((dst[keep], nodes)), weights=weights)


def _held_out(g, share, kind, rng):
    """Boolean mask of the held-out nodes."""
    if kind == "uniform":
        return rng.random(g.n) < share
    held = np.zeros(g.n, dtype=bool)
    size, target, adj = max(1, int(0.02 * g.n)), int(share * g.n), g.to_scipy()
    while held.sum() < target:
        start = int(rng.choice(np.flatnonzero(~held)))
        ball = csg.breadth_first_order(adj, start, directed=False, return_predecessors=False)
        ball = ball[~held[ball]][: min(size, target - int(held.sum()))]
        held[ball] = True
    return held


def _orders(g, held, base_parts_full, k, rng):
    h = np.flatnonzero(held)
    out = {"random": rng.permutation(h)}
    seen = np.zeros(g.n, dtype=bool)
    seq = []
    for s in rng.permutation(h):  # BFS of the whole graph from held-out starts, per component
        if seen[s]:
            continue
        comp = csg.breadth_first_order(g.to_scipy(), int(s), directed=False, return_predecessors=False)
        seen[comp] = True
        seq.append(comp[held[comp]])
    out["BFS bursts"] = np.concatenate(seq) if seq else h
    rows, cols = g.rows(), g.indices
    sel = held[rows] & ~held[cols]
    counts = np.zeros((g.n, k), dtype=np.int64)
    np.add.at(counts, (rows[sel], base_parts_full[cols[sel]]), 1)
    major = np.where(counts[h].max(axis=1) > 0, counts[h].argmax(axis=1), k)
    out["by shard"] = h[np.lexsort((rng.permutation(h.size), major))]
    return out


def _arrivals(g, order):
    """ptr and neighbour ids: each arrival's edges to nodes kept or arrived before it."""
    rank = np.full(g.n, -1, dtype=np.int64)
    rank[order] = np.arange(order.size)
    rows, cols = g.rows().astype(np.int64), g.indices.astype(np.int64)
    keep = (rank[rows] >= 0) & (rank[cols] < rank[rows])
    r = rank[rows[keep]]
    by = np.argsort(r, kind="stable")
    ptr = np.zeros(order.size + 1, dtype=np.int64)
    np.cumsum(np.bincount(r, minlength=order.size), out=ptr[1:])
    weights = None if g.edge_weights is None else g.edge_weights[keep][by]
    return ptr, cols[keep][by], weights


def _cut_fraction(g, parts):
    w, scale = cut_weights(g.edge_weights)
    p = parts.copy()
    p[p < 0] = -1 - np.flatnonzero(p < 0)  # a rejected node is alone: its edges count as cut
    return cut_total(g.indptr, g.indices, w, p) / scale / g.total_edge_weight()


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--graphs", default="3elt,ca-CondMat-lcc,email-Enron")
    ap.add_argument("--k", type=int, default=16)
    ap.add_argument("--holdout", type=float, default=0.15)
    ap.add_argument("--holdout-kind", choices=("uniform", "regions"), default="uniform")
    ap.add_argument("--eps", type=float, default=0.03)
    ap.add_argument("--seed", type=int, default=1)
    args = ap.parse_args()
    console = Console(width=150)
    k = args.k
    for name in args.graphs.split(","):
        path = next((p for p in DATASETS.glob(f"{name}.txt*")), None)
        if path is None:
            console.print(f"[red]{name}: not found in {DATASETS}[/red]")
            continue
        g = read_graph(path)
        rng = np.random.default_rng(args.seed)
        held = _held_out(g, args.holdout, args.holdout_kind, rng)
        base = _base_graph(g, held)
        t = time.perf_counter()
        base_parts = partition_graph(base, k, eps=args.eps, seed=args.seed).parts
        t_base = time.perf_counter() - t
        full = np.full(g.n, -1, dtype=np.int64)
        full[base.ids] = base_parts
        cap = final_capacity(k, args.eps, final_nodes=g.n)
        table = Table(title=f"{name}: {g.n:,} nodes, {held.sum():,} held out ({args.holdout:.0%}, {args.holdout_kind}), k = {k}, "
                            f"capacity {cap:,} (ε = {args.eps}, final n)")
        for col in ("order", "rule", "cut", "max load / cap", "max / avg", "min / avg", "rejected", "µs / arrival"):
            table.add_column(col, justify="left" if col in ("order", "rule") else "right")
        w, scale = cut_weights(base.edge_weights)
        base_cut = cut_total(base.indptr, base.indices, w, base_parts) / scale / base.total_edge_weight()
        table.add_row("[dim]reference[/dim]", "[dim]rest alone (partition_graph)[/dim]", f"{base_cut:.4f}", "", "",
                      "", "", f"[dim]{t_base:.1f} s[/dim]")
        t = time.perf_counter()
        whole = partition_graph(g, k, eps=args.eps, seed=args.seed).parts
        wl = np.bincount(whole, minlength=k) / (g.n / k)
        table.add_row("", "[dim]whole graph anew (partition_graph)[/dim]", f"{_cut_fraction(g, whole):.4f}", "",
                      f"{wl.max():.3f}", f"{wl.min():.3f}", "", f"[dim]{time.perf_counter() - t:.1f} s[/dim]",
                      end_section=True)
        warm = OnlinePlacer(base, base_parts, k, cap)  # load the compiled kernel before timing
        warm.place_many([-1], [0, 0], np.empty(0, dtype=np.int64))
        for oname, order in _orders(g, held, full, k, rng).items():
            ptr, nbr, ew = _arrivals(g, order)
            for i, (label, rule, mu) in enumerate(METHODS):
                secs, outs = [], []
                for _ in range(3):  # the fastest of three identical runs (the machine is shared)
                    placer = OnlinePlacer(base, base_parts, k, cap, rule=rule, mu=mu, seed=args.seed)
                    t = time.perf_counter()
                    outs.append(placer.place_many(order, ptr, nbr, weights=ew))
                    secs.append(time.perf_counter() - t)
                out, secs = outs[0], min(secs)
                assert all(np.array_equal(out, o) for o in outs), "same input, different placement"
                loads = placer.loads
                assert loads.max() <= cap, "a shard went above capacity"
                parts = full.copy()
                parts[order] = out
                avg = loads.sum() / k
                table.add_row(oname if i == 0 else "", label, f"{_cut_fraction(g, parts):.4f}",
                              f"{loads.max() / cap:.3f}", f"{loads.max() / avg:.3f}", f"{loads.min() / avg:.3f}",
                              f"{int((out < 0).sum()):,}",
                              f"{1e6 * secs / max(order.size, 1):.2f}", end_section=i == len(METHODS) - 1)
        console.print(table)


if __name__ == "__main__":
    main()
