"""Catalog of public graphs: list them, fetch them, verify what was fetched.

The catalog (``partition/data/catalog.json``, shipped as package data so an
installed copy finds it) names each graph's collection, upstream download
address and format, its node and edge counts after normalisation (undirected,
duplicates merged, self-loops dropped), and three checksums:

``file_sha256``
    sha256 of the exact file in Shardline's edge-list form (``file``); checked
    when the file is copied from a local folder (``fetch(..., from_dir=DIR)``).
``edges_sha256``
    a content checksum independent of compression and layout: sha256 of the
    int64 little-endian array of shape ``(m, 2)`` holding every undirected
    pair ``(u, v)``, ``u < v``, in the file's own ids, self-loops dropped,
    duplicates merged, rows sorted by ``u`` then ``v`` (see
    :func:`edges_sha256`).
``degrees_sha256``
    sha256 of the int64 little-endian sorted degree sequence (every node that
    appears in an edge line, self-loops not counted); it does not depend on
    the ids, so it checks a download whose ids differ from the catalog's copy.

A download is converted to the edge-list form (Matrix Market archives are read
with ``scipy.io.mmread`` and written as 1-based ``u v`` pairs, as in the
collection) and checked before anything is written: ``edges_sha256`` when the
catalog's copy keeps the upstream ids (``download_check: "edges"``), otherwise
(``"shape"``: the copy was relabelled by a third party) the node and edge
counts and ``degrees_sha256``. Entries with ``subset: "largest-component"``
keep the largest connected component of the download.
"""

from __future__ import annotations

import gzip
import hashlib
import io
import json
import os
import re
import socket
import tarfile
import urllib.error
import urllib.request
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from partition.atomic import atomic_path
from partition.errors import InputError, ParameterError
from partition.generators import edgelist_bytes

__all__ = [
    "DEFAULT_CATALOG",
    "Fetched",
    "degrees_sha256",
    "edges_sha256",
    "fetch",
    "file_sha256",
    "get_dataset",
    "list_datasets",
    "load_catalog",
    "read_pairs",
]

DEFAULT_CATALOG = Path(__file__).resolve().parent / "data" / "catalog.json"

_REQUIRED = (
    "name", "collection", "kind", "url", "upstream_format", "nodes", "edges", "file",
    "file_sha256", "edges_sha256", "degrees_sha256", "download_check",
)
_FORMATS = ("edgelist", "edgelist.gz", "matrix-market.tar.gz")
_COMMENT = re.compile(rb"(?m)^[ \t]*[#%][^\n]*\n?")


# the catalog
def load_catalog(catalog=None):
    """The catalog's entries, in file order.

    Parameters
    ----------
    catalog : str, path-like, list of dict or None
        A catalog JSON file (``{"datasets": [...]}``), a list of entries, or
        ``None`` for :data:`DEFAULT_CATALOG`.

    Returns
    -------
    list of dict

    Raises
    ------
    InputError
        A missing or malformed file, or an entry that lacks a field.
    """
    if isinstance(catalog, list):
        entries, source = catalog, "<catalog>"
    else:
        source = os.fspath(DEFAULT_CATALOG if catalog is None else catalog)
        try:
            with open(source, encoding="utf-8") as fh:
                data = json.load(fh)
        except FileNotFoundError:
            raise InputError(source, "the dataset catalog is missing") from None
        except json.JSONDecodeError as exc:
            raise InputError(source, f"is not valid JSON: {exc.msg}", exc.lineno) from None
        entries = data.get("datasets") if isinstance(data, dict) else None
        if not isinstance(entries, list):
            raise InputError(source, 'expected an object with a "datasets" list')
    for pos, entry in enumerate(entries):
        missing = [key for key in _REQUIRED if key not in entry]
        if missing:
            raise InputError(source, f"entry {pos + 1} ({entry.get('name', '?')}) lacks {', '.join(missing)}")
        if entry["upstream_format"] not in _FORMATS:
            raise InputError(source, f"entry {entry['name']}: unknown upstream_format {entry['upstream_format']!r}")
        if entry["download_check"] not in ("edges", "shape"):
            raise InputError(source, f"entry {entry['name']}: download_check must be 'edges' or 'shape'")
    return list(entries)


def list_datasets(catalog=None):
    """The catalog's entries (see :func:`load_catalog`), sorted by name."""
    return sorted(load_catalog(catalog), key=lambda e: e["name"].lower())


def get_dataset(name, catalog=None):
    """The entry called ``name``; a :class:`ParameterError` listing the names if there is none."""
    entries = load_catalog(catalog)
    for entry in entries:
        if entry["name"] == name:
            return entry
    names = ", ".join(sorted(e["name"] for e in entries))
    raise ParameterError(f"no dataset called {name!r}; the catalog has: {names}")


# checksums
def file_sha256(path):
    """Hex sha256 of a file's bytes."""
    digest = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()


def _sorted_unique(values):
    """Sorted distinct values (a sort and a neighbour comparison)."""
    values = np.sort(values)
    return values[np.concatenate(([True], values[1:] != values[:-1]))] if values.size else values


def _canonical_pairs(src, dst, loops=False):
    """Distinct ``(min, max)`` pairs sorted by first then second id (self-loops only with ``loops``)."""
    src = np.asarray(src)
    dst = np.asarray(dst)
    if src.dtype.kind not in "iu" or dst.dtype.kind not in "iu":
        raise ParameterError("edge checksums are defined for integer node ids only")
    src = src.astype(np.int64, copy=False)
    dst = dst.astype(np.int64, copy=False)
    keep = np.ones(src.shape, dtype=bool) if loops else src != dst
    lo, hi = np.minimum(src, dst)[keep], np.maximum(src, dst)[keep]
    if lo.size and lo.min() >= 0 and hi.max() < 2**31:
        key = _sorted_unique((lo << 32) | hi)  # same order as sorting the pairs, much faster
        return np.stack((key >> 32, key & 0xFFFFFFFF), axis=1)
    return np.unique(np.stack((lo, hi), axis=1), axis=0).reshape(-1, 2)


def edges_sha256(src, dst):
    """Content checksum of an undirected edge list in its own ids.

    sha256 over the bytes of the ``(m, 2)`` int64 little-endian array of the
    distinct undirected pairs ``(min(u, v), max(u, v))`` with ``u != v``,
    rows sorted ascending by first then second id. The same edges give the
    same checksum whatever the file's order, direction, duplicates or
    compression.

    Parameters
    ----------
    src, dst : array_like of int
        Edge endpoints in the file's ids.

    Returns
    -------
    str
        64 hex digits.

    Raises
    ------
    ParameterError
        When the ids are not integers.
    """
    pairs = _canonical_pairs(src, dst)
    return hashlib.sha256(np.ascontiguousarray(pairs, dtype="<i8").tobytes()).hexdigest()


def degrees_sha256(src, dst):
    """Label-free checksum: sha256 of the sorted degree sequence (int64 little-endian).

    Nodes are the distinct ids of ``src`` and ``dst`` (a self-loop's endpoint
    is a node of degree 0 unless it has other edges); degrees count distinct
    undirected neighbours.

    Returns
    -------
    str
        64 hex digits.
    """
    pairs = _canonical_pairs(src, dst)
    nodes = _sorted_unique(np.concatenate((np.asarray(src, dtype=np.int64), np.asarray(dst, dtype=np.int64))))
    deg = np.bincount(np.searchsorted(nodes, pairs.ravel()), minlength=nodes.shape[0])
    return hashlib.sha256(np.sort(deg).astype("<i8").tobytes()).hexdigest()


def _shape(src, dst):
    """(nodes, undirected edges) after normalisation."""
    pairs = _canonical_pairs(src, dst)
    nodes = _sorted_unique(np.concatenate((np.asarray(src), np.asarray(dst)))).shape[0]
    return int(nodes), int(pairs.shape[0])


# reading upstream files
def read_pairs(data, source=None):
    """Integer ``u v`` pairs from edge-list text (first two fields of each line).

    Lines starting with ``#`` or ``%`` are comments; fields are separated by
    spaces or tabs; further fields (weights, labels) are ignored.

    Parameters
    ----------
    data : bytes
        Uncompressed file content.
    source : str or None
        Name used in error messages.

    Returns
    -------
    src, dst : ndarray of int64

    Raises
    ------
    InputError
        Naming the first line that does not start with two integers.
    """
    body = _COMMENT.sub(b"", data.replace(b"\r\n", b"\n"))
    width = len(body.lstrip().split(b"\n", 1)[0].split())
    values = None
    if width >= 2 and (_fields_per_line(body) == width).all():
        try:
            values = np.array(body.split(), dtype=np.int64)
        except (ValueError, OverflowError):
            pass
    if values is None:
        raise InputError(source, *_first_bad_line(data, width))
    values = values.reshape(-1, width)
    return values[:, 0].copy(), values[:, 1].copy()


def _fields_per_line(body):
    """Number of whitespace-separated fields on each non-blank line (vectorised over bytes)."""
    buf = np.frombuffer(body, dtype=np.uint8)
    space = (buf == 32) | (buf == 9) | (buf == 10) | (buf == 13)
    starts = ~space & np.concatenate(([True], space[:-1]))
    counts = np.bincount(np.cumsum(buf == 10)[starts])
    return counts[counts > 0]


def _first_bad_line(data, width):
    for lineno, line in enumerate(data.decode("utf-8", "replace").split("\n"), start=1):
        s = line.strip()
        if not s or s[0] in "#%":
            continue
        parts = s.split()
        if len(parts) != width or len(parts) < 2 or not all(p.lstrip("+-").isdigit() for p in parts):
            want = f"{width} integer fields" if width >= 2 else "two integer node ids"
            return f"expected {want}, found {s[:80]!r}", lineno
    return "no edges were found", None


def _maybe_gunzip(raw, source):
    if raw[:2] != b"\x1f\x8b":
        return raw
    try:
        return gzip.decompress(raw)
    except (OSError, EOFError) as exc:
        raise InputError(source, f"is not a valid gzip file: {exc}") from None


def _tar_member(raw, member, source):
    try:
        with tarfile.open(fileobj=io.BytesIO(raw), mode="r:*") as tar:
            names = tar.getnames()
            if member not in names:
                raise InputError(source, f"the archive has no member {member!r} (it has: {', '.join(names[:10])})")
            return tar.extractfile(member).read()
    except tarfile.TarError as exc:
        raise InputError(source, f"is not a readable tar archive: {exc}") from None


def _matrix_market_pairs(data, source):
    import scipy.io

    try:
        coo = scipy.io.mmread(io.BytesIO(data)).tocoo()
    except (ValueError, IndexError, TypeError, AttributeError) as exc:
        raise InputError(source, f"is not a readable Matrix Market file: {exc}") from None
    return coo.row.astype(np.int64) + 1, coo.col.astype(np.int64) + 1


def _largest_component(src, dst):
    import scipy.sparse as sp
    from scipy.sparse.csgraph import connected_components

    nodes, codes = np.unique(np.concatenate((src, dst)), return_inverse=True)
    n, m = nodes.shape[0], src.shape[0]
    adj = sp.coo_matrix((np.ones(m, dtype=np.int8), (codes[:m], codes[m:])), shape=(n, n)).tocsr()
    _, label = connected_components(adj, directed=False)
    big = np.argmax(np.bincount(label))
    keep = label[codes[:m]] == big
    return src[keep], dst[keep]


# fetch
@dataclass(frozen=True)
class Fetched:
    """What :func:`fetch` wrote: the ``path``, its ``source`` (file or address) and what was ``checked``."""

    path: Path
    source: str
    checked: str


def fetch(name, dest_dir, from_dir=None, catalog=None, timeout=30.0):
    """Fetch a catalog graph into ``dest_dir`` and verify it.

    With ``from_dir`` the file ``entry["file"]`` is copied from that folder and
    its sha256 must equal ``file_sha256``. Without it, ``entry["url"]`` is
    downloaded, converted to Shardline's edge-list form when needed, and
    checked as the module docstring describes. Nothing is written unless the
    check passes; the output appears atomically as ``dest_dir/entry["file"]``.

    Parameters
    ----------
    name : str
        Catalog name of the graph.
    dest_dir : str or path-like
        Output folder (created when missing).
    from_dir : str, path-like or None
        A local folder that already holds the file.
    catalog : see :func:`load_catalog`
    timeout : float
        Seconds to wait for the server (per connection attempt and read).

    Returns
    -------
    Fetched

    Raises
    ------
    ParameterError
        Unknown name, or an address that is not http(s).
    InputError
        The local file is missing, a download fails (offline, DNS failure,
        time-out, HTTP error: the message names the address and suggests
        ``--from DIR``), the download cannot be parsed, or a checksum or count
        does not match.
    """
    entry = get_dataset(name, catalog)
    dest = Path(dest_dir) / entry["file"]
    if from_dir is not None:
        return _copy_local(entry, Path(from_dir) / entry["file"], dest)
    url = entry["url"]
    raw = _download(url, entry["file"], timeout)
    body, src, dst, converted = _convert(entry, raw, url)
    checked = _verify_download(entry, src, dst, url)
    with atomic_path(dest) as tmp:
        with open(tmp, "wb") as fh:
            fh.write(body)
    how = "converted from " + entry["upstream_format"] if converted else "as downloaded"
    return Fetched(dest, url, f"{checked} ({how})")


def _copy_local(entry, source, dest):
    if not source.is_file():
        raise InputError(source, f"no such file; the folder given with --from must hold {entry['file']}")
    digest = hashlib.sha256()
    with atomic_path(dest) as tmp:
        with open(source, "rb") as inp, open(tmp, "wb") as out:
            for block in iter(lambda: inp.read(1 << 20), b""):
                digest.update(block)
                out.write(block)
        if digest.hexdigest() != entry["file_sha256"]:
            raise InputError(
                source,
                f"sha256 {digest.hexdigest()} does not match the catalog's {entry['file_sha256']} "
                f"for {entry['name']}; nothing was written",
            )
    return Fetched(dest, str(source), "file sha256")


def _download(url, filename, timeout):
    if not url.startswith(("http://", "https://")):
        raise ParameterError(f"only http and https addresses can be downloaded, got {url!r}")
    advice = f"if this machine is offline, download it elsewhere and pass --from DIR (a folder holding {filename})"
    try:
        with urllib.request.urlopen(url, timeout=timeout) as resp:
            return resp.read()
    except urllib.error.HTTPError as exc:
        raise InputError(url, f"download failed: HTTP {exc.code} {exc.reason}; {advice}") from None
    except urllib.error.URLError as exc:
        raise InputError(url, f"could not be downloaded ({exc.reason}); {advice}") from None
    except (socket.timeout, TimeoutError):
        raise InputError(url, f"download timed out after {timeout:g} s; {advice}") from None
    except OSError as exc:
        raise InputError(url, f"download failed ({exc}); {advice}") from None


def _convert(entry, raw, url):
    """Returns (bytes to write, src, dst, converted?)."""
    fmt = entry["upstream_format"]
    member = entry.get("upstream_member")
    if fmt in ("edgelist", "edgelist.gz"):
        text = _maybe_gunzip(raw, url)
        src, dst = read_pairs(text, url)
        if not entry.get("subset"):
            keep_gz = entry["file"].endswith(".gz")
            if keep_gz and raw[:2] == b"\x1f\x8b":
                return raw, src, dst, False
            return (_gzip(text) if keep_gz else text), src, dst, keep_gz
    else:
        src, dst = _matrix_market_pairs(_tar_member(raw, member, url), f"{url}:{member}")
    if entry.get("subset") == "largest-component":
        src, dst = _largest_component(src, dst)
    elif entry.get("subset"):
        raise InputError(None, f"entry {entry['name']}: unknown subset {entry['subset']!r}")
    text = _edge_text(entry, src, dst, url)
    return (_gzip(text) if entry["file"].endswith(".gz") else text), src, dst, True


def _edge_text(entry, src, dst, url):
    pairs = _canonical_pairs(src, dst, loops=True)  # a self-loop keeps its node in the graph
    return edgelist_bytes(pairs[:, 0], pairs[:, 1], comment=f"{entry['name']}: converted from {url}")


def _gzip(data):
    buf = io.BytesIO()
    with gzip.GzipFile(filename="", mode="wb", fileobj=buf, mtime=0) as gz:
        gz.write(data)
    return buf.getvalue()


def _verify_download(entry, src, dst, url):
    nodes, edges = _shape(src, dst)
    if (nodes, edges) != (entry["nodes"], entry["edges"]):
        raise InputError(
            url,
            f"has {nodes} nodes and {edges} edges after normalisation; the catalog expects "
            f"{entry['nodes']} and {entry['edges']} for {entry['name']}; nothing was written",
        )
    if entry["download_check"] == "edges":
        got, want, what = edges_sha256(src, dst), entry["edges_sha256"], "edges_sha256"
    else:
        got, want, what = degrees_sha256(src, dst), entry["degrees_sha256"], "degrees_sha256"
    if got != want:
        raise InputError(
            url, f"{what} {got} does not match the catalog's {want} for {entry['name']}; nothing was written"
        )
    return f"counts and {what}"
