"""Consistent hashing with bounded loads: a shard for keys that have no relations.

Keys and shard points are hashed to a ring of 64-bit positions (Karger et al.
1997); each shard has ``points_per_shard`` points, default 1, the case the
bounded-load analysis (Mirrokni, Thorup & Zadimoghaddam 2018) is for. With
``m`` keys and ``n`` shards each shard holds at most ``c = ⌈(1 + ε)·m/n⌉``
keys: keys are placed one by one in a fixed priority order, each on the first
shard clockwise from its position (a point at exactly that position counts)
whose load is below ``c``. The priority order is increasing key hash, i.e. ring
order from position 0; ties (probability about ``m²/2⁶⁵``) go by the key
itself. With one point per shard the loads do not depend on that order (it is
linear probing with buckets of size ``c``); which key lands where does.
``ε = inf`` means no bound: plain consistent hashing. ``c`` is exact: ε is read
as the shortest decimal printing as the given float (``0.1`` is ``1/10``).

Hashes are seeded and stable, never Python's ``hash()``: integer key ``x`` →
``mix(mix(seed) ^ x)``, point ``j`` of integer shard ``s`` →
``mix(mix(mix(seed + 1) ^ s) + j)`` (``mix`` = splitmix64,
:func:`partition.rules.mix64`, on the two's-complement bits); a string key →
8 bytes (little-endian) of BLAKE2b of its UTF-8 bytes keyed with the seed,
personalisation ``b"shardline-key"``; point ``j`` of a string shard likewise
with ``b"shardline-shard"`` and salt ``j``.

:class:`BoundedLoadRing` keeps keys and points sorted and after every change
places all keys again with one sweep (numba, ``O(m + P)`` with a union-find
that skips full shards, after an ``O(m log P)`` search for each key's first
point). So its state is by construction the from-scratch placement of the
current sets, which matters because ``c`` changes with ``m`` and ``n`` and a
change can cascade around the ring; an update costs ``O(m)``
(``jobs/bench_bounded_hash.py`` measures it). Plain consistent hashing and
``hash mod n``, the benchmark's comparisons, are here too.

References: D. Karger, E. Lehman, T. Leighton, R. Panigrahy, M. Levine and
D. Lewin, "Consistent hashing and random trees", STOC 1997; V. Mirrokni,
M. Thorup and M. Zadimoghaddam, "Consistent hashing with bounded loads",
SODA 2018.
"""

from __future__ import annotations

import hashlib
import math
from dataclasses import dataclass
from fractions import Fraction

import numba
import numpy as np

from partition.errors import ParameterError
from partition.rules import mix64

__all__ = [
    "BoundedLoadRing", "Moves", "capacity", "key_hashes", "shard_points", "place_on_ring",
    "bounded_assign", "consistent_assign", "mod_assign",
]

_U64 = (1 << 64) - 1


def _check_seed(seed):
    if isinstance(seed, bool) or not isinstance(seed, (int, np.integer)) or not 0 <= int(seed) <= _U64:
        raise ParameterError(f"seed must be a whole number in [0, 2**64), got {seed!r}")
    return int(seed)


def _check_points(count):
    if isinstance(count, bool) or not isinstance(count, (int, np.integer)) or count < 1:
        raise ParameterError(f"points per shard must be a whole number >= 1, got {count!r}")
    return int(count)


def _exact_eps(eps):
    """ε as a Fraction (None for no bound)."""
    if not isinstance(eps, Fraction):
        try:
            f = float(eps)
        except (TypeError, ValueError):
            raise ParameterError(f"imbalance must be a number, got {eps!r}") from None
        if f != f:
            raise ParameterError("imbalance must be a number, got NaN")
        eps = None if f == math.inf else Fraction(repr(f)) if f >= 0 else Fraction(-1)
    if eps is not None and eps < 0:
        raise ParameterError("imbalance must be >= 0 (inf for no bound)")
    return eps


def capacity(m, n, eps):
    """Largest load a shard may hold: ``⌈(1 + ε)·m/n⌉``, in exact arithmetic.

    Parameters
    ----------
    m : int
        Number of keys (>= 0).
    n : int
        Number of shards (>= 1).
    eps : float or Fraction
        Allowed imbalance ε >= 0; ``inf`` means no bound (capacity ``m``).

    Returns
    -------
    int

    Raises
    ------
    ParameterError
        If ``m < 0``, ``n < 1`` or ε is negative or not a number.

    References
    ----------
    Mirrokni, Thorup & Zadimoghaddam, "Consistent hashing with bounded loads", SODA 2018.
    """
    m, n = int(m), int(n)
    if m < 0 or n < 1:
        raise ParameterError(f"need m >= 0 keys and n >= 1 shards, got m = {m}, n = {n}")
    e = _exact_eps(eps)
    if e is None:
        return m
    num = (1 + e) * m
    return -((-num.numerator) // (num.denominator * n))


def _as_keys(keys, what="key"):
    """Keys as an int64 array or an object array of str, and their kind."""
    if isinstance(keys, np.ndarray) and keys.dtype.kind in "iu":
        if keys.dtype == np.uint64 and keys.size and keys.max() > np.iinfo(np.int64).max:
            raise ParameterError(f"integer {what}s must fit in int64")
        return keys.astype(np.int64, copy=False).reshape(-1), "int"
    seq = list(keys)
    if not seq:
        return np.empty(0, dtype=np.int64), None
    if all(isinstance(k, str) for k in seq):
        out = np.empty(len(seq), dtype=object)
        out[:] = seq
        return out, "str"
    if all(isinstance(k, (int, np.integer)) and not isinstance(k, bool) for k in seq):
        try:
            return np.array(seq, dtype=np.int64), "int"
        except OverflowError:
            raise ParameterError(f"integer {what}s must fit in int64") from None
    raise ParameterError(f"{what}s must be all str or all integers (no mixing, no bool)")


def _blake(values, seed, person, salts=None):
    key, out = seed.to_bytes(8, "little"), np.empty(len(values), dtype=np.uint64)
    for i, v in enumerate(values):
        salt = b"" if salts is None else int(salts[i]).to_bytes(8, "little")
        d = hashlib.blake2b(v.encode("utf-8"), digest_size=8, key=key, person=person, salt=salt)
        out[i] = int.from_bytes(d.digest(), "little")
    return out


def key_hashes(keys, seed=0):
    """Ring positions of keys (the hashes are defined in the module docstring).

    Parameters
    ----------
    keys : array_like of int, or sequence of str
    seed : int
        Whole number in ``[0, 2**64)``.

    Returns
    -------
    ndarray of uint64

    Raises
    ------
    ParameterError
        On mixed key types or a bad seed.

    References
    ----------
    Steele, Lea & Flood, "Fast splittable pseudorandom number generators", OOPSLA 2014;
    Aumasson, Neves, Wilcox-O'Hearn & Winnerlein, "BLAKE2: simpler, smaller, fast as MD5", ACNS 2013.
    """
    seed = _check_seed(seed)
    arr, kind = _as_keys(keys)
    if kind == "str":
        return _blake(arr, seed, b"shardline-key")
    return mix64(mix64(np.uint64(seed)) ^ arr.view(np.uint64))


def shard_points(shards, count=1, seed=0):
    """Ring positions of ``count`` points per shard; entry ``i·count + j`` is point ``j`` of shard ``i``.

    Parameters
    ----------
    shards : array_like of int, or sequence of str
    count : int
        Points per shard (>= 1).
    seed : int

    Returns
    -------
    ndarray of uint64

    Raises
    ------
    ParameterError
        On a bad count or seed, or mixed shard types.

    References
    ----------
    Karger, Lehman, Leighton, Panigrahy, Levine & Lewin, "Consistent hashing and random
    trees", STOC 1997 (several points per shard).
    """
    seed, count = _check_seed(seed), _check_points(count)
    arr, kind = _as_keys(shards, "shard")
    j = np.tile(np.arange(count, dtype=np.uint64), arr.shape[0])
    if kind == "str":
        return _blake(np.repeat(arr, count), seed, b"shardline-shard", j)
    salt = mix64(np.uint64((seed + 1) & _U64))
    with np.errstate(over="ignore"):
        return mix64(np.repeat(mix64(salt ^ arr.view(np.uint64)), count) + j)


@numba.njit(cache=True, nogil=True)
def _sweep(start, point_shard, members, ptr, cap):  # pragma: no cover - compiled
    """Place keys in the given order; ``nxt`` (union-find) skips points of full shards.

    ``members[ptr[s]:ptr[s + 1]]`` are the points of shard ``s``.
    """
    n_points = point_shard.shape[0]
    nxt = np.arange(n_points)
    load = np.zeros(ptr.shape[0] - 1, np.int64)
    out = np.empty(start.shape[0], np.int64)
    for t in range(start.shape[0]):
        i = r = start[t]
        while nxt[r] != r:
            r = nxt[r]
        while i != r:  # path compression: every point passed leads to r
            j = nxt[i]
            nxt[i] = r
            i = j
        s = point_shard[r]
        out[t] = s
        load[s] += 1
        if load[s] == cap:  # shard full: each of its points now leads to the next point
            for q in members[ptr[s]:ptr[s + 1]]:
                nxt[q] = q + 1 if q + 1 < n_points else 0
    return out, load


def place_on_ring(key_positions, point_positions, point_shards, n_shards, cap):
    """Bounded-load placement of keys, in the order given, on a sorted ring of points.

    Parameters
    ----------
    key_positions : ndarray of uint64
        Ring position of each key, in priority order (the first is placed first).
    point_positions : ndarray of uint64
        Positions of the shard points, sorted ascending.
    point_shards : ndarray of int
        Shard index in ``[0, n_shards)`` of each point.
    n_shards : int
    cap : int
        Capacity of a shard; ``cap`` times the number of shards with points must be >= the keys.

    Returns
    -------
    shard : ndarray of int64
        Shard of each key: that of the first point at or clockwise after the key's
        position whose shard held fewer than ``cap`` keys when the key was placed.
    loads : ndarray of int64
        Keys per shard.

    Raises
    ------
    ParameterError
        If the arrays disagree, the points are unsorted or the capacity is too small.

    References
    ----------
    Mirrokni, Thorup & Zadimoghaddam, "Consistent hashing with bounded loads", SODA 2018.
    """
    kp = np.asarray(key_positions, dtype=np.uint64).reshape(-1)
    pp = np.asarray(point_positions, dtype=np.uint64).reshape(-1)
    ps = np.asarray(point_shards, dtype=np.int64).reshape(-1)
    n_shards, cap = int(n_shards), int(cap)
    if pp.shape != ps.shape or pp.size == 0:
        raise ParameterError("need at least one point, and one shard per point position")
    if (pp[1:] < pp[:-1]).any():
        raise ParameterError("point positions must be sorted ascending")
    if ps.min() < 0 or ps.max() >= n_shards:
        raise ParameterError(f"point shards must lie in [0, {n_shards})")
    if cap * np.unique(ps).size < kp.size:
        raise ParameterError(f"capacity {cap} is too small for {kp.size} keys on {np.unique(ps).size} shards")
    if kp.size == 0:
        return np.empty(0, np.int64), np.zeros(n_shards, np.int64)
    start = np.searchsorted(pp, kp, side="left").astype(np.int64)
    start[start == pp.size] = 0
    ptr = np.concatenate(([0], np.cumsum(np.bincount(ps, minlength=n_shards))))
    return _sweep(start, ps, np.argsort(ps, kind="stable"), ptr, cap)


def _priority(hashes, keys):
    """Order of keys by (hash, key); raises on repeated keys."""
    order = np.argsort(hashes, kind="stable")
    h = hashes[order]
    tied = np.flatnonzero(h[1:] == h[:-1])
    for a in np.unique(np.searchsorted(h, h[tied], side="left")).tolist():  # rare: sort runs by key
        b = int(np.searchsorted(h, h[a], side="right"))
        block = sorted(order[a:b].tolist(), key=lambda i: keys[i])
        if any(keys[x] == keys[y] for x, y in zip(block, block[1:])):
            raise ParameterError(f"key {keys[block[0]]!r} appears more than once")
        order[a:b] = block
    return order


def _ring(shards, seed, points_per_shard):
    """Sorted shard names, point positions and point shard indices (ties: shard, point)."""
    names, _ = _as_keys(shards, "shard")
    if names.size == 0:
        raise ParameterError("need at least one shard")
    names = np.array(sorted(names.tolist()), dtype=names.dtype)
    if (names[1:] == names[:-1]).any():
        raise ParameterError("shard names must be distinct")
    pos = shard_points(names, points_per_shard, seed)
    sid = np.repeat(np.arange(names.size, dtype=np.int64), points_per_shard)
    order = np.lexsort((sid, pos))
    return names, pos[order], sid[order]


def bounded_assign(keys, shards, eps, seed=0, points_per_shard=1):
    """Bounded-load consistent hashing of a set of keys, from scratch.

    Parameters
    ----------
    keys : array_like of int, or sequence of str
        Distinct keys.
    shards : array_like of int, or sequence of str
        Distinct shard names.
    eps : float
        Allowed imbalance ε >= 0 (``inf``: no bound).
    seed : int
    points_per_shard : int
        Ring points per shard (the load analysis is for 1).

    Returns
    -------
    ndarray
        Shard name of each key, in the order of ``keys``.

    Raises
    ------
    ParameterError
        On repeated keys or shards, mixed types, or bad parameters.

    References
    ----------
    Mirrokni, Thorup & Zadimoghaddam, "Consistent hashing with bounded loads", SODA 2018.
    """
    karr, _ = _as_keys(keys)
    names, pp, ps = _ring(shards, seed, points_per_shard)
    h = key_hashes(karr, seed)
    order = _priority(h, karr)
    shard, _ = place_on_ring(h[order], pp, ps, names.size, capacity(karr.size, names.size, eps))
    out = np.empty(karr.size, dtype=np.int64)
    out[order] = shard
    return names[out]


def consistent_assign(keys, shards, seed=0, points_per_shard=1):
    """Plain consistent hashing: each key to the shard of the first point clockwise.

    Parameters
    ----------
    keys : array_like of int, or sequence of str
    shards : array_like of int, or sequence of str
    seed : int
    points_per_shard : int
        Ring points ("virtual nodes") per shard.

    Returns
    -------
    ndarray
        Shard name of each key, in the order of ``keys``.

    Raises
    ------
    ParameterError
        On bad shards or parameters.

    References
    ----------
    Karger, Lehman, Leighton, Panigrahy, Levine & Lewin, "Consistent hashing and random
    trees", STOC 1997.
    """
    names, pp, ps = _ring(shards, seed, points_per_shard)
    start = np.searchsorted(pp, key_hashes(keys, seed), side="left")
    start[start == pp.size] = 0
    return names[ps[start]]


def mod_assign(keys, shards, seed=0):
    """Modulo hashing: each key to ``shards[hash(key) mod n]``, shards in the order given.

    Parameters
    ----------
    keys : array_like of int, or sequence of str
    shards : sequence
        Distinct shard names; adding a shard means appending it.
    seed : int

    Returns
    -------
    ndarray
        Shard name of each key.

    Raises
    ------
    ParameterError
        With no shards or repeated shards.

    References
    ----------
    Knuth, The Art of Computer Programming, vol. 3, section 6.4 (the division method).
    """
    names, _ = _as_keys(shards, "shard")
    if names.size == 0 or np.unique(names).size != names.size:
        raise ParameterError("need at least one shard, all names distinct")
    return names[key_hashes(keys, seed) % np.uint64(names.size)]


@dataclass(frozen=True)
class Moves:
    """Keys whose shard changed in one update: ``keys[i]`` went from ``before[i]`` to ``after[i]``."""

    keys: np.ndarray
    before: np.ndarray
    after: np.ndarray

    def __len__(self):
        return int(self.keys.shape[0])


class BoundedLoadRing:
    """A changing set of keys and shards placed by bounded-load consistent hashing.

    Every update places all keys again with one sweep over the sorted arrays,
    so :meth:`assignment` always equals :func:`bounded_assign` of the current
    sets; updates return the :class:`Moves` of the keys present before and after.

    Parameters
    ----------
    shards : array_like of int, or sequence of str
        Distinct shard names (at least one).
    eps : float
        Allowed imbalance ε >= 0: a shard holds at most ``⌈(1 + ε)·m/n⌉`` keys (``inf``: no bound).
    seed : int
    points_per_shard : int
        Ring points per shard (default 1, the case the load analysis is for).
    keys : array_like of int, or sequence of str, optional
        Initial keys.

    Raises
    ------
    ParameterError
        On bad parameters, or repeated or mixed-type keys or shards.

    References
    ----------
    Mirrokni, Thorup & Zadimoghaddam, "Consistent hashing with bounded loads", SODA 2018.
    """

    def __init__(self, shards, eps, seed=0, points_per_shard=1, keys=()):
        self.seed, self.points_per_shard = _check_seed(seed), _check_points(points_per_shard)
        _exact_eps(eps)
        self.eps = eps
        self._names, self._pp, self._ps = _ring(shards, self.seed, self.points_per_shard)
        karr, self._key_kind = _as_keys(keys)
        h = key_hashes(karr, self.seed)
        order = _priority(h, karr)
        self._kh, self._kv = h[order], karr[order]
        self._update()

    def _update(self):
        """Place every key again; returns the shard name of each key."""
        cap = capacity(self._kh.size, self._names.size, self.eps)
        self._assign = place_on_ring(self._kh, self._pp, self._ps, self._names.size, cap)[0]
        return self._names[self._assign]

    def _find(self, key):
        """(key, kind, hash, index on the ring or None, insertion index)."""
        arr, kind = _as_keys([key])
        if self._kv.size and kind != self._key_kind:
            raise ParameterError(f"key {key!r} is not of the ring's key type ({self._key_kind})")
        h = key_hashes(arr, self.seed)[0]
        a, b = int(np.searchsorted(self._kh, h, "left")), int(np.searchsorted(self._kh, h, "right"))
        hits = [i for i in range(a, b) if self._kv[i] == arr[0]]
        at = a + sum(1 for i in range(a, b) if self._kv[i] < arr[0])
        return arr[0], kind, h, (hits[0] if hits else None), at

    def _shard_change(self, names):
        before = self._names[self._assign]
        self._names, self._pp, self._ps = _ring(names, self.seed, self.points_per_shard)
        after = self._update()
        diff = np.flatnonzero(before != after)
        return Moves(self._kv[diff], before[diff], after[diff])

    def add_key(self, key):
        """Add a new key; returns the :class:`Moves` of the keys already on the ring."""
        value, kind, h, at, pos = self._find(key)
        if at is not None:
            raise ParameterError(f"key {key!r} is already on the ring")
        if self._kv.size == 0:
            self._key_kind, self._kv = kind, np.empty(0, dtype=np.int64 if kind == "int" else object)
        before = self._names[self._assign]
        self._kh, self._kv = np.insert(self._kh, pos, h), np.insert(self._kv, pos, value)
        after, keys = np.delete(self._update(), pos), np.delete(self._kv, pos)
        diff = np.flatnonzero(before != after)
        return Moves(keys[diff], before[diff], after[diff])

    def remove_key(self, key):
        """Remove a key; returns the :class:`Moves` of the remaining keys."""
        at = self._find(key)[3]
        if at is None:
            raise ParameterError(f"key {key!r} is not on the ring")
        before = np.delete(self._names[self._assign], at)
        self._kh, self._kv = np.delete(self._kh, at), np.delete(self._kv, at)
        after = self._update()
        diff = np.flatnonzero(before != after)
        return Moves(self._kv[diff], before[diff], after[diff])

    def add_shard(self, shard):
        """Add a new shard; returns the :class:`Moves` of the keys."""
        listed = self._names.tolist()
        names = _as_keys(listed + [shard], "shard")[0]
        if shard in listed:
            raise ParameterError(f"shard {shard!r} is already on the ring")
        return self._shard_change(names)

    def remove_shard(self, shard):
        """Remove a shard (not the last one); returns the :class:`Moves` of the keys."""
        listed = self._names.tolist()
        if isinstance(shard, bool) or shard not in listed:
            raise ParameterError(f"shard {shard!r} is not on the ring")
        if len(listed) == 1:
            raise ParameterError("cannot remove the last shard")
        return self._shard_change(_as_keys([s for s in listed if s != shard], "shard")[0])

    @property
    def capacity(self):
        """Current capacity ``⌈(1 + ε)·m/n⌉``."""
        return capacity(self._kh.size, self._names.size, self.eps)

    def shards(self):
        """Shard names, sorted."""
        return self._names.tolist()

    def __len__(self):
        return int(self._kh.size)

    def shard_of(self, key):
        """Shard of a key on the ring (``ParameterError`` if absent)."""
        at = self._find(key)[3]
        if at is None:
            raise ParameterError(f"key {key!r} is not on the ring")
        return self._names[self._assign[at]:self._assign[at] + 1].tolist()[0]

    def assignment(self):
        """``(keys, shards)`` arrays in priority order (increasing key hash)."""
        return self._kv.copy(), self._names[self._assign]

    def loads(self):
        """Keys per shard as a dict ``{shard: load}``."""
        counts = np.bincount(self._assign, minlength=self._names.size)
        return dict(zip(self._names.tolist(), counts.tolist()))
