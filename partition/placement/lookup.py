"""Node-to-shard lookups for services: sorted keys, a bucket directory and a compiled search.

A :class:`Placement` holds the keys of a node→shard file as one sorted uint64
array (integer keys with their sign bit flipped, which keeps their order;
string keys as a 64-bit hash: FNV-1a followed by the splitmix64 finaliser)
beside an int16/int32 shard array. A directory of about one bucket per key,
indexed by the high bits of ``key − smallest key``, narrows every search to a
few neighbouring entries, so a lookup costs two or three memory accesses
instead of the ~24 of a plain binary search over millions of keys. Integer
keys take 14 bytes per key with int16 shards (8 key + 2 shard + at most 4 of
directory). String placements also keep the key bytes in hash order, and a
hit is confirmed by comparing the bytes, so answers are exact even when two
keys share a hash (the search scans the run of equal hashes). Vectorised
lookups run one compiled loop over the query array; a single integer key is
searched in Python over memoryviews of the same arrays, which costs less than
the call into compiled code. The compiled loop searches blocks of 16 queries
step by step, so the memory accesses of different queries overlap.

:meth:`Placement.load` reads a node→shard table with
:func:`partition.node_shards.read_node_shards` (the one reader of such tables).
"""

from __future__ import annotations

import numba
import numpy as np
import pyarrow as pa
import pyarrow.compute as pc

from partition.errors import ParameterError
from partition.node_shards import read_node_shards
from partition.rules import SPLITMIX_GAMMA, SPLITMIX_M1, SPLITMIX_M2

__all__ = ["Placement", "fnv1a64", "string_key_hash"]

_FNV_OFFSET = np.uint64(0xCBF29CE484222325)
_FNV_PRIME = np.uint64(0x100000001B3)
_GOLDEN, _M1, _M2 = SPLITMIX_GAMMA, SPLITMIX_M1, SPLITMIX_M2  # numba reads them as compile-time constants
_SIGN = np.uint64(1 << 63)
_ALL = np.uint64(0xFFFFFFFFFFFFFFFF)
_HASH_MASK = _ALL  # bits of the string hash in use; a narrower mask forces collisions in tests
_MISSING = object()


# --- compiled kernels --------------------------------------------------------


@numba.njit(cache=True, nogil=True)
def _fnv(data, a, b):
    h = _FNV_OFFSET
    for j in range(a, b):
        h = (h ^ np.uint64(data[j])) * _FNV_PRIME
    return h


@numba.njit(cache=True, nogil=True)
def _mix(z):
    z = z + _GOLDEN
    z = (z ^ (z >> np.uint64(30))) * _M1
    z = (z ^ (z >> np.uint64(27))) * _M2
    return z ^ (z >> np.uint64(31))


@numba.njit(cache=True, nogil=True)
def _hash_all(offsets, data, finalise, mask):
    out = np.empty(offsets.shape[0] - 1, dtype=np.uint64)
    for i in range(out.shape[0]):
        h = _fnv(data, offsets[i], offsets[i + 1])
        out[i] = (_mix(h) if finalise else h) & mask
    return out


@numba.njit(cache=True, nogil=True)
def _lower(keys, starts, lo, hi, shift, q):
    """Position of the first copy of ``q`` in the sorted ``keys``, or -1.

    The directory (``starts``, ``lo``, ``hi``, ``shift``; see ``_directory``)
    gives the bucket of ``q``; a binary search runs inside it (one or two keys
    on average).
    """
    if q < lo or q > hi:
        return np.int64(-1)
    b = (q - lo) >> shift
    a = np.int64(starts[b])
    e = np.int64(starts[b + 1])
    while a < e:
        mid = (a + e) >> 1
        if keys[mid] < q:
            a = mid + 1
        else:
            e = mid
    if a < keys.shape[0] and keys[a] == q:
        return a
    return np.int64(-1)


_BLOCK = 16  # queries searched side by side, so their memory accesses overlap


@numba.njit(cache=True, nogil=True)
def _lower_block(keys, starts, lo, hi, shift, qs, t, pos, end):
    """``pos[j]`` = position of the first copy of ``qs[j]`` in ``keys`` or -1, for ``j < t``.

    The same search as ``_lower``, run step by step over the block: each step
    issues ``t`` independent loads, which the processor overlaps.
    """
    for j in range(t):
        q = qs[j]
        if q < lo or q > hi:
            pos[j] = 0
            end[j] = 0
        else:
            b = (q - lo) >> shift
            pos[j] = starts[b]
            end[j] = starts[b + 1]
    active = True
    while active:
        active = False
        for j in range(t):
            a, e = pos[j], end[j]
            if a < e:
                mid = (a + e) >> 1
                if keys[mid] < qs[j]:
                    pos[j] = mid + 1
                else:
                    end[j] = mid
                active = True
    for j in range(t):
        a = pos[j]
        if not (a < keys.shape[0] and keys[a] == qs[j]):
            pos[j] = -1


@numba.njit(cache=True, nogil=True)
def _find_ints(keys, starts, lo, hi, shift, shards, queries, default, out):
    pos = np.empty(_BLOCK, dtype=np.int64)
    end = np.empty(_BLOCK, dtype=np.int64)
    for s in range(0, queries.shape[0], _BLOCK):
        t = min(_BLOCK, queries.shape[0] - s)
        _lower_block(keys, starts, lo, hi, shift, queries[s : s + t], t, pos, end)
        for j in range(t):
            out[s + j] = default if pos[j] < 0 else shards[pos[j]]


@numba.njit(cache=True, nogil=True)
def _same(d1, a1, b1, d2, a2, b2):
    if b1 - a1 != b2 - a2:
        return False
    for t in range(b1 - a1):
        if d1[a1 + t] != d2[a2 + t]:
            return False
    return True


@numba.njit(cache=True, nogil=True)
def _string_position(keys, starts, lo, hi, shift, k_off, k_data, q_data, qa, qb, mask):
    """Position of the stored string equal to ``q_data[qa:qb]``, or -1 (scans equal hashes)."""
    h = _mix(_fnv(q_data, qa, qb)) & mask
    p = _lower(keys, starts, lo, hi, shift, h)
    while 0 <= p < keys.shape[0] and keys[p] == h:
        if _same(k_data, k_off[p], k_off[p + 1], q_data, qa, qb):
            return p
        p += 1
    return np.int64(-1)


@numba.njit(cache=True, nogil=True)
def _find_strings(keys, starts, lo, hi, shift, shards, k_off, k_data, q_off, q_data, mask, default, out):
    h = np.empty(_BLOCK, dtype=np.uint64)
    pos = np.empty(_BLOCK, dtype=np.int64)
    end = np.empty(_BLOCK, dtype=np.int64)
    for s in range(0, out.shape[0], _BLOCK):
        t = min(_BLOCK, out.shape[0] - s)
        for j in range(t):
            h[j] = _mix(_fnv(q_data, q_off[s + j], q_off[s + j + 1])) & mask
        _lower_block(keys, starts, lo, hi, shift, h, t, pos, end)
        for j in range(t):
            i, p = s + j, pos[j]
            out[i] = default
            while 0 <= p < keys.shape[0] and keys[p] == h[j]:
                if _same(k_data, k_off[p], k_off[p + 1], q_data, q_off[i], q_off[i + 1]):
                    out[i] = shards[p]
                    break
                p += 1


@numba.njit(cache=True, nogil=True)
def _repeat_in_runs(keys, k_off, k_data):
    """A position whose string equals an earlier one in its run of equal hashes, or -1."""
    n = keys.shape[0]
    for a in range(n - 1):
        b = a + 1
        while b < n and keys[b] == keys[a]:
            if _same(k_data, k_off[a], k_off[a + 1], k_data, k_off[b], k_off[b + 1]):
                return b
            b += 1
    return -1


# --- hashes of string keys ---------------------------------------------------


def _string_buffers(arr):
    """int64 offsets and uint8 bytes of a pyarrow large_string array without nulls."""
    arr = arr.combine_chunks() if isinstance(arr, pa.ChunkedArray) else arr
    arr = pc.cast(arr, pa.large_string()) if arr.type != pa.large_string() else arr
    _, off, data = arr.buffers()
    offsets = np.frombuffer(off, dtype=np.int64)[arr.offset : arr.offset + len(arr) + 1]
    data = np.frombuffer(data, dtype=np.uint8) if data is not None else np.zeros(0, dtype=np.uint8)
    return offsets, data


def fnv1a64(strings):
    """64-bit FNV-1a hash of the UTF-8 bytes of each string.

    Parameters
    ----------
    strings : sequence of str or pyarrow string array

    Returns
    -------
    ndarray of uint64

    References
    ----------
    G. Fowler, L. C. Noll, K.-P. Vo and D. Eastlake, "The FNV Non-Cryptographic
    Hash Algorithm", IETF Internet-Draft draft-eastlake-fnv (offset basis
    0xcbf29ce484222325, prime 0x100000001b3).
    """
    offsets, data = _string_buffers(_as_strings(strings))
    return _hash_all(offsets, data, False, _ALL)


def string_key_hash(strings):
    """The hash a :class:`Placement` sorts string keys by: splitmix64 finaliser of FNV-1a.

    ``mix64(fnv1a64(s))`` with :func:`partition.rules.mix64`; the finaliser
    spreads every input byte over the high bits the bucket directory uses.

    Parameters
    ----------
    strings : sequence of str or pyarrow string array

    Returns
    -------
    ndarray of uint64

    References
    ----------
    G. L. Steele Jr., D. Lea and C. H. Flood, "Fast splittable pseudorandom
    number generators", OOPSLA 2014 (the finaliser).
    """
    offsets, data = _string_buffers(_as_strings(strings))
    return _hash_all(offsets, data, True, _ALL)


def _as_strings(keys):
    """Keys as a pyarrow large_string array; integers become their decimal text."""
    if isinstance(keys, (pa.Array, pa.ChunkedArray)):
        if not (pa.types.is_string(keys.type) or pa.types.is_large_string(keys.type)
                or pa.types.is_integer(keys.type)):
            raise ParameterError(f"keys must be strings or integers, got Arrow type {keys.type}")
        if keys.null_count:
            raise ParameterError("keys must not be null")
        return pc.cast(keys, pa.large_string())
    arr = _object_array(keys) if isinstance(keys, (list, tuple)) else np.asarray(keys)
    arr = arr.reshape(-1) if arr.ndim == 0 else arr
    if arr.ndim != 1:
        raise ParameterError(f"keys must be one-dimensional, got shape {arr.shape}")
    if arr.size == 0:
        return pa.array([], type=pa.large_string())
    if arr.dtype.kind in "iu":
        arr = arr.astype(str)
    elif arr.dtype.kind == "O":
        try:
            return pa.array(arr, type=pa.large_string(), from_pandas=False)
        except (pa.ArrowTypeError, pa.ArrowInvalid):
            bad = [x for x in arr if not isinstance(x, (str, int, np.integer)) or isinstance(x, bool)]
            if bad:
                raise ParameterError(f"keys must be strings or integers, got {bad[0]!r}") from None
            arr = arr.astype(str)
    elif arr.dtype.kind not in "US":
        raise ParameterError(f"keys must be strings or integers, got dtype {arr.dtype}")
    return pa.array(arr, type=pa.large_string())


def _object_array(items):
    """A list as a 1-d object array (numpy's fixed-width strings would drop trailing NULs)."""
    arr = np.empty(len(items), dtype=object)
    arr[:] = items
    return arr


def _as_int_keys(keys):
    """Integer keys as int64, and a mask of uint64 values beyond int64 (never placed) or None."""
    arr = _object_array(keys) if isinstance(keys, (list, tuple)) else np.asarray(keys)
    arr = arr.reshape(-1) if arr.ndim == 0 else arr
    if arr.ndim != 1:
        raise ParameterError(f"keys must be one-dimensional, got shape {arr.shape}")
    if arr.size == 0:
        return np.zeros(0, dtype=np.int64), None
    if arr.dtype.kind == "O":
        try:
            inferred = pa.array(arr, from_pandas=False)
        except (pa.ArrowTypeError, pa.ArrowInvalid, OverflowError):
            inferred = None
        if inferred is None or not pa.types.is_integer(inferred.type):
            raise ParameterError("this placement has integer keys; got keys that are not all integers")
        arr = inferred.to_numpy()
    if arr.dtype.kind not in "iu":
        raise ParameterError(f"this placement has integer keys; got keys of dtype {arr.dtype}")
    too_big = None
    if arr.dtype == np.uint64:
        too_big = arr > np.uint64(np.iinfo(np.int64).max)
        arr = np.where(too_big, 0, arr).astype(np.int64)
    return arr.astype(np.int64, copy=False), too_big


# --- the placement -----------------------------------------------------------


class Placement:
    """An immutable node→shard map answering single and vectorised lookups.

    Build it with :meth:`load` (a ``node,shard`` file) or :meth:`from_arrays`.
    Integer placements take integer keys; string placements take strings
    (integers are looked up as their decimal text).

    Attributes
    ----------
    integer_keys : bool
        Whether the keys are int64 (else strings).
    k : int
        Largest shard id plus one (0 when empty).
    """

    def __init__(self, keys, shards, k_off=None, k_data=None, mask=_ALL):
        """Wrap sorted uint64 ``keys`` and their ``shards``; build through :meth:`load` or :meth:`from_arrays`."""
        self._keys, self._shards = keys, shards
        self._index = (keys,) + _directory(keys)
        self._off, self._data, self._mask = k_off, k_data, mask
        # Python views for single-key lookups (indexing a memoryview yields a Python int)
        self._views = tuple(memoryview(a) for a in (keys, self._index[1], shards))
        self._bounds = tuple(int(x) for x in self._index[2:])
        self.integer_keys = k_off is None
        self.k = int(shards.max()) + 1 if shards.size else 0

    # --- building ----------------------------------------------------------
    @classmethod
    def load(cls, path):
        """Read a node→shard file (see :func:`read_node_shards`) into a placement.

        Parameters
        ----------
        path : str or os.PathLike

        Returns
        -------
        Placement

        Raises
        ------
        InputError
            The file is missing, unreadable or malformed, lists a node twice, or
            has a shard that is not an integer in ``[0, 2**31)``; the message
            names the file and line.
        """
        table = read_node_shards(path)
        return cls._build(table.ids, table.shards)

    @classmethod
    def from_arrays(cls, keys, shards):
        """Build a placement from a key array and the shard of each key.

        Parameters
        ----------
        keys : array_like of int, or of str, or pyarrow array
            Distinct keys. Integer arrays (or object arrays holding only
            integers) give an integer placement; anything else is read as
            strings, integers in it becoming their decimal text.
        shards : array_like of int, same length
            Shard ids in ``[0, 2**31)``; stored as int16 when below ``2**15``.

        Returns
        -------
        Placement

        Raises
        ------
        ParameterError
            Lengths differ, a shard is negative, too large or not an integer,
            a key is not an integer or string, or a key appears twice.
        """
        if not isinstance(keys, (pa.Array, pa.ChunkedArray)):
            arr = _object_array(keys) if isinstance(keys, (list, tuple)) else np.asarray(keys)
            if arr.dtype.kind == "O" and arr.size:
                try:
                    inferred = pa.array(arr.reshape(-1), from_pandas=False)
                except (pa.ArrowTypeError, pa.ArrowInvalid):
                    inferred = None
                if inferred is not None and pa.types.is_integer(inferred.type):
                    arr = inferred.to_numpy().astype(np.int64, copy=False)
            keys = arr
        elif pa.types.is_integer(keys.type):
            if keys.null_count:
                raise ParameterError("keys must not be null")
            keys = pc.cast(keys, pa.int64()).to_numpy()
        shards = np.asarray(shards)
        if shards.dtype.kind not in "iu" or shards.ndim != 1:
            raise ParameterError(f"shards must be a one-dimensional integer array, got {shards.dtype} {shards.shape}")
        if len(keys) != shards.shape[0]:
            raise ParameterError(f"{len(keys)} keys but {shards.shape[0]} shards")
        if shards.size and (shards.min() < 0 or shards.max() >= 2**31):
            bad = shards[(shards < 0) | (shards >= 2**31)][0]
            raise ParameterError(f"shard {int(bad)} is out of range; shard ids run from 0 to 2**31 - 1")
        if isinstance(keys, np.ndarray) and keys.dtype.kind in "iu" and keys.dtype != np.bool_:
            if keys.dtype == np.uint64 and keys.size and keys.max() > np.iinfo(np.int64).max:
                raise ParameterError("integer keys must fit int64")
            keys = keys.astype(np.int64, copy=False)
        return cls._build(keys, shards.astype(np.int64, copy=False))

    @classmethod
    def _build(cls, keys, shards, repeat_error=None):
        sdtype = np.int16 if (shards.size == 0 or shards.max() < 2**15) else np.int32
        if isinstance(keys, np.ndarray) and keys.dtype == np.int64:
            u = keys.view(np.uint64) ^ _SIGN
            order = np.argsort(u)
            u = u[order]
            twice = np.flatnonzero(u[1:] == u[:-1])
            if twice.size:
                key = int(keys[order[twice[0]]])
                raise repeat_error(key) if repeat_error else ParameterError(f"key {key} appears twice")
            return cls(u, shards[order].astype(sdtype))
        arr = _as_strings(keys)
        mask = np.uint64(_HASH_MASK)
        off, data = _string_buffers(arr)
        h = _hash_all(off, data, True, mask)
        order = np.argsort(h, kind="stable")
        arr = arr.take(pa.array(order))
        off, data = _string_buffers(arr)
        off, data = off - off[0], data[off[0] : off[-1]].copy() if off.size else data
        h = h[order]
        twice = _repeat_in_runs(h, off, data)
        if twice >= 0:
            key = arr[int(twice)].as_py()
            raise repeat_error(key) if repeat_error else ParameterError(f"key {key!r} appears twice")
        return cls(h, shards[order].astype(sdtype), k_off=off, k_data=data, mask=mask)

    # --- lookups -------------------------------------------------------------
    def shard_of(self, key, default=_MISSING):
        """The shard of one key.

        Parameters
        ----------
        key : int or str
        default : object, optional
            Returned for a key that is not placed; without it such a key raises.

        Returns
        -------
        int (or ``default``)

        Raises
        ------
        KeyError
            The key is not placed and no default was given.
        """
        pos = self._position(key)
        if pos >= 0:
            return self._views[2][pos]
        if default is _MISSING:
            raise KeyError(key)
        return default

    def __contains__(self, key):
        return self._position(key) >= 0

    def _position(self, key):
        """Position of ``key`` or -1; integer keys are searched in Python (cheaper than a compiled call)."""
        if isinstance(key, (bool, np.bool_)) or not isinstance(key, (int, np.integer, str)):
            return -1
        if self.integer_keys:
            if isinstance(key, str) or not -(2**63) <= int(key) < 2**63:
                return -1
            return self._search(int(key) + 2**63)
        raw = (str(int(key)) if not isinstance(key, str) else key).encode("utf-8", "surrogatepass")
        q = np.frombuffer(raw, dtype=np.uint8)
        return int(_string_position(*self._index, self._off, self._data, q, 0, q.shape[0], self._mask))

    def _search(self, q):
        keys, starts, _ = self._views
        lo, hi, shift = self._bounds
        if not lo <= q <= hi:
            return -1
        b = (q - lo) >> shift
        a, e = starts[b], starts[b + 1]
        while a < e:
            mid = (a + e) >> 1
            if keys[mid] < q:
                a = mid + 1
            else:
                e = mid
        return a if a < len(keys) and keys[a] == q else -1

    def shards_of(self, keys, default=-1):
        """The shard of each key, ``default`` where a key is not placed.

        Parameters
        ----------
        keys : array_like of int or str, or pyarrow array
            Integer placement: integers (any integer dtype). String placement:
            strings, or integers (looked up as their decimal text).
        default : int
            Value for keys that are not placed; must fit int32.

        Returns
        -------
        ndarray of int32, same length as ``keys``

        Raises
        ------
        ParameterError
            ``keys`` has the wrong type for this placement or ``default`` does
            not fit int32.
        """
        if isinstance(default, (bool, np.bool_)) or not isinstance(default, (int, np.integer)) \
                or not -(2**31) <= int(default) < 2**31:
            raise ParameterError(f"default must be an integer that fits int32, got {default!r}")
        if self.integer_keys:
            if isinstance(keys, (pa.Array, pa.ChunkedArray)):
                if not pa.types.is_integer(keys.type):
                    raise ParameterError(f"this placement has integer keys; got Arrow type {keys.type}")
                keys = keys.to_numpy()
            q, too_big = _as_int_keys(keys)
            out = np.empty(q.shape[0], dtype=np.int32)
            _find_ints(*self._index, self._shards, q.view(np.uint64) ^ _SIGN, np.int32(default), out)
            if too_big is not None:
                out[too_big] = default
            return out
        q_off, q_data = _string_buffers(_as_strings(keys))
        out = np.empty(q_off.shape[0] - 1, dtype=np.int32)
        _find_strings(*self._index, self._shards, self._off, self._data, q_off, q_data, self._mask,
                      np.int32(default), out)
        return out

    # --- contents ------------------------------------------------------------
    def __len__(self):
        return int(self._keys.shape[0])

    def to_arrays(self):
        """The keys and their shards: integer keys ascending, string keys in hash order.

        Returns
        -------
        keys : ndarray of int64, or of str (dtype object)
        shards : ndarray of int16 or int32
        """
        if self.integer_keys:
            return (self._keys ^ _SIGN).view(np.int64), self._shards.copy()
        arr = pa.LargeStringArray.from_buffers(len(self), pa.py_buffer(self._off), pa.py_buffer(self._data))
        return arr.to_numpy(zero_copy_only=False).astype(object), self._shards.copy()

    @property
    def nbytes(self):
        """Bytes held by the lookup arrays (keys, shards, directory, string bytes)."""
        parts = [self._keys, self._shards, self._index[1], self._off, self._data]
        return int(sum(a.nbytes for a in parts if a is not None))

    def __repr__(self):
        kind = "integer" if self.integer_keys else "string"
        return f"Placement({len(self)} {kind} keys, k={self.k}, {self.nbytes} bytes)"


def _directory(keys):
    """Bucket starts over the sorted uint64 ``keys``: at most one bucket per key.

    Bucket ``b`` holds the keys in ``[lo + b·2**shift, lo + (b+1)·2**shift)``;
    ``starts[b]`` is the position of its first key. Returns ``(starts, lo, hi, shift)``.
    """
    n = int(keys.shape[0])
    idx = np.int32 if n < 2**31 else np.int64
    if n == 0:  # lo > hi: every query misses before the directory is read
        return np.zeros(2, dtype=idx), np.uint64(1), np.uint64(0), np.uint64(0)
    lo, hi = keys[0], keys[-1]
    span = int(hi - lo)
    shift = max(0, span.bit_length() - n.bit_length() + 1)
    nb = (span >> shift) + 1
    floors = lo + (np.arange(nb, dtype=np.uint64) << np.uint64(shift))
    starts = np.empty(nb + 1, dtype=idx)
    starts[:nb] = np.searchsorted(keys, floors, side="left")
    starts[nb] = n
    return starts, lo, hi, np.uint64(shift)
