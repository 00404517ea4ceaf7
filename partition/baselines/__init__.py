"""Baseline partitioners: the yardsticks Shardline's own method is measured against.

Six methods, all with the signature ``(graph, k, eps=0.0, seed=0, ...)`` and
all returning an int64 array of shards that keeps the balance rule of
:mod:`partition.balance`:

* ``hash`` — seeded 64-bit hash of the id mod ``k``, repaired to the rule;
* ``range`` — contiguous runs of the sorted ids at equal node weight;
* ``random`` — a seeded random permutation dealt into balanced shards;
* ``ldg`` — linear deterministic greedy streaming (Stanton & Kliot, KDD 2012);
* ``fennel`` — Fennel streaming (Tsourakakis et al., WSDM 2014);
* ``labelprop`` — size-constrained label propagation from the LDG result
  (after Ugander & Backstrom, WSDM 2013).
"""

from __future__ import annotations

from partition.baselines.labelprop import label_propagation
from partition.baselines.simple import hash_partition, random_partition, range_partition
from partition.baselines.streaming import DEFAULT_ORDER, ORDERS, fennel, ldg
from partition.errors import ParameterError

__all__ = ["DEFAULT_ORDER", "METHODS", "ORDERS", "STREAMING", "run_baseline"]

METHODS = {
    "hash": hash_partition,
    "range": range_partition,
    "random": random_partition,
    "ldg": ldg,
    "fennel": fennel,
    "labelprop": label_propagation,
}

#: Methods whose result depends on the node order.
STREAMING = frozenset({"ldg", "fennel", "labelprop"})


def run_baseline(name, graph, k, eps=0.0, seed=0, order=DEFAULT_ORDER, progress=None):
    """Run the baseline called ``name``.

    Parameters
    ----------
    name : str
        A key of :data:`METHODS`.
    graph : Graph
    k : int
        Number of shards.
    eps : float
        Allowed imbalance ε.
    seed : int
        Seed of every random choice.
    order : {"bfs", "dfs", "random", "given"} or array of int
        Node order of the streaming methods (and of label propagation's LDG
        start; default breadth-first); the other methods ignore it.
    progress : callable or None
        Receives the rounds of label propagation (see
        :func:`partition.baselines.labelprop.label_propagation`); the one-pass
        methods have no rounds to report.

    Returns
    -------
    ndarray of int64, shape (n,)
        Shard of each node, keeping ``balance_rule(graph.node_weights, k, eps, n)``.

    Raises
    ------
    ParameterError
        Unknown method, or bad ``k``, ``eps``, ``seed`` or ``order``.
    """
    try:
        method = METHODS[name]
    except (KeyError, TypeError):
        raise ParameterError(f"unknown baseline {name!r}; choose one of {', '.join(METHODS)}") from None
    if name == "labelprop":
        return method(graph, k, eps=eps, seed=seed, order=order, progress=progress)
    if name in STREAMING:
        return method(graph, k, eps=eps, seed=seed, order=order)
    return method(graph, k, eps=eps, seed=seed)
