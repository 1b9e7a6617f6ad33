"""Parameter and population checks shared by the problem modules (private)."""

from __future__ import annotations

import numpy as np

__all__ = ["require_int", "population_of"]


def require_int(name: str, value, minimum: int) -> int:
    """``value`` as an int, or a ValueError naming the parameter when it is not a whole number >= ``minimum``."""
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, (int, np.integer)) or value < minimum:
        raise ValueError(f"{name} must be an integer >= {minimum}; got {value!r}")
    return int(value)


def population_of(problem, X) -> np.ndarray:
    """``X`` as a uint8 array of shape ``(count, problem.n)``, or a ValueError naming the problem."""
    X = np.asarray(X, dtype=np.uint8)
    if X.ndim != 2 or X.shape[1] != problem.n:
        raise ValueError(f"{problem.name}: expected a population of shape (count, {problem.n}); got {X.shape}")
    return X
