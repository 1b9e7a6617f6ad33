"""Tests of the problem registry and of loading user objectives."""

import inspect
import sys
from pathlib import Path

import numpy as np
import pytest

import optim.objectives.command
import optim.objectives.loader
from optim import objectives
from optim.problem import FunctionProblem, Problem
from optim.objectives import (
    PROBLEMS,
    REQUIRED,
    ProblemError,
    available,
    factory_parameters,
    get_factory,
    make_problem,
)
from optim.objectives.loader import build_problem

DATA = Path(__file__).parent / "data" / "objectives"
EXAMPLES = "example_objectives.py"


def load(attribute, params=None):
    return make_problem(f"{EXAMPLES}:{attribute}", params, base_dir=DATA)


def expect_error(match, use, params=None, base_dir=DATA):
    with pytest.raises(ProblemError, match=match) as caught:
        make_problem(use, params, base_dir=base_dir)
    message = str(caught.value)
    assert "\n" not in message
    return message


# ---------------------------------------------------------------- registry


def test_registered_names():
    assert {"onemax", "trap", "four-peaks", "hiff", "ising-ring"} <= set(available())
    assert available() == sorted(PROBLEMS)


#: Registered problems that run the user's own program: they cannot be built without parameters
#: and have no known optimum (tests/test_problems_command.py covers them).
NEEDS_USER_INPUT = {"command"}


@pytest.mark.parametrize("name", sorted(set(PROBLEMS) - NEEDS_USER_INPUT))
def test_every_registered_name_builds_with_defaults(name):
    problem = make_problem(name)
    assert isinstance(problem, Problem)
    assert problem.optimum is not None
    X = np.random.default_rng(0).integers(0, problem.cardinality[None, :], size=(20, problem.n)).astype(np.uint8)
    assert problem.evaluate(X).shape == (20,)
    parameters = factory_parameters(get_factory(name))
    assert parameters
    assert all(p.description for p in parameters)
    assert all(p.default is not REQUIRED for p in parameters)


def test_registered_problem_with_parameters():
    problem = make_problem("trap", {"n": 12, "k": 4, "shuffle": True, "seed": 3})
    assert problem.n == 12 and problem.k == 4 and problem.blocks.shape == (3, 4)


def test_registry_entry_may_be_a_callable(monkeypatch):
    monkeypatch.setitem(PROBLEMS, "tiny-onemax", lambda n=3: objectives.make_problem("onemax", {"n": n}))
    assert "tiny-onemax" in available()
    assert make_problem("tiny-onemax").n == 3


@pytest.mark.parametrize("name, nearest", [("trapp", "trap"), ("four_peaks", "four-peaks"), ("ising", "ising-ring")])
def test_unknown_name_suggests_nearest(name, nearest):
    message = expect_error(f"did you mean '{nearest}'", name)
    assert f"unknown problem '{name}'" in message
    assert "known problems: " + ", ".join(available()) in message
    with pytest.raises(ProblemError, match=f"did you mean '{nearest}'"):
        get_factory(name)


def test_unknown_name_without_near_match():
    message = expect_error("unknown problem 'zzzzzz'", "zzzzzz")
    assert "did you mean" not in message


def test_problem_error_is_a_value_error():
    assert issubclass(ProblemError, ValueError)
    assert objectives.ProblemError is optim.objectives.loader.ProblemError


# ---------------------------------------------------------------- factory_parameters


def test_factory_parameters_of_trap():
    parameters = factory_parameters(get_factory("trap"))
    assert [(p.name, p.default) for p in parameters] == [("n", 60), ("k", 3), ("shuffle", False), ("seed", 0)]
    assert parameters[0].description == "Number of bits, a positive multiple of ``k``."
    assert parameters[2].description.startswith("Scatter the blocks over the string")
    assert parameters[2].description.endswith("so that blocks are not contiguous.")


def test_factory_parameters_docstring_parsing():
    def factory(size, low=0, high=1, *extra, colour="red", **options):
        """Build something.

        Parameters
        ----------
        size : int
            How many
            variables.
        low, high : int
            The bounds.
        *extra
            Ignored.

        Returns
        -------
        colour
            Not a parameter entry.
        """

    parameters = factory_parameters(factory)
    assert parameters == [
        ("size", REQUIRED, "How many variables."),
        ("low", 0, "The bounds."),
        ("high", 1, "The bounds."),
        ("colour", "red", ""),
    ]
    assert REQUIRED is inspect.Parameter.empty


def test_factory_parameters_of_problem_subclass():
    from optim.objectives.loader import load_object

    cls = load_object(f"{EXAMPLES}:AlternatingLamps", DATA)
    assert factory_parameters(cls) == [
        ("n", 10, "Number of lamps in the row."),
        ("bonus", 0.0, "Added to every score."),
    ]


# ---------------------------------------------------------------- loading user objectives


def test_file_factory_relative_to_base_dir():
    problem = load("weighted_lamps", {"n": 8, "weight": 3.0})
    assert isinstance(problem, FunctionProblem) and problem.n == 8
    assert problem.evaluate(np.ones((2, 8), dtype=np.uint8)).tolist() == [24.0, 24.0]


def test_file_factory_relative_to_current_directory(monkeypatch):
    monkeypatch.chdir(DATA.parent)
    problem = make_problem(f"objectives/{EXAMPLES}:weighted_lamps")
    assert problem.n == 6


def test_file_factory_absolute_path(tmp_path):
    problem = make_problem(f"{DATA / EXAMPLES}:weighted_lamps", base_dir=tmp_path)
    assert problem.n == 6


def test_problem_subclass_is_a_factory():
    problem = load("AlternatingLamps", {"n": 7, "bonus": 1.5})
    assert problem.name == "lamps" and problem.optimum == 7.5
    assert problem.evaluate_one([0, 1, 0, 1, 0, 1, 0]) == 7.5


def test_problem_instance():
    problem = load("READY_MADE")
    assert problem.n == 5
    expect_error(
        r"'example_objectives.py:READY_MADE' is a ready-made Problem and takes no parameters; got n",
        f"{EXAMPLES}:READY_MADE",
        {"n": 4},
    )


def test_plain_per_candidate_function():
    problem = load("lit_every_third", {"n": 7})
    assert isinstance(problem, FunctionProblem) and not problem.vectorized
    assert problem.name == "lit_every_third" and problem.goal == "maximize"
    x = np.array([1, 0, 0, 1, 0, 0, 1], dtype=np.uint8)
    assert problem.evaluate_one(x) == 7.0
    assert problem.evaluate(np.vstack([x, 1 - x])).tolist() == [7.0, 0.0]


def test_plain_function_with_all_options():
    params = {
        "n": 4,
        "cardinality": 3,
        "goal": "minimize",
        "vectorized": False,
        "optimum": 0,
        "variable_names": ["a", "b", "c", "d"],
    }
    problem = load("lit_every_third", params)
    assert problem.goal == "minimize" and problem.optimum == 0.0
    assert problem.cardinality.tolist() == [3, 3, 3, 3]
    assert problem.variable_names == ["a", "b", "c", "d"]


def test_plain_vectorised_function():
    problem = load("lit_total", {"n": 5, "vectorized": True})
    assert problem.vectorized
    X = np.array([[1, 1, 0, 0, 1], [0, 0, 0, 0, 0]], dtype=np.uint8)
    assert problem.evaluate(X).tolist() == [3.0, 0.0]


def test_module_reference():
    problem = make_problem("optim_problems.trap:trap", {"n": 9, "k": 3})
    assert problem.name == "trap-3" and problem.n == 9


def test_same_file_loads_twice_without_touching_sys_path():
    path_before = list(sys.path)
    first = load("AlternatingLamps")
    second = load("AlternatingLamps")
    assert sys.path == path_before
    assert type(first) is not type(second)
    assert type(first).__module__ != type(second).__module__
    assert first.evaluate_one(np.zeros(10)) == second.evaluate_one(np.zeros(10)) == 0.0


def test_file_may_import_a_module_beside_it(monkeypatch):
    monkeypatch.delitem(sys.modules, "lamp_weights", raising=False)
    path_before = list(sys.path)
    problem = make_problem("uses_neighbour.py:weighted_row", {"n": 4, "vectorized": True}, base_dir=DATA)
    assert sys.path == path_before
    assert problem.evaluate_one([1, 0, 1, 1]) == 13.0
    monkeypatch.delitem(sys.modules, "lamp_weights", raising=False)


# ---------------------------------------------------------------- loading errors


def test_missing_file():
    expected = (DATA / "absent.py").resolve()
    message = expect_error("objective file not found", "absent.py:thing")
    assert str(expected) in message


def test_file_must_be_python(tmp_path):
    (tmp_path / "objective.txt").write_text("x = 1\n")
    expect_error(r"must be a \.py file", "./objective.txt:x", base_dir=tmp_path)


def test_missing_callable_name():
    expect_error("with a Python name after ':'", f"{EXAMPLES}:")
    expect_error("with a Python name after ':'", f"{EXAMPLES}:not-a-name")


def test_syntax_error_names_file_and_line(tmp_path):
    path = tmp_path / "broken.py"
    path.write_text("import numpy\n\ndef score(x)\n    return 1\n")
    message = expect_error("SyntaxError at line 3", "broken.py:score", base_dir=tmp_path)
    assert f"cannot import objective file {path.resolve()}" in message


def test_import_failure_names_file_exception_and_line(tmp_path):
    path = tmp_path / "explodes.py"
    path.write_text("x = 1\nraise RuntimeError('the lamp row is not wired\\nsecond line')\n")
    message = expect_error("RuntimeError: the lamp row is not wired", "explodes.py:x", base_dir=tmp_path)
    assert str(path.resolve()) in message and "(line 2)" in message
    assert "second line" not in message
    assert not any(name.endswith("_explodes") for name in sys.modules)


def test_missing_callable_lists_those_present():
    message = expect_error("no callable 'lamp_score'", f"{EXAMPLES}:lamp_score")
    listed = message.split("callables there: ")[1].split(", ")
    assert listed == sorted(
        [
            "AlternatingLamps",
            "NotAProblem",
            "READY_MADE",
            "lamp_count_text",
            "lit_every_third",
            "lit_total",
            "sized_lamps",
            "two_rows",
            "weighted_lamps",
        ]
    )


def test_module_not_importable():
    expect_error(
        r"^cannot import module 'no_such_lamp_module': no module named 'no_such_lamp_module'$",
        "no_such_lamp_module:thing",
    )
    expect_error(r"no module named 'no_such_lamp_module'", "no_such_lamp_module.sub:thing")


def test_module_failing_inside_names_exception_and_place(tmp_path, monkeypatch):
    (tmp_path / "lamp_broken_module.py").write_text("import math\nimport lamp_missing_dependency\n")
    monkeypatch.syspath_prepend(str(tmp_path))
    message = expect_error(
        r"cannot import module 'lamp_broken_module': ModuleNotFoundError: "
        r"No module named 'lamp_missing_dependency'",
        "lamp_broken_module:f",
    )
    assert "lamp_broken_module.py, line 2)" in message
    monkeypatch.delitem(sys.modules, "lamp_broken_module", raising=False)


def test_callable_missing_in_module():
    message = expect_error("no callable 'nothing' in module 'optim_problems.trap'", "optim_problems.trap:nothing")
    assert message.endswith("callables there: ConcatenatedTrap, trap")


def test_unknown_factory_parameter():
    message = expect_error(
        r"unknown parameter 'kk' for problem 'trap' \(accepted: n, k, shuffle, seed\)", "trap", {"kk": 3}
    )
    assert message.endswith("did you mean 'k'?")
    expect_error(
        r"unknown parameter 'size' for problem 'example_objectives.py:AlternatingLamps' "
        r"\(accepted: n, bonus\)",
        f"{EXAMPLES}:AlternatingLamps",
        {"size": 3},
    )


def test_unknown_objective_parameter():
    message = expect_error(
        r"unknown parameter 'colour' .*\(accepted: n, cardinality, goal, vectorized, "
        r"optimum, variable_names\)",
        f"{EXAMPLES}:lit_total",
        {"n": 3, "colour": "red"},
    )
    assert "lit_total" in message


def test_missing_factory_parameter():
    message = expect_error(
        r"^missing parameter 'size' for problem 'example_objectives.py:sized_lamps' "
        r"\(accepted: size, pattern\)",
        f"{EXAMPLES}:sized_lamps",
        {"pattern": "x"},
    )
    assert message.endswith("if it is an objective function, give the number of variables as parameter 'n'")


def test_objective_without_n_hints_at_n():
    expect_error(
        r"missing parameter 'x' .*give the number of variables as parameter 'n'", f"{EXAMPLES}:lit_every_third"
    )


def test_objective_taking_two_arguments():
    # Two required arguments: not an objective function, so 'n' is an unknown factory parameter.
    message = expect_error(
        r"^unknown parameter 'n' for problem 'example_objectives.py:two_rows' "
        r"\(accepted: x, y\)",
        f"{EXAMPLES}:two_rows",
        {"n": 3},
    )
    assert message.endswith("an objective function must take exactly one required argument, the candidate")


def test_factory_with_defaults_only_is_not_an_objective():
    # weighted_lamps(n=6, weight=2.0) has a parameter n: a factory even when n is given.
    assert load("weighted_lamps", {"n": 3}).n == 3
    # sized_lamps(size, pattern=...) has one required argument and no n, so with n it
    # is taken as an objective function (the documented rule).
    assert isinstance(load("sized_lamps", {"n": 3}), FunctionProblem)


def test_registered_factories_are_never_objective_functions(monkeypatch):
    def make_lamps(size=4):
        return make_problem("onemax", {"n": size})

    def score_one(x):
        return 1.0

    monkeypatch.setitem(PROBLEMS, "lamps", make_lamps)
    monkeypatch.setitem(PROBLEMS, "one-lamp", score_one)
    message = expect_error(r"^unknown parameter 'n' for problem 'lamps' \(accepted: size\)", "lamps", {"n": 3})
    assert "objective function" in message
    expect_error(r"^unknown parameter 'n' for problem 'one-lamp' \(accepted: x\)", "one-lamp", {"n": 3})
    assert isinstance(build_problem(score_one, {"n": 3}), FunctionProblem)
    with pytest.raises(ProblemError, match="unknown parameter 'n'"):
        build_problem(score_one, {"n": 3}, plain_functions=False)


def test_vectorized_must_be_boolean():
    expect_error(
        r"parameter 'vectorized' .* must be true or false; got 'yes'",
        f"{EXAMPLES}:lit_total",
        {"n": 3, "vectorized": "yes"},
    )


def test_bad_objective_option_is_wrapped():
    expect_error(
        r"problem 'example_objectives.py:lit_total': The 'goal' parameter must be one of maximize, minimize",
        f"{EXAMPLES}:lit_total",
        {"n": 3, "goal": "best"},
    )


def test_factory_value_error_is_wrapped():
    message = expect_error(r"^problem 'trap': n must be a positive multiple of k=3; got n=10$", "trap", {"n": 10})
    expect_error(
        r"^problem 'example_objectives.py:weighted_lamps': weight must be positive; got -1$",
        f"{EXAMPLES}:weighted_lamps",
        {"weight": -1},
    )
    assert message


def test_factory_type_error_is_wrapped():
    expect_error(
        r"^problem 'example_objectives.py:sized_lamps': pattern must be a string; got int$",
        f"{EXAMPLES}:sized_lamps",
        {"size": 4, "pattern": 5},
    )


def test_factory_returning_something_else():
    expect_error(
        r"^factory 'example_objectives.py:lamp_count_text' returned a int, not a Problem$",
        f"{EXAMPLES}:lamp_count_text",
    )


def test_class_that_is_not_a_problem():
    expect_error(r"NotAProblem' is a class but not a subclass of Problem", f"{EXAMPLES}:NotAProblem")


def test_attribute_that_is_not_callable():
    expect_error(r"LAMP_LIMIT' is a int, not a Problem, a Problem subclass or a callable", f"{EXAMPLES}:LAMP_LIMIT")


def test_bad_params_and_names():
    expect_error(r"parameters of problem 'trap' must be a mapping; got list", "trap", [1, 2])
    expect_error(r"parameter names of problem 'trap' must be strings; got 1", "trap", {1: 2})
    expect_error(r"must be named by a non-empty string", "  ")
    with pytest.raises(ProblemError, match="non-empty string"):
        make_problem(None)


def test_build_problem_labels_default_to_the_name():
    with pytest.raises(ProblemError, match=r"^factory 'returns_text' returned a str, not a Problem$"):
        build_problem(lambda: "text", label="returns_text")

    def returns_text():
        return "text"

    with pytest.raises(ProblemError, match=r"^factory 'returns_text' returned a str"):
        build_problem(returns_text)
