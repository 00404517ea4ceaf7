"""Ring points per shard against load spread: the table behind ``shardline ring``'s default.

Places 10,000 text keys (invented session ids ``session-00000`` …) on 8
shards with bounded-load consistent hashing (Mirrokni, Thorup &
Zadimoghaddam, SODA 2018) for 1, 10, 100 and 1000 ring points per shard and
prints, for each allowed imbalance ε, the largest and smallest shard load,
their ratio, whether ``shardline ring`` would warn (smallest below
``⌊(1 − min(ε, ½))·m/K⌋``), the keys that move when a 9th shard is added
(the ideal is m/9 ≈ 1,111) and the seconds the placement took.

Usage: ``python jobs/bench_ring_points.py [--keys M] [--shards K] [--seed S]``
"""

from __future__ import annotations

import argparse
import time

import numpy as np

from partition.commands.ring import DEFAULT_POINTS, uneven_floor
from partition.placement.bounded_hash import BoundedLoadRing


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--keys", type=int, default=10_000)
    ap.add_argument("--shards", type=int, default=8)
    ap.add_argument("--seed", type=int, default=0)
    args = ap.parse_args(argv)
    keys = np.array([f"session-{i:05d}" for i in range(args.keys)], dtype=object)
    m, k = args.keys, args.shards
    print(f"{m:,} keys on {k} shards (mean {m / k:,.1f}); default points per shard: {DEFAULT_POINTS}")
    print(f"{'eps':>5} {'points':>6} {'max':>6} {'min':>6} {'max/min':>8} {'warns':>6} {'moved +1 shard':>15} "
          f"{'seconds':>8}")
    for eps in (0.25, 0.0, float("inf")):
        for points in (1, 10, 100, 1000):
            t0 = time.perf_counter()
            ring = BoundedLoadRing(np.arange(k), eps, seed=args.seed, points_per_shard=points, keys=keys)
            loads = np.array(list(ring.loads().values()))
            seconds = time.perf_counter() - t0
            moved = len(ring.add_shard(k))
            warns = "yes" if loads.min() < uneven_floor(m, k, eps) else "no"
            print(f"{eps:>5g} {points:>6} {loads.max():>6,} {loads.min():>6,} {loads.max() / loads.min():>8.3f} "
                  f"{warns:>6} {moved:>15,} {seconds:>8.3f}")


if __name__ == "__main__":
    main()
