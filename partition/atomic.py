"""Atomic output: write to a temporary file beside the target, then rename.

A reader never sees half a file, and an error leaves no output behind.
"""

from __future__ import annotations

import contextlib
import os
import tempfile


@contextlib.contextmanager
def atomic_path(path):
    """Yield a temporary path in the target's folder; rename it over ``path`` on success.

    On any exception the temporary file is removed and ``path`` is untouched.
    """
    path = os.fspath(path)
    folder = os.path.dirname(os.path.abspath(path))
    os.makedirs(folder, exist_ok=True)
    # The temporary name ends with the target's name, so writers that choose a
    # format by extension (.csv, .parquet, .gz) see the same extension.
    fd, tmp = tempfile.mkstemp(prefix=".shardline-tmp-", suffix="-" + os.path.basename(path), dir=folder)
    os.close(fd)
    try:
        yield tmp
        # mkstemp makes the file owner-only; give it the usual mode under the umask
        if os.path.isfile(tmp):
            os.chmod(tmp, 0o666 & ~_umask())
        os.replace(tmp, path)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(tmp)
        raise


@contextlib.contextmanager
def atomic_paths(paths):
    """Yield temporary paths for several targets; rename them all only if every write succeeds.

    ``None`` entries are passed through as ``None``. On any exception every
    temporary file is removed and no target is touched.
    """
    with contextlib.ExitStack() as stack:
        yield [None if p is None else stack.enter_context(atomic_path(p)) for p in paths]


def _umask():
    mask = os.umask(0)
    os.umask(mask)
    return mask


def write_text(path, text):
    """Write ``text`` to ``path`` atomically (UTF-8)."""
    with atomic_path(path) as tmp:
        with open(tmp, "w", encoding="utf-8") as fh:
            fh.write(text)


def write_bytes(path, data):
    """Write ``data`` to ``path`` atomically."""
    with atomic_path(path) as tmp:
        with open(tmp, "wb") as fh:
            fh.write(data)
