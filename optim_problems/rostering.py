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
from typing import Dict, List, Optional, Tuple

import numpy as np

from optim.problem import Problem
from optim_problems._instances import InstanceFormatError, resolve_solve_option
from optim_problems.scheduling import _import_milp, _LineDict, _LineList, _read_yaml

__all__ = [
    "StaffRoster",
    "RosterData",
    "staff_roster",
    "read_roster",
    "random_roster",
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

_SHIFT_NAMES = {1: ["day"], 2: ["day", "night"], 3: ["early", "late", "night"]}


class RosterData:
    """The data of a rostering instance.

    Parameters
    ----------
    person_names : sequence of str
        One name per person.
    day_names : sequence of str
        Days of the horizon, in order.
    shift_names : sequence of str
        Shifts of one day, in time order.
    demand : array_like of int
        People needed on each shift, length ``days * shifts``.
    max_shifts : array_like of int
        Maximum number of shifts of each person.
    min_rest : int
        Number of shifts that must stay free after a worked shift.
    unavailable : array_like of bool or None
        ``(people, days * shifts)`` shifts a person cannot work.
    avoid : array_like of bool or None
        ``(people, days * shifts)`` shifts a person would rather not work.
    """

    def __init__(
        self,
        person_names,
        day_names,
        shift_names,
        demand,
        max_shifts,
        min_rest=1,
        unavailable=None,
        avoid=None,
    ):
        self.person_names = [str(v) for v in person_names]
        self.day_names = [str(v) for v in day_names]
        self.shift_names = [str(v) for v in shift_names]
        for label, names in (
            ("person", self.person_names),
            ("day", self.day_names),
            ("shift", self.shift_names),
        ):
            if not names:
                raise ValueError(f"a roster needs at least one {label}")
            if len(set(names)) != len(names):
                raise ValueError(f"{label} names must be distinct")
        self.slot_names = [f"{day}-{shift}" for day in self.day_names for shift in self.shift_names]
        people, slots = len(self.person_names), len(self.slot_names)
        self.demand = _int_array(demand, (slots,), "demand")
        self.max_shifts = _int_array(np.broadcast_to(max_shifts, (people,)), (people,), "max_shifts")
        if int(min_rest) != min_rest or min_rest < 0:
            raise ValueError(f"min_rest must be a non-negative integer; got {min_rest!r}")
        self.min_rest = int(min_rest)
        self.unavailable = _bool_array(unavailable, (people, slots), "unavailable")
        self.avoid = _bool_array(avoid, (people, slots), "avoid")


def _int_array(values, shape, what) -> np.ndarray:
    array = np.asarray(values)
    if array.shape != shape or not np.issubdtype(array.dtype, np.integer) or (array.size and array.min() < 0):
        raise ValueError(f"{what} must be non-negative integers of shape {shape}; got {array.shape} {array.dtype}")
    return array.astype(np.int64)


def _bool_array(values, shape, what) -> np.ndarray:
    if values is None:
        return np.zeros(shape, dtype=bool)
    array = np.asarray(values, dtype=bool)
    if array.shape != shape:
        raise ValueError(f"{what} must have shape {shape}; got {array.shape}")
    return array


# --------------------------------------------------------------------------- files


def _count(value, path, line, what) -> int:
    """``value`` as a non-negative int, or a file error saying what was expected."""
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or value < 0:
        raise InstanceFormatError(path, line, f"{what} must be a non-negative integer; got {value!r}")
    return int(value)


def _item_line(sequence, index: int, fallback: int) -> int:
    """Line of item ``index`` of a YAML list (``fallback`` when unknown)."""
    return sequence.line_at(index) if isinstance(sequence, _LineList) else fallback


def _name_list(value, path, line, what) -> List[str]:
    if not isinstance(value, list) or not value:
        raise InstanceFormatError(path, line, f"'{what}' must be a non-empty list of names; got {value!r}")
    names = []
    for index, item in enumerate(value):
        item_line = _item_line(value, index, line)
        if item is None or isinstance(item, (list, dict)) or not str(item).strip():
            raise InstanceFormatError(path, item_line, f"'{what}' entries must be non-empty names; got {item!r}")
        name = str(item).strip()
        if name in names:
            raise InstanceFormatError(path, item_line, f"duplicate name {name!r} in '{what}'")
        names.append(name)
    return names


def _check_keys(mapping: _LineDict, allowed, path, where):
    for key in mapping:
        if key not in allowed:
            expected = ", ".join(f"'{k}'" for k in allowed)
            raise InstanceFormatError(path, mapping.line_of(key), f"unknown key {key!r} {where}; expected {expected}")


def _slot_mask(entries, path, line, what, days, shifts) -> np.ndarray:
    """Turn a list of ``day``, ``day-shift`` or ``shift`` references into a shift mask."""
    mask = np.zeros((len(days), len(shifts)), dtype=bool)
    if entries is None:
        return mask.reshape(-1)
    if not isinstance(entries, list):
        raise InstanceFormatError(
            path, line, f"'{what}' must be a list of days, day-shift slots or shifts; got {entries!r}"
        )
    slots = {f"{day}-{shift}": (d, s) for d, day in enumerate(days) for s, shift in enumerate(shifts)}
    for index, entry in enumerate(entries):
        token = str(entry).strip()
        if token in slots:
            mask[slots[token]] = True
        elif token in days:
            mask[days.index(token), :] = True
        elif token in shifts:
            mask[:, shifts.index(token)] = True
        else:
            raise InstanceFormatError(
                path,
                _item_line(entries, index, line),
                f"unknown shift {token!r} in '{what}'; "
                f"expected a day, a shift or a day-shift slot such as {next(iter(slots))!r}",
            )
    return mask.reshape(-1)


def read_roster(path) -> RosterData:
    """Read a rostering instance from a YAML file (format in the module docstring).

    Parameters
    ----------
    path : str or os.PathLike
        A ``.yaml`` or ``.yml`` file, optionally compressed (``.gz``, ``.bz2``, ``.xz``).

    Returns
    -------
    RosterData
    """
    path = os.fspath(path)
    stem, extension = os.path.splitext(path)
    if extension.lower() in (".gz", ".bz2", ".xz"):
        extension = os.path.splitext(stem)[1]
    if extension.lower() not in (".yaml", ".yml"):
        raise ValueError(f"{path}: unknown roster format {extension!r}; expected .yaml or .yml")
    data = _read_yaml(path)
    _check_keys(data, ("days", "shifts", "min_rest", "max_shifts", "demand", "people"), path, "at the top level")
    for key in ("days", "shifts", "max_shifts", "demand", "people"):
        if key not in data:
            raise InstanceFormatError(path, data.line, f"missing key '{key}'")
    if isinstance(data["days"], int) and not isinstance(data["days"], bool) and data["days"] >= 1:
        days = [f"day{d + 1}" for d in range(data["days"])]
    else:
        if not isinstance(data["days"], list):
            raise InstanceFormatError(
                path,
                data.line_of("days"),
                f"'days' must be a positive count or a list of names; got {data['days']!r}",
            )
        days = _name_list(data["days"], path, data.line_of("days"), "days")
    shifts = _name_list(data["shifts"], path, data.line_of("shifts"), "shifts")
    clash = sorted(set(days) & set(shifts))
    if clash:
        raise InstanceFormatError(
            path, data.line_of("shifts"), f"{clash[0]!r} names both a day and a shift; names must differ"
        )
    min_rest = _count(data.get("min_rest", 1), path, data.line_of("min_rest"), "'min_rest'")
    default_max = _count(data["max_shifts"], path, data.line_of("max_shifts"), "'max_shifts'")

    demand_map = data["demand"]
    if not isinstance(demand_map, _LineDict):
        raise InstanceFormatError(
            path, data.line_of("demand"), "'demand' must map each shift name to a number or a list per day"
        )
    _check_keys(demand_map, shifts, path, "in 'demand'")
    demand = np.zeros((len(days), len(shifts)), dtype=np.int64)
    for s, shift in enumerate(shifts):
        if shift not in demand_map:
            raise InstanceFormatError(path, demand_map.line, f"'demand' has no entry for shift {shift!r}")
        value, line = demand_map[shift], demand_map.line_of(shift)
        if isinstance(value, list):
            if len(value) != len(days):
                raise InstanceFormatError(
                    path,
                    line,
                    f"demand of {shift!r} must list {len(days)} numbers (one per day); got {len(value)}",
                )
            demand[:, s] = [
                _count(v, path, _item_line(value, d, line), f"demand of {shift!r}") for d, v in enumerate(value)
            ]
        else:
            demand[:, s] = _count(value, path, line, f"demand of {shift!r}")

    people = data["people"]
    if not isinstance(people, list) or not people:
        raise InstanceFormatError(
            path, data.line_of("people"), "'people' must be a non-empty list of {name, ...} entries"
        )
    names, max_shifts, unavailable, avoid = [], [], [], []
    for position, person in enumerate(people):
        if not isinstance(person, _LineDict):
            raise InstanceFormatError(
                path,
                _item_line(people, position, data.line_of("people")),
                f"person {position + 1} must be a mapping with a 'name'; got {person!r}",
            )
        _check_keys(person, ("name", "max_shifts", "unavailable", "avoid"), path, "for a person")
        name = person.get("name")
        if name is None or isinstance(name, (list, dict)) or not str(name).strip():
            raise InstanceFormatError(path, person.line, f"person {position + 1} needs a non-empty 'name'")
        name = str(name).strip()
        if name in names:
            raise InstanceFormatError(path, person.line_of("name"), f"duplicate person name {name!r}")
        names.append(name)
        max_shifts.append(
            _count(person["max_shifts"], path, person.line_of("max_shifts"), f"max_shifts of {name!r}")
            if "max_shifts" in person
            else default_max
        )
        unavailable.append(
            _slot_mask(person.get("unavailable"), path, person.line_of("unavailable"), "unavailable", days, shifts)
        )
        avoid.append(_slot_mask(person.get("avoid"), path, person.line_of("avoid"), "avoid", days, shifts))
    return RosterData(
        names,
        days,
        shifts,
        demand.reshape(-1),
        np.array(max_shifts),
        min_rest,
        np.array(unavailable),
        np.array(avoid),
    )


def random_roster(
    people: int = 6, days: int = 7, shifts_per_day: int = 3, seed: int = 0, min_rest: int = 2, max_shifts=None
) -> RosterData:
    """A seeded random rostering instance.

    Demand is 1 or 2 people per shift (1 on the last shift of each day), each
    person is unavailable for about 10% of the shifts and would rather avoid
    another 10%. ``max_shifts=None`` gives everyone ``max(1, floor(total
    demand / people))`` shifts, so that covering every shift is usually a
    little beyond the staff's maxima.
    """
    for label, value in (("people", people), ("days", days), ("shifts_per_day", shifts_per_day)):
        if int(value) != value or value < 1:
            raise ValueError(f"{label} must be a positive integer; got {value!r}")
    rng = np.random.default_rng(seed)
    shift_names = _SHIFT_NAMES.get(int(shifts_per_day), [f"s{k}" for k in range(int(shifts_per_day))])
    demand = rng.integers(1, 3, size=(int(days), int(shifts_per_day)))
    demand[:, -1] = 1
    demand = demand.reshape(-1)
    if max_shifts is None:
        max_shifts = max(1, int(demand.sum()) // int(people))
    draw = rng.random((int(people), demand.size))
    return RosterData(
        [f"p{p}" for p in range(int(people))],
        [f"day{d + 1}" for d in range(int(days))],
        shift_names,
        demand,
        np.full(int(people), int(max_shifts)),
        min_rest,
        draw < 0.1,
        (draw >= 0.1) & (draw < 0.2),
    )


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
    milp, Bounds, LinearConstraint = _import_milp()
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
