"""Weighted partial MAX-SAT: readers, a random k-SAT generator and the objective.

A formula is a list of clauses over Boolean variables ``1 … n`` (DIMACS
literals: ``v`` is variable ``v`` true, ``-v`` is it false). Soft clauses carry
a positive integer weight; hard clauses must hold. Candidate bit ``j`` (0-based)
is the value of DIMACS variable ``j + 1`` and is named ``v<j+1>``.

Score of a candidate (maximised)::

    score = (total weight of satisfied soft clauses)
            - hard_penalty * (number of violated hard clauses)

with ``hard_penalty = (sum of all soft weights) + 1``. Every candidate that
satisfies all hard clauses scores at least 0 and every other candidate scores
at most -1, so ``score >= 0`` (:attr:`MaxSatProblem.feasibility_threshold`)
means feasible. For a plain CNF every clause is soft with weight 1 and the score
is the number of satisfied clauses.

Accepted files
--------------
* DIMACS CNF: header ``p cnf <variables> <clauses>``, clauses as literals
  ending with ``0``; a clause may span several lines.
* Classic weighted CNF: header ``p wcnf <variables> <clauses> [<top>]``; each
  clause starts with its weight; a weight ``>= top`` marks a hard clause
  (without ``top`` every clause is soft).
* Header-less weighted CNF: one clause per line, ``h <literals> 0`` for a hard
  clause and ``<weight> <literals> 0`` for a soft one.

Lines starting with ``c`` are comments and a line starting with ``%`` ends the
formula (as at the end of some benchmark files). Files ending in ``.gz``,
``.bz2`` or ``.xz`` are decompressed. A header whose clause count differs from
the clauses found raises :class:`InstanceFormatError` (pass
``strict_count=False`` to get a :class:`ClauseCountWarning` instead).
"""

from __future__ import annotations

import os
import warnings
from typing import List, Optional, Sequence, Tuple

import numpy as np

from optim.problem import Problem
from optim_problems._instances import InstanceFormatError, read_instance_lines, resolve_solve_option

__all__ = [
    "MaxSatFormula",
    "MaxSatProblem",
    "InstanceFormatError",
    "ClauseCountWarning",
    "read_formula",
    "parse_formula",
    "format_formula",
    "write_formula",
    "random_ksat",
    "rc2_optimum",
    "max_sat",
]

#: Largest instance (variables, clauses) that ``solve="auto"`` hands to RC2.
AUTO_SOLVE_LIMIT = (150, 1000)

#: Literal slots per precomputed clause block in :meth:`MaxSatProblem.evaluate`.
_BLOCK_SLOTS = 1 << 13


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


class MaxSatProblem(Problem):
    """Maximise the satisfied soft weight of a formula, hard clauses penalised.

    See the module docstring for the score. Evaluation gathers the candidate's
    value of every literal from padded index/sign arrays and takes ``any`` over
    the literal axis, in blocks of clauses to bound memory.

    Parameters
    ----------
    formula : MaxSatFormula
        The clauses.
    optimum : float or None
        The best score, when known.
    optimum_source : str or None
        How the optimum was obtained.
    name : str
        A short label.
    """

    #: A score at or above this value means every hard clause holds.
    feasibility_threshold = 0.0

    def __init__(self, formula: MaxSatFormula, optimum=None, optimum_source=None, name="max-sat"):
        super().__init__(
            formula.n_variables,
            goal="maximize",
            optimum=optimum,
            optimum_source=optimum_source,
            name=name,
            variable_names=[f"v{j}" for j in range(1, formula.n_variables + 1)],
        )
        self.formula = formula
        self.hard_penalty = float(formula.soft_weight_total + 1)
        self._blocks = _clause_blocks(formula)

    def satisfied(self, X: np.ndarray) -> np.ndarray:
        """Boolean array ``(count, n_clauses)``: which clauses each candidate satisfies."""
        X = self._check(X)
        out = np.empty((X.shape[0], self.formula.n_clauses), dtype=bool)
        for rows, variables, negated, valid in self._blocks:
            values = X[:, variables] ^ negated
            out[:, rows] = np.any(values.astype(bool) & valid, axis=2)
        return out

    def violated_hard(self, X: np.ndarray) -> np.ndarray:
        """Number of violated hard clauses of each candidate (int64, ``(count,)``)."""
        return (~self.satisfied(X))[:, self.formula.hard].sum(axis=1).astype(np.int64)

    def evaluate(self, X: np.ndarray) -> np.ndarray:
        sat = self.satisfied(X)
        soft_weights = np.where(self.formula.hard, 0.0, self.formula.weights.astype(np.float64))
        penalties = np.where(self.formula.hard, self.hard_penalty, 0.0)
        return sat @ soft_weights - (~sat) @ penalties

    def is_feasible(self, X: np.ndarray) -> np.ndarray:
        """Whether each candidate satisfies every hard clause."""
        return self.violated_hard(X) == 0

    def _check(self, X) -> np.ndarray:
        X = np.asarray(X, dtype=np.uint8)
        if X.ndim != 2 or X.shape[1] != self.n:
            raise ValueError(f"expected a population of shape (count, {self.n}); got {X.shape}")
        return X

    def describe(self) -> dict:
        summary = super().describe()
        summary.update(
            clauses=self.formula.n_clauses,
            hard_clauses=int(self.formula.hard.sum()),
            hard_penalty=self.hard_penalty,
        )
        return summary


def _clause_blocks(formula: MaxSatFormula):
    """Blocks of clauses sorted by length, each padded to its own longest clause."""
    lengths = np.array([len(c) for c in formula.clauses], dtype=np.int64)
    order = np.argsort(lengths, kind="stable")
    blocks = []
    start = 0
    while start < len(order):
        width = max(1, int(lengths[order[start]]))
        stop = start + 1
        while stop < len(order):
            wider = max(width, int(lengths[order[stop]]))
            if (stop - start + 1) * wider > _BLOCK_SLOTS:
                break
            width, stop = wider, stop + 1
        rows = order[start:stop]
        variables = np.zeros((len(rows), width), dtype=np.int64)
        negated = np.zeros((len(rows), width), dtype=np.uint8)
        valid = np.zeros((len(rows), width), dtype=bool)
        for r, clause_index in enumerate(rows):
            clause = formula.clauses[clause_index]
            if clause:
                literals = np.asarray(clause, dtype=np.int64)
                variables[r, : len(clause)] = np.abs(literals) - 1
                negated[r, : len(clause)] = literals < 0
                valid[r, : len(clause)] = True
        blocks.append((rows, variables, negated, valid))
        start = stop
    return blocks


def _import_rc2():
    try:
        from pysat.examples.rc2 import RC2
        from pysat.formula import WCNF
    except ImportError as error:
        raise ImportError(
            "the MAX-SAT reference optimum needs python-sat: pip install python-sat (import name pysat)"
        ) from error
    return RC2, WCNF


def rc2_optimum(formula: MaxSatFormula) -> Tuple[Optional[float], Optional[np.ndarray]]:
    """Exact optimum with the RC2 MaxSAT solver of python-sat.

    RC2 (Ignatiev, Morgado & Marques-Silva 2019, "RC2: an efficient MaxSAT
    solver") returns a model minimising the weight of falsified soft clauses;
    the best score is the total soft weight minus that cost.

    Returns
    -------
    best : float or None
        The best score, or ``None`` when the hard clauses cannot all hold.
    assignment : numpy.ndarray or None
        A uint8 vector of length ``n_variables`` reaching it.
    """
    RC2, WCNF = _import_rc2()
    wcnf = WCNF()
    fixed_cost = 0
    for clause, weight, hard in zip(formula.clauses, formula.weights, formula.hard, strict=True):
        if not clause:
            if hard:
                return None, None
            fixed_cost += int(weight)
        elif hard:
            wcnf.append(list(clause))
        else:
            wcnf.append(list(clause), weight=int(weight))
    assignment = np.zeros(formula.n_variables, dtype=np.uint8)
    if not wcnf.hard and not wcnf.soft:
        return float(formula.soft_weight_total - fixed_cost), assignment
    with RC2(wcnf) as solver:
        model = solver.compute()
        cost = solver.cost
    if model is None:
        return None, None
    for lit in model:
        if 0 < abs(lit) <= formula.n_variables:
            assignment[abs(lit) - 1] = 1 if lit > 0 else 0
    return float(formula.soft_weight_total - fixed_cost - cost), assignment


def _rc2_available() -> bool:
    try:
        _import_rc2()
    except ImportError:
        return False
    return True


def max_sat(
    path=None,
    n: int = 50,
    ratio: float = 4.26,
    k: int = 3,
    seed: int = 0,
    solve="auto",
    optimum: Optional[float] = None,
    strict_count: bool = True,
) -> MaxSatProblem:
    """A MAX-SAT problem from a DIMACS CNF/WCNF file or a random k-SAT formula.

    Parameters
    ----------
    path : str or None
        DIMACS CNF or WCNF file; when None a random k-SAT formula is generated.
    n : int
        Number of variables of the generated formula.
    ratio : float
        Clauses per variable of the generated formula (4.26: hard 3-SAT region).
    k : int
        Literals per clause of the generated formula.
    seed : int
        Seed of the generator.
    solve : bool or "auto"
        Compute the exact optimum with RC2 (python-sat); "auto": only if installed and small.
    optimum : float or None
        A known best score to use instead of solving.
    strict_count : bool
        Reject a file whose header clause count is wrong (False: warn).
    """
    if path is not None:
        formula = read_formula(path, strict_count=strict_count)
        name = f"max-sat:{os.path.basename(os.fspath(path))}"
    else:
        formula = random_ksat(n, ratio=ratio, k=k, seed=seed)
        name = f"max-sat:random-{k}sat-n{n}-ratio{ratio:g}-seed{seed}"
    source = None
    if optimum is not None:
        source = "given by the user"
    else:
        small = (
            formula.n_variables <= AUTO_SOLVE_LIMIT[0] and formula.n_clauses <= AUTO_SOLVE_LIMIT[1] and _rc2_available()
        )
        if resolve_solve_option(solve, small):
            optimum, _ = rc2_optimum(formula)
            source = (
                "RC2 MaxSAT solver of python-sat (Ignatiev, Morgado & Marques-Silva 2019)"
                if optimum is not None
                else "RC2 (python-sat): the hard clauses cannot all hold"
            )
    return MaxSatProblem(formula, optimum=optimum, optimum_source=source, name=name)
