"""Reading a workload replay summary: per routing policy, the fan-out histogram and the cache hit rates.

A workload replay runs a request log against a placement and records, for
each routing policy, how many shards each request reached and how often a
cache of a given size answered. The report reads its summary, a JSON object
with one key:

``policies``
    either an object ``{policy name: policy}`` or a list of policies that
    each carry a ``"name"``. A policy holds

    ``fanout_histogram``
        requests per fan-out: an object ``{"1": 812, "2": 120, ...}``, a list
        of ``[fanout, requests]`` pairs, or a list of
        ``{"fanout": f, "requests": r}`` objects (fan-outs are whole numbers
        ≥ 1, requests whole numbers ≥ 0);
    ``hit_rate`` (optional)
        the hit rate for several cache sizes: a list of
        ``{"cache_size": c, "hit_rate": h}`` objects or ``[c, h]`` pairs,
        with ``c`` ≥ 0 (entries per shard) and ``0 ≤ h ≤ 1``.

Other keys are ignored. Every problem is an :class:`~partition.errors.InputError`
naming the file and, for bad JSON, the line.
"""

from __future__ import annotations

import math

from partition.errors import InputError

__all__ = ["read_workload", "parse_workload"]


def read_workload(path):
    """Read and check a workload replay summary (module docstring).

    Parameters
    ----------
    path : str or path-like

    Returns
    -------
    dict
        ``{policy: {"fanout": [(f, requests), ...] sorted by f,
        "hit_rate": [(cache_size, rate), ...] sorted by size}}``, policies in
        file order.

    Raises
    ------
    InputError
        Missing file, bad JSON, or a field that breaks the rules above.
    """
    from partition.jsonfile import read_json

    return parse_workload(read_json(path, "the workload replay summary"), source=str(path))


def _number(value, what, source, whole=False, low=0.0, high=math.inf):
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        raise InputError(source, f"{what} must be a number, got {value!r}")
    if whole and int(value) != value:
        raise InputError(source, f"{what} must be a whole number, got {value!r}")
    if not low <= value <= high:
        raise InputError(source, f"{what} must lie in [{low:g}, {high:g}], got {value!r}")
    return int(value) if whole else float(value)


def _pairs(value, keys, what, source):
    if isinstance(value, dict):
        return list(value.items())
    if not isinstance(value, list):
        raise InputError(source, f"{what} must be an object or a list, got {type(value).__name__}")
    out = []
    for item in value:
        if isinstance(item, dict) and all(key in item for key in keys):
            out.append((item[keys[0]], item[keys[1]]))
        elif isinstance(item, (list, tuple)) and len(item) == 2:
            out.append(tuple(item))
        else:
            raise InputError(source, f"{what}: each entry must be [{keys[0]}, {keys[1]}] or an object with "
                                     f"{keys[0]!r} and {keys[1]!r}, got {item!r}")
    return out


def parse_workload(data, source="<workload>"):
    """Check an already-parsed workload summary; see :func:`read_workload`."""
    if not isinstance(data, dict) or "policies" not in data:
        raise InputError(source, 'expected an object with a "policies" entry')
    policies = data["policies"]
    if isinstance(policies, list):
        named = []
        for item in policies:
            if not isinstance(item, dict) or not isinstance(item.get("name"), str):
                raise InputError(source, 'each entry of the "policies" list must be an object with a "name"')
            named.append((item["name"], item))
        policies = dict(named)
    if not isinstance(policies, dict) or not policies:
        raise InputError(source, '"policies" must name at least one routing policy')
    out = {}
    for name, pol in policies.items():
        if not isinstance(pol, dict) or "fanout_histogram" not in pol:
            raise InputError(source, f"policy {name!r} lacks a fanout_histogram")
        hist = []
        for f, r in _pairs(pol["fanout_histogram"], ("fanout", "requests"), f"policy {name!r} fanout_histogram",
                           source):
            try:
                f = int(f) if isinstance(f, str) and f.strip().isdigit() else f
            except ValueError:
                pass
            hist.append((_number(f, f"policy {name!r}: fan-out", source, whole=True, low=1),
                         _number(r, f"policy {name!r}: requests", source, whole=True)))
        rates = [(_number(c, f"policy {name!r}: cache size", source),
                  _number(h, f"policy {name!r}: hit rate", source, high=1.0))
                 for c, h in _pairs(pol.get("hit_rate") or [], ("cache_size", "hit_rate"),
                                    f"policy {name!r} hit_rate", source)]
        out[str(name)] = {"fanout": sorted(hist), "hit_rate": sorted(rates)}
    return out
