"""Request logs in memory: requests in time order, each a set of keys (:class:`RequestLog`).

The readers of the log formats are in :mod:`partition.workload.readers`.
Keys follow :mod:`partition.workload.keys` (integers only when every key is a
canonical int64, otherwise strings byte for byte, never floats); a key repeated
within one request counts once; requests are kept in time order.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pyarrow as pa

from partition.errors import InputError, ParameterError
from partition.graph import dense_ids
from partition.workload.keys import keys_from_strings

__all__ = ["RequestLog", "log_from_lists", "assemble_log"]


@dataclass(eq=False)
class RequestLog:
    """Requests in time order, each a set of keys.

    Attributes
    ----------
    keys : ndarray
        Sorted distinct keys (int64, or object array of str), as given.
    indptr : ndarray of int64, shape (requests + 1,)
        Request ``r`` touched ``members[indptr[r]:indptr[r + 1]]``.
    members : ndarray of int32
        Dense key codes (indices into ``keys``), distinct within a request.
    times : ndarray of float64 or None
        Time of each request (seconds for ISO-8601 input), when the log has one.
    source : str or None
    """

    keys: np.ndarray
    indptr: np.ndarray
    members: np.ndarray
    times: np.ndarray | None = None
    source: str | None = None

    @property
    def n_requests(self) -> int:
        return int(self.indptr.shape[0] - 1)

    @property
    def n_keys(self) -> int:
        return int(self.keys.shape[0])

    def sizes(self) -> np.ndarray:
        """Number of distinct keys of each request (int64)."""
        return np.diff(self.indptr)

    def access_counts(self) -> np.ndarray:
        """How many requests touched each key (int64, one per key)."""
        return np.bincount(self.members, minlength=self.n_keys).astype(np.int64)

    def take(self, start, stop) -> "RequestLog":
        """Requests ``start..stop-1`` over the same key table."""
        a, b = int(self.indptr[start]), int(self.indptr[stop])
        return RequestLog(self.keys, self.indptr[start : stop + 1] - a, self.members[a:b],
                          None if self.times is None else self.times[start:stop], self.source)

    def split(self, train_fraction=None, split_time=None):
        """The log cut in time order into a training part and a held-out part.

        Parameters
        ----------
        train_fraction : float or None
            The first ``round(fraction · requests)`` requests train.
        split_time : float or None
            Requests with ``time < split_time`` train (needs a time column).

        Returns
        -------
        (RequestLog, RequestLog)
        """
        if (train_fraction is None) == (split_time is None):
            raise ParameterError("give exactly one of a training fraction and a split time")
        if split_time is not None:
            if self.times is None:
                raise ParameterError("a split time needs a log with a time column")
            cut = int(np.searchsorted(self.times, float(split_time), side="left"))
        else:
            f = float(train_fraction)
            if not 0.0 < f < 1.0:
                raise ParameterError(f"the training fraction must be between 0 and 1, got {train_fraction!r}")
            cut = int(round(f * self.n_requests))
        if cut <= 0 or cut >= self.n_requests:
            raise ParameterError(f"the split leaves {cut} of {self.n_requests} requests for training; "
                                 "both parts need at least one request")
        return self.take(0, cut), self.take(cut, self.n_requests)


def log_from_lists(requests, times=None, source=None):
    """A :class:`RequestLog` from Python lists of keys (tests, generators).

    Keys are given as Python values: all integers, or all strings; the key
    rule is applied to their text.
    """
    sizes = np.fromiter((len(r) for r in requests), dtype=np.int64, count=len(requests))
    flat = [k for r in requests for k in r]
    if flat and all(isinstance(k, (int, np.integer)) and not isinstance(k, bool) for k in flat):
        values = np.asarray(flat, dtype=np.int64)
    else:
        values = keys_from_strings(pa.array([str(k) for k in flat], pa.large_string()))
    return assemble_log(values, sizes, None if times is None else np.asarray(times, np.float64), source)


def assemble_log(values, sizes, times, source, lines=None, path=None):
    """Dense codes, time order and per-request de-duplication of flat key values."""
    if len(values) == 0:
        raise InputError(path or source, "the log holds no requests with keys")
    keys, (codes,) = dense_ids([values])
    n_req = sizes.shape[0]
    req = np.repeat(np.arange(n_req, dtype=np.int64), sizes)
    if times is not None:
        bad = ~np.isfinite(times)
        if bad.any():
            row = int(np.flatnonzero(bad)[0])
            raise InputError(path or source, "the time is not a finite number",
                             None if lines is None else int(lines[row]))
        order = np.argsort(times, kind="stable")
        rank = np.empty(n_req, dtype=np.int64)
        rank[order] = np.arange(n_req)
        req = rank[req]
        times = times[order]
        sizes = sizes[order]
    combined = np.unique(req * np.int64(len(keys)) + codes)  # sorted by (request, key), repeats merged
    req_sorted = combined // len(keys)
    members = (combined % len(keys)).astype(np.int32)
    counts = np.bincount(req_sorted, minlength=n_req)
    indptr = np.zeros(n_req + 1, dtype=np.int64)
    np.cumsum(counts, out=indptr[1:])
    return RequestLog(keys, indptr, members, times, None if source is None else str(source))
