"""Shared helpers for the combinatorial benchmark problems.

Reading instance files (plain or compressed text, and YAML that keeps the line
of every value, with errors that name the file and the line), enumerating
every binary assignment of a small instance for exact reference optima, and
reaching the MILP solver of scipy for the others.
"""

from __future__ import annotations

import bz2
import gzip
import lzma
import os
from typing import Callable, List, Optional, Tuple

import numpy as np

__all__ = [
    "InstanceFormatError",
    "read_instance_lines",
    "binary_assignments",
    "exhaustive_maximum",
    "resolve_solve_option",
    "LineDict",
    "LineList",
    "read_yaml",
    "import_milp",
]

_OPENERS = {".gz": gzip.open, ".bz2": bz2.open, ".xz": lzma.open}


class InstanceFormatError(ValueError):
    """A malformed instance file.

    The message reads ``"<file>, line <k>: <what was expected>"``; the parts
    are kept as the attributes ``path``, ``line`` (1-based, or ``None`` when the
    problem concerns the whole file) and ``reason``.
    """

    def __init__(self, path, line: Optional[int], reason: str):
        self.path = str(path)
        self.line = line
        self.reason = reason
        where = self.path if line is None else f"{self.path}, line {line}"
        super().__init__(f"{where}: {reason}")


def read_instance_lines(path) -> List[Tuple[int, str]]:
    """Return the ``(line number, text)`` pairs of a UTF-8 text file.

    Files ending in ``.gz``, ``.bz2`` or ``.xz`` are decompressed on the fly.
    Line numbers start at 1; trailing newlines are removed.

    Raises
    ------
    FileNotFoundError
        When the file does not exist.
    InstanceFormatError
        When the file is not UTF-8 text.
    """
    path = os.fspath(path)
    opener = _OPENERS.get(os.path.splitext(path)[1].lower(), open)
    try:
        with opener(path, "rt", encoding="utf-8") as handle:
            return [(number, text.rstrip("\r\n")) for number, text in enumerate(handle, 1)]
    except UnicodeDecodeError as error:
        raise InstanceFormatError(path, None, f"expected UTF-8 text ({error.reason})") from None
    except (OSError, EOFError, lzma.LZMAError) as error:
        if isinstance(error, FileNotFoundError):
            raise
        raise InstanceFormatError(path, None, f"could not be read: {error}") from None


def import_milp():
    """Return ``(milp, Bounds, LinearConstraint)`` from scipy, or raise a clear ImportError."""
    try:
        from scipy.optimize import Bounds, LinearConstraint, milp
    except ImportError as error:  # pragma: no cover - depends on the environment
        raise ImportError(
            "the exact reference solver needs scipy (>= 1.9) for scipy.optimize.milp; "
            "install it with 'pip install scipy' or pass solve=False"
        ) from error
    return milp, Bounds, LinearConstraint


class LineDict(dict):
    """A YAML mapping that remembers where it and each of its values start (1-based lines)."""

    line: int = 0
    value_lines: dict

    def line_of(self, key) -> int:
        """Line of the value stored under ``key`` (the mapping's own line when absent)."""
        return self.value_lines.get(key, self.line)


class LineList(list):
    """A YAML sequence that remembers where it and each of its items start (1-based lines)."""

    line: int = 0
    item_lines: list

    def line_at(self, index: int) -> int:
        """Line of item ``index``."""
        return self.item_lines[index]


def read_yaml(path):
    """Parse a YAML file into :class:`LineDict` and :class:`LineList` (duplicate keys are errors)."""
    try:
        import yaml
    except ImportError as error:  # pragma: no cover - depends on the environment
        raise ImportError("reading YAML instance files needs PyYAML ('pip install pyyaml')") from error

    class _Loader(yaml.SafeLoader):
        pass

    def _construct(loader, node):
        loader.flatten_mapping(node)
        result = LineDict()
        result.line = node.start_mark.line + 1
        result.value_lines = {}
        for key_node, value_node in node.value:
            key = loader.construct_object(key_node, deep=True)
            if not isinstance(key, (str, int, float, bool)) and key is not None:
                raise InstanceFormatError(path, key_node.start_mark.line + 1, f"expected a plain key; got {key!r}")
            if key in result:
                raise InstanceFormatError(path, key_node.start_mark.line + 1, f"duplicate key {key!r}")
            result[key] = loader.construct_object(value_node, deep=True)
            result.value_lines[key] = value_node.start_mark.line + 1
        return result

    def _construct_sequence(loader, node):
        result = LineList(loader.construct_object(item, deep=True) for item in node.value)
        result.line = node.start_mark.line + 1
        result.item_lines = [item.start_mark.line + 1 for item in node.value]
        return result

    _Loader.add_constructor(yaml.resolver.BaseResolver.DEFAULT_MAPPING_TAG, _construct)
    _Loader.add_constructor(yaml.resolver.BaseResolver.DEFAULT_SEQUENCE_TAG, _construct_sequence)
    text = "\n".join(line for _, line in read_instance_lines(path))
    try:
        data = yaml.load(text, Loader=_Loader)
    except yaml.YAMLError as error:
        mark = getattr(error, "problem_mark", None) or getattr(error, "context_mark", None)
        line = mark.line + 1 if mark is not None else None
        reason = getattr(error, "problem", None) or str(error)
        raise InstanceFormatError(path, line, f"not valid YAML ({reason})") from None
    if not isinstance(data, LineDict):
        raise InstanceFormatError(path, 1, "expected a YAML mapping at the top level")
    return data


def binary_assignments(n: int, start: int, stop: int) -> np.ndarray:
    """Rows ``start … stop - 1`` of the table of all ``2**n`` binary vectors.

    Row ``r`` holds the binary digits of ``r`` with variable 0 as the most
    significant digit; the result is ``uint8`` of shape ``(stop - start, n)``.
    """
    codes = np.arange(start, stop, dtype=np.int64)
    shifts = np.arange(n - 1, -1, -1, dtype=np.int64)
    return ((codes[:, None] >> shifts[None, :]) & 1).astype(np.uint8)


def exhaustive_maximum(
    evaluate: Callable[[np.ndarray], np.ndarray],
    n: int,
    fix_first_zero: bool = False,
    chunk_bits: int = 15,
) -> Tuple[float, np.ndarray]:
    """Maximise ``evaluate`` by enumerating every binary vector of length ``n``.

    Candidates are scored in chunks of ``2**chunk_bits`` rows, so memory stays
    bounded while each call is vectorised over the chunk.

    Parameters
    ----------
    evaluate : callable
        Scores a ``(count, n)`` uint8 population, returning ``count`` numbers.
    n : int
        Number of binary variables.
    fix_first_zero : bool
        Enumerate only vectors with variable 0 equal to 0 (for objectives that
        are unchanged by flipping every bit, such as a cut value).
    chunk_bits : int
        Log2 of the number of candidates scored per call.

    Returns
    -------
    best : float
        The largest score.
    assignment : numpy.ndarray
        A uint8 vector of length ``n`` reaching it (the first in enumeration order).
    """
    free = n - 1 if fix_first_zero else n
    if free < 0:
        raise ValueError("n must be at least 1")
    total = 1 << free
    step = 1 << chunk_bits
    best_value = -np.inf
    best_row = None
    for start in range(0, total, step):
        block = binary_assignments(free, start, min(total, start + step))
        if fix_first_zero:
            block = np.concatenate([np.zeros((block.shape[0], 1), np.uint8), block], axis=1)
        scores = np.asarray(evaluate(block), dtype=np.float64)
        where = int(np.argmax(scores))
        if scores[where] > best_value:
            best_value = float(scores[where])
            best_row = block[where].copy()
    return best_value, best_row


def resolve_solve_option(solve, small_enough: bool) -> bool:
    """Decide whether a factory computes its reference optimum.

    ``True`` always solves, ``False`` never does, and ``"auto"`` solves only when
    ``small_enough`` holds.
    """
    if solve is True or solve is False:
        return solve
    if solve == "auto":
        return bool(small_enough)
    raise ValueError(f"solve must be True, False or 'auto'; got {solve!r}")
