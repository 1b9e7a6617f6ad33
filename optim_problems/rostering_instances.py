"""Rostering instances: their data, read from YAML files or drawn at random.

The file format is set out in the docstring of :mod:`optim_problems.rostering`.
"""

from __future__ import annotations

import os
from typing import List

import numpy as np

from optim_problems._instances import InstanceFormatError, LineDict, LineList, read_yaml

__all__ = ["RosterData", "read_roster", "random_roster"]

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
    return sequence.line_at(index) if isinstance(sequence, LineList) else fallback


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


def _check_keys(mapping: LineDict, allowed, path, where):
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
    """Read a rostering instance from a YAML file (format in :mod:`optim_problems.rostering`).

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
    data = read_yaml(path)
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
    if not isinstance(demand_map, LineDict):
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
        if not isinstance(person, LineDict):
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
