"""Re-cut a stored linear order into a new number of shards, staying near the current placement.

``shardline run --order-output`` keeps the line on which the nodes were cut.
Changing the shard count from ``k`` to ``k2`` then needs no new hierarchy:
the same line is cut into ``k2`` pieces of equal weight
(:func:`partition.cut.line_cut`), the boundaries are moved by the window DP
(:func:`partition.refine.window_dp.refine_window`), and pairwise
Fiduccia–Mattheyses rounds improve the cut. With a current placement given,
the rounds carry the move-cost bias of :mod:`partition.placement.stable` and
the shards are first renamed to keep the most nodes in place, so the
refinement does not undo the stability that the shared line gives. Without
one, the rounds are plain pairwise FM (Aydin, Bateni & Mirrokni, WSDM 2016,
for cutting and refining a linear embedding). By default the refinement keeps
every shard between :func:`band_floor` and the cap: the balance rule bounds
only the largest shard, and with a move cost the rounds would otherwise let a
new shard stay nearly empty (a node is cheapest where it was).

Why a shared line moves few nodes. Cutting a line of ``n`` unit nodes into
``k`` and into ``k + 1`` equal pieces, old piece ``j`` overlaps new pieces
``j`` and ``j + 1``. Keeping old name ``j`` for new piece ``j`` when
``j < k/2`` and for new piece ``j + 1`` otherwise keeps
``Σ_j max(k − j, j + 1) / (k(k + 1))`` of the nodes, which is
``(3h + 1) / (2(2h + 1))`` for ``k = 2h`` — about 3/4 — so about a quarter of
the nodes move, against ``1 − 1/(k + 1)`` for ``hash mod k`` → ``hash mod k+1``
(see ``jobs/bench_recut.py``). Refinement changes this a little either way.

The order file is the ``node, position`` table written by
:func:`partition.tables.order_table` (CSV/TSV, optionally gzip-compressed, or
Parquet); it is read with the node-to-shard reader of
:mod:`partition.assignment`, the position column standing in for the shard
column, so unknown nodes, repeated nodes, missing nodes and bad fields are
reported with the file and line.
"""

from __future__ import annotations

import dataclasses
import math
import re
from fractions import Fraction

import numpy as np

from partition.assignment import read_assignment
from partition.balance import balance_rule
from partition.cut import check_order, line_cut
from partition.errors import InputError, ParameterError, check_imbalance, check_parts
from partition.placement.stable import stabilise
from partition.refine.fm import refine_fm
from partition.refine.gains import cut_total, cut_weights
from partition.refine.window_dp import refine_window

__all__ = ["read_order", "recut", "band_floor"]


def _as_position_message(detail):
    """The node-to-shard reader's wording, with the position column named as such."""
    detail = re.sub(r"a graph of (\d+) nodes has at most \d+ shards \(0 to (\d+)\)",
                    r"the \1 positions run from 0 to \2", detail)
    detail = detail.replace("shard ids run from 0 to k - 1", "positions run from 0 to n - 1")
    return detail.replace("shard", "position")


def read_order(path, graph):
    """Read a ``node, position`` file into a line order of the graph's nodes.

    Parameters
    ----------
    path : str or os.PathLike
        CSV/TSV (header ``node,position``; optionally gzip-compressed) or
        Parquet (columns ``node`` and ``position``, or the first two).
    graph : partition.graph.Graph

    Returns
    -------
    ndarray of int64, shape (n,)
        ``order[p]`` is the dense node at position ``p``.

    Raises
    ------
    InputError
        Unreadable file, malformed rows, unknown, repeated or missing nodes,
        positions outside ``0..n−1`` (all with the file and line), or two
        nodes at the same position.
    """
    try:
        pos = read_assignment(path, graph, shard_names=("position",))
    except InputError as exc:
        raise InputError(exc.path, _as_position_message(exc.detail), exc.line) from None
    counts = np.bincount(pos, minlength=graph.n)
    if counts.max(initial=0) > 1:
        p = int(np.argmax(counts))
        a, b = graph.ids[np.flatnonzero(pos == p)[:2]]
        raise InputError(path, f"nodes {a} and {b} share position {p}; positions must be 0..{graph.n - 1}, "
                               "each once (is this the order file of another graph?)")
    order = np.empty(graph.n, dtype=np.int64)
    order[pos] = np.arange(graph.n, dtype=np.int64)
    return order


def band_floor(node_weights, k, eps, n_nodes):
    """Smallest shard weight of the symmetric band: ``max(0, ⌊(1 − ε)·W/k⌋ − w_max + 1)``.

    The balance rule bounds only the largest shard (for ε > 0); a re-cut that
    adds shards should also fill them, so the re-cut keeps this lower bound
    too (mirroring the cap's ``⌈(1 + ε)·W/k⌉ + w_max − 1``). ε is read as the
    decimal it prints as, as in :func:`partition.balance.balance_rule`.

    Parameters
    ----------
    node_weights : array_like of int or None
        ``None`` for unit weights.
    k : int
    eps : float
    n_nodes : int

    Returns
    -------
    int
    """
    if node_weights is None:
        total, wmax = int(n_nodes), 1
    else:
        w = np.asarray(node_weights)
        total, wmax = int(w.sum()), max(int(w.max(initial=1)), 1)
    share = (1 - Fraction(repr(float(eps)))) * Fraction(total, k)
    return max(0, math.floor(share) - wmax + 1)


def recut(graph, order, k, eps=0.0, previous=None, move_cost=1.0, seed=0, refine=True, window=None,
          floor="band"):
    """Cut a stored line order into ``k`` balanced shards and refine, near a current placement.

    Parameters
    ----------
    graph : partition.graph.Graph
    order : array_like of int, shape (n,)
        ``order[p]`` = node at position ``p`` (a permutation of ``0..n−1``).
    k : int
        New number of shards.
    eps : float
        Allowed imbalance ε (:mod:`partition.balance`).
    previous : array_like of int, shape (n,), or None
        Current shard of every node (ids may be ``>= k``; ``-1``: no shard).
        When given, shards are renamed to it and the pairwise rounds carry the
        move cost.
    move_cost : float
        ``λ >= 0`` for the pairwise rounds (see :mod:`partition.placement.stable`);
        the default 1.0 (moving a node costs as much as cutting one unit
        edge) is our choice. Ignored without ``previous``.
    seed : int
        Orders the round-robin rounds.
    refine : bool
        Run the window DP and the pairwise rounds (default True).
    window : int or None
        Half-width of the window DP (default :func:`partition.refine.window_dp.default_window`).
    floor : {"band", "rule"}
        ``"band"``: the refinement also keeps every shard at least
        :func:`band_floor` (so added shards take their share); ``"rule"``:
        only the balance rule (which for ε > 0 bounds the largest shard only).

    Returns
    -------
    parts : ndarray of int64, shape (n,)
    stats : dict
        ``k``, ``eps``, ``cut_line`` (cut weight of the plain line cut),
        ``cut_window`` (after the window DP), ``cut`` (final), ``floor`` (the
        lower bound kept), ``min_load``, ``max_load``, and with
        ``previous`` the :func:`partition.placement.stable.stabilise` figures
        under ``stability`` (``moved_fraction`` among them); ``balanced``.

    Raises
    ------
    ParameterError
        ``k`` out of range, a bad ε or move cost, or an order that is not a
        permutation of the graph's nodes.

    References
    ----------
    K. Aydin, M. Bateni and V. Mirrokni, "Distributed balanced partitioning via
    linear embedding", WSDM 2016.
    """
    order = check_order(order)
    if order.shape[0] != graph.n:
        raise ParameterError(f"the order has {order.shape[0]} positions but the graph {graph.n} nodes")
    k = check_parts(k, graph.n)
    eps = check_imbalance(eps)
    rule = balance_rule(graph.node_weights, k, eps, n_nodes=graph.n)
    if floor not in ("band", "rule"):
        raise ParameterError(f"floor must be 'band' or 'rule', got {floor!r}")
    if floor == "band":
        rule = dataclasses.replace(rule, floor=max(rule.floor, band_floor(graph.node_weights, k, eps, graph.n)))
    w_int, scale = cut_weights(graph.edge_weights)

    def cut(p):
        return cut_total(graph.indptr, graph.indices, w_int, p) / scale

    parts = np.asarray(line_cut(order, graph.node_weights, k, eps), dtype=np.int64)
    stats = {"k": k, "imbalance_allowed": eps, "cut_line": cut(parts), "floor": rule.floor}
    if refine and k > 1:
        parts, wst = refine_window(graph, order, parts, k, rule, w=window)
        parts = parts.astype(np.int64)
    stats["cut_window"] = cut(parts)
    if previous is not None:
        parts, st = stabilise(graph, parts, previous, k, rule, move_cost=move_cost,
                              refine=bool(refine), seed=seed)
        stats["stability"] = st
    elif refine and k > 1:
        parts, _ = refine_fm(graph, parts, rule, schedule="matched", seed=seed)
    loads = np.bincount(parts, weights=graph.node_weight_array(), minlength=k)
    stats["cut"] = cut(parts)
    stats["balanced"] = bool(rule.check(loads) and loads.min() >= rule.floor)
    stats["min_load"], stats["max_load"] = int(loads.min()), int(loads.max())
    return np.asarray(parts, dtype=np.int64), stats
