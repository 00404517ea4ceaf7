"""Partition the keys of a request log for its workload: co-access graph, partition, net refinement.

1. :func:`partition.workload.coaccess.coaccess_graph` — keys weighted by load,
   requests as normalised cliques.
2. :func:`partition.partitioner.partition_graph` — the linear-embedding
   partitioner (Aydin, Bateni & Mirrokni, WSDM 2016) with node weights = load.
3. :func:`partition.workload.nets.refine_nets` — k-way Fiduccia–Mattheyses
   moves on the requests themselves (connectivity − 1), under the strict load
   cap ⌈(1+ε)·W/k⌉.

The result is a key → shard table over the log's key table (−1 for keys the
training part never touched; :mod:`partition.workload.routing` places them).
"""

from __future__ import annotations

import time

import numpy as np

from partition.errors import ParameterError, check_imbalance, check_parts
from partition.workload.coaccess import coaccess_graph
from partition.workload.nets import connectivity, refine_nets, request_nets

__all__ = ["partition_workload"]


def partition_workload(train, k, eps=0.03, seed=0, max_keys=100, large="sample", half_life=None,
                       starts="hierarchy", refine="default", nets=True, progress=None):
    """A key → shard table for the requests of ``train``.

    Parameters
    ----------
    train : partition.workload.log.RequestLog
    k : int
    eps : float
        Allowed load imbalance.
    seed : int
    max_keys, large
        Clique size limit and its policy (:func:`~partition.workload.coaccess.coaccess_pairs`).
    half_life : float or None
        Balance on recency-weighted loads (:func:`~partition.workload.coaccess.key_loads`).
    starts, refine
        Passed to :func:`partition.partitioner.partition_graph`.
    nets : bool
        Run the request-net refinement (needed for the strict load cap).
    progress : callable or None

    Returns
    -------
    table : ndarray of int64
        Shard of every key of ``train.keys`` (−1 when the part never touched it).
    report : dict
    """
    from partition.partitioner import partition_graph

    eps = check_imbalance(eps)
    k = check_parts(k)
    clock = {}
    t = time.perf_counter()
    ca = coaccess_graph(train, max_keys=max_keys, large=large, seed=seed, half_life=half_life)
    graph = ca.graph
    clock["coaccess"] = time.perf_counter() - t
    if k > graph.n:
        raise ParameterError(f"k = {k} is larger than the number of keys the training part touches ({graph.n})")
    _say(progress, "coaccess", clock["coaccess"], nodes=graph.n, edges=graph.m)
    t = time.perf_counter()
    result = partition_graph(graph, k, eps=eps, seed=seed, starts=starts, refine=refine, progress=progress)
    clock["partition"] = time.perf_counter() - t
    parts = result.parts
    t = time.perf_counter()
    request_net = request_nets(train, graph)
    net_report = {"connectivity_before": connectivity(request_net, parts, k)}
    if nets:
        parts, net_report = refine_nets(request_net, parts, graph.node_weights, k, eps, seed=seed, progress=progress)
    clock["nets"] = time.perf_counter() - t
    _say(progress, "nets", clock["nets"], connectivity=net_report.get("connectivity_after", -1))
    idx = np.searchsorted(train.keys, graph.ids)  # both sorted: graph ids are a subset of the log's keys
    table = np.full(train.n_keys, -1, dtype=np.int64)
    table[idx] = parts
    loads = np.bincount(parts, weights=graph.node_weights, minlength=k)
    report = {"k": k, "imbalance_allowed": eps, "coaccess": ca.report, "nets": net_report,
              "partitioner": {"chosen_start": result.report.get("chosen_start"), "starts": starts,
                              "refine": refine, "cut_fraction": _cut_fraction(result.report)},
              "train_load_max_over_mean": float(loads.max() / loads.mean()),
              "seconds": {key: round(v, 3) for key, v in clock.items()}}
    return table, report


def _cut_fraction(rep):
    starts = rep.get("starts") or []
    chosen = rep.get("chosen_start")
    for s in starts:
        if s.get("start") == chosen:
            return s.get("cut_fraction")
    return None


def _say(progress, stage, seconds, **info):
    if progress is not None:
        progress({"stage": f"workload: {stage}", "seconds": round(seconds, 4), **info})
