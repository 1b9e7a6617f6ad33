"""What every search method provides to the driver in :mod:`optim.search`."""

from __future__ import annotations

import abc
from dataclasses import dataclass, field
from typing import Callable, Dict, Optional

import numpy as np

from optim.problem import Problem

__all__ = ["Method", "StepOutcome", "uniform_candidates"]

#: ``fitness(X) -> array``: scores of the candidates, oriented so that larger is better.
FitnessFunction = Callable[[np.ndarray], np.ndarray]


@dataclass
class StepOutcome:
    """The candidates one step evaluated, in evaluation order, and what it cost.

    ``evaluations`` equals ``len(candidates)``: every candidate listed was
    counted as one call of the objective.
    """

    candidates: np.ndarray
    fitness: np.ndarray
    seconds: Dict[str, float] = field(default_factory=dict)

    @property
    def evaluations(self) -> int:
        return int(self.candidates.shape[0])


def uniform_candidates(problem: Problem, count: int, rng: np.random.Generator) -> np.ndarray:
    """``count`` candidates drawn uniformly from each variable's values."""
    values = rng.integers(0, problem.cardinality[None, :], size=(int(count), problem.n), dtype=np.int64)
    return values.astype(np.uint8)


class Method(abc.ABC):
    """A search method driven one step (one generation) at a time.

    Subclasses keep all their state in attributes that :meth:`get_state` can
    export, so that a run can be checkpointed and resumed exactly.
    """

    name = "method"

    def __init__(self, problem: Problem, rng: np.random.Generator):
        self.problem = problem
        self.rng = rng

    @abc.abstractmethod
    def step(self, fitness: FitnessFunction, budget: int) -> StepOutcome:
        """Evaluate at most ``budget`` (>= 1) new candidates and update the state."""

    @property
    def model_entropy(self) -> Optional[float]:
        """Entropy (nats) of the distribution the next candidates come from, if the method has one."""
        return None

    @property
    def converged(self) -> bool:
        """``True`` when the method can no longer produce anything new."""
        return False

    def model(self):
        """The current probability model, if any."""
        return None

    @property
    def fitted_on(self) -> Optional[int]:
        """How many candidates (the survivors of the last selection) the current model was fitted on.

        ``None`` for methods without a model, before the first fit, and after a restore from a
        checkpoint until the next fit (the count is not part of the saved state).
        """
        return None

    @abc.abstractmethod
    def get_state(self) -> dict:
        """All state as numpy arrays and plain numbers (the random generator excluded)."""

    @abc.abstractmethod
    def set_state(self, state: dict) -> None:
        """Restore what :meth:`get_state` returned."""
