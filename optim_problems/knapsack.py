"""The 0/1 knapsack problem: choose items of integer weight and value, total
weight within a capacity, maximising the total value.

Candidate bit ``j`` selects item ``j``. Two ways of scoring candidates that
exceed the capacity (parameter ``constraint``):

``"repair"``
    Drop the selected items of worst value/weight ratio, one at a time, until
    the rest fits; the score is the value of the repaired set (a feasible
    candidate keeps its own value). Items are sorted by ratio once (best first,
    ties by index); greedy dropping from the worst end keeps exactly the
    selected items whose cumulative weight in that order, themselves included,
    is within the capacity, so the repair is a cumulative sum over the
    population, without a loop.
``"penalty"``
    ``score = value`` for feasible candidates and
    ``score = value - lam * excess - total_value`` otherwise, where
    ``excess = weight - capacity``, ``lam = 1 + max value/weight ratio`` and
    ``total_value`` is the sum of all item values. Every infeasible candidate
    thus scores below 0, the value of the (feasible) empty set, and hence
    below every feasible candidate; among infeasible candidates less excess
    and more value score higher.

Instance files (our own small formats):

* CSV with header ``name,weight,value`` (capacity given as a parameter);
* YAML with ``capacity:`` and ``items:``, a list of mappings with keys
  ``name``, ``weight`` and ``value``.

Weights and values are non-negative integers.
"""

from __future__ import annotations

import csv
import io
import os
from typing import List, Optional, Sequence, Tuple

import numpy as np

from optim.problem import Problem
from optim_problems._instances import InstanceFormatError, read_instance_lines, resolve_solve_option

__all__ = [
    "KnapsackProblem",
    "InstanceFormatError",
    "KINDS",
    "CONSTRAINTS",
    "generate_items",
    "read_items_csv",
    "read_items_yaml",
    "dp_knapsack",
    "knapsack",
]

#: Instance families of :func:`generate_items`.
KINDS = ("uncorrelated", "weakly-correlated", "strongly-correlated")
#: Constraint handling rules of :class:`KnapsackProblem`.
CONSTRAINTS = ("repair", "penalty")
#: Largest ``items * (capacity + 1)`` table that ``solve="auto"`` fills.
AUTO_SOLVE_CELLS = 20_000_000


class KnapsackProblem(Problem):
    """A 0/1 knapsack instance with a constraint-handling rule.

    Parameters
    ----------
    weights, values : sequence of int
        Non-negative integer weight and value of each item.
    capacity : int
        Non-negative integer capacity.
    constraint : {"repair", "penalty"}
        How candidates over the capacity are scored (module docstring).
    item_names : sequence of str or None
        Item labels (the variable names).
    optimum, optimum_source, name
        As for :class:`optim.problem.Problem`.
    """

    def __init__(
        self,
        weights: Sequence[int],
        values: Sequence[int],
        capacity: int,
        constraint: str = "repair",
        item_names=None,
        optimum=None,
        optimum_source=None,
        name="knapsack",
    ):
        weights = _as_counts(weights, "weights")
        values = _as_counts(values, "values")
        if weights.shape != values.shape:
            raise ValueError("weights and values must have the same length")
        if int(capacity) != capacity or capacity < 0:
            raise ValueError(f"capacity must be a non-negative integer; got {capacity!r}")
        if constraint not in CONSTRAINTS:
            raise ValueError(f"constraint must be one of {CONSTRAINTS}; got {constraint!r}")
        super().__init__(
            weights.shape[0],
            goal="maximize",
            optimum=optimum,
            optimum_source=optimum_source,
            name=name,
            variable_names=item_names,
        )
        self.weights = weights
        self.values = values
        self.capacity = int(capacity)
        self.constraint = constraint
        positive = weights > 0
        ratios = np.full(self.n, np.inf)
        ratios[positive] = values[positive] / weights[positive]
        self.penalty_rate = 1.0 + (float(ratios[positive].max()) if positive.any() else 0.0)
        self.total_value = float(values.sum())
        # Best ratio first; a stable sort of -ratio breaks ties by item index.
        self._order = np.argsort(-ratios, kind="stable")

    def _check(self, X) -> np.ndarray:
        X = np.asarray(X, dtype=np.uint8)
        if X.ndim != 2 or X.shape[1] != self.n:
            raise ValueError(f"expected a population of shape (count, {self.n}); got {X.shape}")
        return X

    def selected_weight(self, X: np.ndarray) -> np.ndarray:
        """Total weight of each candidate's selection (int64)."""
        return self._check(X).astype(np.int64) @ self.weights

    def selected_value(self, X: np.ndarray) -> np.ndarray:
        """Total value of each candidate's selection (int64), ignoring the capacity."""
        return self._check(X).astype(np.int64) @ self.values

    def is_feasible(self, X: np.ndarray) -> np.ndarray:
        """Whether each candidate's selection fits the capacity."""
        return self.selected_weight(X) <= self.capacity

    def repair(self, X: np.ndarray) -> np.ndarray:
        """The greedily repaired selections (worst-ratio items dropped until they fit)."""
        X = self._check(X)
        ordered = X[:, self._order].astype(np.int64)
        cumulative = np.cumsum(ordered * self.weights[self._order], axis=1)
        kept = (ordered == 1) & (cumulative <= self.capacity)
        repaired = np.zeros_like(X)
        repaired[:, self._order] = kept
        return repaired

    def evaluate(self, X: np.ndarray) -> np.ndarray:
        X = self._check(X)
        if self.constraint == "repair":
            return self.selected_value(self.repair(X)).astype(np.float64)
        value = self.selected_value(X).astype(np.float64)
        excess = np.maximum(self.selected_weight(X) - self.capacity, 0).astype(np.float64)
        return np.where(excess > 0, value - self.penalty_rate * excess - self.total_value, value)

    def describe(self) -> dict:
        summary = super().describe()
        summary.update(
            capacity=self.capacity,
            constraint=self.constraint,
            total_weight=int(self.weights.sum()),
            total_value=int(self.values.sum()),
        )
        return summary


def _as_counts(values, what: str) -> np.ndarray:
    array = np.asarray(values)
    if array.ndim != 1 or array.shape[0] < 1:
        raise ValueError(f"{what} must be a non-empty one-dimensional sequence")
    as_int = array.astype(np.int64)
    if not np.all(as_int == array) or np.any(as_int < 0):
        raise ValueError(f"{what} must be non-negative integers")
    return as_int


def generate_items(
    items: int = 40, kind: str = "uncorrelated", data_range: int = 1000, seed: int = 0
) -> Tuple[np.ndarray, np.ndarray]:
    """Random item weights and values of one of the classic families.

    With ``R = data_range`` and weights ``w_j`` uniform on ``1 … R``
    (definitions as in Kellerer, Pferschy & Pisinger 2004, "Knapsack
    Problems"; the exact bounds are from memory):

    * uncorrelated: values ``p_j`` uniform on ``1 … R``;
    * weakly-correlated: ``p_j`` uniform on ``w_j - R/10 … w_j + R/10``,
      raised to at least 1;
    * strongly-correlated: ``p_j = w_j + R/10``.

    Parameters
    ----------
    items : int
        Number of items.
    kind : str
        One of :data:`KINDS`.
    data_range : int
        Largest weight R (at least 10).
    seed : int
        Seed of ``numpy.random.default_rng``.

    Returns
    -------
    weights, values : numpy.ndarray
        int64 arrays of length ``items``.
    """
    if int(items) != items or items < 1:
        raise ValueError(f"items must be a positive integer; got {items!r}")
    if kind not in KINDS:
        raise ValueError(f"kind must be one of {KINDS}; got {kind!r}")
    if int(data_range) != data_range or data_range < 10:
        raise ValueError(f"data_range must be an integer of at least 10; got {data_range!r}")
    rng = np.random.default_rng(seed)
    spread = int(data_range) // 10
    weights = rng.integers(1, data_range + 1, size=items)
    if kind == "uncorrelated":
        values = rng.integers(1, data_range + 1, size=items)
    elif kind == "weakly-correlated":
        values = np.maximum(weights + rng.integers(-spread, spread + 1, size=items), 1)
    else:
        values = weights + spread
    return weights.astype(np.int64), values.astype(np.int64)


def _count(token, path, line: int, what: str) -> int:
    text = str(token).strip()
    try:
        value = int(text)
    except ValueError:
        value = -1
    if value < 0:
        raise InstanceFormatError(path, line, f"expected a non-negative integer {what}, got {text!r}")
    return value


def read_items_csv(path) -> Tuple[List[str], np.ndarray, np.ndarray]:
    """Read a CSV file with header ``name,weight,value``.

    Blank lines and lines starting with ``#`` are skipped.

    Returns
    -------
    names : list of str
    weights, values : numpy.ndarray

    Raises
    ------
    InstanceFormatError
        On a wrong header, a row without three fields, an empty or repeated
        name, a weight or value that is not a non-negative integer, or no items.
    """
    path = os.fspath(path)
    rows = [(no, text) for no, text in read_instance_lines(path) if text.strip() and not text.lstrip().startswith("#")]
    if not rows:
        raise InstanceFormatError(path, None, "expected a header 'name,weight,value' and item rows")
    names, weights, values = [], [], []
    seen = {}
    for index, (number, text) in enumerate(rows):
        fields = [f.strip() for f in next(csv.reader(io.StringIO(text)))]
        if index == 0:
            if [f.lower() for f in fields] != ["name", "weight", "value"]:
                raise InstanceFormatError(
                    path, number, f"expected the header 'name,weight,value', got {text.strip()!r}"
                )
            continue
        if len(fields) != 3:
            raise InstanceFormatError(path, number, f"expected 3 fields 'name,weight,value', got {len(fields)}")
        name = fields[0]
        if not name:
            raise InstanceFormatError(path, number, "expected a non-empty item name")
        if name in seen:
            raise InstanceFormatError(path, number, f"item name {name!r} repeats line {seen[name]}")
        seen[name] = number
        names.append(name)
        weights.append(_count(fields[1], path, number, "weight"))
        values.append(_count(fields[2], path, number, "value"))
    if not names:
        raise InstanceFormatError(path, rows[0][0], "expected at least one item after the header")
    return names, np.array(weights, np.int64), np.array(values, np.int64)


def read_items_yaml(path) -> Tuple[List[str], np.ndarray, np.ndarray, int]:
    """Read a YAML file with ``capacity:`` and ``items:`` (module docstring).

    Returns
    -------
    names : list of str
    weights, values : numpy.ndarray
    capacity : int

    Raises
    ------
    InstanceFormatError
        On invalid YAML, a missing or bad ``capacity``, ``items`` that is not a
        non-empty list of mappings with keys ``name``, ``weight``, ``value``,
        a repeated name, or a weight or value that is not a non-negative integer.
    """
    import yaml

    path = os.fspath(path)
    text = "\n".join(line for _, line in read_instance_lines(path))
    try:
        root = yaml.compose(text, Loader=yaml.SafeLoader)
    except yaml.YAMLError as error:
        mark = getattr(error, "problem_mark", None)
        line = None if mark is None else mark.line + 1
        raise InstanceFormatError(path, line, f"expected valid YAML ({getattr(error, 'problem', error)})") from None
    if not isinstance(root, yaml.MappingNode):
        line = None if root is None else root.start_mark.line + 1
        raise InstanceFormatError(path, line, "expected a mapping with keys 'capacity' and 'items'")
    top = {key.value: (key, node) for key, node in root.value}
    unknown = sorted(set(top) - {"capacity", "items"})
    if unknown:
        key = top[unknown[0]][0]
        raise InstanceFormatError(
            path,
            key.start_mark.line + 1,
            f"unexpected key {unknown[0]!r}: expected 'capacity' and 'items'",
        )
    for required in ("capacity", "items"):
        if required not in top:
            raise InstanceFormatError(path, None, f"expected a top-level key {required!r}")
    capacity_node = top["capacity"][1]
    capacity = _scalar_count(capacity_node, path, "capacity")
    items_node = top["items"][1]
    if not isinstance(items_node, yaml.SequenceNode) or not items_node.value:
        raise InstanceFormatError(path, items_node.start_mark.line + 1, "expected 'items' to be a non-empty list")
    names, weights, values = [], [], []
    seen = {}
    for item in items_node.value:
        line = item.start_mark.line + 1
        if not isinstance(item, yaml.MappingNode):
            raise InstanceFormatError(path, line, "expected an item mapping with keys name, weight, value")
        fields = {key.value: node for key, node in item.value}
        if set(fields) != {"name", "weight", "value"}:
            raise InstanceFormatError(
                path,
                line,
                f"expected item keys name, weight, value; got {', '.join(sorted(fields)) or 'none'}",
            )
        name_node = fields["name"]
        if not isinstance(name_node, yaml.ScalarNode) or not str(name_node.value).strip():
            raise InstanceFormatError(path, name_node.start_mark.line + 1, "expected a non-empty item name")
        name = str(name_node.value).strip()
        if name in seen:
            raise InstanceFormatError(
                path, name_node.start_mark.line + 1, f"item name {name!r} repeats line {seen[name]}"
            )
        seen[name] = name_node.start_mark.line + 1
        names.append(name)
        weights.append(_scalar_count(fields["weight"], path, "weight"))
        values.append(_scalar_count(fields["value"], path, "value"))
    return names, np.array(weights, np.int64), np.array(values, np.int64), capacity


def _scalar_count(node, path, what: str) -> int:
    import yaml

    line = node.start_mark.line + 1
    if not isinstance(node, yaml.ScalarNode):
        raise InstanceFormatError(path, line, f"expected a non-negative integer {what}")
    return _count(node.value, path, line, what)


def dp_knapsack(weights: Sequence[int], values: Sequence[int], capacity: int) -> Tuple[int, np.ndarray]:
    """Exact 0/1 knapsack by dynamic programming over the capacity.

    ``best[c]`` is the largest value of items ``0 … j`` of total weight at most
    ``c``; adding item ``j`` is ``best[c] = max(best[c], best[c - w_j] + p_j)``,
    one vectorised update over all ``c`` per item (Bellman 1957, "Dynamic
    Programming"; Kellerer, Pferschy & Pisinger 2004). The choices are stored, ``items x
    (capacity + 1)`` booleans, to recover an optimal set.

    Returns
    -------
    best : int
        The optimal total value.
    selection : numpy.ndarray
        A uint8 vector selecting an optimal set of items.
    """
    weights = _as_counts(weights, "weights")
    values = _as_counts(values, "values")
    capacity = int(capacity)
    n = weights.shape[0]
    best = np.zeros(capacity + 1, dtype=np.int64)
    taken = np.zeros((n, capacity + 1), dtype=bool)
    for j in range(n):
        w = int(weights[j])
        if w > capacity:
            continue
        candidate = best[: capacity + 1 - w] + values[j]
        better = candidate > best[w:]
        taken[j, w:] = better
        best[w:] = np.where(better, candidate, best[w:])
    selection = np.zeros(n, dtype=np.uint8)
    room = capacity
    for j in range(n - 1, -1, -1):
        if taken[j, room]:
            selection[j] = 1
            room -= int(weights[j])
    return int(best[capacity]), selection


def knapsack(
    path=None,
    items: int = 40,
    kind: str = "uncorrelated",
    capacity_ratio: float = 0.5,
    constraint: str = "repair",
    seed: int = 0,
    capacity: Optional[int] = None,
    data_range: int = 1000,
    solve="auto",
) -> KnapsackProblem:
    """A 0/1 knapsack problem from a CSV/YAML file or a generated instance.

    Parameters
    ----------
    path : str or None
        Item file (.csv with header name,weight,value, or .yaml/.yml); None: generate.
    items : int
        Number of generated items.
    kind : str
        Generated family: uncorrelated, weakly-correlated or strongly-correlated.
    capacity_ratio : float
        Generated capacity as a fraction of the total item weight (rounded down).
    constraint : {"repair", "penalty"}
        Scoring of overweight candidates: greedy repair or penalty.
    seed : int
        Seed of the generator.
    capacity : int or None
        Capacity (required for CSV files; overrides a YAML file's and the ratio).
    data_range : int
        Largest generated weight R.
    solve : bool or "auto"
        Compute the exact optimum by dynamic programming; "auto": if the table is small.
    """
    if path is not None:
        path = os.fspath(path)
        extension = os.path.splitext(path[:-3] if path.endswith(".gz") else path)[1].lower()
        if extension == ".csv":
            names, weights, values = read_items_csv(path)
            if capacity is None:
                raise ValueError(f"{path}: a CSV item file needs the capacity parameter")
        elif extension in (".yaml", ".yml"):
            names, weights, values, file_capacity = read_items_yaml(path)
            capacity = file_capacity if capacity is None else capacity
        else:
            raise ValueError(f"{path}: expected a .csv, .yaml or .yml item file")
        name = f"knapsack:{os.path.basename(path)}"
    else:
        if not 0.0 <= capacity_ratio <= 1.0:
            raise ValueError(f"capacity_ratio must lie in [0, 1]; got {capacity_ratio!r}")
        weights, values = generate_items(items, kind=kind, data_range=data_range, seed=seed)
        names = None
        if capacity is None:
            capacity = int(np.floor(capacity_ratio * weights.sum()))
        name = f"knapsack:{kind}-n{items}-seed{seed}"
    problem = KnapsackProblem(weights, values, capacity, constraint=constraint, item_names=names, name=name)
    if resolve_solve_option(solve, problem.n * (problem.capacity + 1) <= AUTO_SOLVE_CELLS):
        problem.optimum = float(dp_knapsack(weights, values, capacity)[0])
        problem.optimum_source = "dynamic programming over the capacity (Kellerer, Pferschy & Pisinger 2004)"
    return problem
