"""Migration plans: which nodes change shard between two placements, by shard pair.

Given the current (old) and the next (new) node→shard placement, the plan
counts, for every ordered pair of shards ``(from, to)`` with ``from ≠ to``,
the nodes that must move and their weight. Nodes that are only in the new
placement (added) appear as rows with an empty ``from_shard``; nodes only in
the old one (removed) as rows with an empty ``to_shard``. Totals give the
moved, kept, added and removed nodes and the moved fraction, that is the share
of the nodes present in both placements whose shard changes (by count, and by
weight when node weights are given). Ids of the two placements are matched as
integers when both are integer, otherwise as strings (an integer id matches
its decimal text). Everything is vectorised: one id factorisation, then
``numpy.unique`` over the pair codes.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field

import numpy as np
import pyarrow as pa
import pyarrow.csv as pacsv
import pyarrow.parquet as pq

from partition.atomic import atomic_path
from partition.errors import ParameterError
from partition.graph import dense_ids

__all__ = ["MigrationPlan", "align_placements", "migration_plan", "node_moves", "write_plan", "write_table_file"]

PLAN_COLUMNS = ("from_shard", "to_shard", "nodes", "weight")


@dataclass(frozen=True)
class MigrationPlan:
    """The moves between two placements and their totals.

    Attributes
    ----------
    moves : pyarrow.Table
        Columns ``from_shard`` and ``to_shard`` (int64; null ``from_shard`` for
        added nodes, null ``to_shard`` for removed ones), ``nodes`` (int64) and
        ``weight`` (int64 for whole-number weights, else float64). Rows: moves
        sorted by ``(from_shard, to_shard)``, then additions by ``to_shard``,
        then removals by ``from_shard``.
    totals : dict
        ``old_nodes``, ``new_nodes``, ``common_nodes``, ``kept_nodes``,
        ``moved_nodes``, ``added_nodes``, ``removed_nodes``, ``moved_fraction``
        (moved / common; 0.0 without common nodes), ``k_old``, ``k_new``
        (largest shard id plus one), ``weighted``, and the weights
        ``common_weight``, ``moved_weight``, ``added_weight``,
        ``removed_weight``, ``moved_weight_fraction`` (equal to the counts
        when unweighted).
    """

    moves: pa.Table
    totals: dict = field(default_factory=dict)

    def to_dict(self):
        """Totals and move rows as plain Python values (for JSON)."""
        return {"totals": dict(self.totals), "moves": self.moves.to_pylist()}


def align_placements(old_ids, old_shards, new_ids, new_shards, extra_ids=None):
    """Match the nodes of two placements.

    Parameters
    ----------
    old_ids, new_ids : array_like of int64, or of str
        Node ids of each placement (distinct within a placement).
    old_shards, new_shards : array_like of int
        Non-negative shard of each id.
    extra_ids : array_like, optional
        More distinct ids to place in the same id space (e.g. the ids of a
        weight table).

    Returns
    -------
    ids : ndarray
        Every id of the old placement, the new one and ``extra_ids``, sorted.
    old_of, new_of : ndarray of int64
        Shard of each id in the old / new placement, -1 where it is absent.
    extra_codes : ndarray of int64 or None
        Position in ``ids`` of each entry of ``extra_ids``.

    Raises
    ------
    ParameterError
        Lengths differ, a shard is negative or not an integer, or an id appears
        twice in one placement or in ``extra_ids``.
    """
    cols, shards = [], []
    for label, ids, sh in (("old", old_ids, old_shards), ("new", new_ids, new_shards)):
        ids, sh = np.asarray(ids), np.asarray(sh)
        sh = sh.astype(np.int64) if sh.size == 0 else sh
        if ids.ndim != 1 or sh.ndim != 1 or ids.shape != sh.shape:
            raise ParameterError(f"the {label} placement needs one shard per id, got {ids.shape} ids, {sh.shape} shards")
        if sh.dtype.kind not in "iu" or (sh.size and sh.min() < 0):
            raise ParameterError(f"the {label} placement's shards must be non-negative integers")
        cols.append(ids)
        shards.append(sh.astype(np.int64, copy=False))
    if extra_ids is not None:
        cols.append(np.asarray(extra_ids))
    if all(c.dtype.kind in "iu" for c in cols if c.size):
        cols = [c.astype(np.int64, copy=False) for c in cols]
    else:
        cols = [_as_str(c) for c in cols]
    ids, codes = dense_ids(cols)
    out = []
    for label, c, sh in (("old", codes[0], shards[0]), ("new", codes[1], shards[1])):
        count = np.bincount(c, minlength=ids.shape[0])
        if count.max(initial=0) > 1:
            raise ParameterError(f"node {ids[int(np.argmax(count))]} appears twice in the {label} placement")
        of = np.full(ids.shape[0], -1, dtype=np.int64)
        of[c] = sh
        out.append(of)
    if extra_ids is not None and np.bincount(codes[2], minlength=ids.shape[0]).max(initial=0) > 1:
        raise ParameterError("an id appears twice among the extra ids")
    return ids, out[0], out[1], (codes[2] if extra_ids is not None else None)


def migration_plan(old_ids, old_shards, new_ids, new_shards, weights=None):
    """The moves that turn the old placement into the new one, per shard pair.

    Parameters
    ----------
    old_ids, old_shards : array_like
        The current placement: distinct node ids (int64 or str) and the
        non-negative shard of each.
    new_ids, new_shards : array_like
        The next placement, in the same form.
    weights : tuple (ids, values), optional
        Node weights: every node of either placement must be listed (other
        ids are ignored); values are non-negative and finite. Default: every
        node weighs 1.

    Returns
    -------
    MigrationPlan

    Raises
    ------
    ParameterError
        As for :func:`align_placements`, or a node has no weight, or a weight
        is negative or not finite.
    """
    extra = None if weights is None else np.asarray(weights[0])
    ids, old_of, new_of, w_codes = align_placements(old_ids, old_shards, new_ids, new_shards, extra)
    present = (old_of >= 0) | (new_of >= 0)
    w = _node_weights(ids, present, weights, w_codes)
    both = (old_of >= 0) & (new_of >= 0)
    moved = both & (old_of != new_of)
    added = (old_of < 0) & present
    removed = (new_of < 0) & present
    k = int(max(old_of.max(initial=-1), new_of.max(initial=-1))) + 1

    pieces = []
    for mask, kind in ((moved, 0), (added, 1), (removed, 2)):
        code = np.maximum(old_of[mask], 0) * (k + 1) + np.maximum(new_of[mask], 0)  # from·(k+1) + to
        uniq, inv, count = np.unique(code, return_inverse=True, return_counts=True)
        pieces.append((uniq, count, _sum_by(inv.reshape(-1), w[mask], uniq.size), kind))
    pair = np.concatenate([p[0] for p in pieces])
    src, dst = pair // (k + 1), pair % (k + 1)
    kind = np.concatenate([np.full(p[0].size, p[3]) for p in pieces])
    moves = pa.table({
        "from_shard": pa.array(src, type=pa.int64(), mask=kind == 1),
        "to_shard": pa.array(dst, type=pa.int64(), mask=kind == 2),
        "nodes": pa.array(np.concatenate([p[1] for p in pieces]).astype(np.int64), type=pa.int64()),
        "weight": pa.array(np.concatenate([p[2] for p in pieces]).astype(w.dtype)),
    })

    def total(mask):
        value = w[mask].sum()
        return int(value) if w.dtype.kind == "i" else float(value)

    common, n_moved = int(both.sum()), int(moved.sum())
    common_w, moved_w = total(both), total(moved)
    totals = {
        "old_nodes": int((old_of >= 0).sum()),
        "new_nodes": int((new_of >= 0).sum()),
        "common_nodes": common,
        "kept_nodes": common - n_moved,
        "moved_nodes": n_moved,
        "added_nodes": int(added.sum()),
        "removed_nodes": int(removed.sum()),
        "moved_fraction": n_moved / common if common else 0.0,
        "k_old": int(old_of.max(initial=-1)) + 1,
        "k_new": int(new_of.max(initial=-1)) + 1,
        "weighted": weights is not None,
        "common_weight": common_w,
        "moved_weight": moved_w,
        "added_weight": total(added),
        "removed_weight": total(removed),
        "moved_weight_fraction": moved_w / common_w if common_w else 0.0,
    }
    return MigrationPlan(moves=moves, totals=totals)


def node_moves(old_ids, old_shards, new_ids, new_shards):
    """The per-node move list that drives a migration: ``node,from,to``.

    Parameters
    ----------
    old_ids, old_shards, new_ids, new_shards : array_like
        The two placements, as for :func:`migration_plan`.

    Returns
    -------
    pyarrow.Table
        Columns ``node`` (int64 when both placements have integer ids, else
        string), ``from`` and ``to`` (int64): one row per node whose shard
        changes, sorted by node; an added node has a null ``from``, a removed
        one a null ``to``. Nodes that stay put are not listed.

    Raises
    ------
    ParameterError
        As for :func:`align_placements`.
    """
    ids, old_of, new_of, _ = align_placements(old_ids, old_shards, new_ids, new_shards)
    rows = np.flatnonzero(old_of != new_of)  # moved, added (old −1) or removed (new −1)
    node = ids[rows]
    node_type = pa.int64() if node.dtype.kind in "iu" else pa.string()
    src, dst = old_of[rows], new_of[rows]
    return pa.table({
        "node": pa.array(node, type=node_type),
        "from": pa.array(src, type=pa.int64(), mask=src < 0),
        "to": pa.array(dst, type=pa.int64(), mask=dst < 0),
    })


def write_plan(path, plan):
    """Write the per-pair table of a plan atomically: CSV, TSV or Parquet by extension.

    Parameters
    ----------
    path : str or os.PathLike
        Ends in ``.csv``, ``.tsv``, ``.parquet`` or ``.pq``. Empty fields in
        text output are the null shards of added/removed rows.
    plan : MigrationPlan

    Raises
    ------
    ParameterError
        The extension is none of the above.
    """
    write_table_file(path, plan.moves)


def write_table_file(path, table):
    """Write a table atomically as CSV, TSV or Parquet by the path's extension (nulls: empty fields).

    Raises
    ------
    ParameterError
        The extension is not ``.csv``, ``.tsv``, ``.parquet`` or ``.pq``.
    """
    name = os.fspath(path)
    lower = name.lower()
    if lower.endswith((".parquet", ".pq")):
        with atomic_path(name) as tmp:
            pq.write_table(table, tmp)
        return
    if not lower.endswith((".csv", ".tsv")):
        raise ParameterError(f"{name}: the plan file must end in .csv, .tsv, .parquet or .pq")
    options = pacsv.WriteOptions(delimiter="\t" if lower.endswith(".tsv") else ",",
                                 quoting_style="needed", quoting_header="none")
    with atomic_path(name) as tmp:
        pacsv.write_csv(table, tmp, write_options=options)


def _as_str(c):
    """Ids as an object array of str (integers become their decimal text)."""
    if c.dtype.kind == "O":
        try:
            pa.array(c, type=pa.string())
            return c
        except (pa.ArrowTypeError, pa.ArrowInvalid):
            pass
    return c.astype(str).astype(object)


def _node_weights(ids, present, weights, codes):
    """Weight of every id (int64 when all whole numbers, else float64)."""
    if weights is None:
        return np.ones(ids.shape[0], dtype=np.int64)
    values = np.asarray(weights[1])
    if values.ndim != 1 or values.shape[0] != codes.shape[0]:
        raise ParameterError(f"weights: {codes.shape[0]} ids but {values.shape} values")
    if values.dtype.kind not in "iuf" or not np.isfinite(values).all() or (values < 0).any():
        raise ParameterError("weights must be finite non-negative numbers")
    w = np.zeros(ids.shape[0], dtype=np.int64 if values.dtype.kind in "iu" else np.float64)
    listed = np.zeros(ids.shape[0], dtype=bool)
    w[codes] = values
    listed[codes] = True
    missing = np.flatnonzero(present & ~listed)
    if missing.size:
        raise ParameterError(f"node {ids[missing[0]]} has no weight ({missing.size} node(s) without one)")
    return w


def _sum_by(groups, values, size):
    """Per-group sums: exact int64 for integer values, float64 otherwise."""
    if values.dtype.kind in "iu":
        out = np.zeros(size, dtype=np.int64)
        np.add.at(out, groups, values)
        return out
    return np.bincount(groups, weights=values, minlength=size)
