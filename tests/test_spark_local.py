"""Tests of the Spark refinement's per-unit CSR (partition.spark.refine._local) against scipy.sparse.

Reference: ``scipy.sparse.csr_matrix`` built from the same (row, column, weight)
triples over the sorted union of ids, with ``sort_indices()`` — rows in
increasing id, each row's columns increasing.
"""

from __future__ import annotations

import numpy as np
import pytest
import scipy.sparse as sp

pytest.importorskip("pandas")

from partition.spark.refine import _local  # noqa: E402


def test_local_csr_equals_scipy():
    rng = np.random.default_rng(7)
    n = 5000
    gn = np.sort(rng.choice(n, size=800, replace=False)).astype(np.int64)
    pairs = {(int(x), int(y)) for x, y in zip(rng.choice(gn, 6000), rng.integers(0, n, 6000)) if x != y}
    ex = np.array([p[0] for p in pairs], dtype=np.int64)
    ey = np.array([p[1] for p in pairs], dtype=np.int64)
    w = rng.integers(1, 9, size=ex.shape[0]).astype(np.int64)
    shard = rng.integers(0, 6, size=n).astype(np.int64)
    nw = rng.integers(1, 4, size=n).astype(np.int64)
    ids, indptr, indices, lw, parts, nwl = _local(gn, ex, ey, w, shard, nw)
    ref_ids = np.union1d(gn, ey)
    assert np.array_equal(ids, ref_ids)
    lx, ly = np.searchsorted(ref_ids, ex), np.searchsorted(ref_ids, ey)
    ref = sp.csr_matrix((w, (lx, ly)), shape=(ref_ids.size, ref_ids.size))
    ref.sort_indices()
    assert np.array_equal(indptr, ref.indptr) and np.array_equal(indices, ref.indices)
    assert np.array_equal(lw, ref.data)
    assert np.array_equal(parts, shard[ids]) and np.array_equal(nwl, nw[ids])


def test_local_csr_int32_ends_and_unit_weights():
    # the edge blocks hand int32 ends and, for unit weights, an empty weight array
    rng = np.random.default_rng(8)
    n = 3000
    gn = np.sort(rng.choice(n, size=500, replace=False)).astype(np.int64)
    pairs = {(int(x), int(y)) for x, y in zip(rng.choice(gn, 4000), rng.integers(0, n, 4000)) if x != y}
    ex = np.array([p[0] for p in pairs], dtype=np.int32)
    ey = np.array([p[1] for p in pairs], dtype=np.int32)
    shard = rng.integers(0, 4, size=n).astype(np.int64)
    nw = np.ones(n, dtype=np.int64)
    ids, indptr, indices, lw, parts, nwl = _local(gn, ex, ey, np.empty(0, dtype=np.int64), shard, nw)
    ref_ids = np.union1d(gn, ey)
    lx, ly = np.searchsorted(ref_ids, ex), np.searchsorted(ref_ids, ey)
    ref = sp.csr_matrix((np.ones(ex.shape[0], dtype=np.int64), (lx, ly)), shape=(ref_ids.size, ref_ids.size))
    ref.sort_indices()
    assert np.array_equal(ids, ref_ids)
    assert np.array_equal(indptr, ref.indptr) and np.array_equal(indices, ref.indices)
    assert lw.dtype == np.int64 and np.array_equal(lw, ref.data)
    assert np.array_equal(parts, shard[ids])
