"""Tests of partition.cut: the balanced line cut and the boundary helpers."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from partition.cut import boundaries_from_parts, cut_boundaries, line_cut, parts_from_boundaries, positions
from partition.errors import ParameterError


def _piece_sizes(order, parts, k):
    line = parts[order]
    # contiguity: shard numbers never decrease along the line
    assert np.all(np.diff(line) >= 0)
    return np.bincount(line, minlength=k)


@pytest.mark.parametrize("n,k", [(10, 4), (10, 3), (12, 4), (7, 7), (100, 7), (1, 1), (5, 1), (1000, 64)])
def test_unit_sizes_floor_or_ceiling(n, k):
    rng = np.random.default_rng(n * 31 + k)
    order = rng.permutation(n)
    parts = line_cut(order, None, k)
    sizes = _piece_sizes(order, parts, k)
    # formula: sizes ⌊n/k⌋ or ⌈n/k⌉, exactly n mod k of them the ceiling
    assert set(sizes.tolist()) <= {n // k, -(-n // k)}
    assert int(np.count_nonzero(sizes == -(-n // k))) == (n % k if n % k else k)
    # independent reference: numpy.array_split gives the same multiset of sizes
    ref = [len(c) for c in np.array_split(np.arange(n), k)]
    assert sorted(sizes.tolist()) == sorted(ref)
    # and piece j has ⌈(j+1)n/k⌉ − ⌈jn/k⌉ nodes (the documented placement)
    expect = [math.ceil((j + 1) * n / k) - math.ceil(j * n / k) for j in range(k)]
    assert sizes.tolist() == expect


def test_unit_placement_differs_from_array_split():
    # n = 10, k = 4 by hand: ⌈10/4⌉=3, ⌈20/4⌉=5, ⌈30/4⌉=8 → sizes 3, 2, 3, 2.
    # numpy.array_split puts the larger pieces first: 3, 3, 2, 2.
    parts = line_cut(np.arange(10), None, 4)
    assert np.bincount(parts).tolist() == [3, 2, 3, 2]
    assert [len(c) for c in np.array_split(np.arange(10), 4)] == [3, 3, 2, 2]


def test_follows_the_order():
    order = np.array([4, 2, 0, 3, 1, 5])
    parts = line_cut(order, None, 3)
    # positions 0-1 → shard 0, 2-3 → shard 1, 4-5 → shard 2 (n/k = 2 each, by hand)
    assert parts[[4, 2]].tolist() == [0, 0]
    assert parts[[0, 3]].tolist() == [1, 1]
    assert parts[[1, 5]].tolist() == [2, 2]


def test_weighted_worked_example():
    # weights along the line 0,0,0,5,1,1,0,2,3,0 (W = 12), k = 3: targets ⌈12/3⌉ = 4 and 8;
    # prefix 0,0,0,0,5,6,7,7,9,12,12 first reaches 4 at p = 4 and 8 at p = 8 (by hand).
    w = np.array([0, 0, 0, 5, 1, 1, 0, 2, 3, 0])
    parts = line_cut(np.arange(10), w, 3)
    assert parts.tolist() == [0, 0, 0, 0, 1, 1, 1, 1, 2, 2]
    assert boundaries_from_parts(np.arange(10), parts, 3).tolist() == [4, 8]


@settings(max_examples=150, deadline=None)
@given(
    st.lists(st.integers(min_value=0, max_value=20), min_size=1, max_size=60),
    st.integers(min_value=1, max_value=60),
    st.integers(min_value=0, max_value=2**31),
)
def test_weighted_bound(weights, k, seed):
    w = np.array(weights, dtype=np.int64)
    n = w.shape[0]
    k = min(k, n)
    order = np.random.default_rng(seed).permutation(n)
    parts = line_cut(order, w, k)
    loads = np.bincount(parts, weights=w, minlength=k).astype(np.int64)
    _piece_sizes(order, parts, k)
    total = int(w.sum())
    wmax = max(int(w.max()), 1)
    # bound ⌈W/k⌉ + w_max − 1 (proof in partition.cut's docstring; the ε = 0 cap of partition.balance)
    assert loads.max() <= -(-total // k) + wmax - 1
    assert loads.sum() == total


@settings(max_examples=60, deadline=None)
@given(st.integers(min_value=1, max_value=200), st.integers(min_value=1, max_value=50), st.integers(0, 2**31))
def test_boundaries_round_trip(n, k, seed):
    k = min(k, n)
    rng = np.random.default_rng(seed)
    order = rng.permutation(n)
    b = np.sort(rng.integers(0, n + 1, size=k - 1))
    parts = parts_from_boundaries(order, b, k)
    assert boundaries_from_parts(order, parts, k).tolist() == b.tolist()
    # piece j holds exactly the positions b_j .. b_{j+1} − 1
    full = np.concatenate(([0], b, [n]))
    assert np.bincount(parts, minlength=k).tolist() == np.diff(full).tolist()


def test_cut_boundaries_unit_formula():
    # unit weights: b_j = ⌈j·n/k⌉ (module docstring), e.g. n = 100, k = 7
    b = cut_boundaries(np.ones(100, dtype=np.int64), 7)
    assert b.tolist() == [math.ceil(j * 100 / 7) for j in range(1, 7)]


def test_positions_inverts_order():
    order = np.array([3, 0, 2, 1])
    assert positions(order).tolist() == [1, 3, 2, 0]


def test_bad_inputs():
    with pytest.raises(ParameterError):
        line_cut(np.arange(5), None, 6)  # k > n
    with pytest.raises(ParameterError):
        line_cut(np.arange(5), None, 0)
    with pytest.raises(ParameterError):
        line_cut(np.array([0, 1, 1, 3]), None, 2)  # not a permutation
    with pytest.raises(ParameterError):
        line_cut(np.arange(4), np.array([1, -1, 1, 1]), 2)
    with pytest.raises(ParameterError):
        line_cut(np.arange(4), np.array([1.5, 1, 1, 1]), 2)
    with pytest.raises(ParameterError):
        line_cut(np.arange(4), None, 2, eps=-0.1)
    with pytest.raises(ParameterError, match="not contiguous"):
        boundaries_from_parts(np.arange(4), np.array([0, 1, 0, 1]), 2)
    with pytest.raises(ParameterError):
        parts_from_boundaries(np.arange(4), np.array([3, 1]), 3)  # decreasing
