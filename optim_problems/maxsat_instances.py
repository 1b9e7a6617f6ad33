"""MAX-SAT formulas: read from DIMACS CNF and WCNF files, written back, or drawn as random k-SAT.

The accepted files are set out in the docstring of :mod:`optim_problems.maxsat`.
"""

from __future__ import annotations

import os
import warnings
from typing import List, Optional, Sequence, Tuple

import numpy as np

from optim_problems._instances import InstanceFormatError, read_instance_lines

__all__ = [
    "MaxSatFormula",
    "ClauseCountWarning",
    "read_formula",
    "parse_formula",
    "format_formula",
    "write_formula",
    "random_ksat",
]


class ClauseCountWarning(UserWarning):
    """The header's clause count differs from the clauses in the file."""


class MaxSatFormula:
    """Clauses with weights, as read from a file or generated.

    Parameters
    ----------
    n_variables : int
        Number of Boolean variables (DIMACS variables ``1 … n_variables``).
    clauses : sequence of sequence of int
        Each clause as nonzero DIMACS literals.
    weights : sequence of int or None
        Positive weight of each clause (ignored for hard clauses); 1 when ``None``.
    hard : sequence of bool or None
        Which clauses are hard; none when ``None``.
    """

    def __init__(
        self,
        n_variables: int,
        clauses: Sequence[Sequence[int]],
        weights: Optional[Sequence[int]] = None,
        hard: Optional[Sequence[bool]] = None,
    ):
        self.n_variables = int(n_variables)
        self.clauses: List[Tuple[int, ...]] = [tuple(int(lit) for lit in c) for c in clauses]
        m = len(self.clauses)
        self.weights = np.ones(m, np.int64) if weights is None else np.asarray(weights, np.int64)
        self.hard = np.zeros(m, bool) if hard is None else np.asarray(hard, bool)
        if self.weights.shape != (m,) or self.hard.shape != (m,):
            raise ValueError("weights and hard must give one entry per clause")
        if m and np.any(self.weights[~self.hard] < 1):
            raise ValueError("soft clause weights must be positive integers")
        for clause in self.clauses:
            for lit in clause:
                if lit == 0 or abs(lit) > self.n_variables:
                    raise ValueError(f"literal {lit} is out of range for {self.n_variables} variables")

    @property
    def n_clauses(self) -> int:
        """Number of clauses (hard and soft)."""
        return len(self.clauses)

    @property
    def soft_weight_total(self) -> int:
        """Sum of the weights of the soft clauses."""
        return int(self.weights[~self.hard].sum())

    def __repr__(self) -> str:
        return f"<MaxSatFormula {self.n_variables} variables, {self.n_clauses} clauses ({int(self.hard.sum())} hard)>"


def _parse_int(token: str, path, line: int, what: str) -> int:
    try:
        return int(token)
    except ValueError:
        raise InstanceFormatError(path, line, f"expected {what}, got {token!r}") from None


def _parse_header(tokens: List[str], path, line: int):
    usage = "expected a header 'p cnf <variables> <clauses>' or 'p wcnf <variables> <clauses> [<top>]'"
    kind = tokens[1].lower() if len(tokens) > 1 else ""
    if tokens[0] != "p" or kind not in ("cnf", "wcnf"):
        raise InstanceFormatError(path, line, usage)
    if len(tokens) != 4 and not (kind == "wcnf" and len(tokens) == 5):
        raise InstanceFormatError(path, line, usage)
    numbers = []
    for token in tokens[2:]:
        value = _parse_int(token, path, line, "a non-negative integer in the header")
        if value < 0:
            raise InstanceFormatError(path, line, f"expected a non-negative integer in the header, got {token!r}")
        numbers.append(value)
    top = numbers[2] if len(numbers) == 3 else None
    return kind, numbers[0], numbers[1], top


class _Collector:
    """Accumulate clauses while checking literals against the declared range."""

    def __init__(self, path, n_declared: Optional[int]):
        self.path = path
        self.n_declared = n_declared
        self.clauses: List[Tuple[int, ...]] = []
        self.weights: List[int] = []
        self.hard: List[bool] = []
        self.n_seen = 0

    def literal(self, token: str, line: int) -> int:
        lit = _parse_int(token, self.path, line, "an integer literal")
        if self.n_declared is not None and abs(lit) > self.n_declared:
            raise InstanceFormatError(
                self.path,
                line,
                f"literal {lit} is out of range: expected 1..{self.n_declared} or "
                f"-{self.n_declared}..-1 (the header declares {self.n_declared} variables)",
            )
        self.n_seen = max(self.n_seen, abs(lit))
        return lit

    def weight(self, token: str, line: int) -> int:
        value = _parse_int(token, self.path, line, "a positive integer clause weight")
        if value < 1:
            raise InstanceFormatError(self.path, line, f"expected a positive integer clause weight, got {token!r}")
        return value

    def add(self, literals: List[int], weight: int, hard: bool) -> None:
        self.clauses.append(tuple(literals))
        self.weights.append(weight)
        self.hard.append(hard)


def parse_formula(lines, path="<string>", strict_count: bool = True) -> MaxSatFormula:
    """Parse DIMACS CNF or WCNF text (see the module docstring for the formats).

    Parameters
    ----------
    lines : str or sequence of (int, str)
        The text, or ``(line number, text)`` pairs as from
        :func:`optim_problems._instances.read_instance_lines`.
    path : str
        The file name used in error messages.
    strict_count : bool
        Raise on a clause count that differs from the header (else warn).

    Raises
    ------
    InstanceFormatError
        On a bad header, a token that is not an integer, a literal out of the
        declared range, a non-positive weight, a clause without its final 0, or
        (with ``strict_count``) a clause count that differs from the header.
    """
    if isinstance(lines, str):
        lines = list(enumerate(lines.splitlines(), 1))
    header = None
    header_line = None
    collector = None
    pending: List[int] = []
    pending_weight: Optional[int] = None
    pending_line: Optional[int] = None
    expect_weight = False
    for number, text in lines:
        stripped = text.strip()
        if not stripped or stripped[0] == "c":
            continue
        if stripped[0] == "%":
            break
        tokens = stripped.split()
        if stripped[0] == "p":
            if header is not None or collector is not None:
                raise InstanceFormatError(path, number, "expected a single 'p' header line before the first clause")
            header = _parse_header(tokens, path, number)
            header_line = number
            collector = _Collector(path, header[1])
            expect_weight = header[0] == "wcnf"
            continue
        if header is None:
            collector = collector or _Collector(path, None)
            _parse_headerless_line(tokens, number, collector)
            continue
        kind, _, _, top = header
        for token in tokens:
            if expect_weight:
                pending_weight = collector.weight(token, number)
                pending_line = number
                expect_weight = False
                continue
            lit = collector.literal(token, number)
            if pending_line is None:
                pending_line = number
            if lit != 0:
                pending.append(lit)
                continue
            if kind == "wcnf":
                hard = top is not None and pending_weight >= top
                collector.add(pending, pending_weight, hard)
                expect_weight = True
            else:
                collector.add(pending, 1, False)
            pending, pending_weight, pending_line = [], None, None
    if pending_line is not None:
        raise InstanceFormatError(
            path,
            pending_line,
            "the clause starting on this line is not terminated: expected a final 0",
        )
    if collector is None:
        raise InstanceFormatError(path, None, "expected a 'p cnf' or 'p wcnf' header or clauses; the file has none")
    if header is not None:
        declared = header[2]
        found = len(collector.clauses)
        if declared != found:
            message = f"the header declares {declared} clauses but the file holds {found}"
            if strict_count:
                raise InstanceFormatError(path, header_line, message)
            warnings.warn(f"{path}, line {header_line}: {message}", ClauseCountWarning, stacklevel=2)
        n_variables = header[1]
    else:
        n_variables = collector.n_seen
    if n_variables < 1:
        raise InstanceFormatError(path, header_line, "expected at least one variable")
    return MaxSatFormula(n_variables, collector.clauses, collector.weights, collector.hard)


def _parse_headerless_line(tokens: List[str], number: int, collector: _Collector) -> None:
    if tokens[0] == "h":
        weight, hard = 0, True
    else:
        weight, hard = collector.weight(tokens[0], number), False
    literals = [collector.literal(token, number) for token in tokens[1:]]
    if not literals or literals[-1] != 0:
        raise InstanceFormatError(collector.path, number, "expected the clause to end with 0 on the same line")
    if 0 in literals[:-1]:
        raise InstanceFormatError(collector.path, number, "expected one clause per line (a 0 appears before the end)")
    collector.add(literals[:-1], weight, hard)


def read_formula(path, strict_count: bool = True) -> MaxSatFormula:
    """Read a DIMACS CNF or WCNF file (see :func:`parse_formula`)."""
    return parse_formula(read_instance_lines(path), path=os.fspath(path), strict_count=strict_count)


def format_formula(formula: MaxSatFormula) -> str:
    """DIMACS text of ``formula``: ``p cnf`` when every clause is soft with
    weight 1, else the header-less weighted format."""
    plain = not formula.hard.any() and bool(np.all(formula.weights == 1))
    lines = []
    if plain:
        lines.append(f"p cnf {formula.n_variables} {formula.n_clauses}")
        lines.extend(" ".join(map(str, clause + (0,))) for clause in formula.clauses)
    else:
        for clause, weight, hard in zip(formula.clauses, formula.weights, formula.hard, strict=True):
            head = "h" if hard else str(int(weight))
            lines.append(" ".join([head, *map(str, clause), "0"]))
    return "\n".join(lines) + "\n"


def write_formula(formula: MaxSatFormula, path) -> None:
    """Write ``formula`` to ``path`` as DIMACS text (see :func:`format_formula`)."""
    with open(path, "w", encoding="utf-8") as handle:
        handle.write(format_formula(formula))


def random_ksat(n: int, ratio: float = 4.26, k: int = 3, seed: int = 0) -> MaxSatFormula:
    """A random k-SAT formula: ``round(ratio * n)`` clauses, each over ``k``
    distinct variables drawn uniformly, each literal negated with probability 1/2.

    The ratio 4.26 lies in the hard region of random 3-SAT (Mitchell, Selman &
    Levesque 1992, "Hard and easy distributions of SAT problems").

    Parameters
    ----------
    n : int
        Number of variables.
    ratio : float
        Clauses per variable.
    k : int
        Literals per clause (at most ``n``).
    seed : int
        Seed of ``numpy.random.default_rng``.
    """
    if int(n) != n or n < 1:
        raise ValueError(f"n must be a positive integer; got {n!r}")
    if int(k) != k or not 1 <= k <= n:
        raise ValueError(f"k must be an integer between 1 and n={n}; got {k!r}")
    if not ratio > 0:
        raise ValueError(f"ratio must be positive; got {ratio!r}")
    m = max(1, int(np.floor(ratio * n + 0.5)))
    rng = np.random.default_rng(seed)
    variables = rng.integers(0, n, size=(m, k))
    while True:
        ordered = np.sort(variables, axis=1)
        repeated = np.any(ordered[:, 1:] == ordered[:, :-1], axis=1)
        if not repeated.any():
            break
        variables[repeated] = rng.integers(0, n, size=(int(repeated.sum()), k))
    signs = np.where(rng.integers(0, 2, size=(m, k)) == 1, -1, 1)
    clauses = (signs * (variables + 1)).tolist()
    return MaxSatFormula(n, clauses)
