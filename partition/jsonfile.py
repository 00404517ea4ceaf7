"""Read a JSON file the user names: errors name the file (and the line of a syntax error), never a traceback."""

from __future__ import annotations

import json

from partition.errors import InputError

__all__ = ["read_json"]


def read_json(path, what):
    """The parsed JSON of ``path``; ``what`` says in the missing-file error what the file is.

    Raises
    ------
    InputError
        The file is missing, unreadable or not valid JSON (with its line).
    """
    try:
        with open(path, encoding="utf-8") as fh:
            text = fh.read()
    except FileNotFoundError:
        raise InputError(path, f"no such file ({what})") from None
    except OSError as exc:
        raise InputError(path, f"cannot be read ({exc.strerror or exc})") from None
    try:
        return json.loads(text)
    except json.JSONDecodeError as exc:
        raise InputError(path, f"is not valid JSON ({exc.msg})", exc.lineno) from None
