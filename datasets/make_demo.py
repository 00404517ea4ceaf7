"""Make the demo graph: frequent-ride pairs of a fictional shared-bicycle network.

Larkspur Bay Bikes is an invented bicycle-share scheme in an invented coastal
city. Its docks sit in fourteen neighbourhoods; an edge joins two docks
between which riders made at least ``MIN_RIDES`` trips in a month (either
direction), weighted by that ride count. Rides come from two made-up habits:
short hops to nearby docks (more likely the closer and the busier the docks)
and commutes from homes to the harbour, the station and the university. The
result is a weighted graph with string ids such as ``dock-harbourside-017``,
clustered by neighbourhood with some long commuting edges: a small stand-in
for the placement problems Shardline solves.

Run ``python datasets/make_demo.py`` to regenerate
``datasets/demo/larkspur-bay-rides.csv.gz``; the same seed gives the same bytes
(gzip written with a zero timestamp).
"""

from __future__ import annotations

import argparse
import gzip
import io
from pathlib import Path

import numpy as np
from scipy.spatial import cKDTree

SEED = 20240611
MIN_RIDES = 4
OUTPUT = Path(__file__).resolve().parent / "demo" / "larkspur-bay-rides.csv.gz"

# name, centre x/y (km), spread (km), docks, draws commuters (weight, 0 = none)
NEIGHBOURHOODS = [
    ("harbourside", 0.0, 0.0, 0.55, 420, 5.0),
    ("station-square", 1.5, 0.8, 0.40, 300, 4.0),
    ("old-town", -1.2, 1.0, 0.45, 330, 1.0),
    ("millrace", 2.8, 2.5, 0.50, 220, 0.0),
    ("kestrel-hill", -2.5, 3.0, 0.55, 180, 0.0),
    ("saltmarsh", 4.0, -1.5, 0.60, 160, 0.0),
    ("lantern-quay", -0.8, -1.8, 0.45, 260, 1.5),
    ("university", 3.2, 0.6, 0.45, 280, 3.0),
    ("foundry", -3.5, -0.5, 0.50, 200, 1.0),
    ("westcliff", -5.0, 1.8, 0.60, 150, 0.0),
    ("ferry-point", 1.0, -3.5, 0.45, 140, 0.5),
    ("orchard-rise", 5.5, 2.2, 0.60, 170, 0.0),
    ("tidewater", -2.0, -3.6, 0.55, 150, 0.0),
    ("brackenridge", 0.5, 4.2, 0.55, 190, 0.0),
]
LOCAL_PARTNERS = 12     # nearby docks a rider may hop to
LOCAL_RIDES = 14.0      # mean monthly rides between two average docks 0 km apart
LOCAL_RANGE_KM = 0.9    # distance at which hop rides fall by a factor e
COMMUTES_PER_DOCK = 2   # commute destinations drawn per dock
COMMUTE_RIDES = 6.0     # mean monthly rides on one commute pair
COMMUTE_RANGE_KM = 4.0  # distance at which a workplace's pull falls by a factor e


def docks(rng):
    """Dock names, neighbourhood index, position (km) and popularity."""
    names, hood, xy = [], [], []
    for h, (name, cx, cy, spread, count, _) in enumerate(NEIGHBOURHOODS):
        names += [f"dock-{name}-{i:03d}" for i in range(1, count + 1)]
        hood.append(np.full(count, h))
        xy.append(rng.normal((cx, cy), spread, size=(count, 2)))
    popularity = rng.lognormal(0.0, 0.5, size=len(names))
    return np.array(names, dtype=object), np.concatenate(hood), np.concatenate(xy), popularity


def ride_pairs(rng, hood, xy, popularity):
    """Dock pairs (a, b) and their monthly ride counts, before thresholding."""
    n = xy.shape[0]
    dist, near = cKDTree(xy).query(xy, k=LOCAL_PARTNERS + 1)
    a = np.repeat(np.arange(n), LOCAL_PARTNERS)
    b = near[:, 1:].ravel()
    d = dist[:, 1:].ravel()
    rate = LOCAL_RIDES * popularity[a] * popularity[b] * np.exp(-d / LOCAL_RANGE_KM)
    src, dst, rides = [a], [b], [rng.poisson(rate)]

    centres = np.array([(cx, cy) for _, cx, cy, *_ in NEIGHBOURHOODS])
    pull = np.array([w for *_, w in NEIGHBOURHOODS])
    for h in range(len(NEIGHBOURHOODS)):  # one pass per neighbourhood, vectorised over its docks
        home = np.flatnonzero(hood == h)
        gap = np.linalg.norm(centres - centres[h], axis=1)
        weight = pull * np.exp(-gap / COMMUTE_RANGE_KM)
        weight[h] = 0.0
        if weight.sum() == 0:
            continue
        target_hood = rng.choice(len(NEIGHBOURHOODS), size=(home.size, COMMUTES_PER_DOCK), p=weight / weight.sum())
        for t in np.unique(target_hood):
            rows, cols = np.nonzero(target_hood == t)
            work = np.flatnonzero(hood == t)
            p = popularity[work] / popularity[work].sum()
            src.append(home[rows])
            dst.append(rng.choice(work, size=rows.size, p=p))
            rides.append(rng.poisson(COMMUTE_RIDES * popularity[home[rows]], size=rows.size))
    return np.concatenate(src), np.concatenate(dst), np.concatenate(rides)


def build(seed=SEED):
    """The demo's rows ``(dock_a, dock_b, rides)``, dock_a < dock_b, sorted."""
    rng = np.random.default_rng(seed)
    names, hood, xy, popularity = docks(rng)
    a, b, rides = ride_pairs(rng, hood, xy, popularity)
    lo, hi = np.minimum(a, b), np.maximum(a, b)
    key = lo * len(names) + hi
    uniq, inverse = np.unique(key, return_inverse=True)
    total = np.bincount(inverse, weights=rides).astype(np.int64)
    keep = total >= MIN_RIDES
    lo, hi, total = uniq[keep] // len(names), uniq[keep] % len(names), total[keep]
    first, second = names[lo], names[hi]
    swap = first > second
    first, second = np.where(swap, second, first), np.where(swap, first, second)
    order = np.lexsort((second, first))
    return list(zip(first[order], second[order], total[order].tolist()))


def render(rows):
    """The gzip-compressed CSV bytes (header ``dock_a,dock_b,rides``, zero gzip timestamp)."""
    text = "dock_a,dock_b,rides\n" + "".join(f"{a},{b},{r}\n" for a, b, r in rows)
    buf = io.BytesIO()
    with gzip.GzipFile(filename="", mode="wb", fileobj=buf, mtime=0, compresslevel=9) as gz:
        gz.write(text.encode("utf-8"))
    return buf.getvalue()


def write_demo(path=OUTPUT, seed=SEED):
    """Write the demo graph to ``path`` atomically; returns the number of edges."""
    from partition.atomic import write_bytes

    rows = build(seed)
    write_bytes(path, render(rows))
    return len(rows)


def main(argv=None):
    parser = argparse.ArgumentParser(description="Regenerate the Larkspur Bay Bikes demo graph.")
    parser.add_argument("-o", "--output", default=str(OUTPUT), help=f"output file (default: {OUTPUT})")
    args = parser.parse_args(argv)
    m = write_demo(args.output)
    print(f"wrote {args.output}: {m} frequent-ride dock pairs")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
