"""Whether a graph fits this machine's memory: the rule behind ``--engine auto``.

The in-memory engine holds about :data:`BYTES_PER_EDGE` bytes per undirected
edge (CSR both ways, affinities, refinement state); ``auto`` runs in memory
when that is below a quarter of the available memory, otherwise on Spark. The
rule lives outside :mod:`partition.spark` so that choosing the engine imports
neither pyspark nor pandas.
"""

from __future__ import annotations

import os
from pathlib import Path

__all__ = ["BYTES_PER_EDGE", "available_memory", "fits_driver"]

BYTES_PER_EDGE = 40  # in-memory engine, per undirected edge (CSR both ways, affinities, refinement)


def available_memory():
    """Bytes of memory available to a new process.

    ``MemAvailable`` of ``/proc/meminfo`` (Linux), else psutil when installed,
    else free pages × page size from ``os.sysconf``.

    Returns
    -------
    int
    """
    try:
        with open("/proc/meminfo", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("MemAvailable:"):
                    return int(line.split()[1]) * 1024
    except (OSError, ValueError, IndexError):
        pass
    try:
        import psutil
    except ImportError:
        return os.sysconf("SC_AVPHYS_PAGES") * os.sysconf("SC_PAGE_SIZE")
    return int(psutil.virtual_memory().available)


def fits_driver(path_or_stats, memory_bytes=None):
    """Whether the in-memory engine can run a graph on this machine (``--engine auto``).

    Rule: ``edges × BYTES_PER_EDGE < memory / 4``, where ``edges`` is the
    number of edge lines (from ``{"edges": m}``) or, for a path, estimated from
    its size (10 bytes a line for text, 4 for compressed text or Parquet — an
    overestimate of the edges, so the rule errs towards Spark), and
    ``memory`` the available physical memory (:func:`available_memory`) unless given.

    Parameters
    ----------
    path_or_stats : str, path-like or dict
    memory_bytes : int or None

    Returns
    -------
    bool
    """
    if isinstance(path_or_stats, dict):
        edges = int(path_or_stats["edges"])
    else:
        p = Path(path_or_stats)
        files = [p] if p.is_file() else [f for f in p.rglob("*") if f.is_file()]
        size = sum(f.stat().st_size for f in files)
        packed = any(str(f).endswith((".gz", ".bz2", ".parquet", ".pq")) for f in files)
        edges = size // (4 if packed else 10)
    if memory_bytes is None:
        memory_bytes = available_memory()
    return edges * BYTES_PER_EDGE < memory_bytes / 4
