"""Tests for optim_problems.scheduling (machine assignment, P||Cmax)."""

import itertools
import math
import os

import numpy as np
import pytest

from optim_problems.scheduling import (
    MachineAssignment,
    lpt_schedule,
    machine_assignment,
    makespan_lower_bound,
    schedule_makespan,
    solve_exact,
)
from optim_problems.scheduling_instances import random_jobs, read_jobs

DATA = os.path.join(os.path.dirname(__file__), "data", "instances")
BUNDLED = os.path.join(os.path.dirname(__file__), os.pardir, "optim_problems", "instances")


def _slow_makespan(times, machine_per_job, machines):
    """Per-candidate reference: add up each machine's load with plain Python."""
    loads = [0] * machines
    for time, machine in zip(times, machine_per_job, strict=True):
        loads[machine] += int(time)
    return max(loads)


def _slow_bits_to_machines(row, jobs, bits):
    """Read each job's bits as a binary numeral, first bit most significant."""
    machines = []
    for job in range(jobs):
        value = 0
        for k in range(bits):
            value = 2 * value + int(row[job * bits + k])
        machines.append(value)
    return machines


def _brute_force_optimum(times, machines):
    """Exact optimum by trying all machines**jobs assignments."""
    return min(
        _slow_makespan(times, assignment, machines)
        for assignment in itertools.product(range(machines), repeat=len(times))
    )


# --------------------------------------------------------------------------- evaluation


@pytest.mark.parametrize("machines", [2, 3, 5])
def test_index_evaluate_matches_slow_reference(machines):
    rng = np.random.default_rng(11)
    times = random_jobs(13, 1, 30, seed=3)
    problem = MachineAssignment(times, machines, encoding="index")
    X = rng.integers(0, machines, size=(200, 13)).astype(np.uint8)
    expected = [_slow_makespan(times, row, machines) for row in X]
    scores = problem.evaluate(X)
    assert scores.dtype == np.float64 and scores.shape == (200,)
    np.testing.assert_array_equal(scores, expected)


@pytest.mark.parametrize("machines", [2, 4, 8])
def test_bits_evaluate_matches_slow_reference(machines):
    rng = np.random.default_rng(12)
    bits = int(math.log2(machines))
    times = random_jobs(9, 1, 25, seed=4)
    problem = MachineAssignment(times, machines, encoding="bits")
    assert problem.n == 9 * bits and problem.binary
    X = rng.integers(0, 2, size=(200, problem.n)).astype(np.uint8)
    expected = [_slow_makespan(times, _slow_bits_to_machines(row, 9, bits), machines) for row in X]
    np.testing.assert_array_equal(problem.evaluate(X), expected)


def test_variable_names_and_cardinality():
    index = MachineAssignment([3, 4, 5], 3)
    assert index.variable_names == ["job0", "job1", "job2"]
    assert index.cardinality.tolist() == [3, 3, 3] and index.goal == "minimize"
    bits = MachineAssignment([3, 4, 5], 4, encoding="bits")
    assert bits.variable_names[:3] == ["job0.b0", "job0.b1", "job1.b0"]


def test_encode_round_trips_through_both_encodings():
    rng = np.random.default_rng(5)
    times = random_jobs(10, 1, 20, seed=6)
    for encoding in ("index", "bits"):
        problem = MachineAssignment(times, 8, encoding=encoding)
        for _ in range(20):
            assignment = rng.integers(0, 8, size=10)
            row = problem.encode(assignment)
            np.testing.assert_array_equal(problem.machine_of(row[None, :])[0], assignment)
            assert problem.evaluate_one(row) == schedule_makespan(times, assignment, 8)


def test_evaluate_rejects_bad_candidates():
    problem = MachineAssignment([3, 4, 5], 3)
    with pytest.raises(ValueError, match="shape"):
        problem.evaluate(np.zeros((2, 4), dtype=np.uint8))
    with pytest.raises(ValueError, match="0 … 2"):
        problem.evaluate(np.array([[0, 1, 3]], dtype=np.uint8))


def test_bits_encoding_needs_a_power_of_two():
    with pytest.raises(ValueError, match="power of two"):
        MachineAssignment([3, 4, 5], 3, encoding="bits")
    with pytest.raises(ValueError, match="encoding"):
        MachineAssignment([3, 4, 5], 4, encoding="gray")


# --------------------------------------------------------------------------- references


@pytest.mark.parametrize("machines,seed", [(2, 0), (2, 1), (3, 2), (3, 3)])
def test_milp_optimum_equals_brute_force(machines, seed):
    times = random_jobs(6, 1, 15, seed=seed)
    value, assignment = solve_exact(times, machines)
    assert value == _brute_force_optimum(times, machines)
    assert _slow_makespan(times, assignment, machines) == value


def test_milp_optimum_equals_brute_force_over_all_bit_strings():
    times = random_jobs(5, 1, 12, seed=8)
    problem = MachineAssignment(times, 4, encoding="bits")
    every = np.array(list(itertools.product((0, 1), repeat=problem.n)), dtype=np.uint8)
    value, _ = solve_exact(times, 4)
    assert problem.evaluate(every).min() == value
    assert value == _brute_force_optimum(times, 4)


def test_lpt_bound_and_lower_bound_against_milp():
    # Graham, R. L. (1969), "Bounds on multiprocessing timing anomalies":
    # LPT <= (4/3 - 1/(3m)) * OPT. The lower bound max(ceil(sum p / m), max p)
    # is common practice, no source.
    for seed in range(12):
        machines = 2 + seed % 4
        times = random_jobs(9 + seed % 5, 1, 30, seed=100 + seed)
        optimum, _ = solve_exact(times, machines)
        lpt = schedule_makespan(times, lpt_schedule(times, machines), machines)
        assert makespan_lower_bound(times, machines) <= optimum <= lpt
        assert lpt <= (4 / 3 - 1 / (3 * machines)) * optimum + 1e-9


@pytest.mark.parametrize("machines", [2, 3, 4])
def test_graham_tight_example_attains_the_bound(machines):
    # Graham (1969), "Bounds on multiprocessing timing anomalies": the instance
    # 2m-1, 2m-1, 2m-2, 2m-2, ..., m+1, m+1, m, m, m has LPT = 4m-1 and
    # OPT = 3m, so the bound is tight (family from memory; both values are
    # checked here, OPT by the MILP and by brute force for m = 2, 3).
    times = [t for t in range(2 * machines - 1, machines, -1) for _ in (0, 1)] + [machines] * 3
    lpt = schedule_makespan(times, lpt_schedule(times, machines), machines)
    optimum, _ = solve_exact(times, machines)
    assert lpt == 4 * machines - 1
    assert optimum == 3 * machines
    if machines <= 3:
        assert _brute_force_optimum(times, machines) == optimum
    assert lpt == pytest.approx((4 / 3 - 1 / (3 * machines)) * optimum)


def test_lpt_schedule_follows_the_rule():
    # Longest first, each to the least loaded machine, ties to the lowest number:
    # 9 -> M0, 7 -> M1, first 4 -> M1 (11), second 4 -> M0 (13), 2 -> M1 (13).
    assert lpt_schedule([2, 9, 4, 4, 7], 2).tolist() == [1, 0, 1, 0, 1]
    assert makespan_lower_bound([2, 9, 4, 4, 7], 2) == 13
    assert makespan_lower_bound([2, 30, 4], 2) == 30


# --------------------------------------------------------------------------- factory


def test_random_factory_is_seeded_and_solved():
    first = machine_assignment(jobs=10, machines=3, seed=4)
    second = machine_assignment(jobs=10, machines=3, seed=4)
    other = machine_assignment(jobs=10, machines=3, seed=5)
    np.testing.assert_array_equal(first.times, second.times)
    assert not np.array_equal(first.times, other.times)
    assert first.optimum == _brute_force_optimum(first.times, 3)
    assert first.optimum_source
    assert machine_assignment(jobs=10, machines=3, seed=4, solve=False).optimum is None
    with pytest.raises(ValueError, match="solve must be"):
        machine_assignment(jobs=10, solve="sometimes")


def test_default_factory_has_exact_optimum_and_lpt_seed():
    problem = machine_assignment()
    assert problem.n == 20 and problem.machines == 4
    seed_row = problem.initial_candidates()
    assert seed_row.shape == (1, 20) and seed_row.dtype == np.uint8
    lpt = schedule_makespan(problem.times, lpt_schedule(problem.times, 4), 4)
    assert problem.evaluate(seed_row)[0] == lpt >= problem.optimum
    assert problem.optimum == solve_exact(problem.times, 4)[0]


def test_bits_factory_initial_candidate_is_the_lpt_schedule():
    problem = machine_assignment(jobs=12, machines=8, encoding="bits", seed=2)
    assert problem.n == 36
    lpt = schedule_makespan(problem.times, lpt_schedule(problem.times, 8), 8)
    assert problem.evaluate(problem.initial_candidates())[0] == lpt


def test_bundled_print_shop_instance():
    problem = machine_assignment(os.path.join(BUNDLED, "sched-print-shop-night.yaml"))
    assert problem.machines == 4 and problem.n == 16
    assert problem.variable_names[0] == "wedding-invitations"
    lpt = schedule_makespan(problem.times, lpt_schedule(problem.times, 4), 4)
    assert problem.optimum == solve_exact(problem.times, 4)[0] < lpt


# --------------------------------------------------------------------------- files


def test_yaml_and_csv_fixtures_agree():
    names, times, machines = read_jobs(os.path.join(DATA, "sched-tiny.yaml"))
    csv_names, csv_times, csv_machines = read_jobs(os.path.join(DATA, "sched-tiny.csv"))
    assert names == csv_names == ["alpha", "bravo", "charlie", "delta", "echo", "foxtrot"]
    assert times.tolist() == csv_times.tolist() == [7, 5, 4, 4, 3, 3]
    assert machines == 3 and csv_machines is None
    from_yaml = machine_assignment(os.path.join(DATA, "sched-tiny.yaml"))
    from_csv = machine_assignment(os.path.join(DATA, "sched-tiny.csv"), machines=3)
    # By hand: the machine holding 'alpha' (7) ends at 7 or >= 10, and with 7
    # alone the other 19 units need two machines, so the optimum is 10.
    assert from_yaml.optimum == from_csv.optimum == _brute_force_optimum(times, 3) == 10
    assert machine_assignment(os.path.join(DATA, "sched-tiny.yaml"), machines=2).machines == 2


def _write(tmp_path, name, text):
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return str(path)


YAML_ERRORS = [
    ("syntax", "machines: 2\njobs: [ {name: a, time: 3\n", r"not valid YAML"),
    ("top-level", "- a\n- b\n", r"line 1: expected a YAML mapping"),
    ("missing-jobs", "machines: 2\n", r"line 1: missing key 'jobs'"),
    ("jobs-not-list", "machines: 2\njobs: 5\n", r"line 2: 'jobs' must be a non-empty list"),
    ("empty-jobs", "machines: 2\njobs: []\n", r"line 2: 'jobs' must be a non-empty list"),
    ("entry-not-mapping", "jobs:\n  - {name: a, time: 3}\n  - b\n", r"line 3: job 2 must be a mapping"),
    ("missing-time", "jobs:\n  - {name: a, time: 3}\n  - {name: b}\n", r"line 3: job 2 has no 'time'"),
    (
        "bad-time",
        "jobs:\n  - {name: a, time: 3}\n  - {name: b,\n     time: -2}\n",
        r"line 4: time of job 'b' must be a positive integer",
    ),
    (
        "float-time",
        "jobs:\n  - {name: a, time: 2.5}\n",
        r"line 2: time of job 'a' must be a positive integer",
    ),
    (
        "bad-machines",
        "machines: two\njobs:\n  - {name: a, time: 3}\n",
        r"line 1: 'machines' must be a positive integer",
    ),
    (
        "duplicate-name",
        "jobs:\n  - {name: a, time: 3}\n  - {name: a, time: 4}\n",
        r"line 3: duplicate job name 'a'",
    ),
    (
        "duplicate-key",
        "machines: 2\nmachines: 3\njobs:\n  - {name: a, time: 3}\n",
        r"line 2: duplicate key 'machines'",
    ),
    (
        "unknown-key",
        "machines: 2\ndeadline: 9\njobs:\n  - {name: a, time: 3}\n",
        r"line 2: unknown key 'deadline'",
    ),
    ("unknown-job-key", "jobs:\n  - {name: a, time: 3, colour: red}\n", r"line 2: unknown job key 'colour'"),
    ("empty-name", "jobs:\n  - {name: '', time: 3}\n", r"line 2: job name must be a non-empty text"),
]


@pytest.mark.parametrize("label,text,message", YAML_ERRORS, ids=[e[0] for e in YAML_ERRORS])
def test_yaml_reader_rejects_malformed_files(tmp_path, label, text, message):
    path = _write(tmp_path, f"{label}.yaml", text)
    with pytest.raises(ValueError, match=message) as caught:
        read_jobs(path)
    assert path in str(caught.value)


CSV_ERRORS = [
    ("empty", "\n\n", r"empty file; expected the header 'name,time'"),
    ("header", "job,minutes\na,3\n", r"line 1: expected the header 'name,time'"),
    ("no-jobs", "name,time\n", r"no jobs after the header"),
    ("fields", "name,time\na,3\nb,4,5\n", r"line 3: expected 2 fields"),
    ("bad-time", "name,time\na,3\n\nb,soon\n", r"line 4: time of job 'b' must be a positive integer"),
    ("zero-time", "name,time\na,0\n", r"line 2: time of job 'a' must be a positive integer"),
    ("duplicate-name", "name,time\na,3\na,4\n", r"line 3: duplicate job name 'a'"),
    ("empty-name", "name,time\n ,3\n", r"line 2: job name must be a non-empty text"),
]


@pytest.mark.parametrize("label,text,message", CSV_ERRORS, ids=[e[0] for e in CSV_ERRORS])
def test_csv_reader_rejects_malformed_files(tmp_path, label, text, message):
    path = _write(tmp_path, f"{label}.csv", text)
    with pytest.raises(ValueError, match=message) as caught:
        read_jobs(path)
    assert path in str(caught.value)


def test_unknown_extension_is_rejected(tmp_path):
    path = _write(tmp_path, "jobs.txt", "a 3\n")
    with pytest.raises(ValueError, match=r"jobs\.txt: unknown instance format '\.txt'"):
        read_jobs(path)


def test_compressed_files_are_read(tmp_path):
    import gzip

    source = os.path.join(DATA, "sched-tiny.csv")
    target = tmp_path / "sched-tiny.csv.gz"
    with open(source, "rb") as plain, gzip.open(target, "wb") as packed:
        packed.write(plain.read())
    names, times, _ = read_jobs(str(target))
    assert names[0] == "alpha" and times.tolist() == [7, 5, 4, 4, 3, 3]
