"""Export a run's placement as a self-describing folder: node→shard table, per-shard lists, manifest.

:func:`export_run` reads the node→shard file of ``shardline run`` (or
``shardline recut``) and its JSON report, and writes a folder holding

* ``assignment.<ext>`` — every node and its shard, sorted by node id;
* ``shards/shard-<s>.<ext>`` — one file per shard ``s = 0..k−1`` (zero-padded
  to at least five digits, so the names sort in shard order) listing its
  nodes, sorted by id; empty shards get an empty file;
* ``manifest.json`` — the input graph's path, size and SHA-256 checksum, ``k``,
  ε, seed, options, tool version and metrics copied from the report (the
  ``cut_matrix``/``cut_pairs`` entries are left out: they are in the report),
  the SHA-256 of the assignment and report it was made from, the creation time
  and every written file with its SHA-256, size and row count.

Formats: Parquet (``node``/``shard`` columns, int64 or string ids), CSV
(header row, RFC 4180 quoting where needed) or JSON Lines (one object per
row, ``{"node": ..., "shard": ...}``). Every byte depends only on the inputs
except the manifest's ``created_utc`` (UTC, ISO 8601), the one
non-deterministic field; the manifest lists it under ``nondeterministic``.

Atomicity: the folder is built as a hidden temporary sibling and renamed into
place, so a failure at any point leaves no folder behind; an existing folder
is replaced only with ``force=True`` (moved aside, the new one renamed in,
then the old one removed). The input graph must exist: it is looked for where
the report names it (as given, then relative to the folder the run was started
from, inferred from the report's own recorded path), and a graph file passed
explicitly must have the same checksum as the one the report names (or the
checksum the report records, when it records one); when the named file is
gone and the report records no checksum, the file passed is taken as it is. :func:`verify_export`
checks a written folder against its manifest and, optionally, a graph file.
Checksums: SHA-256 (NIST FIPS 180-4).
"""

from __future__ import annotations

import contextlib
import datetime
import hashlib
import json
import os
import shutil
import tempfile

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.parquet as pq

from partition import __version__
from partition.atomic import atomic_path, write_bytes, write_text
from partition.errors import InputError, ParameterError
from partition.node_shards import read_node_shards

__all__ = ["export_run", "verify_export", "check_export", "publish_export", "file_sha256", "find_input_graph",
           "check_pairing",
           "manifest_head", "data_files", "FORMATS", "EXTENSIONS", "MANIFEST"]

FORMATS = ("parquet", "csv", "jsonl")
MANIFEST = "manifest.json"
# the file-name ending of an exported table in each format
EXTENSIONS = {"parquet": "parquet", "csv": "csv", "jsonl": "jsonl"}
_LEFT_OUT = ("cut_matrix", "cut_pairs")


def file_sha256(path, chunk=1 << 20):
    """Hex SHA-256 of a file's bytes, read in chunks; of a folder dataset, over its data files.

    A folder (a Parquet or CSV dataset as Spark writes it) is hashed as the
    sequence, in sorted relative-path order, of every data file's relative
    path (UTF-8, then a zero byte) and its bytes' own SHA-256 digest; names
    starting with ``.`` or ``_`` (checksums, ``_SUCCESS`` markers) are left out.

    Raises
    ------
    InputError
        The file is missing or unreadable.
    """
    if os.path.isdir(path):
        h = hashlib.sha256()
        for rel in data_files(path):
            h.update(rel.encode("utf-8") + b"\0")
            h.update(bytes.fromhex(file_sha256(os.path.join(path, rel), chunk)))
        return h.hexdigest()
    h = hashlib.sha256()
    try:
        with open(path, "rb") as fh:
            for block in iter(lambda: fh.read(chunk), b""):
                h.update(block)
    except FileNotFoundError:
        raise InputError(path, "no such file") from None
    except IsADirectoryError:
        raise InputError(path, "is a directory, not a file") from None
    except OSError as exc:
        raise InputError(path, f"cannot be read ({exc.strerror or exc})") from None
    return h.hexdigest()


def _read_report(path):
    from partition.jsonfile import read_json

    report = read_json(path, "the run's JSON report; give it with --report")
    if not isinstance(report, dict) or "k" not in report or not isinstance(report.get("input"), dict) \
            or "graph" not in report["input"]:
        raise InputError(path, "is not a run report: it lacks 'k' or 'input.graph'")
    return report


def check_pairing(report, report_path, output, name="assignment"):
    """Refuse a run output that is not the one its report was written with.

    A run records the SHA-256 of each output beside it (``outputs.sha256``);
    when the file at ``output`` has another checksum, the two come from
    different runs (or the file was edited) and no figure of the report
    describes it. Reports without the record (older runs) are accepted.

    Raises
    ------
    InputError
    """
    recorded = ((report.get("outputs") or {}).get("sha256") or {}).get(name)
    if not recorded or not os.path.exists(output):
        return
    digest = file_sha256(output)
    if digest != recorded:
        raise InputError(output, f"SHA-256 {digest[:16]}… differs from the {recorded[:16]}… recorded in "
                                 f"{report_path}: this file and that report come from different runs; pass "
                                 "the run's own report with --report")


def find_input_graph(report, report_path):
    """Where the graph named in a report is now, or ``None``; and the places looked at.

    Parameters
    ----------
    report : dict
        A run report (``input.graph`` and, optionally, ``outputs.report``).
    report_path : str
        Where the report was read from.

    Returns
    -------
    path : str or None
        The first candidate that is a file.
    tried : list of str
        Candidates in the order tried: the recorded path as it is, then
        relative to the folder the run was started from (when the report's
        own recorded path is relative and is a suffix of where it was read).
    """
    recorded = str(report["input"]["graph"])
    tried = [recorded]
    stored = (report.get("outputs") or {}).get("report")
    if not os.path.isabs(recorded) and stored and not os.path.isabs(str(stored)):
        here = os.path.abspath(report_path)
        tail = os.path.normpath(str(stored))
        if here.endswith(os.sep + tail):
            start = here[: -len(tail) - 1]
            tried.append(os.path.join(start, recorded))
    for cand in tried:
        if os.path.isfile(cand):
            return cand, tried
    return None, tried


def _check_graph(report, report_path, graph):
    """Path, checksum and size of the input graph; raises on a missing file or a mismatch."""
    located, tried = find_input_graph(report, report_path)
    recorded_sum = report["input"].get("sha256")
    if graph is None:
        if located is None:
            raise InputError(report_path, f"the input graph {report['input']['graph']!r} named in the report "
                                          f"was not found (looked at {', '.join(map(repr, tried))}); "
                                          "give it with --graph")
        path, digest = located, file_sha256(located)
        if recorded_sum and digest != recorded_sum:
            raise InputError(located, f"SHA-256 {digest} differs from the {recorded_sum} recorded in "
                                      f"{report_path}: the graph changed after the run")
        return path, digest
    digest = file_sha256(graph)
    expected, source = recorded_sum, f"recorded in {report_path}"
    if expected is None and located is not None:
        expected, source = file_sha256(located), f"of {located}, the graph the report names"
    if expected is not None and digest != expected:
        raise InputError(graph, f"SHA-256 {digest} does not match the input checksum {expected} ({source}); "
                                "this placement was made from another graph")
    return os.fspath(graph), digest


def _sorted_rows(ids, shards):
    order = np.argsort(ids, kind="stable")
    return ids[order], shards[order]


def _id_array(ids):
    return pa.array(ids, type=pa.int64() if ids.dtype.kind in "iu" else pa.string())


def _json_strings(arr):
    """JSON string literals of a pyarrow string array (vectorised; rare control characters one by one)."""
    esc = pc.replace_substring(pc.replace_substring(arr, "\\", "\\\\"), '"', '\\"')
    out = pc.binary_join_element_wise('"', esc, '"', "")
    ctrl = pc.match_substring_regex(arr, "[\\x00-\\x1f]").to_numpy(zero_copy_only=False)
    if ctrl.any():
        values = out.to_pylist()
        raw = arr.to_pylist()
        for i in np.flatnonzero(ctrl).tolist():
            values[i] = json.dumps(raw[i], ensure_ascii=False)
        out = pa.array(values, type=pa.string())
    return out


def _csv_strings(arr):
    """RFC 4180 fields: quoted only when needed (comma, quote, line break, edge blanks, leading #/%, empty)."""
    need = pc.match_substring_regex(arr, r'[",\n\r]|^\s|\s$|^[#%]|^$')
    quoted = pc.binary_join_element_wise('"', pc.replace_substring(arr, '"', '""'), '"', "")
    return pc.if_else(need, quoted, arr)


def _text_bytes(table, fmt):
    """CSV (header row) or JSON Lines bytes of a table of int64/string columns."""
    head = (",".join(table.column_names) + "\n").encode() if fmt == "csv" else b""
    if table.num_rows == 0:
        return head
    fields = []
    for name in table.column_names:
        col = table.column(name).combine_chunks()
        if pa.types.is_integer(col.type):
            text = pc.cast(col, pa.string())
        else:
            text = _csv_strings(col) if fmt == "csv" else _json_strings(col)
        fields.append(text if fmt == "csv" else pc.binary_join_element_wise(f'"{name}": ', text, ""))
    sep = "," if fmt == "csv" else ", "
    row = fields[0] if len(fields) == 1 else pc.binary_join_element_wise(*fields, sep)
    if fmt == "jsonl":
        row = pc.binary_join_element_wise("{", row, "}", "")
    row = pc.cast(pc.binary_join_element_wise(row, "", "\n"), pa.large_string())
    return head + _concat_bytes(row)


def _concat_bytes(arr):
    """The UTF-8 bytes of a large_string array without nulls, end to end (no per-row Python objects)."""
    arr = arr.combine_chunks() if isinstance(arr, pa.ChunkedArray) else arr
    offsets = np.frombuffer(arr.buffers()[1], dtype=np.int64)[arr.offset: arr.offset + len(arr) + 1]
    return arr.buffers()[2].to_pybytes()[offsets[0]:offsets[-1]]


def _write_table(path, table, fmt):
    if fmt == "parquet":
        with atomic_path(path) as tmp:
            pq.write_table(table, tmp)
    else:
        write_bytes(path, _text_bytes(table, fmt))


def _now_utc():
    return datetime.datetime.now(datetime.timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")


def export_run(assignment, out_dir, fmt="parquet", report=None, graph=None, force=False, created=None,
               progress=None):
    """Write a run's placement, per-shard node lists and a manifest into a new folder.

    Parameters
    ----------
    assignment : str or os.PathLike
        The node→shard file written by ``shardline run`` (CSV/TSV/Parquet).
    out_dir : str or os.PathLike
        Folder to create (atomically; see the module docstring).
    fmt : {"parquet", "csv", "jsonl"}
    report : str or os.PathLike, optional
        The run's JSON report (default ``ASSIGNMENT.report.json``).
    graph : str or os.PathLike, optional
        The input graph file; its checksum must match the one the report
        names (or records). Default: the file the report names.
    force : bool
        Replace an existing folder.
    created : str, optional
        Creation time to record (default: now, UTC, ISO 8601).
    progress : partition.progress.Progress, optional
        Gets one counted stage over the ``k + 1`` tables written.

    Returns
    -------
    dict
        The manifest as written.

    Raises
    ------
    ParameterError
        Unknown format; the folder exists (without ``force``) or is a file.
    InputError
        Missing or malformed assignment or report, a missing input graph, a
        checksum mismatch, or an assignment that does not fit the report
        (node count, shard ids ``>= k``). Nothing is written in these cases.

    References
    ----------
    NIST, "Secure Hash Standard (SHS)", FIPS PUB 180-4, 2015 (SHA-256).
    """
    assignment, out_dir, report_path, rep, graph_path, graph_sum = check_export(
        assignment, out_dir, fmt, report, graph, force)
    k = int(rep["k"])
    table = read_node_shards(assignment)
    ids, shards = table.ids, table.shards
    nodes = rep["input"].get("nodes")
    if nodes is not None and ids.shape[0] != int(nodes):
        raise InputError(assignment, f"holds {ids.shape[0]} nodes but the report's graph has {nodes}")
    if shards.size and int(shards.max()) >= k:
        raise InputError(assignment, f"uses shard {int(shards.max())} but the report says k = {k}")
    ids, shards = _sorted_rows(ids, shards)
    manifest = manifest_head(rep, fmt, graph_path, graph_sum, assignment, report_path, created)
    return publish_export(out_dir, manifest, lambda tmp: _write_all(tmp, ids, shards, k, fmt, progress))


def check_export(assignment, out_dir, fmt, report, graph, force):
    """The checks every export makes before it reads the assignment.

    Returns
    -------
    tuple
        ``(assignment, out_dir, report_path, report, graph_path, graph_sha256)``
        with paths as strings (``out_dir`` normalised; the report defaults to
        ``ASSIGNMENT.report.json``).

    Raises
    ------
    ParameterError
        Unknown format; ``out_dir`` is a file, or a folder and not ``force``.
    InputError
        Missing or malformed report, missing input graph, checksum mismatch.
    """
    if fmt not in FORMATS:
        raise ParameterError(f"unknown export format {fmt!r}; expected one of {', '.join(FORMATS)}")
    assignment = os.fspath(assignment)
    out_dir = os.path.normpath(os.fspath(out_dir))
    report_path = os.fspath(report) if report is not None else assignment.rstrip("/") + ".report.json"
    if os.path.exists(out_dir):
        if not os.path.isdir(out_dir):
            raise ParameterError(f"{out_dir} exists and is not a folder; choose another output")
        if not force:
            raise ParameterError(f"{out_dir} already exists; use --force to replace it")
    rep = _read_report(report_path)
    check_pairing(rep, report_path, assignment)
    graph_path, graph_sum = _check_graph(rep, report_path, graph)
    return assignment, out_dir, report_path, rep, graph_path, graph_sum


def publish_export(out_dir, manifest, fill):
    """Build the export folder as a hidden temporary sibling, then rename it into place.

    ``fill(tmp)`` writes the tables into ``tmp`` and returns the manifest's
    ``files`` list; the manifest is written last. On any failure the
    temporary folder is removed and an existing ``out_dir`` is left as it was.
    Returns the manifest.
    """
    parent = os.path.dirname(os.path.abspath(out_dir))
    os.makedirs(parent, exist_ok=True)
    tmp = tempfile.mkdtemp(prefix="." + os.path.basename(out_dir) + ".", suffix=".tmp", dir=parent)
    try:
        manifest["files"] = fill(tmp)
        write_text(os.path.join(tmp, MANIFEST), json.dumps(manifest, indent=2, sort_keys=True) + "\n")
        os.chmod(tmp, 0o777 & ~_umask())
        _swap_in(tmp, out_dir)
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise
    return manifest


def data_files(folder):
    """Relative paths (``/``-separated) of the data files under ``folder``, sorted.

    Names starting with ``.`` or ``_`` (checksums, ``_SUCCESS`` markers, and
    folders so named) are left out: these are the files
    :func:`file_sha256` hashes for a folder dataset.
    """
    found = []
    for root, dirs, files in os.walk(folder):
        dirs[:] = sorted(d for d in dirs if not d.startswith((".", "_")))
        for f in files:
            if not f.startswith((".", "_")):
                found.append(os.path.relpath(os.path.join(root, f), folder).replace(os.sep, "/"))
    return sorted(found)


def manifest_head(rep, fmt, graph_path, graph_sum, assignment, report_path, created=None):
    """The manifest's fields other than ``files``, from the run report and the checked input.

    Metrics are the report's ``result`` without the bulky cut matrix entries.
    """
    metrics = {key: v for key, v in (rep.get("result") or {}).items() if key not in _LEFT_OUT}
    return {
        "manifest_version": 1,
        "tool": f"shardline {__version__}",
        "created_utc": created if created is not None else _now_utc(),
        "nondeterministic": ["created_utc"],
        "format": fmt,
        "input": {"graph": graph_path, "sha256": graph_sum, "bytes": os.path.getsize(graph_path),
                  "nodes": rep["input"].get("nodes"), "edges": rep["input"].get("edges")},
        "source": {"assignment": {"path": assignment, "sha256": file_sha256(assignment)},
                   "report": {"path": report_path, "sha256": file_sha256(report_path)},
                   "tool": rep.get("tool")},
        "k": int(rep["k"]),
        "imbalance_allowed": rep.get("imbalance_allowed"),
        "seed": rep.get("seed"),
        "engine": rep.get("engine"),
        "options": rep.get("options"),
        "metrics": metrics,
    }


def _umask():
    mask = os.umask(0)
    os.umask(mask)
    return mask


def _write_all(folder, ids, shards, k, fmt, progress=None):
    """Write the assignment and the per-shard files; returns the manifest's file list."""
    if progress is not None:
        progress.task(f"export: writing {k + 1:,} {fmt} tables", total=k + 1)
    ext = EXTENSIONS[fmt]
    files = []
    node_arr = _id_array(ids)

    def put(rel, table, shard=None):
        path = os.path.join(folder, *rel.split("/"))
        _write_table(path, table, fmt)
        files.append({"path": rel, "sha256": file_sha256(path), "bytes": os.path.getsize(path),
                      "rows": table.num_rows, "shard": shard})
        if progress is not None:
            progress.advance()

    put(f"assignment.{ext}", pa.table({"node": node_arr, "shard": pa.array(shards, type=pa.int64())}))
    os.makedirs(os.path.join(folder, "shards"))
    by_shard = np.argsort(shards, kind="stable")  # ids are sorted, so each group stays sorted
    bounds = np.zeros(k + 1, dtype=np.int64)
    np.cumsum(np.bincount(shards, minlength=k), out=bounds[1:])
    width = max(5, len(str(k - 1)))
    for s in range(k):
        rows = by_shard[bounds[s]:bounds[s + 1]]
        put(f"shards/shard-{s:0{width}d}.{ext}", pa.table({"node": node_arr.take(pa.array(rows))}), shard=s)
    if progress is not None:
        progress.done()
    return files


def _swap_in(tmp, out_dir):
    """Rename the finished folder into place, replacing an existing one."""
    if not os.path.exists(out_dir):
        os.rename(tmp, out_dir)
        return
    parent = os.path.dirname(os.path.abspath(out_dir))
    old = tempfile.mkdtemp(prefix="." + os.path.basename(out_dir) + ".", suffix=".old", dir=parent)
    os.rmdir(old)
    os.rename(out_dir, old)
    try:
        os.rename(tmp, out_dir)
    except BaseException:
        os.rename(old, out_dir)
        raise
    with contextlib.suppress(OSError):
        shutil.rmtree(old)


def verify_export(out_dir, graph=None):
    """Check an exported folder against its manifest (and a graph file against its checksum).

    Parameters
    ----------
    out_dir : str or os.PathLike
        A folder written by :func:`export_run`.
    graph : str or os.PathLike, optional
        A graph file whose SHA-256 must equal the manifest's input checksum.

    Returns
    -------
    dict
        ``files`` (number checked), ``input_sha256``, ``graph_checked``.

    Raises
    ------
    InputError
        A missing or malformed manifest, a listed file that is missing or
        whose checksum differs, or a graph whose checksum differs from the
        manifest's input checksum.
    """
    out_dir = os.fspath(out_dir)
    mpath = os.path.join(out_dir, MANIFEST)
    try:
        with open(mpath, "r", encoding="utf-8") as fh:
            manifest = json.load(fh)
    except FileNotFoundError:
        raise InputError(mpath, "no such file: is this an export folder?") from None
    except json.JSONDecodeError as exc:
        raise InputError(mpath, f"is not valid JSON ({exc.msg})", exc.lineno) from None
    try:
        files, expected = manifest["files"], manifest["input"]["sha256"]
    except (KeyError, TypeError):
        raise InputError(mpath, "is not an export manifest: it lacks 'files' or 'input.sha256'") from None
    for entry in files:
        path = os.path.join(out_dir, *str(entry["path"]).split("/"))
        digest = file_sha256(path)
        if digest != entry["sha256"]:
            raise InputError(path, f"SHA-256 {digest} differs from the manifest's {entry['sha256']}")
    if graph is not None:
        digest = file_sha256(graph)
        if digest != expected:
            raise InputError(graph, f"SHA-256 {digest} does not match the input checksum {expected} in {mpath}; "
                                    "this export was made from another graph")
    return {"files": len(files), "input_sha256": expected, "graph_checked": graph is not None}
