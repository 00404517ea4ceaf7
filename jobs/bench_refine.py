"""Benchmark: run time and cut of the refinement steps (pairwise FM, k-way FM, rebalance, min cut, multilevel).

Part 1 times each step on a seeded R-MAT graph (Graph500 parameters, default
scale 16 and edge factor 16: about 0.9 M undirected edges after removing
duplicates) at k = 64, from a line cut of the reverse Cuthill–McKee order
(scipy). The goal for pairwise FM is about one second per round of k/2 pairs.
Numba kernels are compiled on a tiny graph first, so the times exclude it.

Part 2 reports cut fractions on public graphs from ``../shared/datasets``
(sources in ../shared/datasets/CATALOG.md): the start (the hierarchy's leaf order cut into k
pieces when the hierarchy stages are importable, otherwise the RCM line cut),
flat pairwise FM, multilevel refinement, and min-cut repair after multilevel.

Usage: python jobs/bench_refine.py [--scale 16] [--edge-factor 16] [--k 64] [--eps 0.03] [--skip-rmat] [--skip-shared]
"""

from __future__ import annotations

import argparse
import time
from pathlib import Path

import numpy as np
from scipy.sparse.csgraph import reverse_cuthill_mckee

from partition.balance import balance_rule
from partition.cut import line_cut
from partition.edgelist import read_graph
from partition.generators import rmat
from partition.graph import build_graph
from partition.refine.flow import refine_flow
from partition.refine.fm import fm_round, refine_fm, refine_fm_kway
from partition.refine.multilevel import refine_multilevel
from partition.refine.rebalance import rebalance
from partition.refine.schedule import line_pairs, round_robin
from partition.refine.units import edge_cut

SHARED = Path(__file__).resolve().parents[2] / "shared" / "datasets"
CASES = (("3elt.txt.gz", 2), ("3elt.txt.gz", 64), ("ca-HepPh.txt.gz", 8), ("email-Enron.txt.gz", 8),
         ("usroads.txt.gz", 64))


def rcm_start(graph, k, eps):
    order = reverse_cuthill_mckee(graph.to_scipy().tocsr(), symmetric_mode=True).astype(np.int64)
    return np.asarray(line_cut(order, None, k, eps), dtype=np.int64)


def hierarchy_start(graph, k, eps):
    """(labels, parts) from the pipeline's stages, or None when they are not importable."""
    try:
        from partition.affinity import edge_affinity
        from partition.embedding import linear_order
        from partition.hierarchy import build_hierarchy
    except ImportError:
        return None
    h = build_hierarchy(graph, edge_affinity(graph, "jaccard"))
    order = linear_order(h, graph)
    return h.labels, np.asarray(line_cut(order, None, k, eps), dtype=np.int64)


def timed(fn, *args, **kw):
    t0 = time.perf_counter()
    out = fn(*args, **kw)
    return out, time.perf_counter() - t0


def warm_up():
    rng = np.random.default_rng(0)
    g = build_graph(rng.integers(0, 60, 240), rng.integers(0, 60, 240))
    rule = balance_rule(None, 4, 0.03, g.n)
    parts = np.arange(g.n) % 4
    refine_fm(g, parts, rule)
    refine_fm_kway(g, parts, rule)
    rebalance(g, np.zeros(g.n, dtype=np.int64), rule)
    refine_flow(g, parts, rule, max_rounds=1)


def bench_rmat(scale, edge_factor, k, eps):
    src, dst = rmat(scale, edge_factor)
    g = build_graph(src, dst)
    print(f"R-MAT scale {scale}, edge factor {edge_factor}: n = {g.n}, m = {g.m}, k = {k}, eps = {eps}")
    rule = balance_rule(None, k, eps, g.n)
    parts = rcm_start(g, k, eps)
    m = g.m
    print(f"  start (RCM line cut): cut fraction {edge_cut(g, parts) / m:.4f}")
    for name, pairs in (("line pairs", line_pairs(k, 0)), ("round-robin round", round_robin(k)[0])):
        (p, _), sec = timed(fm_round, g, parts, pairs, rule)
        print(f"  fm_round, {name} ({len(pairs)} pairs): {sec:.3f} s, cut {edge_cut(g, p) / m:.4f}")
        (p, _), sec = timed(fm_round, g, parts, pairs, rule, n_jobs=2)
        print(f"  fm_round, {name}, 2 threads: {sec:.3f} s")
    for sched in ("line", "matched", "round_robin"):
        (p, st), sec = timed(refine_fm, g, parts, rule, schedule=sched)
        print(f"  refine_fm {sched} ({len(st['rounds'])} rounds): {sec:.2f} s, cut {st['cut_after'] / m:.4f}")
    (p, st), sec = timed(refine_fm_kway, g, parts, rule)
    print(f"  refine_fm_kway: {sec:.2f} s, cut {st['cut_after'] / m:.4f}")
    off = parts.copy()
    off[np.flatnonzero(parts == 1)[: g.n // (4 * k)]] = 0  # shard 0 a quarter over
    (p, st), sec = timed(rebalance, g, off, rule)
    print(f"  rebalance ({st['moved']} moves): {sec:.3f} s, balanced {st['balanced']}")
    (p, st), sec = timed(refine_flow, g, parts, rule, schedule="matched", max_rounds=2)
    print(f"  refine_flow matched, 2 rounds: {sec:.2f} s, cut {st['cut_after'] / m:.4f}")
    hs = hierarchy_start(g, k, eps)
    if hs is not None:
        labels, hparts = hs
        (p, st), sec = timed(refine_multilevel, g, labels, hparts, rule)
        print(f"  refine_multilevel from leaf order: {sec:.2f} s, cut {st['cut_before'] / m:.4f} -> "
              f"{st['cut_after'] / m:.4f}")


def bench_shared(eps):
    print(f"\nPublic graphs (../shared/datasets/CATALOG.md), eps = {eps}: cut fractions")
    for name, k in CASES:
        path = SHARED / name
        if not path.exists():
            print(f"  {name}: not found, skipped")
            continue
        g = read_graph(path)
        rule = balance_rule(None, k, eps, g.n)
        hs = hierarchy_start(g, k, eps)
        if hs is None:
            labels, parts, kind = None, rcm_start(g, k, eps), "RCM"
        else:
            (labels, parts), kind = hs, "leaf order"
        m = g.m
        fm, st_fm = refine_fm(g, parts, rule)
        line = f"  {name} k={k}: start ({kind}) {edge_cut(g, parts) / m:.4f}, FM {st_fm['cut_after'] / m:.4f}"
        if labels is not None:
            t0 = time.perf_counter()
            ml, st_ml = refine_multilevel(g, labels, parts, rule)
            fl, st_fl = refine_flow(g, ml, rule)
            sec = time.perf_counter() - t0
            line += (f", multilevel {st_ml['cut_after'] / m:.4f}, + min cut {st_fl['cut_after'] / m:.4f}"
                     f" ({sec:.1f} s, balanced {st_fl['balanced']})")
        print(line)


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--scale", type=int, default=16)
    ap.add_argument("--edge-factor", type=int, default=16)
    ap.add_argument("--k", type=int, default=64)
    ap.add_argument("--eps", type=float, default=0.03)
    ap.add_argument("--skip-rmat", action="store_true")
    ap.add_argument("--skip-shared", action="store_true")
    args = ap.parse_args()
    _, sec = timed(warm_up)
    print(f"kernel compile / cache load: {sec:.1f} s")
    if not args.skip_rmat:
        bench_rmat(args.scale, args.edge_factor, args.k, args.eps)
    if not args.skip_shared:
        bench_shared(args.eps)


if __name__ == "__main__":
    main()
