"""A seeded synthetic workload: the reading-room sessions of an invented library.

Scenario: the digital catalogue of *Tern Harbour Public Library* (a library we
invented) holds ``n_keys`` items on ``n_topics`` subject shelves. A reader's
session (one request) picks a shelf — shelf popularity follows a Zipf law over
a ranking that drifts slowly from one order to another over the log — and
fetches ``1 + Poisson(mean_size − 1)`` items, each from that shelf with
probability ``1 − noise`` (item popularity Zipf within the shelf) and otherwise
from the whole catalogue (Zipf over all items). In one window of the log one
shelf bursts (its weight multiplied by ``burst_factor``). Zipf popularity of
requests is the model of Breslau, Cao, Fan, Phillips & Shenker, "Web caching
and Zipf-like distributions: evidence and implications", INFOCOM 1999.

The known best routing is the planted one: shelves are packed onto ``k``
shards by expected load (largest first onto the least loaded shard, Graham's
LPT rule, SIAM J. Appl. Math. 1969), and every item lives with its shelf; a
session without noise then touches one shard.
"""

from __future__ import annotations

import gzip
import json

import numpy as np

from partition.atomic import atomic_path
from partition.errors import ParameterError
from partition.workload.log import assemble_log

__all__ = ["LibraryWorkload", "library_workload", "write_log"]


class LibraryWorkload:
    """A generated log with its planted structure.

    Attributes
    ----------
    log : partition.workload.log.RequestLog
    topic_of_key : ndarray of int64
        Shelf of every key of ``log.keys``.
    planted : ndarray of int64
        The planted key → shard table over ``log.keys`` (for ``k`` shards).
    burst : tuple
        ``(first request, last request + 1, shelf)`` of the burst.
    """

    def __init__(self, log, topic_of_key, planted, burst):
        self.log, self.topic_of_key, self.planted, self.burst = log, topic_of_key, planted, burst


def _zipf(n, a):
    p = 1.0 / np.arange(1, n + 1, dtype=np.float64) ** a
    return p / p.sum()


def library_workload(n_requests=20000, n_keys=5000, n_topics=40, k=8, mean_size=6.0, zipf=0.9, noise=0.1,
                     drift=0.5, burst=(0.8, 0.85), burst_factor=8.0, seed=0):
    """Generate the library workload (module docstring).

    Parameters
    ----------
    n_requests, n_keys, n_topics : int
    k : int
        Shards of the planted table.
    mean_size : float
        Mean session size (≥ 1).
    zipf : float
        Zipf exponent of shelves and of items.
    noise : float
        Chance that an item comes from the whole catalogue.
    drift : float
        Share of the shelf ranking that has changed by the end of the log (0..1).
    burst : (float, float)
        The burst window as fractions of the log.
    burst_factor : float
    seed : int

    Returns
    -------
    LibraryWorkload
    """
    if n_topics < 1 or n_keys < n_topics or n_requests < 2 or k < 1 or mean_size < 1:
        raise ParameterError("need n_requests ≥ 2, n_keys ≥ n_topics ≥ 1, k ≥ 1 and mean_size ≥ 1")
    if not (0 <= noise <= 1 and 0 <= drift <= 1 and 0 <= burst[0] <= burst[1] <= 1):
        raise ParameterError("noise and drift must be in [0, 1] and the burst window inside the log")
    rng = np.random.default_rng(seed)
    topic_of_item = np.sort(rng.integers(0, n_topics, size=n_keys))
    topic_of_item[:n_topics] = np.arange(n_topics)  # every shelf holds an item
    topic_of_item.sort()
    starts = np.searchsorted(topic_of_item, np.arange(n_topics + 1))
    item_ids = rng.permutation(np.arange(1, 10 * n_keys + 1, dtype=np.int64))[:n_keys]  # catalogue numbers
    rank0 = rng.permutation(n_topics)
    rank1 = rank0.copy()
    moved = rng.choice(n_topics, size=int(round(drift * n_topics)), replace=False)
    rank1[moved] = rank0[rng.permutation(moved)]
    shelf_p = _zipf(n_topics, zipf)
    burst_topic = int(rng.integers(0, n_topics))
    b0, b1 = int(burst[0] * n_requests), int(burst[1] * n_requests)

    chunk = max(1, n_requests // 200)
    topics = np.empty(n_requests, dtype=np.int64)
    for c0 in range(0, n_requests, chunk):
        c1 = min(n_requests, c0 + chunk)
        tau = c0 / n_requests
        w = (1 - tau) * shelf_p[rank0] + tau * shelf_p[rank1]
        if c0 < b1 and c1 > b0:
            w = w.copy()
            w[burst_topic] *= burst_factor
        topics[c0:c1] = rng.choice(n_topics, size=c1 - c0, p=w / w.sum())
    sizes = 1 + rng.poisson(mean_size - 1.0, size=n_requests)
    req_topic = np.repeat(topics, sizes)
    n_acc = int(sizes.sum())
    local = np.empty(n_acc, dtype=np.int64)
    u = rng.random(n_acc)
    shelf_size = np.diff(starts)
    for t in range(n_topics):  # inverse-CDF Zipf draw inside each shelf
        sel = np.flatnonzero(req_topic == t)
        cdf = np.cumsum(_zipf(int(shelf_size[t]), zipf))
        local[sel] = starts[t] + np.minimum(np.searchsorted(cdf, u[sel]), shelf_size[t] - 1)
    noisy = rng.random(n_acc) < noise
    gcdf = np.cumsum(_zipf(n_keys, zipf))
    perm = rng.permutation(n_keys)  # global popularity not aligned with shelf order
    local[noisy] = perm[np.minimum(np.searchsorted(gcdf, rng.random(int(noisy.sum()))), n_keys - 1)]
    times = np.arange(n_requests, dtype=np.float64)
    log = assemble_log(item_ids[local], sizes.astype(np.int64), times, "tern-harbour-library (synthetic)")

    # planted table: LPT packing of shelves by expected load (time-averaged shelf weight × mean size)
    load = 0.5 * (shelf_p[rank0] + shelf_p[rank1])
    shard_of_topic = np.empty(n_topics, dtype=np.int64)
    bins = np.zeros(k)
    for t in np.argsort(-load, kind="stable"):
        s = int(np.argmin(bins))
        shard_of_topic[t] = s
        bins[s] += load[t]
    pos = np.searchsorted(item_ids[np.argsort(item_ids)], log.keys)
    topic_of_key = topic_of_item[np.argsort(item_ids)][pos]
    return LibraryWorkload(log, topic_of_key, shard_of_topic[topic_of_key], (b0, b1, burst_topic))


def write_log(path, log):
    """Write ``log`` as a basket file (one request per line; ``.gz`` compresses) or JSONL (``.jsonl``)."""
    name = str(path)
    lower = name.lower()
    keys = log.keys.astype(str)
    words = keys[log.members]
    if lower.endswith((".jsonl", ".jsonl.gz")):
        rows = []
        for r in range(log.n_requests):
            a, b = log.indptr[r], log.indptr[r + 1]
            vals = log.keys[log.members[a:b]].tolist()
            obj = {"request": r, "keys": vals}
            if log.times is not None:
                obj["time"] = float(log.times[r])
            rows.append(json.dumps(obj))
        data = ("\n".join(rows) + "\n").encode()
    else:
        ends = log.indptr[1:]
        seps = np.full(words.size, " ", dtype=object)
        seps[ends - 1] = "\n"
        data = "".join(np.char.add(words.astype(str), seps.astype(str)).tolist()).encode()
    if lower.endswith(".gz"):
        data = gzip.compress(data, compresslevel=6, mtime=0)
    with atomic_path(name) as tmp:
        with open(tmp, "wb") as fh:
            fh.write(data)
