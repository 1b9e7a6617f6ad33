"""Weighted partial MAX-SAT: the objective and its exact reference optimum (RC2).

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
the clauses found raises :class:`~optim_problems._instances.InstanceFormatError`
(pass ``strict_count=False`` to get a
:class:`~optim_problems.maxsat_instances.ClauseCountWarning` instead).
"""

from __future__ import annotations

import os
from typing import Optional, Tuple

import numpy as np

from optim.problem import Problem
from optim_problems._instances import resolve_solve_option
from optim_problems.maxsat_instances import MaxSatFormula, random_ksat, read_formula

__all__ = [
    "MaxSatProblem",
    "rc2_optimum",
    "max_sat",
]

#: Largest instance (variables, clauses) that ``solve="auto"`` hands to RC2.
AUTO_SOLVE_LIMIT = (150, 1000)

#: Literal slots per precomputed clause block in :meth:`MaxSatProblem.evaluate`.
_BLOCK_SLOTS = 1 << 13


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
