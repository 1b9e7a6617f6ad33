"""Machine assignment (P||Cmax): share jobs among identical machines to finish early.

Each of ``n`` jobs with an integer processing time goes to one of ``m``
identical machines; the score to minimise is the makespan, the largest total
processing time on any machine.

Encodings (``encoding``)
------------------------
``"index"``
    One variable per job with ``m`` values, the machine number. Variables are
    named after the jobs (``job3`` for generated instances).
``"bits"``
    ``m = 2**b`` machines and ``b`` binary variables per job, read as a binary
    numeral with the first bit most significant (``job3.b0`` is the high bit).

Instance files
--------------
YAML (``.yaml`` / ``.yml``)::

    machines: 3
    jobs:
      - {name: flyers, time: 12}
      - {name: posters, time: 7}

CSV (``.csv``): a header line ``name,time`` followed by one job per line; the
number of machines is passed as a parameter. Blank lines are skipped. Times are
positive integers and job names are distinct and non-empty.

References
----------
Graham, R. L. (1969). Bounds on multiprocessing timing anomalies. *SIAM
Journal on Applied Mathematics* 17(2), 416-429 (the LPT rule and its bound
``LPT <= (4/3 - 1/(3m)) OPT``).
"""

from __future__ import annotations

import os
from typing import Optional, Sequence, Tuple

import numpy as np

from optim.problem import Problem
from optim_problems._instances import import_milp, resolve_solve_option
from optim_problems.scheduling_instances import random_jobs, read_jobs

__all__ = [
    "MachineAssignment",
    "machine_assignment",
    "schedule_makespan",
    "lpt_schedule",
    "makespan_lower_bound",
    "solve_exact",
    "ENCODINGS",
]

ENCODINGS = ("index", "bits")

#: Largest instance (jobs * machines) that ``solve="auto"`` hands to the MILP solver.
_AUTO_SOLVE_SIZE = 240
#: Seconds the MILP solver may spend under ``solve="auto"``.
_AUTO_TIME_LIMIT = 10.0


# --------------------------------------------------------------------------- references


def _check_times(times, machines) -> Tuple[np.ndarray, int]:
    times = np.asarray(times, dtype=np.int64).reshape(-1)
    if times.size == 0 or times.min() < 1:
        raise ValueError("processing times must be a non-empty list of positive integers")
    if int(machines) != machines or machines < 1:
        raise ValueError(f"machines must be a positive integer; got {machines!r}")
    return times, int(machines)


def schedule_makespan(times, assignment, machines: int) -> int:
    """Makespan of one schedule (``assignment[j]`` is the machine of job ``j``)."""
    times, machines = _check_times(times, machines)
    assignment = np.asarray(assignment, dtype=np.int64).reshape(-1)
    if assignment.shape != times.shape or assignment.min() < 0 or assignment.max() >= machines:
        raise ValueError("assignment must give each job a machine number 0 … machines-1")
    return int(np.bincount(assignment, weights=times, minlength=machines).max())


def lpt_schedule(times, machines: int) -> np.ndarray:
    """The longest-processing-time-first schedule (Graham 1969).

    Jobs are taken in order of decreasing time (ties by index) and each goes to
    the currently least loaded machine (ties to the lowest machine number).
    Its makespan is at most ``(4/3 - 1/(3m))`` times the optimum.

    Returns
    -------
    numpy.ndarray
        int64 machine number of each job.
    """
    times, machines = _check_times(times, machines)
    loads = np.zeros(machines, dtype=np.int64)
    assignment = np.empty(times.size, dtype=np.int64)
    for job in np.argsort(-times, kind="stable"):
        target = int(np.argmin(loads))
        assignment[job] = target
        loads[target] += times[job]
    return assignment


def makespan_lower_bound(times, machines: int) -> int:
    """``max(ceil(sum p / m), max p)``: no schedule finishes earlier (common practice, no source)."""
    times, machines = _check_times(times, machines)
    return int(max(-(-int(times.sum()) // machines), int(times.max())))


def solve_exact(times, machines: int, time_limit: Optional[float] = None) -> Tuple[int, np.ndarray]:
    """Optimal makespan by mixed-integer programming with ``scipy.optimize.milp``.

    Binaries ``x[j, k]`` (job ``j`` on machine ``k``) and a makespan ``C``:
    minimise ``C`` subject to ``sum_k x[j, k] = 1`` and
    ``sum_j p[j] x[j, k] <= C``. Machine loads are also required to be
    non-increasing in ``k``, which removes machine-permutation symmetry
    without losing any makespan.

    Parameters
    ----------
    times : sequence of int
        Processing times.
    machines : int
        Number of identical machines.
    time_limit : float or None
        Seconds the solver may spend; ``None`` for no limit.

    Returns
    -------
    makespan : int
        The optimal makespan.
    assignment : numpy.ndarray
        int64 machine of each job in an optimal schedule.

    Raises
    ------
    RuntimeError
        When the solver stops without proving optimality.
    """
    times, machines = _check_times(times, machines)
    milp, Bounds, LinearConstraint = import_milp()
    jobs = times.size
    count = jobs * machines + 1
    makespan_column = count - 1
    assign = np.zeros((jobs, count))
    for job in range(jobs):
        assign[job, job * machines : (job + 1) * machines] = 1.0
    load = np.zeros((machines, count))
    for machine in range(machines):
        load[machine, machine : jobs * machines : machines] = times
    load_minus_c = load.copy()
    load_minus_c[:, makespan_column] = -1.0
    constraints = [
        LinearConstraint(assign, 1.0, 1.0),
        LinearConstraint(load_minus_c, -np.inf, 0.0),
    ]
    if machines > 1:
        constraints.append(LinearConstraint(load[:-1] - load[1:], 0.0, np.inf))
    lower = np.zeros(count)
    upper = np.ones(count)
    lower[makespan_column] = makespan_lower_bound(times, machines)
    upper[makespan_column] = schedule_makespan(times, lpt_schedule(times, machines), machines)
    integrality = np.ones(count)
    integrality[makespan_column] = 0
    cost = np.zeros(count)
    cost[makespan_column] = 1.0
    options = {} if time_limit is None else {"time_limit": float(time_limit)}
    result = milp(
        cost,
        integrality=integrality,
        bounds=Bounds(lower, upper),
        constraints=constraints,
        options=options,
    )
    if result.status != 0 or result.x is None:
        raise RuntimeError(f"milp did not prove an optimal schedule: {result.message}")
    x = np.round(result.x[:makespan_column]).reshape(jobs, machines)
    assignment = np.argmax(x, axis=1).astype(np.int64)
    value = schedule_makespan(times, assignment, machines)
    if abs(value - result.fun) > 1e-6 * max(1.0, value):
        raise RuntimeError(f"milp objective {result.fun} disagrees with the schedule's makespan {value}")
    return value, assignment


# --------------------------------------------------------------------------- problem


class MachineAssignment(Problem):
    """Assign jobs to identical machines, minimising the makespan (P||Cmax).

    Parameters
    ----------
    times : sequence of int
        Positive integer processing time of each job.
    machines : int
        Number of identical machines (a power of two for ``"bits"``).
    encoding : {"index", "bits"}
        One ``machines``-valued variable per job, or ``log2(machines)`` bits per job.
    job_names : sequence of str or None
        Names used for the variables; ``job0 …`` when ``None``.
    optimum : float or None
        The optimal makespan when known.
    optimum_source : str or None
        How the optimum was obtained.
    name : str
        Label used in logs.
    """

    def __init__(
        self,
        times,
        machines: int,
        encoding: str = "index",
        job_names: Optional[Sequence[str]] = None,
        optimum: Optional[float] = None,
        optimum_source: Optional[str] = None,
        name: str = "machine-assignment",
    ):
        times, machines = _check_times(times, machines)
        if encoding not in ENCODINGS:
            raise ValueError(f"encoding must be one of {ENCODINGS}; got {encoding!r}")
        if machines < 2:
            raise ValueError(f"machines must be at least 2; got {machines}")
        if job_names is None:
            job_names = [f"job{j}" for j in range(times.size)]
        job_names = [str(v) for v in job_names]
        if len(job_names) != times.size:
            raise ValueError(f"job_names must have {times.size} entries; got {len(job_names)}")
        if encoding == "index":
            if machines > 256:
                raise ValueError(f"the index encoding allows at most 256 machines; got {machines}")
            bits = 0
            n, cardinality, names = times.size, machines, job_names
        else:
            bits = machines.bit_length() - 1
            if machines != 1 << bits:
                raise ValueError(f"the bits encoding needs a power of two machines; got {machines}")
            n, cardinality = times.size * bits, 2
            names = [f"{job}.b{k}" for job in job_names for k in range(bits)]
        super().__init__(
            n,
            cardinality=cardinality,
            goal="minimize",
            optimum=optimum,
            optimum_source=optimum_source,
            name=name,
            variable_names=names,
        )
        self.times = times
        self.machines = machines
        self.encoding = encoding
        self.job_names = job_names
        self.bits_per_job = bits
        self._place_values = (1 << np.arange(bits - 1, -1, -1)).astype(np.int64)

    def machine_of(self, X: np.ndarray) -> np.ndarray:
        """Machine number of each job, shape ``(count, jobs)`` int64."""
        X = np.asarray(X)
        if X.ndim != 2 or X.shape[1] != self.n:
            raise ValueError(f"expected candidates of shape (count, {self.n}); got {X.shape}")
        if self.encoding == "index":
            machine = X.astype(np.int64)
            if machine.size and (machine.min() < 0 or machine.max() >= self.machines):
                raise ValueError(f"machine numbers must lie in 0 … {self.machines - 1}")
            return machine
        if X.size and X.max() > 1:
            raise ValueError("the bits encoding takes 0/1 values only")
        grouped = X.astype(np.int64).reshape(X.shape[0], self.times.size, self.bits_per_job)
        return grouped @ self._place_values

    def loads(self, X: np.ndarray) -> np.ndarray:
        """Total processing time on each machine, shape ``(count, machines)`` float64."""
        machine = self.machine_of(X)
        count = machine.shape[0]
        slots = machine + self.machines * np.arange(count, dtype=np.int64)[:, None]
        weights = np.broadcast_to(self.times.astype(np.float64), machine.shape)
        totals = np.bincount(slots.ravel(), weights=weights.ravel(), minlength=count * self.machines)
        return totals.reshape(count, self.machines)

    def evaluate(self, X: np.ndarray) -> np.ndarray:
        """Makespan of each candidate."""
        return self.loads(X).max(axis=1)

    def encode(self, assignment) -> np.ndarray:
        """The candidate row (uint8, length ``n``) for a machine-per-job assignment."""
        assignment = np.asarray(assignment, dtype=np.int64).reshape(-1)
        if assignment.shape != self.times.shape or assignment.min() < 0 or assignment.max() >= self.machines:
            raise ValueError("assignment must give each job a machine number 0 … machines-1")
        if self.encoding == "index":
            return assignment.astype(np.uint8)
        bits = (assignment[:, None] // self._place_values[None, :]) % 2
        return bits.reshape(-1).astype(np.uint8)

    def initial_candidates(self) -> np.ndarray:
        """The LPT schedule (Graham 1969) as the single seed candidate, shape ``(1, n)``."""
        return self.encode(lpt_schedule(self.times, self.machines))[None, :]

    def describe(self) -> dict:
        summary = super().describe()
        summary.update(
            jobs=int(self.times.size),
            machines=self.machines,
            encoding=self.encoding,
            lower_bound=makespan_lower_bound(self.times, self.machines),
            lpt_makespan=schedule_makespan(self.times, lpt_schedule(self.times, self.machines), self.machines),
        )
        return summary


def _known_optimum(times, machines, solve) -> Tuple[Optional[float], Optional[str]]:
    """Optimum and its source according to the ``solve`` option (True, False or "auto")."""
    wanted = resolve_solve_option(solve, times.size * machines <= _AUTO_SOLVE_SIZE)
    if solve is False:
        return None, None
    bound = makespan_lower_bound(times, machines)
    if schedule_makespan(times, lpt_schedule(times, machines), machines) == bound:
        return float(bound), "LPT schedule meets the lower bound max(ceil(sum p / m), max p)"
    if not wanted:
        return None, None
    if solve == "auto":
        try:
            value, _ = solve_exact(times, machines, time_limit=_AUTO_TIME_LIMIT)
        except (ImportError, RuntimeError):
            return None, None
    else:
        value, _ = solve_exact(times, machines)
    return float(value), "scipy.optimize.milp (assignment MILP)"


def machine_assignment(
    path=None,
    jobs: int = 20,
    machines: Optional[int] = None,
    encoding: str = "index",
    low: int = 1,
    high: int = 20,
    seed: int = 0,
    solve="auto",
) -> MachineAssignment:
    """Machine assignment (P||Cmax), from a file or generated at random.

    Parameters
    ----------
    path : str or None
        YAML or CSV job file (format in the module docstring); random jobs when None.
    jobs : int
        Number of random jobs (ignored with a file).
    machines : int or None
        Machine count; None means the YAML file's value, else 4.
    encoding : {"index", "bits"}
        One machine-number variable per job, or log2(machines) bits per job.
    low : int
        Smallest random processing time.
    high : int
        Largest random processing time.
    seed : int
        Seed of the random job times.
    solve : bool or "auto"
        Compute the exact optimum: always (True), never (False), or for small instances.

    Returns
    -------
    MachineAssignment
    """
    if path is not None:
        names, times, file_machines = read_jobs(path)
        if machines is None:
            machines = file_machines if file_machines is not None else 4
        label = f"machine-assignment:{os.path.splitext(os.path.basename(os.fspath(path)))[0]}"
    else:
        times = random_jobs(jobs, low, high, seed)
        names = None
        machines = 4 if machines is None else machines
        label = f"machine-assignment:random-{int(jobs)}x{int(machines)}-seed{seed}"
    problem = MachineAssignment(times, machines, encoding=encoding, job_names=names, name=label)
    optimum, source = _known_optimum(problem.times, problem.machines, solve)
    problem.optimum, problem.optimum_source = optimum, source
    return problem
