"""Graph-blind baselines: hash of the id, contiguous id ranges, and a seeded random deal.

These ignore the edges entirely, which makes them the floor any partitioner
must beat. ``hash`` is what a system does with no partitioner at all (the shard
is a hash of the key); ``range`` keeps neighbouring ids together, which helps
exactly when ids were given in a locality-preserving order; ``random`` is the
uniformly random balanced assignment, whose expected cut fraction is about
``1 − 1/k``.

All three meet the balance rule of :mod:`partition.balance`. ``range`` and
``random`` cut a sequence of nodes at equal node weight: node ``i`` of the
sequence goes to shard ``⌊k · C_i / W⌋`` where ``C_i`` is the weight before it.
A shard then holds nodes whose starting offsets lie in a window of width
``W/k``, so its weight is below ``W/k + w_max`` — within the cap
``⌈W/k⌉ + w_max − 1``; with unit weights the sizes are ``⌊n/k⌋`` or ``⌈n/k⌉``.
``hash`` is repaired to the rule by :func:`partition.baselines.repair.repair_balance`.
"""

from __future__ import annotations

import hashlib

import numpy as np

from partition.baselines.repair import prepare, repair_balance
from partition.rules import SPLITMIX_GAMMA, mix64

__all__ = ["hash_keys", "hash_partition", "range_partition", "random_partition", "cut_sequence"]

_MASK = (1 << 64) - 1


def hash_keys(ids, seed=0):
    """A seeded, platform-independent 64-bit hash of each node id.

    Integer ids: the splitmix64 output for the state ``id + seed · γ``
    (``γ = 0x9E3779B97F4A7C15``), i.e. ``mix64(id + (seed + 1) · γ mod 2^64)``,
    with the id read as its two's-complement 64-bit pattern. String ids: the
    first 8 bytes (little-endian) of BLAKE2b of the UTF-8 bytes, keyed with the
    seed; this is a per-id loop of the standard library's ``hashlib``
    (about a microsecond per id).

    Parameters
    ----------
    ids : ndarray
        int64 ids, or an object array of str.
    seed : int
        Whole number >= 0.

    Returns
    -------
    ndarray of uint64

    References
    ----------
    Steele, Lea & Flood, OOPSLA 2014 (splitmix64); J.-P. Aumasson, S. Neves,
    Z. Wilcox-O'Hearn and C. Winnerlein, "BLAKE2: simpler, smaller, fast as
    MD5", ACNS 2013 (BLAKE2b).
    """
    ids = np.asarray(ids)
    seed = int(seed)
    if ids.dtype.kind in "iu":
        state = ids.astype(np.int64, copy=False).view(np.uint64)
        offset = np.uint64((seed * int(SPLITMIX_GAMMA)) & _MASK)
        with np.errstate(over="ignore"):
            return mix64(state + offset)  # rules.mix64 adds γ once more: the state id + (seed + 1) · γ
    key = seed.to_bytes(max(8, (seed.bit_length() + 7) // 8), "little")
    return np.fromiter(
        (
            int.from_bytes(hashlib.blake2b(str(s).encode("utf-8"), digest_size=8, key=key).digest(), "little")
            for s in ids
        ),
        dtype=np.uint64,
        count=ids.shape[0],
    )


def cut_sequence(order, node_weights, k):
    """Cut a sequence of nodes into ``k`` contiguous runs of equal weight.

    Parameters
    ----------
    order : ndarray of int, shape (n,)
        A permutation of the nodes.
    node_weights : ndarray of int64, shape (n,)
    k : int

    Returns
    -------
    ndarray of int64, shape (n,)
        ``parts[order[i]] = ⌊k · C_i / W⌋`` with ``C_i`` the weight of
        ``order[:i]`` (by position when the total weight ``W`` is 0).
    """
    n = order.shape[0]
    w = node_weights[order]
    total = int(w.sum())
    if total == 0:
        before = np.arange(n, dtype=np.int64)
        total = n
    else:
        before = np.cumsum(w) - w
    if k * total < 2**62:
        shard = (np.int64(k) * before) // np.int64(total)
    else:  # exact big-integer arithmetic for enormous weights
        shard = np.array([(k * int(c)) // total for c in before], dtype=np.int64)
    parts = np.empty(n, dtype=np.int64)
    parts[order] = np.minimum(shard, k - 1)
    return parts


def hash_partition(graph, k, eps=0.0, seed=0):
    """Shard = seeded 64-bit hash of the node id mod ``k``, then balance repair.

    Parameters
    ----------
    graph : Graph
    k : int
        Number of shards.
    eps : float
        Allowed imbalance ε.
    seed : int
        Seed of the hash.

    Returns
    -------
    ndarray of int64, shape (n,)
        Shard of each node; keeps ``balance_rule(graph.node_weights, k, eps, n)``.
        The repair moves the fewest nodes it can out of over-full shards, those
        with the largest hash leaving first.

    Raises
    ------
    ParameterError
        ``k < 1``, ``k > n``, negative imbalance, bad seed.

    References
    ----------
    Steele, Lea & Flood, "Fast splittable pseudorandom number generators",
    OOPSLA 2014 (the mixing function).
    """
    rule, w, seed = prepare(graph, k, eps, seed)
    keys = hash_keys(graph.ids, seed)
    parts = (keys % np.uint64(rule.k)).astype(np.int64)
    return repair_balance(parts, rule.k, rule, w, priority=keys)


def range_partition(graph, k, eps=0.0, seed=0):
    """Contiguous ranges of the sorted ids, cut at equal node weight.

    Parameters
    ----------
    graph : Graph
    k : int
    eps : float
        Allowed imbalance (the result is as balanced as the weights allow
        whatever ε is).
    seed : int
        Validated but unused: the result depends on the ids only.

    Returns
    -------
    ndarray of int64, shape (n,)
        Shard 0 holds the smallest ids.

    Raises
    ------
    ParameterError
        ``k < 1``, ``k > n``, negative imbalance, bad seed.
    """
    rule, w, _ = prepare(graph, k, eps, seed)
    return cut_sequence(np.arange(graph.n, dtype=np.int64), w, rule.k)


def random_partition(graph, k, eps=0.0, seed=0):
    """A seeded random permutation of the nodes dealt into balanced shards.

    Parameters
    ----------
    graph : Graph
    k : int
    eps : float
    seed : int
        Seed of :func:`numpy.random.default_rng`.

    Returns
    -------
    ndarray of int64, shape (n,)
        The permutation is cut into ``k`` runs of equal weight.

    Raises
    ------
    ParameterError
        ``k < 1``, ``k > n``, negative imbalance, bad seed.
    """
    rule, w, seed = prepare(graph, k, eps, seed)
    order = np.random.default_rng(seed).permutation(graph.n)
    return cut_sequence(order, w, rule.k)
