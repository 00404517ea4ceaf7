"""Benchmark: load and keys moved by bounded-load consistent hashing, beside the plain methods.

For each size (m keys, n shards) and each ε it builds a bounded-load ring
(one point per shard, the case the load bound is proved for), records the
largest shard load against the capacity ⌈(1+ε)m/n⌉, and averages the keys
moved per shard insertion and per shard removal over random trials (each
change is undone before the next trial). Moves are printed divided by m/n,
beside 1/ε² for ε < 1: Mirrokni, Thorup & Zadimoghaddam (SODA 2018) bound the
expected moves per shard insertion or removal by O(m/(n·ε²)) — the bound
gives no constant, so only the trend over ε can be compared. Plain
consistent hashing (1 and 100 points per shard, Karger et al., STOC 1997) and
hash mod n are measured on the same keys and changes. A second table gives
the keys moved per key insertion and removal (the paper's O(1/ε²) per key
operation) and the cost of one update of the ring. When (1+ε)m/n is a whole
number, as for m = 100 000 and n = 100, one more key raises the capacity by
one everywhere and many keys move back towards their first shard; the table
shows the capacity before and after so such steps are visible. For shard
changes the column "at fixed c" repeats the measurement with the capacity
held at its value before the change, which separates the moves due to the
new ring from those due to the step of ⌈(1+ε)m/n⌉.

Usage: python jobs/bench_bounded_hash.py [--sizes 100000:100,1000000:1000] [--trials 20] [--seed 1]
"""

from __future__ import annotations

import argparse
import time

import numpy as np
from rich.console import Console
from rich.table import Table

from partition.placement.bounded_hash import (
    BoundedLoadRing, bounded_assign, capacity, consistent_assign, key_hashes, mod_assign, place_on_ring,
    shard_points,
)

EPS = (0.1, 0.25, 0.5, 1.0, 2.0)


def _trials(n, trials, rng):
    added = [n + t for t in range(trials)]
    removed = rng.choice(n, size=min(trials, n), replace=False).tolist()
    return added, removed


def _bounded(keys, n, eps, seed, added, removed):
    """Max load, capacity, mean moves per insertion/removal, ms per measured update."""
    ring = BoundedLoadRing(np.arange(n), eps, seed=seed, keys=keys)
    worst = max(ring.loads().values()) - ring.capacity  # must stay <= 0 in every state
    max_load, cap = max(ring.loads().values()), ring.capacity
    ins, rem, seconds = [], [], 0.0
    for new in added:
        t = time.perf_counter()
        ins.append(len(ring.add_shard(new)))
        seconds += time.perf_counter() - t
        worst = max(worst, max(ring.loads().values()) - ring.capacity)
        ring.remove_shard(new)
    for old in removed:
        t = time.perf_counter()
        rem.append(len(ring.remove_shard(old)))
        seconds += time.perf_counter() - t
        worst = max(worst, max(ring.loads().values()) - ring.capacity)
        ring.add_shard(old)
    assert worst <= 0, "a shard went above capacity"
    return max_load, cap, np.mean(ins), np.mean(rem), 1e3 * seconds / (len(added) + len(removed)), ring


def _fixed_cap_moves(keys, n, eps, seed, added, removed):
    """Mean moves per shard insertion/removal when the capacity is held at its value before the change.

    Separates the moves caused by the changed ring from those caused by ⌈(1+ε)m/n⌉ stepping.
    """
    kh = np.sort(key_hashes(keys, seed))  # priority order (distinct hashes here)
    cap = capacity(keys.size, n, eps)

    def place(shards):
        shards = np.sort(np.asarray(shards, dtype=np.int64))
        pos = shard_points(shards, 1, seed)
        order = np.argsort(pos, kind="stable")
        return shards[place_on_ring(kh, pos[order], order, shards.size, cap)[0]]

    base = place(np.arange(n))
    ins = [int((place(np.append(np.arange(n), new)) != base).sum()) for new in added]
    rem = [int((place(np.delete(np.arange(n), old)) != base).sum()) for old in removed]
    return np.mean(ins), np.mean(rem)


def _plain(assign, keys, n, added, removed):
    shards = list(range(n))
    base = assign(keys, shards)
    max_load = int(np.bincount(base.astype(np.int64)).max())
    ins = [int((assign(keys, shards + [new]) != base).sum()) for new in added]
    rem = [int((assign(keys, [s for s in shards if s != old]) != base).sum()) for old in removed]
    return max_load, np.mean(ins), np.mean(rem)


def _key_ops(ring, keys, trials, rng):
    """Mean moves of other keys per key insertion and removal, and ms per update."""
    ins, rem, seconds = [], [], 0.0
    fresh = keys.max() + 1 + np.arange(trials)
    for k in fresh.tolist():
        t = time.perf_counter()
        ins.append(len(ring.add_key(k)))
        seconds += time.perf_counter() - t
        ring.remove_key(k)
    for k in rng.choice(keys, size=trials, replace=False).tolist():
        t = time.perf_counter()
        rem.append(len(ring.remove_key(k)))
        seconds += time.perf_counter() - t
        ring.add_key(k)
    return np.mean(ins), np.mean(rem), 1e3 * seconds / (2 * trials)


def run_size(m, n, trials, seed, console):
    rng = np.random.default_rng(seed)
    keys = rng.choice(1 << 62, size=m, replace=False).astype(np.int64)
    added, removed = _trials(n, trials, rng)
    share = m / n
    t = time.perf_counter()
    bounded_assign(keys, np.arange(n), 0.25, seed=seed)
    scratch = time.perf_counter() - t

    table = Table(title=f"m = {m:,} keys, n = {n:,} shards, {trials} shard insertions and {len(removed)} removals "
                  f"(moves ÷ m/n = {share:,.0f})")
    for head in ("method", "ε", "capacity", "max load", "max ÷ m/n", "moved / insert ÷ m/n",
                 "moved / remove ÷ m/n", "same at fixed c: insert, remove", "1/ε²", "ms / update"):
        table.add_column(head, justify="left" if head == "method" else "right")
    keyops = Table(title=f"bounded loads, m = {m:,}, n = {n:,}: other keys moved per key operation "
                   f"(mean of {trials} each)")
    for head in ("ε", "capacity before → after insert", "moved / key insert",
                 "capacity after removal", "moved / key removal", "1/ε²", "ms / update"):
        keyops.add_column(head, justify="right")
    for eps in EPS:
        max_load, cap, ins, rem, ms, ring = _bounded(keys, n, eps, seed, added, removed)
        bound = f"{1 / eps ** 2:.1f}" if eps < 1 else "—"
        fin, frem = _fixed_cap_moves(keys, n, eps, seed, added, removed)
        table.add_row("bounded loads, 1 point", f"{eps:g}", f"{cap:,}", f"{max_load:,}", f"{max_load / share:.3f}",
                      f"{ins / share:.3f}", f"{rem / share:.3f}", f"{fin / share:.3f}, {frem / share:.3f}",
                      bound, f"{ms:.1f}")
        kin, krem, kms = _key_ops(ring, keys, trials, rng)
        keyops.add_row(f"{eps:g}", f"{cap:,} → {capacity(m + 1, n, eps):,}", f"{kin:.1f}",
                       f"{capacity(m - 1, n, eps):,}", f"{krem:.1f}", bound, f"{kms:.1f}")
    plain = [("consistent, 1 point", lambda k, s: consistent_assign(k, s, seed, 1)),
             ("consistent, 100 points", lambda k, s: consistent_assign(k, s, seed, 100)),
             ("hash mod n", lambda k, s: mod_assign(k, s, seed))]
    for name, assign in plain:
        max_load, ins, rem = _plain(assign, keys, n, added, removed)
        table.add_row(name, "∞", "—", f"{max_load:,}", f"{max_load / share:.3f}",
                      f"{ins / share:.3f}", f"{rem / share:.3f}", "—", "—", "—")
    console.print(table)
    console.print(keyops)
    console.print(f"from-scratch bounded_assign of {m:,} integer keys on {n:,} shards: {scratch:.3f} s\n")


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", default="100000:100,1000000:1000", help="comma-separated m:n pairs")
    ap.add_argument("--trials", type=int, default=20, help="shard (and key) insertions and removals per size")
    ap.add_argument("--seed", type=int, default=1)
    args = ap.parse_args(argv)
    console = Console(width=190)
    bounded_assign(np.arange(10), np.arange(3), 0.5)  # load (or compile) the numba kernel before timing
    for pair in args.sizes.split(","):
        m, n = (int(x) for x in pair.split(":"))
        run_size(m, n, args.trials, args.seed, console)


if __name__ == "__main__":
    main()
