"""Output paths: one check of every path a command will write, before it reads or computes anything.

Each command (or action) declares its outputs beside its options with
:func:`declare_outputs`: the destination of the option and the kind of file it
names. :func:`check_outputs`, called once by the command line before the
command runs, refuses (exit status 2, nothing written):

* an output that names one of the command's inputs (any other path argument
  that exists), so ``run tri.txt -o tri.txt`` cannot overwrite its edge list;
* two outputs naming the same path;
* a file output that names an existing directory;
* a name whose extension the writer does not produce (``-o shards.xlsx``
  would otherwise hold CSV text).

Writers still write atomically (:mod:`partition.atomic`); this module only
decides, early and in one place, whether a path may be written at all.
"""

from __future__ import annotations

import os

from partition.errors import ParameterError

__all__ = ["Kind", "TABLE", "TABLE_OR_FOLDER", "JSON", "REPORT", "HTML", "LOG", "FOLDER", "declare_outputs", "check_outputs", "refuse_inputs"]

class Kind:
    """What an output names: the extensions its writer chooses a format by, and whether it is a folder."""

    def __init__(self, name, extensions=None, folder=False, folder_if=(), beside=None):
        self.name, self.extensions, self.folder, self.folder_if = name, extensions, folder, tuple(folder_if)
        self.beside = beside  # unset: written as <that output>.report.json

    def __repr__(self):
        return f"Kind({self.name!r})"


_TABLE_EXT = (".csv", ".tsv", ".parquet", ".pq", ".csv.gz", ".tsv.gz")
TABLE = Kind("table", _TABLE_EXT)
"""A table: CSV/TSV (optionally gzip-compressed) or Parquet, chosen by the name."""
TABLE_OR_FOLDER = Kind("table or Parquet folder", _TABLE_EXT, folder_if=(".parquet", ".pq"))
"""A table, or (Spark engine) a Parquet folder of that name, which may already exist; a name without an
extension is a Parquet folder (the in-memory engine asks for a table name, see ``shardline run``)."""
JSON = Kind("JSON", (".json",))
REPORT = Kind("JSON report", (".json",), beside="output")
"""The JSON report a command always writes: ``--report``, or ``OUTPUT.report.json`` when not given."""
HTML = Kind("HTML page", (".html", ".htm"))
LOG = Kind("request log")
"""A request log: basket text under any name, or JSON Lines (``.jsonl``); no extension rule."""
FOLDER = Kind("folder", folder=True)
"""A folder (created, or swapped into place, by its writer)."""

_DEST_KEY = "_outputs"


def declare_outputs(parser, **kinds):
    """Record that the options ``kinds`` (destination → kind) of ``parser`` name outputs."""
    parser.set_defaults(**{_DEST_KEY: dict(kinds)})
    return parser


def _flag(parser_dest):
    return "-o" if parser_dest == "output" else "--" + parser_dest.replace("_", "-")


def _same(a, b):
    try:
        return os.path.samefile(a, b)
    except OSError:
        return os.path.abspath(a) == os.path.abspath(b)


def refuse_inputs(label, path, inputs):
    """Refuse ``path`` (the output of option ``label``) when it names one of ``inputs`` ((name, path) pairs).

    Raises
    ------
    ParameterError
    """
    for name, value in inputs:
        if value is not None and _same(path, value):
            raise ParameterError(f"{label} {path} is also an input of this command ({name.upper()}); "
                                 "write the output elsewhere, an input is never overwritten")


def check_outputs(args, extra=()):
    """Refuse output paths that would overwrite an input, collide, or name the wrong kind of file.

    Parameters
    ----------
    args : argparse.Namespace
        The parsed command line; its outputs are those recorded by
        :func:`declare_outputs`, its inputs every other string argument that
        names an existing path.
    extra : iterable of (str, str)
        More (label, path) outputs the command derives itself (for example the
        default report path ``OUTPUT.report.json``).

    Raises
    ------
    ParameterError
    """
    kinds = getattr(args, _DEST_KEY, None) or {}
    outputs = []
    for dest, kind in kinds.items():
        path = getattr(args, dest, None)
        if path is None and kind.beside is not None and getattr(args, kind.beside, None) is not None:
            path = f"{getattr(args, kind.beside)}.report.json"
        outputs.append((_flag(dest), path, kind))
    outputs = [(label, os.fspath(path), kind) for label, path, kind in outputs if path is not None]
    outputs += [(label, os.fspath(path), JSON) for label, path in extra if path is not None]
    inputs = []
    for dest, value in sorted(vars(args).items()):
        if dest in kinds or dest.startswith("_"):
            continue
        for v in value if isinstance(value, (list, tuple)) else [value]:
            if isinstance(v, (str, os.PathLike)) and os.path.exists(v):
                inputs.append((dest, os.fspath(v)))
    for i, (label, path, kind) in enumerate(outputs):
        refuse_inputs(label, path, inputs)
        for other_label, other, _ in outputs[:i]:
            if _same(path, other):
                raise ParameterError(f"{other_label} and {label} both name {path}; give each output its own path")
        if kind.folder:
            if os.path.exists(path) and not os.path.isdir(path):
                raise ParameterError(f"{label} {path} is an existing file; this output is a folder")
            continue
        lower = path.lower()
        bare = bool(kind.folder_if) and "." not in os.path.basename(path.rstrip("/"))  # a Spark folder: out/shards
        if os.path.isdir(path) and not (kind.folder_if and (lower.endswith(kind.folder_if) or bare)):
            raise ParameterError(f"{label} {path} is an existing directory; name a file to write")
        if kind.extensions is not None and not lower.endswith(kind.extensions) and not bare:
            raise ParameterError(f"{label} {path}: the name must end in {', '.join(kind.extensions)} "
                                 "(the format is chosen by the name)")
