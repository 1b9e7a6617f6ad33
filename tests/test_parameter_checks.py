"""Every search parameter is checked in one place, whichever way it comes in: Python, a run config, a sweep."""

import subprocess
import sys

import numpy as np
import pytest
import yaml

import optim
from optim.cli import main
from optim.errors import ConfigError, OptimError, ParameterError
from optim.problem import FunctionProblem
from optim.runs.config import load_run_config
from optim.search import SearchSettings, StopRules
from optim.sweeps.config import load_sweep_config

POPULATION = "a whole number >= 2, or 'auto' (no fixed population: runs of doubling size share the budget)"
TARGET = "a number, 'optimum' (the problem's known optimum) or None/null (no target)"
FAILURES = (
    "a whole number of failures (>= 1) or a fraction of the evaluations in [0, 1), or None/null "
    "(never stop for failures)"
)

# (keyword of optimize, bad value, the rule the message states)
BAD_VALUES = [
    ("method", "genetic", "one of tree, forest, univariate, hillclimb, random"),
    ("method", 3, "one of tree, forest, univariate, hillclimb, random"),
    ("population", 1, POPULATION),
    ("population", 2.5, POPULATION),
    ("population", "big", POPULATION),
    ("population", True, POPULATION),
    ("select", 1.5, "a number in (0, 1]"),
    ("select", 0, "a number in (0, 1]"),
    ("select", float("nan"), "a number in (0, 1]"),
    ("prior", -1, "a number >= 0"),
    ("elitism", "yes", "True or False"),
    ("elitism", 1, "True or False"),
    ("alpha", 2, "a number in (0, 1)"),
    ("alpha", 0, "a number in (0, 1)"),
    ("alpha", 1, "a number in (0, 1)"),
    ("jobs", 0, "a whole number >= 1"),
    ("jobs", 1.5, "a whole number >= 1"),
    ("cache", "yes", "True or False, or None/null (the problem decides)"),
    ("timeout", 0, "a number > 0, or None/null (no limit)"),
    ("timeout", -2.5, "a number > 0, or None/null (no limit)"),
    ("dask", "", "a non-empty text, or None/null (evaluate on this machine)"),
    ("dask", 8786, "a non-empty text, or None/null (evaluate on this machine)"),
    ("budget", 0, "a whole number >= 1"),
    ("budget", -5, "a whole number >= 1"),
    ("budget", 100.5, "a whole number >= 1"),
    ("target", "best", TARGET),
    ("target", True, TARGET),
    ("patience", 0, "a whole number >= 1, or None/null (no patience rule)"),
    ("collapse", "no", "True or False"),
    ("max_failures", -3, FAILURES),
    ("max_failures", 2.5, FAILURES),
]
IDS = [f"{keyword}={value!r}" for keyword, value, _ in BAD_VALUES]

#: Where a keyword of optimize stands in a run config.
CONFIG_KEYS = {"budget": ("stop", "evaluations")} | {
    key: ("stop", key) for key in ("target", "patience", "collapse", "max_failures")
}


def _counted_objective():
    calls = []

    def score(x):
        calls.append(1)
        return float(x.sum())

    return score, calls


@pytest.mark.parametrize("keyword, value, rule", BAD_VALUES, ids=IDS)
def test_each_bad_value_through_python_is_one_line_naming_the_parameter(keyword, value, rule):
    score, calls = _counted_objective()
    with pytest.raises(ValueError) as caught:
        optim.maximize(score, 10, **{keyword: value})
    message = str(caught.value)
    assert isinstance(caught.value, ParameterError) and isinstance(caught.value, OptimError)
    assert "\n" not in message
    assert message == f"The '{keyword}' parameter must be {rule}. Got {value!r} instead."
    assert calls == [], "a bad parameter must be refused before the objective is called"


@pytest.mark.parametrize("keyword, value, rule", BAD_VALUES, ids=IDS)
def test_the_same_bad_value_in_a_run_config_names_file_line_and_key(tmp_path, keyword, value, rule):
    section, key = CONFIG_KEYS.get(keyword, ("search", keyword))
    text = yaml.safe_dump({"problem": {"use": "onemax", "n": 10}, section: {key: value}}, sort_keys=False)
    path = tmp_path / "bad.yaml"
    path.write_text(text)
    line = next(number for number, row in enumerate(text.splitlines(), 1) if row.strip().startswith(f"{key}:"))
    with pytest.raises(ConfigError) as caught:
        load_run_config(path)
    message = str(caught.value)
    assert (
        message
        == f"{path.resolve()}:{line}: '{section}.{key}': The '{key}' parameter must be {rule}. Got {value!r} instead."
    )


def test_a_bad_value_in_a_sweep_grid_names_the_entry(tmp_path):
    path = tmp_path / "sweep.yaml"
    path.write_text(
        "problems:\n  - {use: onemax, n: 10}\nmethods:\n  - method: tree\n    select: [0.5, 1.5]\nstop: {patience: 0}\n"
    )
    with pytest.raises(ConfigError) as caught:
        load_sweep_config(path)
    assert str(caught.value).startswith(
        f"{path.resolve()}:5: 'methods.0.select.1': The 'select' parameter must be a number in (0, 1]. Got 1.5 instead."
    )
    path.write_text("problems:\n  - {use: onemax, n: 10}\nmethods:\n  - {method: tree}\nstop: {patience: 0}\n")
    with pytest.raises(ConfigError, match=r":5: 'stop.patience': The 'patience' parameter must be a whole number >= 1"):
        load_sweep_config(path)


def test_a_zero_budget_is_refused_clearly_not_after_the_run():
    with pytest.raises(ValueError, match=r"^The 'budget' parameter must be a whole number >= 1\. Got 0 instead\.$"):
        optim.maximize(lambda x: x.sum(), 10, budget=0)
    with pytest.raises(
        ValueError, match=r"^The 'evaluations' parameter must be a whole number >= 1\. Got 0 instead\.$"
    ):
        StopRules(evaluations=0)


def test_the_problem_size_and_goal_are_checked():
    with pytest.raises(ValueError, match=r"^The 'n' parameter must be a whole number >= 1\. Got 0 instead\.$"):
        optim.maximize(lambda x: x.sum(), 0)
    with pytest.raises(ValueError, match=r"^The 'n' parameter must be a whole number >= 1 \(required"):
        optim.maximize(lambda x: x.sum())
    with pytest.raises(ValueError, match=r"^The 'n' parameter must be a whole number >= 1\. Got 2\.5 instead\.$"):
        FunctionProblem(lambda x: x.sum(), 2.5)
    with pytest.raises(ValueError, match=r"^The 'goal' parameter must be one of maximize, minimize\. Got 'max'"):
        FunctionProblem(lambda x: x.sum(), 5, goal="max")


def test_good_values_are_kept_in_their_plain_type():
    settings = SearchSettings(population=np.int64(40), select=1, prior=0, jobs=2.0, elitism=np.bool_(False))
    assert (settings.population, settings.select, settings.prior, settings.jobs) == (40, 1.0, 0.0, 2)
    assert type(settings.population) is int and type(settings.select) is float and type(settings.jobs) is int
    assert settings.elitism is False
    stop = StopRules(evaluations=1e5, target=12, patience=3.0, max_failures=4.0)
    assert stop.evaluations == 100_000 and type(stop.evaluations) is int
    assert stop.target == 12.0 and type(stop.target) is float and stop.patience == 3
    assert stop.max_failures == 4 and type(stop.max_failures) is int
    assert StopRules(max_failures=0).max_failures == 0.0 and StopRules(max_failures=None).max_failures is None
    assert StopRules(target=None).target is None and StopRules().target == "optimum"


def test_the_command_line_prints_one_line_and_exits_2(tmp_path, capsys):
    path = tmp_path / "bad.yaml"
    path.write_text("problem:\n  use: onemax\n  n: 10\nsearch:\n  select: 1.5\n")
    assert main(["run", str(path), "--out", str(tmp_path / "out"), "--quiet"]) == 2
    err = capsys.readouterr().err.strip()
    assert err == (
        f"optim: error: {path}:5: 'search.select': The 'select' parameter must be a number in (0, 1]. Got 1.5 instead."
    )


def test_python_shows_a_traceback_ending_in_one_value_error_line():
    code = "import optim; optim.maximize(lambda x: x.sum(), 10, select=1.5)"
    finished = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)
    assert finished.returncode == 1
    lines = finished.stderr.strip().splitlines()
    assert lines[0].startswith("Traceback")
    assert (
        lines[-1] == "optim.errors.ParameterError: The 'select' parameter must be a number in (0, 1]. Got 1.5 instead."
    )
    assert issubclass(ParameterError, ValueError)
