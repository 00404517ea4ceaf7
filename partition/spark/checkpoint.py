"""Stage checkpoints of a Spark run: small arrays as ``.npy`` files with JSON markers.

A stage's result is written first, then its marker (both atomically, see
:mod:`partition.atomic`), so a marker always names a complete result. A resumed
run loads the result of every marked stage instead of recomputing it; the
hierarchy rounds have their own Parquet checkpoints
(:mod:`partition.spark.hierarchy`). Options are recorded in the run marker and a
resume with different options is refused.
"""

from __future__ import annotations

import io
import json
import shutil
from pathlib import Path

import numpy as np

from partition.atomic import write_bytes, write_text
from partition.errors import ParameterError

__all__ = ["Checkpoints"]


class Checkpoints:
    """Stage results under ``<work_dir>/stages``.

    Parameters
    ----------
    work_dir : str or path-like
    options : dict
        The run's options (JSON-serialisable); stored on first use.
    resume : bool
        Reuse marked stages (and refuse other options); otherwise start clean.

    Raises
    ------
    ParameterError
        When resuming with options that differ from the stored ones.
    """

    def __init__(self, work_dir, options, resume):
        self.base = Path(work_dir) / "stages"
        self.resume = bool(resume)
        if not self.resume and self.base.exists():
            shutil.rmtree(self.base)  # a fresh run never trusts an older run's markers
        self.base.mkdir(parents=True, exist_ok=True)
        run = Path(work_dir) / "run.json"
        if resume and run.exists():
            stored = json.loads(run.read_text())
            if stored != json.loads(json.dumps(options)):
                raise ParameterError(f"cannot resume {work_dir}: it was started with other options ({stored})")
        write_text(run, json.dumps(options, sort_keys=True))

    def has(self, name):
        """Whether stage ``name`` finished (and resuming is on)."""
        return self.resume and (self.base / f"{name}.json").exists()

    def load(self, name):
        """The arrays and info saved for ``name``: ``(dict of ndarray, dict)``."""
        data = np.load(self.base / f"{name}.npz", allow_pickle=True)
        info = json.loads((self.base / f"{name}.json").read_text())
        return {k: data[k] for k in data.files}, info

    def save(self, name, arrays, info=None):
        """Write the arrays of stage ``name``, then its marker."""
        buf = io.BytesIO()
        np.savez(buf, **arrays)
        write_bytes(self.base / f"{name}.npz", buf.getvalue())
        write_text(self.base / f"{name}.json", json.dumps(info or {}))
