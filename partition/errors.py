"""Errors a user can act on: which file, which line, what was expected.

Every error that comes from bad input or bad parameters is a
:class:`ShardlineError`; the command line prints its message and exits with
status 2 without writing any output.
"""

from __future__ import annotations


class ShardlineError(Exception):
    """Base class of the errors the command line reports with exit status 2."""

    exit_status = 2


class ParameterError(ShardlineError, ValueError):
    """A parameter is out of range (``k < 1``, a negative imbalance, ...)."""


class InputError(ShardlineError, ValueError):
    """A file could not be used; names the file and, where known, the line.

    Parameters
    ----------
    path : str or None
        The file at fault.
    message : str
        What was wrong and what was expected.
    line : int or None
        1-based line number in the (decompressed) file, or ``None``.
    """

    def __init__(self, path, message, line=None):
        self.path = None if path is None else str(path)
        self.line = line
        self.detail = message
        where = self.path or "<input>"
        if line is not None:
            where = f"{where}, line {line}"
        super().__init__(f"{where}: {message}")


def check_parts(k, n_nodes=None):
    """Validate the number of shards ``k`` against the node count."""
    if isinstance(k, bool) or int(k) != k:
        raise ParameterError(f"k must be a whole number, got {k!r}")
    k = int(k)
    if k < 1:
        raise ParameterError(f"k must be at least 1, got {k}")
    if n_nodes is not None and k > n_nodes:
        raise ParameterError(f"k = {k} is larger than the number of nodes ({n_nodes})")
    return k


def check_imbalance(eps):
    """Validate the allowed imbalance ε (0 means exactly balanced)."""
    try:
        eps = float(eps)
    except (TypeError, ValueError):
        raise ParameterError(f"imbalance must be a number, got {eps!r}") from None
    if not (eps >= 0.0) or eps != eps or eps == float("inf"):
        raise ParameterError(f"imbalance must be a finite number >= 0, got {eps!r}")
    return eps


def check_move_cost(move_cost):
    """Validate a move cost ``λ``: a finite number ``>= 0``; returns it as float.

    Raises
    ------
    ParameterError
        Not a number, negative, NaN or infinite.
    """
    try:
        lam = float(move_cost)
    except (TypeError, ValueError):
        raise ParameterError(f"move cost must be a number, got {move_cost!r}") from None
    if not (lam == lam and lam not in (float("inf"), float("-inf")) and lam >= 0):
        raise ParameterError(f"move cost must be a finite number >= 0, got {move_cost!r}")
    return lam
