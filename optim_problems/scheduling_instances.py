"""Job lists for machine assignment: read from YAML or CSV files, or drawn at random.

The file formats are set out in the docstring of :mod:`optim_problems.scheduling`.
"""

from __future__ import annotations

import csv
import os
from typing import List, Optional, Tuple

import numpy as np

from optim_problems._instances import InstanceFormatError, LineDict, read_instance_lines, read_yaml

__all__ = ["read_jobs", "random_jobs"]


def _positive_int(value, path, line, what) -> int:
    """``value`` as a positive int, or a file error saying what was expected."""
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)):
        if isinstance(value, str) and value.strip().lstrip("+").isdigit():
            value = int(value)
        else:
            raise InstanceFormatError(path, line, f"{what} must be a positive integer; got {value!r}")
    if value < 1:
        raise InstanceFormatError(path, line, f"{what} must be a positive integer; got {value!r}")
    return int(value)


def _read_jobs_yaml(path) -> Tuple[List[str], np.ndarray, Optional[int]]:
    data = read_yaml(path)
    unknown = sorted(set(data) - {"machines", "jobs"}, key=str)
    if unknown:
        raise InstanceFormatError(
            path, data.line_of(unknown[0]), f"unknown key {unknown[0]!r}; expected 'machines' and 'jobs'"
        )
    machines = None
    if "machines" in data:
        machines = _positive_int(data["machines"], path, data.line_of("machines"), "'machines'")
    if "jobs" not in data:
        raise InstanceFormatError(path, data.line, "missing key 'jobs' (a list of {name, time} entries)")
    jobs = data["jobs"]
    if not isinstance(jobs, list) or not jobs:
        raise InstanceFormatError(path, data.line_of("jobs"), "'jobs' must be a non-empty list of {name, time} entries")
    names, times = [], []
    for position, entry in enumerate(jobs):
        line = jobs.line_at(position)
        if not isinstance(entry, LineDict):
            raise InstanceFormatError(
                path, line, f"job {position + 1} must be a mapping with 'name' and 'time'; got {entry!r}"
            )
        extra = sorted(set(entry) - {"name", "time"}, key=str)
        if extra:
            raise InstanceFormatError(
                path, entry.line_of(extra[0]), f"unknown job key {extra[0]!r}; expected 'name' and 'time'"
            )
        for key in ("name", "time"):
            if key not in entry:
                raise InstanceFormatError(path, line, f"job {position + 1} has no '{key}'")
        names.append(_job_name(entry["name"], path, entry.line_of("name"), names))
        times.append(_positive_int(entry["time"], path, entry.line_of("time"), f"time of job {names[-1]!r}"))
    return names, np.asarray(times, dtype=np.int64), machines


def _job_name(value, path, line, seen) -> str:
    if value is None or isinstance(value, (list, dict)) or not str(value).strip():
        raise InstanceFormatError(path, line, f"job name must be a non-empty text; got {value!r}")
    name = str(value).strip()
    if name in seen:
        raise InstanceFormatError(path, line, f"duplicate job name {name!r}")
    return name


def _read_jobs_csv(path) -> Tuple[List[str], np.ndarray, Optional[int]]:
    names, times = [], []
    header = None
    for line, text in read_instance_lines(path):
        if not text.strip():
            continue
        cells = [cell.strip() for cell in next(csv.reader([text]))]
        if header is None:
            if [cell.lower() for cell in cells] != ["name", "time"]:
                raise InstanceFormatError(path, line, f"expected the header 'name,time'; got {text!r}")
            header = cells
            continue
        if len(cells) != 2:
            raise InstanceFormatError(path, line, f"expected 2 fields (name,time); got {len(cells)}")
        names.append(_job_name(cells[0], path, line, names))
        times.append(_positive_int(cells[1], path, line, f"time of job {names[-1]!r}"))
    if header is None:
        raise InstanceFormatError(path, None, "empty file; expected the header 'name,time' and one job per line")
    if not names:
        raise InstanceFormatError(path, None, "no jobs after the header 'name,time'")
    return names, np.asarray(times, dtype=np.int64), None


def read_jobs(path) -> Tuple[List[str], np.ndarray, Optional[int]]:
    """Read a job list from a YAML or CSV instance file (format in :mod:`optim_problems.scheduling`).

    Parameters
    ----------
    path : str or os.PathLike
        A ``.yaml``/``.yml`` or ``.csv`` file, optionally compressed (``.gz``, ``.bz2``, ``.xz``).

    Returns
    -------
    names : list of str
        Job names in file order.
    times : numpy.ndarray
        int64 processing times.
    machines : int or None
        The machine count given in a YAML file, else ``None``.
    """
    path = os.fspath(path)
    stem, extension = os.path.splitext(path)
    if extension.lower() in (".gz", ".bz2", ".xz"):
        extension = os.path.splitext(stem)[1]
    extension = extension.lower()
    if extension in (".yaml", ".yml"):
        return _read_jobs_yaml(path)
    if extension == ".csv":
        return _read_jobs_csv(path)
    raise ValueError(f"{path}: unknown instance format {extension!r}; expected .yaml, .yml or .csv")


def random_jobs(jobs: int = 20, low: int = 1, high: int = 20, seed: int = 0) -> np.ndarray:
    """Processing times drawn uniformly from ``low … high`` (inclusive) with a seeded generator."""
    if int(jobs) != jobs or jobs < 1:
        raise ValueError(f"jobs must be a positive integer; got {jobs!r}")
    if int(low) != low or int(high) != high or not 1 <= low <= high:
        raise ValueError(f"need integers 1 <= low <= high; got low={low!r}, high={high!r}")
    rng = np.random.default_rng(seed)
    return rng.integers(int(low), int(high) + 1, size=int(jobs)).astype(np.int64)
