"""Benchmark: nodes moved and cut when the shard count grows from k to k + 1.

For each shared graph and each k it partitions the graph into k shards
(``partition_graph``, which also returns the linear order) and then compares
four ways to get k + 1 shards:

(a) re-cut of the stored order (:func:`partition.placement.recut.recut`, with
    the k-way partition as the previous placement, the move cost given and
    the band floor, so the added shard takes its share);
(b) a new partition from scratch (``partition_graph`` with k + 1), its shards
    renamed optimally to the k-way ones (:func:`relabel_to_match`);
(c) re-hashing, ``hash mod k`` → ``hash mod (k + 1)``
    (:func:`partition.placement.bounded_hash.mod_assign`), printed beside the
    formula it is compared with: a key stays iff ``h mod k = h mod (k+1)``;
    writing ``r = h mod k(k+1)``, both residues equal ``c`` iff
    ``r ≡ c (mod k)`` and ``r ≡ c (mod k+1)``, i.e. (Chinese remainder theorem,
    k and k+1 coprime) iff ``r = c`` with ``0 ≤ c < k``: ``k`` of the
    ``k(k+1)`` residues. For uniform hashes a key stays with probability
    ``1/(k+1)``, so the moved fraction is ``1 − 1/(k+1)``;
(d) bounded-load consistent hashing with the same ε
    (:func:`partition.placement.bounded_hash.bounded_assign`, one point per
    shard), k → k + 1 shards.

Columns: moved fraction (share of nodes whose shard changes), cut fraction of
the k + 1 placement, largest and smallest shard over the average
(the balance rule caps only the largest), seconds. A second table shows the
move-cost trade-off of (a) on the first graph and k, with the band floor and
with the balance rule alone (which bounds only the largest shard).

Usage: python jobs/bench_recut.py [--graphs 3elt,ca-CondMat-lcc,usroads] [--ks 8,16,32]
       [--eps 0.03] [--move-cost 1.0] [--seed 1]
"""

from __future__ import annotations

import argparse
import time
from pathlib import Path

import numpy as np
from rich.console import Console
from rich.table import Table

from partition.edgelist import read_graph
from partition.partitioner import partition_graph
from partition.placement.bounded_hash import bounded_assign, mod_assign
from partition.placement.recut import recut
from partition.placement.relabel import moved_fraction, relabel_to_match
from partition.refine.gains import cut_total, cut_weights

DATASETS = Path(__file__).resolve().parents[2] / "shared" / "datasets"


def _figures(g, parts, k):
    w, scale = cut_weights(g.edge_weights)
    cut = cut_total(g.indptr, g.indices, w, parts) / scale / g.total_edge_weight()
    loads = np.bincount(parts, weights=g.node_weight_array(), minlength=k)
    avg = g.total_node_weight() / k
    return cut, loads.max() / avg, loads.min() / avg


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--graphs", default="3elt,ca-CondMat-lcc,usroads")
    ap.add_argument("--ks", default="8,16,32")
    ap.add_argument("--eps", type=float, default=0.03)
    ap.add_argument("--move-cost", type=float, default=1.0)
    ap.add_argument("--seed", type=int, default=1)
    args = ap.parse_args()
    console = Console(width=150)
    table = Table(title=f"k → k+1 shards (ε = {args.eps}, move cost {args.move_cost}, seed {args.seed})")
    for col in ("graph", "k → k+1", "method", "moved", "formula", "cut", "max/avg", "min/avg", "s"):
        table.add_column(col, justify="left" if col in ("graph", "method") else "right")
    first = None
    for name in args.graphs.split(","):
        path = next((p for p in DATASETS.glob(f"{name}.txt*")), None)
        if path is None:
            console.print(f"[red]{name}: not found in {DATASETS}[/red]")
            continue
        g = read_graph(path)
        for k in (int(x) for x in args.ks.split(",")):
            t = time.perf_counter()
            run = partition_graph(g, k, eps=args.eps, seed=args.seed)
            t_run = time.perf_counter() - t
            old = run.parts
            if first is None:
                first = (name, g, k, old, run.order)
            rows = []
            t = time.perf_counter()
            parts, st = recut(g, run.order, k + 1, eps=args.eps, previous=old, move_cost=args.move_cost,
                              seed=args.seed)
            rows.append(("(a) re-cut", st["stability"]["moved_fraction"], "", parts,
                         time.perf_counter() - t))
            t = time.perf_counter()
            new = partition_graph(g, k + 1, eps=args.eps, seed=args.seed).parts
            _, new = relabel_to_match(old, new, k, k + 1)
            rows.append(("(b) scratch+rename", moved_fraction(old, new), "", new, time.perf_counter() - t))
            ids = g.ids
            t = time.perf_counter()
            a, b = mod_assign(ids, list(range(k)), seed=args.seed), mod_assign(ids, list(range(k + 1)), seed=args.seed)
            rows.append(("(c) mod hash", float(np.mean(a != b)), f"{1 - 1 / (k + 1):.4f}",
                         b.astype(np.int64), time.perf_counter() - t))
            t = time.perf_counter()
            a = bounded_assign(ids, np.arange(k), args.eps, seed=args.seed)
            b = bounded_assign(ids, np.arange(k + 1), args.eps, seed=args.seed)
            rows.append(("(d) bounded hash", float(np.mean(a != b)), "", b.astype(np.int64),
                         time.perf_counter() - t))
            for i, (method, moved, formula, p, secs) in enumerate(rows):
                cut, hi, lo = _figures(g, p, k + 1)
                table.add_row(name if i == 0 else "", f"{k} → {k + 1}" if i == 0 else "", method,
                              f"{moved:.4f}", formula, f"{cut:.4f}", f"{hi:.3f}", f"{lo:.3f}", f"{secs:.2f}")
            table.add_row("", "", "[dim]k-way run[/dim]", "", "", f"[dim]{_figures(g, old, k)[0]:.4f}[/dim]", "", "",
                          f"{t_run:.2f}", end_section=True)
    console.print(table)
    if first is None:
        return
    name, g, k, old, order = first
    trade = Table(title=f"Move cost λ of the re-cut: {name}, {k} → {k + 1} shards")
    for col in ("floor", "λ", "moved", "cut", "max/avg", "min/avg"):
        trade.add_column(col, justify="right")
    for floor in ("band", "rule"):
        for i, lam in enumerate((0.0, 0.25, 0.5, 1.0, 2.0, 4.0)):
            parts, st = recut(g, order, k + 1, eps=args.eps, previous=old, move_cost=lam, seed=args.seed,
                              floor=floor)
            cut, hi, lo = _figures(g, parts, k + 1)
            trade.add_row(floor if i == 0 else "", f"{lam}", f"{st['stability']['moved_fraction']:.4f}",
                          f"{cut:.4f}", f"{hi:.3f}", f"{lo:.3f}", end_section=i == 5)
    console.print(trade)


if __name__ == "__main__":
    main()
