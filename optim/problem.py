"""The objective interface every search method works against.

A :class:`Problem` knows its number of variables, the cardinality of each
variable, whether it is maximised or minimised, and how to score candidates.
Candidates are rows of a ``uint8`` array of shape ``(count, n)`` holding values
``0 … cardinality - 1``; scores are ``float64`` of shape ``(count,)``.
"""

from __future__ import annotations

import abc
from typing import Callable, Optional, Sequence

import numpy as np

from optim.parameters import one_of, whole_number

__all__ = ["Problem", "FunctionProblem", "GOALS", "as_cardinality"]

GOALS = ("maximize", "minimize")


def as_cardinality(cardinality, n: int) -> np.ndarray:
    """Return the cardinality of each of ``n`` variables as an int64 array.

    ``cardinality`` may be ``None`` (all binary), one integer for all
    variables, or a sequence of ``n`` integers, each between 2 and 256.
    """
    if cardinality is None:
        card = np.full(n, 2, dtype=np.int64)
    elif np.isscalar(cardinality):
        card = np.full(n, int(cardinality), dtype=np.int64)
    else:
        card = np.asarray(cardinality, dtype=np.int64).reshape(-1)
        if card.shape[0] != n:
            raise ValueError(f"cardinality must give one value per variable ({n}); got {card.shape[0]} values")
    if n > 0 and (card.min() < 2 or card.max() > 256):
        raise ValueError("every cardinality must be between 2 and 256")
    return card


class Problem(abc.ABC):
    """A discrete black-box objective.

    Subclasses set the attributes in ``__init__`` (usually through
    ``super().__init__``) and implement :meth:`evaluate`, which scores a whole
    population in one vectorised call.

    Parameters
    ----------
    n : int
        Number of variables (>= 1).
    cardinality : int, sequence of int or None
        Number of values of each variable (2 when ``None``).
    goal : {"maximize", "minimize"}
        Direction of optimisation.
    optimum : float or None
        The best attainable score when it is known exactly.
    optimum_source : str or None
        Where the optimum comes from (a formula, a paper, a reference solver).
    name : str
        A short label used in logs.
    variable_names : sequence of str or None
        One name per variable; ``x0 … x{n-1}`` when ``None``.
    """

    #: ``True`` when :meth:`evaluate` scores a whole population in one call
    #: (cheap and deterministic); ``False`` for per-candidate objectives.
    vectorized = True

    #: How per-candidate evaluations run in parallel: ``"processes"`` for Python
    #: code that holds the GIL, ``"threads"`` for objectives that wait on other
    #: programs (external commands).
    parallel = "processes"

    #: Whether runs serve repeated candidates from a cache unless the config
    #: says otherwise (``search.cache``); true for slow deterministic objectives.
    cache_by_default = False

    def __init__(
        self,
        n: int,
        cardinality=None,
        goal: str = "maximize",
        optimum: Optional[float] = None,
        optimum_source: Optional[str] = None,
        name: str = "problem",
        variable_names: Optional[Sequence[str]] = None,
    ):
        self.n = whole_number("n", n, least=1)
        self.goal = one_of("goal", goal, GOALS)
        self.cardinality = as_cardinality(cardinality, self.n)
        self.optimum = None if optimum is None else float(optimum)
        self.optimum_source = optimum_source
        self.name = name
        if variable_names is None:
            variable_names = [f"x{i}" for i in range(self.n)]
        variable_names = [str(v) for v in variable_names]
        if len(variable_names) != self.n:
            raise ValueError(f"variable_names must have {self.n} entries; got {len(variable_names)}")
        if len(set(variable_names)) != self.n:
            raise ValueError("variable_names must be distinct")
        self.variable_names = variable_names

    @property
    def binary(self) -> bool:
        """``True`` when every variable has two values."""
        return bool(np.all(self.cardinality == 2))

    @abc.abstractmethod
    def evaluate(self, X: np.ndarray) -> np.ndarray:
        """Score the candidates ``X`` (shape ``(count, n)``); returns shape ``(count,)``.

        Parameters
        ----------
        X : numpy.ndarray
            ``uint8`` candidates, one per row.

        Returns
        -------
        numpy.ndarray
            ``float64`` scores, one per candidate.
        """

    def evaluate_one(self, x: np.ndarray) -> float:
        """Score one candidate (a row of length ``n``).

        Parameters
        ----------
        x : numpy.ndarray
            The candidate's values.

        Returns
        -------
        float
            Its score.
        """
        return float(self.evaluate(np.asarray(x, dtype=np.uint8).reshape(1, -1))[0])

    def raw_value(self, x: np.ndarray):
        """What the objective returns for one candidate, before it is turned into a float.

        The evaluator scores per-candidate objectives through this method and
        checks the value itself, so that a result that is not one finite number
        (a text, ``None``, a list, NaN) is recorded as such rather than as
        whatever error converting it would raise. The default is
        :meth:`evaluate_one`; a problem that wraps user code returns that
        code's value as it is.
        """
        return self.evaluate_one(x)

    def initial_candidates(self) -> Optional[np.ndarray]:
        """Known configurations to include in the first population, or ``None``.

        Returns
        -------
        numpy.ndarray or None
            ``uint8`` candidates, one per row, or ``None`` when there are none.
        """
        return None

    def describe(self) -> dict:
        """A JSON-friendly summary for run records.

        Returns
        -------
        dict
            ``name``, ``n``, ``cardinality``, ``goal``, ``optimum`` and ``optimum_source``.
        """
        return {
            "name": self.name,
            "n": self.n,
            "cardinality": self.cardinality.tolist()
            if not np.all(self.cardinality == self.cardinality[0])
            else int(self.cardinality[0]),
            "goal": self.goal,
            "optimum": self.optimum,
            "optimum_source": self.optimum_source,
        }

    def __repr__(self) -> str:
        return f"<{type(self).__name__} {self.name!r} n={self.n} goal={self.goal}>"


class FunctionProblem(Problem):
    """Wrap a plain Python function as a :class:`Problem`.

    Parameters
    ----------
    function : callable
        With ``vectorized=False`` (the default), ``function(x)`` receives one
        candidate (a ``uint8`` array of length ``n``) and returns a number.
        With ``vectorized=True`` it receives the ``(count, n)`` population and
        returns ``count`` numbers.
    n : int
        Number of variables (>= 1).
    cardinality : int, sequence of int or None
        Number of values of each variable (2 when ``None``).
    goal : {"maximize", "minimize"}
        Direction of optimisation.
    optimum : float or None
        The best attainable score when it is known exactly (recorded as given by the user).
    name : str or None
        A short label used in logs; the function's name when ``None``.
    variable_names : sequence of str or None
        One name per variable; ``x0 … x{n-1}`` when ``None``.
    vectorized : bool
        Whether ``function`` scores a whole population at once.
    """

    def __init__(
        self,
        function: Callable,
        n: int,
        cardinality=None,
        goal: str = "maximize",
        optimum: Optional[float] = None,
        name: Optional[str] = None,
        variable_names: Optional[Sequence[str]] = None,
        vectorized: bool = False,
    ):
        if not callable(function):
            raise TypeError(f"function must be callable; got {type(function).__name__}")
        super().__init__(
            n,
            cardinality=cardinality,
            goal=goal,
            optimum=optimum,
            optimum_source="given by the user" if optimum is not None else None,
            name=name or getattr(function, "__name__", "function"),
            variable_names=variable_names,
        )
        self.function = function
        self.vectorized = bool(vectorized)

    def evaluate(self, X: np.ndarray) -> np.ndarray:
        X = np.asarray(X, dtype=np.uint8)
        if self.vectorized:
            return np.asarray(self.function(X), dtype=np.float64).reshape(-1)
        return np.array([float(self.function(x)) for x in X], dtype=np.float64)

    def evaluate_one(self, x: np.ndarray) -> float:
        if self.vectorized:
            return super().evaluate_one(x)
        return float(self.function(np.asarray(x, dtype=np.uint8)))

    def raw_value(self, x: np.ndarray):
        """The function's own return value for one candidate (per-candidate functions), unconverted."""
        if self.vectorized:
            return super().raw_value(x)
        return self.function(np.asarray(x, dtype=np.uint8))
