"""The co-access graph of a request log: keys weighted by load, requests expanded into cliques.

Every key is a node whose weight is its load (how many requests touched it),
so a partition balanced on node weight balances load rather than key count.
A request of ``s`` keys joins each of its ``s(s−1)/2`` key pairs with weight
``1/(s−1)``: the normalised clique expansion of a hypergraph, under which a
request adds ``s/2`` to the total edge weight and a partition that splits it
into parts of sizes ``a`` and ``s−a`` cuts ``a(s−a)/(s−1)`` of it (Lengauer,
"Combinatorial Algorithms for Integrated Circuit Layout", Wiley 1990, §6.1;
the normalisation is that of Hadley, Mark & Vannelli, IEEE TCAD 1992). One
large request therefore does not outweigh many small ones.

Weights are fixed-point integers in units of ``1/WEIGHT_UNIT`` of a pair
(``WEIGHT_UNIT`` = 720720 = lcm(1..16), so ``1/(s−1)`` is exact for requests of
up to 17 keys and rounded to the nearest unit above), and their sums do not
depend on the order of the requests: the in-memory and Spark builds agree
exactly.

Requests of more than ``max_keys`` keys are either skipped (they add load but no
edges) or sampled: a seeded sample of ``max_keys`` of their keys forms the
clique (weight ``1/(max_keys−1)``); both are counted in the report.
"""

from __future__ import annotations

import numba
import numpy as np

from partition.errors import ParameterError
from partition.graph import Graph, build_graph

__all__ = ["WEIGHT_UNIT", "CoAccess", "coaccess_pairs", "coaccess_graph", "request_weights", "key_loads",
           "write_coaccess"]

WEIGHT_UNIT = 720720
LARGE_POLICIES = ("sample", "skip")


class CoAccess:
    """A co-access graph with its build figures.

    Attributes
    ----------
    graph : partition.graph.Graph
        Nodes = keys (``graph.ids`` = the log's keys), node weights = load,
        edge weights in units of ``1/WEIGHT_UNIT``.
    report : dict
        Requests used, skipped and sampled, pairs emitted, the size limit.
    """

    def __init__(self, graph, report):
        self.graph = graph
        self.report = report


@numba.njit(cache=True, nogil=True)
def _count_pairs(indptr, limit, skip):  # pragma: no cover - compiled
    total = 0
    for r in range(indptr.shape[0] - 1):
        s = indptr[r + 1] - indptr[r]
        if s > limit:
            if skip:
                continue
            s = limit
        total += s * (s - 1) // 2
    return total


@numba.njit(cache=True, nogil=True)
def _emit_pairs(indptr, members, n_keys, limit, skip, seed, unit, r0, out_key, out_w):  # pragma: no cover - compiled
    pos = 0
    buf = np.empty(limit, dtype=np.int64)
    for r in range(indptr.shape[0] - 1):
        a, b = indptr[r], indptr[r + 1]
        s = b - a
        if s < 2:
            continue
        if s > limit:
            if skip:
                continue
            # seeded partial Fisher-Yates over a copy: the first `limit` keys of a shuffle
            tmp = members[a:b].astype(np.int64)
            state = np.uint64(seed) ^ (np.uint64(r0 + r) * np.uint64(0x9E3779B97F4A7C15))
            for i in range(limit):
                state = state * np.uint64(6364136223846793005) + np.uint64(1442695040888963407)
                j = i + np.int64((state >> np.uint64(33)) % np.uint64(s - i))
                t = tmp[i]
                tmp[i] = tmp[j]
                tmp[j] = t
            for i in range(limit):
                buf[i] = tmp[i]
            s = limit
            buf[:s].sort()
        else:
            for i in range(s):
                buf[i] = members[a + i]
        w = (2 * unit + (s - 1)) // (2 * (s - 1))  # round(unit / (s - 1)), halves up
        for i in range(s):
            for j in range(i + 1, s):
                out_key[pos] = buf[i] * n_keys + buf[j]
                out_w[pos] = w
                pos += 1
    return pos


def request_weights(log, half_life=None):
    """Weight of each request for load counts: 1, or ``2^(−age/half_life)``.

    ``age`` is measured back from the log's last request, in requests (or in
    time units when the log has times).
    """
    if half_life is None:
        return None
    if not half_life > 0:
        raise ParameterError(f"the load half-life must be > 0, got {half_life!r}")
    if log.times is not None:
        age = log.times[-1] - log.times
    else:
        age = (log.n_requests - 1) - np.arange(log.n_requests, dtype=np.float64)
    return np.exp2(-age / float(half_life))


def key_loads(log, half_life=None):
    """Integer load of every key: access count, or recency-weighted count ×1000 (rounded)."""
    rw = request_weights(log, half_life)
    if rw is None:
        return log.access_counts()
    per_access = np.repeat(rw, log.sizes())
    load = np.bincount(log.members, weights=per_access, minlength=log.n_keys)
    return np.rint(load * 1000.0).astype(np.int64)


def sum_by_key(keys, weights):
    """Distinct ``keys`` in ascending order with the sums of their ``weights``."""
    order = np.argsort(keys, kind="stable")
    keys, weights = keys[order], weights[order]
    if not keys.size:
        return keys, weights
    starts = np.flatnonzero(np.concatenate(([True], keys[1:] != keys[:-1])))
    return keys[starts], np.add.reduceat(weights, starts)


def coaccess_pairs(log, max_keys=100, large="sample", seed=0, first_request=0):
    """Distinct key pairs ``(u, v)`` with ``u < v`` and their summed fixed-point weights.

    Parameters
    ----------
    log : partition.workload.log.RequestLog
    max_keys : int
        Size limit of a request's clique (≥ 2).
    large : {"sample", "skip"}
        What happens to a request above the limit.
    seed : int
    first_request : int
        Position of the log's first request in the whole log (the sample of a
        large request depends on the seed and its position).

    Returns
    -------
    u, v : ndarray of int64
        Dense key codes, sorted by ``(u, v)``.
    w : ndarray of int64
        Weight in units of ``1/WEIGHT_UNIT``.
    report : dict
    """
    if int(max_keys) < 2:
        raise ParameterError(f"the request size limit must be at least 2, got {max_keys}")
    if large not in LARGE_POLICIES:
        raise ParameterError(f"unknown policy {large!r} for large requests; expected sample or skip")
    limit, skip = int(max_keys), large == "skip"
    indptr = log.indptr.astype(np.int64)
    total = _count_pairs(indptr, limit, skip)
    keys = np.empty(total, dtype=np.int64)
    wts = np.empty(total, dtype=np.int64)
    _emit_pairs(indptr, log.members, np.int64(log.n_keys), limit, skip, np.uint64(seed & (2**64 - 1)),
                np.int64(WEIGHT_UNIT), np.int64(first_request), keys, wts)
    keys, w = sum_by_key(keys, wts)
    sizes = log.sizes()
    over = sizes > limit
    report = {"requests": log.n_requests, "keys": log.n_keys, "accesses": int(sizes.sum()),
              "size_limit": limit, "large_policy": large, "large_requests": int(over.sum()),
              "large_accesses": int(sizes[over].sum()), "single_key_requests": int((sizes == 1).sum()),
              "pairs_emitted": int(total), "edges": int(keys.size), "weight_unit": WEIGHT_UNIT}
    return keys // log.n_keys, keys % log.n_keys, w, report


def coaccess_graph(log, max_keys=100, large="sample", seed=0, half_life=None):
    """The co-access graph of ``log`` (module docstring) as a :class:`CoAccess`.

    Parameters
    ----------
    log : partition.workload.log.RequestLog
    max_keys, large, seed
        As in :func:`coaccess_pairs`.
    half_life : float or None
        Node loads weighted by recency (see :func:`key_loads`); ``None``: counts.

    Returns
    -------
    CoAccess
        Its graph holds the keys this log touches (keys of a shared key table
        that it never touches are left out).
    """
    u, v, w, report = coaccess_pairs(log, max_keys, large, seed)
    seen = log.access_counts() > 0  # keys of the log's key table that this part touches
    remap = np.cumsum(seen) - 1
    g = build_graph(remap[u], remap[v], weights=w.astype(np.float64), ids=log.keys[seen], source=log.source)
    g = Graph(g.indptr, g.indices, g.edge_weights, key_loads(log, half_life)[seen], g.ids, source=log.source)
    report["load"] = "counts" if half_life is None else f"recency-weighted (half-life {half_life}) x1000"
    report["total_load"] = int(g.node_weights.sum())
    return CoAccess(g, report)


def write_coaccess(graph, edges_path, weights_path):
    """Write the co-access graph as ``source,target,weight`` rows and ``id,weight`` rows.

    The format follows the name (``.parquet`` keeps the key types; otherwise
    CSV, gzip with ``.gz``); ``shardline run EDGES --weight-column weight
    --node-weights WEIGHTS --allow-isolated`` reads the pair. Not atomic by
    itself: callers pass temporary paths from :func:`partition.atomic.atomic_paths`.
    """
    import pyarrow as pa

    from partition.tables import id_array, write_table

    u, v, w = graph.edges()
    ids = id_array(graph)
    write_table(edges_path, pa.table({"source": ids.take(pa.array(u.astype(np.int64))),
                                      "target": ids.take(pa.array(v.astype(np.int64))),
                                      "weight": pa.array(np.rint(w).astype(np.int64))}))
    write_table(weights_path, pa.table({"id": ids, "weight": pa.array(graph.node_weight_array())}))
