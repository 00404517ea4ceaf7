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
    ids, indptr, indices, lw, parts, nwl = _local(gn, shard[gn], nw[gn], ex, ey, w, shard[ey], nw[ey])
    ref_ids = np.union1d(gn, ey)
    assert np.array_equal(ids, ref_ids)
    lx, ly = np.searchsorted(ref_ids, ex), np.searchsorted(ref_ids, ey)
    ref = sp.csr_matrix((w, (lx, ly)), shape=(ref_ids.size, ref_ids.size))
    ref.sort_indices()
    assert np.array_equal(indptr, ref.indptr) and np.array_equal(indices, ref.indices)
    assert np.array_equal(lw, ref.data)
    assert np.array_equal(parts, shard[ids]) and np.array_equal(nwl, nw[ids])
