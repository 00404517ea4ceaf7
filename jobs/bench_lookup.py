"""Benchmark: node→shard lookups for services (partition.placement.lookup.Placement).

Writes a ``node,shard`` CSV for a made-up parcel-locker network (integer locker
ids spread over the 63-bit range, or dense ids with ``--dense``; string keys
``locker-<hex>``), loads it with ``Placement.load`` and prints: keys loaded,
load time, bytes per key, single-key lookups/s (``shard_of`` in a Python loop)
and vectorised lookups/s (``shards_of`` on one array; 90 % placed keys, 10 %
unknown). Every vectorised answer is checked against ``numpy.searchsorted`` on
the sorted keys (integers) or a pyarrow hash join (strings). Goals: at most 24
bytes per integer key; at least 5 M vectorised integer lookups/s at 10 M keys.

Usage: python jobs/bench_lookup.py [--int-keys 10000000] [--str-keys 1000000] [--shards 64]
       [--repeat 3] [--single 200000] [--dense] [--seed 1]
"""

from __future__ import annotations

import argparse
import os
import tempfile
import time

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.csv as pacsv

from partition.placement.lookup import Placement


def _write_csv(path, keys, shards):
    table = pa.table({"node": keys, "shard": pa.array(shards, type=pa.int64())})
    pacsv.write_csv(table, path, write_options=pacsv.WriteOptions(quoting_style="needed", quoting_header="none"))


def _best(fn, repeat):
    best, out = float("inf"), None
    for _ in range(repeat):
        t = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t)
    return best, out


def _peak_rss_mb():
    import resource

    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


def _bench(label, path, keys, queries, expect, singles, repeat):
    t = time.perf_counter()
    placement = Placement.load(path)
    load_s = time.perf_counter() - t
    placement.shards_of(queries[:10])  # compile outside the timing
    vec_s, got = _best(lambda: placement.shards_of(queries), repeat)
    if not np.array_equal(got, expect):
        raise SystemExit(f"{label}: vectorised answers differ from the reference")
    placement.shard_of(singles[0], -1)
    t = time.perf_counter()
    for key in singles:
        placement.shard_of(key, -1)
    single_s = time.perf_counter() - t
    n = len(placement)
    print(f"{label:<16} {n:>12,} {load_s:>8.2f} {placement.nbytes / n:>9.2f} "
          f"{len(singles) / single_s / 1e6:>11.3f} {len(queries) / vec_s / 1e6:>11.2f}")


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--int-keys", type=int, default=10_000_000)
    ap.add_argument("--str-keys", type=int, default=1_000_000)
    ap.add_argument("--shards", type=int, default=64)
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--single", type=int, default=200_000, help="keys looked up one at a time")
    ap.add_argument("--dense", action="store_true", help="integer ids 0..n-1 instead of spread-out ids")
    ap.add_argument("--seed", type=int, default=1)
    args = ap.parse_args(argv)
    rng = np.random.default_rng(args.seed)

    print(f"{'keys':<16} {'loaded':>12} {'load s':>8} {'bytes/key':>9} {'single M/s':>11} {'vector M/s':>11}")
    with tempfile.TemporaryDirectory() as tmp:
        n = args.int_keys
        if args.dense:
            keys = rng.permutation(n).astype(np.int64)
        else:
            keys = rng.integers(0, 2**63 - 1, size=int(n * 1.01), dtype=np.int64)
            keys = rng.permutation(np.unique(keys)[:n])
        shards = rng.integers(0, args.shards, size=keys.size)
        path = os.path.join(tmp, "lockers.csv")
        _write_csv(path, pa.array(keys), shards)
        q = keys[rng.integers(0, keys.size, size=keys.size)]
        unknown = rng.random(q.size) < 0.1
        q[unknown] = rng.integers(-(2**63), 0, size=int(unknown.sum()), dtype=np.int64)  # never placed
        order = np.argsort(keys)
        pos = np.minimum(np.searchsorted(keys[order], q), keys.size - 1)
        expect = np.where(keys[order][pos] == q, shards[order][pos], -1).astype(np.int32)
        singles = [int(x) for x in q[: args.single]]
        _bench("integer" + (" dense" if args.dense else ""), path, keys, q, expect, singles, args.repeat)
        del keys, q, expect, order, pos

        m = args.str_keys
        codes = np.unique(rng.integers(0, 2**48, size=int(m * 1.01), dtype=np.int64))[:m]
        skeys = pc.binary_join_element_wise("locker-", pc.cast(pa.array(rng.permutation(codes)), pa.string()), "")
        sshards = rng.integers(0, args.shards, size=m)
        spath = os.path.join(tmp, "lockers-named.csv")
        _write_csv(spath, skeys, sshards)
        pick = rng.integers(0, m, size=m)
        sq = skeys.take(pa.array(pick)).to_numpy(zero_copy_only=False).astype(object)
        miss = rng.random(m) < 0.1
        sq[miss] = np.char.add("vault-", np.arange(int(miss.sum())).astype(str)).astype(object)
        found = pc.index_in(pa.array(sq, type=pa.string()), value_set=skeys).to_numpy(zero_copy_only=False)
        expect = np.where(np.isnan(found), -1, sshards[np.nan_to_num(found).astype(np.int64)]).astype(np.int32)
        _bench("string", spath, skeys, sq, expect, list(sq[: args.single]), args.repeat)
    print(f"peak RSS {_peak_rss_mb():,.0f} MiB")


if __name__ == "__main__":
    main()
