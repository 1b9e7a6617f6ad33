"""Staff rostering: decide who works which shift over a planning horizon.

Variable ``x[p, s]`` is 1 when person ``p`` works shift ``s``; shifts are in
time order (day by day, and within a day in the listed order) and the
variables are stored person by person, named ``<person>.<day>-<shift>``.
The score to minimise is a weighted sum of penalties, all counted per unit:

``under`` (weight ``w_under``)
    missing people, summed over shifts: ``max(demand[s] - sum_p x[p, s], 0)``.
``over`` (``w_over``)
    surplus people: ``max(sum_p x[p, s] - demand[s], 0)``.
``excess`` (``w_max``)
    shifts beyond a person's maximum: ``max(sum_s x[p, s] - max_shifts[p], 0)``.
``rest`` (``w_rest``)
    pairs of worked shifts of one person closer than the rest rule allows:
    with ``min_rest = r``, shifts ``s`` and ``s + d`` for ``1 <= d <= r``
    (the horizon does not wrap around). ``r = 1`` forbids two consecutive
    shifts (a night followed by the next early shift included).
``unavailable`` (``w_unavail``)
    worked shifts for which the person is unavailable.
``avoid`` (``w_pref``)
    worked shifts the person would rather not work (soft preferences).

Instance files (YAML)
---------------------
::

    days: [mon, tue, wed, thu, fri, sat, sun]   # day names in order, or a count (day1, day2, ...)
    shifts: [early, late, night]                # the shifts of one day, in time order
    min_rest: 2                                 # optional, default 1
    max_shifts: 5                               # default maximum per person
    demand:                                     # people needed, for every shift name:
      early: 2                                  #   one number for every day,
      late: [2, 2, 2, 2, 3, 3, 2]               #   or one number per day
      night: 1
    people:
      - name: Ada
        max_shifts: 3                           # optional, overrides the default
        unavailable: [mon, tue-night, night]    # optional: a day, a day-shift, or a shift name (every day)
        avoid: [sun-early]                      # optional, same forms

Malformed files raise :class:`~optim_problems._instances.InstanceFormatError`
naming the file, the line and what was expected.

The exact reference (:func:`solve_exact`) is a mixed-integer program for
``scipy.optimize.milp`` with the penalties linearised by slack variables.
"""

from __future__ import annotations

import os
from typing import Dict, Optional, Tuple

import numpy as np

from optim.problem import Problem
from optim_problems._instances import import_milp, resolve_solve_option
from optim_problems.rostering_instances import RosterData, random_roster, read_roster

__all__ = [
    "StaffRoster",
    "staff_roster",
    "solve_exact",
    "PENALTIES",
    "DEFAULT_WEIGHTS",
]

#: Penalty names, in the order :meth:`StaffRoster.penalties` reports them.
PENALTIES = ("under", "over", "excess", "rest", "unavailable", "avoid")

#: Default weight of each penalty (factory parameter names in brackets):
#: under (w_under) 10, over (w_over) 1, excess (w_max) 5, rest (w_rest) 8,
#: unavailable (w_unavail) 20, avoid (w_pref) 1.
DEFAULT_WEIGHTS = {"under": 10.0, "over": 1.0, "excess": 5.0, "rest": 8.0, "unavailable": 20.0, "avoid": 1.0}

_WEIGHT_PARAMETERS = {
    "under": "w_under",
    "over": "w_over",
    "excess": "w_max",
    "rest": "w_rest",
    "unavailable": "w_unavail",
    "avoid": "w_pref",
}

#: Largest number of variables that ``solve="auto"`` hands to the MILP solver.
_AUTO_SOLVE_SIZE = 400
#: Seconds the MILP solver may spend under ``solve="auto"``.
_AUTO_TIME_LIMIT = 10.0


# --------------------------------------------------------------------------- problem


class StaffRoster(Problem):
    """Assign people to shifts, minimising weighted coverage, workload, rest and preference penalties.

    Parameters
    ----------
    data : RosterData
        The instance.
    weights : dict or None
        Weight of each penalty in :data:`PENALTIES`; missing ones take :data:`DEFAULT_WEIGHTS`.
    optimum : float or None
        The optimal penalty when known.
    optimum_source : str or None
        How the optimum was obtained.
    name : str
        Label used in logs.
    """

    def __init__(
        self,
        data: RosterData,
        weights: Optional[Dict[str, float]] = None,
        optimum=None,
        optimum_source=None,
        name: str = "staff-roster",
    ):
        merged = dict(DEFAULT_WEIGHTS)
        for key, value in (weights or {}).items():
            if key not in merged:
                raise ValueError(f"unknown penalty {key!r}; expected one of {PENALTIES}")
            merged[key] = value
        for key, value in merged.items():
            value = float(value)
            if not np.isfinite(value) or value < 0:
                raise ValueError(
                    f"weight {_WEIGHT_PARAMETERS[key]} ({key}) must be a non-negative number; got {value!r}"
                )
            merged[key] = value
        self.data = data
        self.weights = merged
        self.people = len(data.person_names)
        self.shifts = len(data.slot_names)
        super().__init__(
            self.people * self.shifts,
            cardinality=2,
            goal="minimize",
            optimum=optimum,
            optimum_source=optimum_source,
            name=name,
            variable_names=[f"{person}.{slot}" for person in data.person_names for slot in data.slot_names],
        )
        self._unavailable = data.unavailable.astype(np.int64)
        self._avoid = data.avoid.astype(np.int64)

    def schedule(self, X: np.ndarray) -> np.ndarray:
        """Candidates as an int64 array of shape ``(count, people, shifts)``."""
        X = np.asarray(X)
        if X.ndim != 2 or X.shape[1] != self.n:
            raise ValueError(f"expected candidates of shape (count, {self.n}); got {X.shape}")
        if X.size and X.max() > 1:
            raise ValueError("roster variables take 0/1 values only")
        return X.astype(np.int64).reshape(X.shape[0], self.people, self.shifts)

    def penalties(self, X: np.ndarray) -> Dict[str, np.ndarray]:
        """Unweighted penalty counts of each candidate, one float64 array per name in :data:`PENALTIES`."""
        R = self.schedule(X)
        cover = R.sum(axis=1)
        worked = R.sum(axis=2)
        rest = np.zeros(R.shape[0], dtype=np.int64)
        for gap in range(1, min(self.data.min_rest, self.shifts - 1) + 1):
            rest += (R[:, :, :-gap] * R[:, :, gap:]).sum(axis=(1, 2))
        counts = {
            "under": np.maximum(self.data.demand - cover, 0).sum(axis=1),
            "over": np.maximum(cover - self.data.demand, 0).sum(axis=1),
            "excess": np.maximum(worked - self.data.max_shifts, 0).sum(axis=1),
            "rest": rest,
            "unavailable": (R * self._unavailable).sum(axis=(1, 2)),
            "avoid": (R * self._avoid).sum(axis=(1, 2)),
        }
        return {key: counts[key].astype(np.float64) for key in PENALTIES}

    def evaluate(self, X: np.ndarray) -> np.ndarray:
        """Weighted penalty of each candidate."""
        counts = self.penalties(X)
        total = np.zeros(np.asarray(X).shape[0], dtype=np.float64)
        for key in PENALTIES:
            total += self.weights[key] * counts[key]
        return total

    def describe(self) -> dict:
        summary = super().describe()
        summary.update(
            people=self.people,
            shifts=self.shifts,
            min_rest=self.data.min_rest,
            weights={_WEIGHT_PARAMETERS[key]: value for key, value in self.weights.items()},
        )
        return summary


def solve_exact(roster: StaffRoster, time_limit: Optional[float] = None) -> Tuple[float, np.ndarray]:
    """Optimal roster by mixed-integer programming with ``scipy.optimize.milp``.

    Binaries ``x[p, s]`` and non-negative slacks: ``u[s] - o[s] = demand[s] -
    sum_p x[p, s]`` (under/over coverage), ``e[p] >= sum_s x[p, s] -
    max_shifts[p]`` (excess), and ``y[p, s, d] >= x[p, s] + x[p, s + d] - 1``
    for each rest gap ``d``. The unavailable and avoided shifts add linear
    costs on ``x``. With non-negative weights the minimal slacks equal the
    penalty counts, so the MILP optimum is the optimum of :meth:`StaffRoster.evaluate`.

    Parameters
    ----------
    roster : StaffRoster
        The instance and its weights.
    time_limit : float or None
        Seconds the solver may spend; ``None`` for no limit.

    Returns
    -------
    value : float
        The MILP's optimal objective (the weighted penalty of ``x``, up to solver round-off).
    x : numpy.ndarray
        uint8 candidate of length ``n`` reaching it.

    Raises
    ------
    RuntimeError
        When the solver stops without proving optimality.
    """
    milp, Bounds, LinearConstraint = import_milp()
    from scipy import sparse

    data, weights = roster.data, roster.weights
    people, shifts = roster.people, roster.shifts
    n = roster.n
    x_index = np.arange(n).reshape(people, shifts)
    u_index = n + np.arange(shifts)
    o_index = u_index[-1] + 1 + np.arange(shifts)
    e_index = o_index[-1] + 1 + np.arange(people)
    pairs = [
        (p, s, s + gap)
        for gap in range(1, min(data.min_rest, shifts - 1) + 1)
        for p in range(people)
        for s in range(shifts - gap)
    ]
    y_index = e_index[-1] + 1 + np.arange(len(pairs))
    columns = n + 2 * shifts + people + len(pairs)

    cost = np.zeros(columns)
    cost[:n] = (weights["unavailable"] * data.unavailable + weights["avoid"] * data.avoid).reshape(-1)
    cost[u_index] = weights["under"]
    cost[o_index] = weights["over"]
    cost[e_index] = weights["excess"]
    cost[y_index] = weights["rest"]

    constraints = []
    # coverage: sum_p x[p, s] + u[s] - o[s] = demand[s]
    rows = np.concatenate([np.tile(np.arange(shifts), people), np.arange(shifts), np.arange(shifts)])
    cols = np.concatenate([x_index.reshape(-1), u_index, o_index])
    vals = np.concatenate([np.ones(n), np.ones(shifts), -np.ones(shifts)])
    cover = sparse.csr_array((vals, (rows, cols)), shape=(shifts, columns))
    constraints.append(LinearConstraint(cover, data.demand, data.demand))
    # excess: sum_s x[p, s] - e[p] <= max_shifts[p]
    rows = np.concatenate([np.repeat(np.arange(people), shifts), np.arange(people)])
    cols = np.concatenate([x_index.reshape(-1), e_index])
    vals = np.concatenate([np.ones(n), -np.ones(people)])
    excess = sparse.csr_array((vals, (rows, cols)), shape=(people, columns))
    constraints.append(LinearConstraint(excess, -np.inf, data.max_shifts))
    # rest: x[p, s] + x[p, t] - y <= 1
    if pairs:
        triples = np.array(pairs)
        count = len(pairs)
        rows = np.tile(np.arange(count), 3)
        cols = np.concatenate([x_index[triples[:, 0], triples[:, 1]], x_index[triples[:, 0], triples[:, 2]], y_index])
        vals = np.concatenate([np.ones(count), np.ones(count), -np.ones(count)])
        rest = sparse.csr_array((vals, (rows, cols)), shape=(count, columns))
        constraints.append(LinearConstraint(rest, -np.inf, 1.0))

    upper = np.full(columns, np.inf)
    upper[:n] = 1.0
    upper[y_index] = 1.0
    integrality = np.zeros(columns)
    integrality[:n] = 1
    options = {"mip_rel_gap": 0.0}
    if time_limit is not None:
        options["time_limit"] = float(time_limit)
    result = milp(
        cost,
        integrality=integrality,
        bounds=Bounds(np.zeros(columns), upper),
        constraints=constraints,
        options=options,
    )
    if result.status != 0 or result.x is None:
        raise RuntimeError(f"milp did not prove an optimal roster: {result.message}")
    x = np.round(result.x[:n]).astype(np.uint8)
    penalty = float(roster.evaluate(x[None, :])[0])
    if abs(penalty - result.fun) > 1e-6 * max(1.0, abs(penalty)):
        raise RuntimeError(f"milp objective {result.fun} disagrees with the roster's penalty {penalty}")
    return float(result.fun), x


def staff_roster(
    path=None,
    people: int = 6,
    days: int = 7,
    shifts_per_day: int = 3,
    seed: int = 0,
    solve="auto",
    min_rest: Optional[int] = None,
    max_shifts: Optional[int] = None,
    w_under: float = DEFAULT_WEIGHTS["under"],
    w_over: float = DEFAULT_WEIGHTS["over"],
    w_max: float = DEFAULT_WEIGHTS["excess"],
    w_rest: float = DEFAULT_WEIGHTS["rest"],
    w_unavail: float = DEFAULT_WEIGHTS["unavailable"],
    w_pref: float = DEFAULT_WEIGHTS["avoid"],
) -> StaffRoster:
    """Staff rostering, from a YAML file or generated at random.

    Parameters
    ----------
    path : str or None
        YAML roster file (format in the module docstring); a random instance when None.
    people : int
        Number of people of a random instance.
    days : int
        Days in a random instance's horizon.
    shifts_per_day : int
        Shifts per day of a random instance.
    seed : int
        Seed of the random instance.
    solve : bool or "auto"
        Compute the exact optimum by MILP: always (True), never (False), or for small instances.
    min_rest : int or None
        Free shifts required after a worked one; None keeps the file's value (2 for random instances).
    max_shifts : int or None
        Maximum shifts for everyone; None keeps the file's values (floor(demand/people) when random).
    w_under : float
        Penalty per missing person per shift.
    w_over : float
        Penalty per surplus person per shift.
    w_max : float
        Penalty per shift beyond a person's maximum.
    w_rest : float
        Penalty per pair of worked shifts that breaks the rest rule.
    w_unavail : float
        Penalty per worked shift for which the person is unavailable.
    w_pref : float
        Penalty per worked shift the person would rather avoid.

    Returns
    -------
    StaffRoster
    """
    if path is not None:
        data = read_roster(path)
        if min_rest is not None or max_shifts is not None:
            data = RosterData(
                data.person_names,
                data.day_names,
                data.shift_names,
                data.demand,
                data.max_shifts if max_shifts is None else max_shifts,
                data.min_rest if min_rest is None else min_rest,
                data.unavailable,
                data.avoid,
            )
        label = f"staff-roster:{os.path.basename(os.fspath(path)).split('.')[0]}"
    else:
        data = random_roster(people, days, shifts_per_day, seed, 2 if min_rest is None else min_rest, max_shifts)
        label = f"staff-roster:random-{int(people)}x{int(days)}x{int(shifts_per_day)}-seed{seed}"
    weights = {
        "under": w_under,
        "over": w_over,
        "excess": w_max,
        "rest": w_rest,
        "unavailable": w_unavail,
        "avoid": w_pref,
    }
    problem = StaffRoster(data, weights=weights, name=label)
    if resolve_solve_option(solve, problem.n <= _AUTO_SOLVE_SIZE):
        try:
            _, x = solve_exact(problem, time_limit=_AUTO_TIME_LIMIT if solve == "auto" else None)
        except (ImportError, RuntimeError):
            if solve != "auto":
                raise
        else:
            problem.optimum = float(problem.evaluate(x[None, :])[0])
            problem.optimum_source = "scipy.optimize.milp (linearised penalties)"
    return problem
