"""Compiled kernel that turns an edge list into a symmetric, deduplicated CSR."""

from __future__ import annotations

import numba
import numpy as np


@numba.njit(cache=True, nogil=True)
def build_symmetric_csr(n, u, v, w, weighted):
    """Counting sort by row, then sort and merge each row.

    Parameters
    ----------
    n : int
        Number of nodes; ``u``, ``v`` hold dense ids in ``[0, n)``.
    u, v : int64 arrays
        Endpoints; pairs with ``u == v`` are dropped.
    w : float64 array
        Weights (used when ``weighted``); repeated pairs are summed.

    Returns
    -------
    indptr : int64 array (n + 1)
    indices : int32 array (2 m)
    weights : float64 array (2 m; empty when not weighted)
    """
    count = np.zeros(n + 1, dtype=np.int64)
    for i in range(u.shape[0]):
        a = u[i]
        b = v[i]
        if a != b:
            count[a + 1] += 1
            count[b + 1] += 1
    for i in range(n):
        count[i + 1] += count[i]
    start = count.copy()
    fill = count[:n].copy()
    total = count[n]
    idx = np.empty(total, dtype=np.int32)
    wt = np.empty(total if weighted else 0, dtype=np.float64)
    for i in range(u.shape[0]):
        a = u[i]
        b = v[i]
        if a != b:
            idx[fill[a]] = b
            idx[fill[b]] = a
            if weighted:
                wt[fill[a]] = w[i]
                wt[fill[b]] = w[i]
            fill[a] += 1
            fill[b] += 1
    # sort each row and merge duplicates in place, compacting to the front
    indptr = np.zeros(n + 1, dtype=np.int64)
    out = 0
    for r in range(n):
        lo = start[r]
        hi = start[r + 1]
        if hi - lo > 1:
            if weighted:
                order = np.argsort(idx[lo:hi], kind="mergesort")
                seg = idx[lo:hi][order]
                segw = wt[lo:hi][order]
            else:
                seg = np.sort(idx[lo:hi])
                segw = wt[0:0]
        else:
            seg = idx[lo:hi].copy()
            segw = wt[lo:hi].copy() if weighted else wt[0:0]
        prev = -1
        for j in range(seg.shape[0]):
            if seg[j] != prev:
                idx[out] = seg[j]
                if weighted:
                    wt[out] = segw[j]
                out += 1
                prev = seg[j]
            elif weighted:
                wt[out - 1] += segw[j]
        indptr[r + 1] = out
    indices = idx[:out].copy()
    weights = wt[:out].copy() if weighted else np.empty(0, dtype=np.float64)
    return indptr, indices, weights
