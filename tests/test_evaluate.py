"""optim.evaluation: scoring, the evaluator and the local backends, one piece at a time.

Reference values are the objectives themselves evaluated directly in this
process (their own vectorised ``evaluate``) or, for shipping, in a separate
Python process; fault kinds are optim's own definitions (common practice, no
source).
"""

import math
import subprocess
import sys
import threading
import time
from pathlib import Path

import numpy as np
import pytest

from optim import objectives
from optim.errors import OptimError
from optim.evaluation import WorkerError
from optim.evaluation.backends import backend_kind, make_backend
from optim.evaluation.evaluator import Evaluator
from optim.evaluation.local import ProcessBackend, ThreadBackend
from optim.evaluation.scoring import FAILURE_KINDS, EvaluationFailure, candidate_text, score_candidates
from optim.evaluation.shipping import ship_problem
from optim.problem import FunctionProblem, Problem

ROOT = Path(__file__).resolve().parents[1]
OBJECTIVES = Path(__file__).resolve().parent / "data" / "objectives_parallel" / "objectives.py"


def load(name, **params):
    """A fixture objective loaded the way a config loads a user's file."""
    return objectives.make_problem(f"{OBJECTIVES}:{name}", params)


def all_codes(n, rng, count):
    """``count`` random candidates of length ``n``, with every value of their first three bits present."""
    X = rng.integers(0, 2, size=(count, n), dtype=np.uint8)
    X[:8, :3] = [[(c >> 2) & 1, (c >> 1) & 1, c & 1] for c in range(8)]
    return X


# -- one candidate: what the objective returned ---------------------------------------------------
def test_every_fault_kind_of_a_per_candidate_objective():
    module_problem = load("faults", n=6)
    from_file = sys.modules[module_problem.function.__module__]
    X = all_codes(6, np.random.default_rng(1), 40)
    outcomes = score_candidates(module_problem, X)
    for x, (value, kind, message) in zip(X, outcomes, strict=True):
        code = 4 * int(x[0]) + 2 * int(x[1]) + int(x[2])
        expected = from_file.FAULTS.get(code)
        assert kind == expected, (code, kind, message)
        if expected is None:
            assert value == float(x.sum()) and message == ""
        else:
            assert math.isnan(value) and kind in FAILURE_KINDS and message
    messages = {4 * int(x[0]) + 2 * int(x[1]) + int(x[2]): m for x, (_, _, m) in zip(X, outcomes, strict=True)}
    assert messages[0].startswith("RuntimeError: the model did not converge (at ") and "objectives.py:" in messages[0]
    assert messages[1] == "the objective returned nan"
    assert messages[2] == "the objective returned -inf"
    assert "shape (3,)" in messages[3]
    assert "None" in messages[4] and "'fast'" in messages[5]


@pytest.mark.parametrize(
    "value, expected",
    [
        (3, 3.0),
        (np.float32(1.5), 1.5),
        (np.int64(-2), -2.0),
        (np.array(4.0), 4.0),
        (np.array([[2.5]]), 2.5),
        ([7], 7.0),
        (True, 1.0),
    ],
)
def test_numbers_in_many_forms_are_scores(value, expected):
    problem = FunctionProblem(lambda x: value, 3)
    [(score, kind, message)] = score_candidates(problem, np.zeros((1, 3), np.uint8))
    assert (score, kind, message) == (expected, None, "")


@pytest.mark.parametrize(
    "value, kind",
    [
        ({"score": 1}, "type"),
        ([1, 2], "shape"),
        (["a"], "type"),
        (b"12", "type"),
        ("12", "type"),
        (object(), "type"),
        (float("inf"), "inf"),
        (np.float64("nan"), "nan"),
    ],
)
def test_things_that_are_not_one_number(value, kind):
    problem = FunctionProblem(lambda x: value, 3)
    [(score, got, message)] = score_candidates(problem, np.zeros((1, 3), np.uint8))
    assert math.isnan(score) and got == kind and message


class _RawText(Problem):
    """Per-candidate, not a FunctionProblem: its raw value is a text, its converted score a number."""

    vectorized = False

    def __init__(self):
        super().__init__(3, name="raw-text")

    def evaluate(self, X):
        return np.zeros(len(X))

    def raw_value(self, x):
        return "12"


def test_the_scorer_checks_the_raw_value_of_any_problem_class():
    [(score, kind, message)] = score_candidates(_RawText(), np.zeros((1, 3), np.uint8))
    assert math.isnan(score) and kind == "type" and "'12'" in message
    assert _RawText().evaluate_one(np.zeros(3, np.uint8)) == 0.0


def test_an_objective_reports_its_own_kind_and_exit_is_caught():
    def reporting(x):
        if x[0]:
            raise EvaluationFailure("no-score", "no number in the output")
        raise SystemExit(3)

    X = np.array([[1, 0], [0, 0]], np.uint8)
    first, second = score_candidates(FunctionProblem(reporting, 2), X)
    assert first[1:] == ("no-score", "no number in the output")
    assert second[1] == "exception" and second[2].startswith("SystemExit: 3")


def test_the_objective_gets_a_copy_of_the_candidate():
    def vandal(x):
        x[:] = 1
        return 0.0

    X = np.zeros((3, 4), np.uint8)
    Evaluator(FunctionProblem(vandal, 4))(X)
    assert not X.any()


# -- vectorised objectives ------------------------------------------------------------------------
class _Batch(Problem):
    """Vectorised; ``mode`` picks a fault of the whole batch."""

    def __init__(self, mode):
        super().__init__(4, name="batch")
        self.mode, self.batches = mode, 0

    def evaluate(self, X):
        self.batches += 1
        values = X.sum(axis=1).astype(np.float64)
        if self.mode == "nonfinite":
            values[X[:, 0] == 1] = np.nan
            values[(X[:, 0] == 0) & (X[:, 1] == 1)] = np.inf
            return values
        if self.mode == "shape":
            return values[:-1]
        if self.mode == "type":
            return ["many"] * X.shape[0]
        if self.mode == "raise" and X.shape[0] > 1:
            raise RuntimeError("the batch failed")
        if self.mode == "raise" and X[0, 0] == 1:
            raise RuntimeError("this one")
        return values


def test_vectorised_faults():
    X = np.array([[1, 0, 0, 0], [0, 1, 0, 1], [0, 0, 1, 1]], np.uint8)
    evaluator = Evaluator(_Batch("nonfinite"))
    assert evaluator(X).tolist() == [-np.inf, -np.inf, 2.0]
    assert [(f.candidate, f.kind) for f in evaluator.take_failures()] == [("1000", "nan"), ("0101", "inf")]
    for mode in ("shape", "type"):
        evaluator = Evaluator(_Batch(mode))
        assert np.all(evaluator(X) == -np.inf)
        assert [f.kind for f in evaluator.take_failures()] == [mode] * 3


def test_a_failing_batch_is_isolated_candidate_by_candidate_in_one_process():
    problem = _Batch("raise")
    evaluator = Evaluator(problem, jobs=2, timeout=5.0)  # vectorised: no workers even so
    X = np.array([[1, 0, 0, 0], [0, 1, 0, 1], [0, 0, 1, 1]], np.uint8)
    assert evaluator(X).tolist() == [-np.inf, 2.0, 2.0]
    assert problem.batches == 4 and evaluator.backend_name == "vectorized" and evaluator._backend is None
    [failure] = evaluator.take_failures()
    assert failure.kind == "exception" and failure.message.startswith("RuntimeError: this one")


# -- the cache ------------------------------------------------------------------------------------
def test_cache_counts_calls_and_hits():
    seen = []

    def counting(x):
        seen.append(candidate_text(x))
        if x[0] == 1 and x[1] == 1:
            raise ValueError("both on")
        return float(x.sum())

    evaluator = Evaluator(FunctionProblem(counting, 3), cache=True)
    first = np.array([[0, 0, 1], [1, 1, 0], [0, 0, 1], [1, 0, 0]], np.uint8)
    assert evaluator(first).tolist() == [1.0, -np.inf, 1.0, 1.0]
    assert (evaluator.calls, evaluator.cache_hits, evaluator.failure_count) == (3, 1, 1)
    second = np.array([[1, 1, 0], [0, 1, 1], [0, 0, 1]], np.uint8)
    assert evaluator(second).tolist() == [-np.inf, 2.0, 1.0]
    assert (evaluator.calls, evaluator.cache_hits, evaluator.failure_count) == (4, 3, 1)
    assert seen == ["001", "110", "100", "011"]  # every distinct candidate exactly once, failures included
    assert evaluator.calls + evaluator.cache_hits == first.shape[0] + second.shape[0]


def test_state_round_trip_keeps_counts_and_cache():
    calls = []
    problem = FunctionProblem(lambda x: calls.append(1) or float(x[0]), 2)
    evaluator = Evaluator(problem, cache=True)
    evaluator(np.array([[1, 0], [0, 1], [1, 0]], np.uint8))
    state = evaluator.get_state()
    again = Evaluator(problem, cache=True)
    again.set_state(state)
    assert (again.calls, again.cache_hits, again.failure_count) == (2, 1, 0)
    before = len(calls)
    assert again(np.array([[0, 1], [1, 0]], np.uint8)).tolist() == [0.0, 1.0]
    assert len(calls) == before and again.cache_hits == 3


def test_settings_are_checked():
    problem = FunctionProblem(lambda x: 0.0, 2)
    for bad in (dict(jobs=0), dict(jobs=1.5), dict(timeout=0), dict(timeout=-1.0), dict(timeout=float("inf"))):
        with pytest.raises(ValueError):
            Evaluator(problem, **bad)


# -- which backend ---------------------------------------------------------------------------------
def test_backend_choice():
    per_candidate = FunctionProblem(lambda x: 0.0, 2)
    waiting = FunctionProblem(lambda x: 0.0, 2)
    waiting.parallel = "threads"
    vectorised = FunctionProblem(lambda X: X.sum(axis=1), 2, vectorized=True)
    assert backend_kind(per_candidate) == "serial"
    assert backend_kind(per_candidate, jobs=2) == "processes"
    assert backend_kind(waiting, jobs=2) == "threads"
    assert backend_kind(waiting, jobs=2, timeout=1.0) == "processes"  # a thread cannot be stopped
    assert backend_kind(per_candidate, timeout=1.0) == "processes"  # serial with a timeout: one worker process
    assert backend_kind(per_candidate, dask="local") == "dask"
    assert backend_kind(vectorised, jobs=4, timeout=1.0, dask="local") == "vectorized"
    assert make_backend(per_candidate) is None and make_backend(vectorised, jobs=2) is None
    assert isinstance(make_backend(waiting, jobs=2), ThreadBackend)


def test_threads_give_the_serial_results():
    lock, active, peak = threading.Lock(), [0], [0]

    def waits(x):
        with lock:
            active[0] += 1
            peak[0] = max(peak[0], active[0])
        time.sleep(0.01)
        with lock:
            active[0] -= 1
        if x[0] == 1 and x[1] == 1:
            raise ValueError("both on")
        return float(x @ np.arange(1, 6))

    problem = FunctionProblem(waits, 5)
    problem.parallel = "threads"
    X = np.random.default_rng(3).integers(0, 2, size=(40, 5), dtype=np.uint8)
    serial, threaded = Evaluator(problem), Evaluator(problem, jobs=4)
    assert np.array_equal(serial(X), threaded(X))
    assert serial.take_failures() == threaded.take_failures()
    assert peak[0] > 1 and threaded.backend_name == "threads"


# -- shipping the objective -----------------------------------------------------------------------
def test_a_user_file_objective_is_shipped_by_value():
    problem = load("score", n=8)
    payload = ship_problem(problem)
    X = np.random.default_rng(4).integers(0, 2, size=(12, 8), dtype=np.uint8)
    script = (
        "import pickle, sys, numpy as np; from optim.evaluation.scoring import score_candidates; "
        "data = sys.stdin.buffer.read(); problem = pickle.loads(data[:-96]); "
        "X = np.frombuffer(data[-96:], dtype=np.uint8).reshape(12, 8); "
        "print(repr([o[0] if o[1] is None else o[1] for o in score_candidates(problem, X)]))"
    )
    # a fresh interpreter, where the loader's module name means nothing: the code must travel in the payload
    out = subprocess.run(
        [sys.executable, "-c", script], input=payload + X.tobytes(), capture_output=True, cwd=ROOT, check=True
    ).stdout.decode()
    expected = [o[0] if o[1] is None else o[1] for o in score_candidates(problem, X)]
    assert eval(out) == expected


def test_an_objective_that_cannot_be_pickled_is_a_clear_error():
    lock = threading.Lock()
    problem = FunctionProblem(lambda x, lock=lock: 0.0, 2, name="locked")
    with pytest.raises(WorkerError, match="'locked' cannot be sent to worker processes") as caught:
        Evaluator(problem, jobs=2)(np.zeros((2, 2), np.uint8))
    assert isinstance(caught.value, OptimError)


# -- local worker processes -----------------------------------------------------------------------
def test_results_go_back_by_index_and_faults_in_candidate_order():
    problem = load("staggered", n=5)
    X = np.array([[0, 0, 1, 0, 1], [0, 1, 1, 1, 1], [1, 0, 0, 0, 0], [1, 1, 1, 0, 0]], np.uint8)
    serial = Evaluator(problem)
    expected = serial(X)
    assert expected.tolist() == [-np.inf, -np.inf, 2.0, 4.0]
    expected_failures = serial.take_failures()
    assert [f.message.split(" (at ")[0] for f in expected_failures] == ["ValueError: code 0", "ValueError: code 1"]
    for options in (dict(jobs=2), dict(jobs=2, timeout=30.0)):
        with Evaluator(problem, **options) as parallel:
            assert parallel.backend_name == "processes"
            assert np.array_equal(parallel(X), expected)
            assert parallel.take_failures() == expected_failures


def test_a_dying_worker_is_charged_to_its_candidate_only():
    problem = load("troublemaker", n=10, fault="exit")
    X = np.random.default_rng(5).integers(0, 2, size=(30, 10), dtype=np.uint8)
    X = np.concatenate([X[:11], problem.culprit[None], X[11:]])
    with Evaluator(problem, jobs=2) as evaluator:
        scores = evaluator(X)
        [failure] = evaluator.take_failures()
        assert failure.kind == "crash" and failure.candidate == candidate_text(problem.culprit)
        assert "died again" in failure.message and "EXIT(1)" in failure.message
        good = np.ones(X.shape[0], bool)
        good[11] = False
        assert scores[11] == -np.inf and np.array_equal(scores[good], problem.evaluate(X[good]))
        assert np.array_equal(evaluator(X[:5]), problem.evaluate(X[:5]))  # the evaluator goes on working


def test_a_hanging_evaluation_times_out_and_the_rest_is_scored():
    problem = load("troublemaker", n=10, fault="hang", seconds=60)
    X = np.random.default_rng(6).integers(0, 2, size=(9, 10), dtype=np.uint8)
    X = np.concatenate([problem.culprit[None], X])
    started = time.monotonic()
    with Evaluator(problem, timeout=1.0) as evaluator:  # jobs=1: one worker process
        scores = evaluator(X)
        took = time.monotonic() - started
        [failure] = evaluator.take_failures()
    assert failure.kind == "timeout" and failure.candidate == candidate_text(problem.culprit)
    assert "search.timeout = 1 s" in failure.message
    assert scores[0] == -np.inf and np.array_equal(scores[1:], problem.evaluate(X[1:]))
    assert took < 30  # the 60 s sleep was cut short (generous: worker start-up on a busy machine)


def test_close_stops_the_workers_and_a_later_call_starts_new_ones():
    problem = load("score", n=6)
    X = np.random.default_rng(7).integers(0, 2, size=(6, 6), dtype=np.uint8)
    evaluator = Evaluator(problem, jobs=2)
    first = evaluator(X)
    backend = evaluator._backend
    assert isinstance(backend, ProcessBackend) and backend._executor is not None
    evaluator.close()
    assert evaluator._backend is None and backend._executor is None
    evaluator.close()
    assert np.array_equal(evaluator(X), first)
    evaluator.close()
