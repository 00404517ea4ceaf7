"""Tests of partition.workload.nets: connectivity − 1 and its k-way FM refinement under a load cap."""

import numpy as np
import pytest

from partition.workload.coaccess import coaccess_graph
from partition.workload.log import log_from_lists
from partition.workload.nets import _gain_table, _move, _pin_counts, connectivity, load_cap, refine_nets, \
    request_nets


def _log(seed, n=300, keys=80):
    rng = np.random.default_rng(seed)
    return log_from_lists([rng.choice(keys, size=rng.integers(2, 8), replace=False).tolist() for _ in range(n)])


def _brute(nets, parts):
    # the definition (Çatalyürek & Aykanat, IEEE TPDS 1999): Σ over nets of (distinct parts − 1)
    return sum(len(set(parts[nets.pins[nets.indptr[e]:nets.indptr[e + 1]]].tolist())) - 1
               for e in range(nets.indptr.size - 1))


def test_connectivity_matches_definition():
    log = _log(2)
    g = coaccess_graph(log).graph
    nets = request_nets(log, g)
    parts = np.random.default_rng(0).integers(0, 4, g.n)
    assert connectivity(nets, parts, 4) == _brute(nets, parts)


def test_gain_table_stays_exact_through_moves():
    log = _log(3)
    g = coaccess_graph(log).graph
    nets = request_nets(log, g)
    k = 4
    rng = np.random.default_rng(1)
    parts = rng.integers(0, k, g.n).astype(np.int64)
    phi = _pin_counts(nets.indptr, nets.pins, parts, k)
    gain = _gain_table(nets.node_ptr, nets.node_nets, phi, parts, k)
    loads = np.bincount(parts, minlength=k).astype(np.int64)
    w = np.ones(g.n, dtype=np.int64)
    for _ in range(60):
        v = int(rng.integers(g.n))
        b = int((parts[v] + rng.integers(1, k)) % k)
        before = _brute(nets, parts)
        predicted = gain[v, b]
        _move(v, b, nets.indptr, nets.pins, nets.node_ptr, nets.node_nets, phi, parts, gain, loads, w, k)
        assert before - _brute(nets, parts) == predicted  # the gain is the drop of Σ(λ−1)
    fresh = _gain_table(nets.node_ptr, nets.node_nets, phi, parts, k)
    mask = np.arange(k)[None, :] != parts[:, None]
    assert np.array_equal(gain[mask], fresh[mask])


def test_refinement_lowers_connectivity_and_keeps_the_cap():
    log = _log(4, n=600)
    g = coaccess_graph(log).graph
    nets = request_nets(log, g)
    k = 4
    start = np.arange(g.n) % k
    parts, rep = refine_nets(nets, start, g.node_weights, k, 0.05, seed=0)
    cap = load_cap(g.node_weights, k, 0.05)
    assert np.bincount(parts, weights=g.node_weights, minlength=k).max() <= cap
    assert rep["connectivity_after"] == _brute(nets, parts) < rep["connectivity_before"] == _brute(nets, start)
    again, _ = refine_nets(nets, start, g.node_weights, k, 0.05, seed=0)
    assert np.array_equal(parts, again)  # same seed, same output


def test_rebalance_from_an_overloaded_start():
    log = _log(5)
    g = coaccess_graph(log).graph
    nets = request_nets(log, g)
    parts, rep = refine_nets(nets, np.zeros(g.n, dtype=np.int64), g.node_weights, 3, 0.05)
    assert np.bincount(parts, weights=g.node_weights, minlength=3).max() <= rep["cap"]
    assert rep["rebalance_moves"] > 0


def test_planted_clusters_recovered():
    # two disjoint groups of keys, requests inside one group: the best 2-way split has Σ(λ−1) = 0
    rng = np.random.default_rng(6)
    reqs = [(rng.choice(20, 4, replace=False) + 20 * (i % 2)).tolist() for i in range(200)]
    log = log_from_lists(reqs)
    g = coaccess_graph(log).graph
    nets = request_nets(log, g)
    start = rng.integers(0, 2, g.n)
    parts, rep = refine_nets(nets, start, g.node_weights, 2, 0.1)
    assert rep["connectivity_after"] == 0
    assert len(set(parts[:20].tolist())) == 1 and len(set(parts[20:].tolist())) == 1


def test_load_cap():
    assert load_cap(np.array([5, 1, 1, 1]), 4, 0.0) == 5  # at least the heaviest key
    assert load_cap(np.ones(100, dtype=np.int64), 4, 0.03) == 26  # ⌈1.03 · 100 / 4⌉
    with pytest.raises(Exception):
        load_cap(np.ones(4), 0, 0.0)
