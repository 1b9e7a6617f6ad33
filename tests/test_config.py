"""Run configs: defaults, overrides, and one clear error (file, line, key) per mistake."""

import textwrap

import pytest

from optim.runs.config import load_run_config
from optim.errors import ConfigError
from optim.search import SearchSettings, StopRules


def write(tmp_path, text, name="run.yaml"):
    path = tmp_path / name
    path.write_text(textwrap.dedent(text).lstrip())
    return path


def test_minimal_config_gets_documented_defaults(tmp_path):
    config = load_run_config(
        write(
            tmp_path,
            """
        problem:
          use: onemax
    """,
        )
    )
    assert config.name == "run"
    assert config.search == SearchSettings()
    assert config.stop == StopRules()
    assert config.seed == 0 and config.out == "runs"
    assert config.to_dict()["search"]["method"] == "tree"


def test_overrides_and_values(tmp_path):
    path = write(
        tmp_path,
        """
        name: demo
        problem:
          use: trap
          n: 30
        search:
          method: hillclimb
          population: 50
        stop:
          evaluations: 1.0e+5
          target: null
          patience: 5
        seed: 4
    """,
    )
    config = load_run_config(path, ["search.population=80", "stop.target=12.5", "seed=9"])
    assert config.search.method == "hillclimb"
    assert config.search.population == 80
    assert config.stop.evaluations == 100000 and isinstance(config.stop.evaluations, int)
    assert config.stop.target == 12.5 and config.stop.patience == 5
    assert config.seed == 9
    assert config.problem == {"use": "trap", "n": 30}


BAD = [
    ("problem:\n  use: onemax\nsearch:\n  popualtion: 10\n", 4, "search.popualtion", "did you mean 'population'"),
    ("problem:\n  use: onemax\nsearhc:\n  method: tree\n", 3, "searhc", "did you mean 'search'"),
    ("problem:\n  use: onemax\nsearch:\n  population: -5\n", 4, "search.population", "a whole number >= 2"),
    ("problem:\n  use: onemax\nsearch:\n  select: 1.5\n", 4, "search.select", "a number in (0, 1]"),
    ("problem:\n  use: onemax\nsearch:\n  method: annealing\n", 4, "search.method", "one of tree, forest"),
    ("problem:\n  use: onemax\nstop:\n  evaluations: 1e5\n", 4, "stop.evaluations", "e-notation"),
    ("problem:\n  use: onemax\nsearch:\n  elitism: maybe\n", 4, "search.elitism", "True or False"),
    (
        "problem:\n  use: onemax\nsearch:\n  population: 500\nstop:\n  evaluations: 100\n",
        6,
        "stop.evaluations",
        "smaller than one population",
    ),
    ("problem:\n  use: onemx\n", 2, "problem.use", "did you mean 'onemax'"),
    ("problem:\n  use: onemax\n  size: 10\n", 3, "problem.size", "has no parameter 'size'"),
    ("search:\n  method: tree\n", 1, "", "no 'problem' section"),
    ("problem:\n  n: 10\n", 1, "problem", "needs a 'use' key"),
    ("problem: [1, 2]\n", 1, "problem", "expected a mapping"),
    ("problem:\n  use: onemax\nseed: -1\n", 3, "seed", "a whole number >= 0"),
    ("problem:\n  use: onemax\n  n: [oops\n", 4, "", "flow sequence at line 3"),
    ("- just\n- a list\n", 1, "", "expected a mapping"),
    ("problem:\n  use: onemax\nstop:\n  target: best\n", 4, "stop.target", "'optimum'"),
]


@pytest.mark.parametrize("text, line, key, fragment", BAD)
def test_bad_configs_name_file_line_key_and_expectation(tmp_path, text, line, key, fragment):
    path = tmp_path / "bad.yaml"
    path.write_text(text)
    with pytest.raises(ConfigError) as info:
        load_run_config(path)
    message = str(info.value)
    assert message.startswith(f"{path}:{line}: "), message
    if key:
        assert f"'{key}'" in message
    assert fragment in message
    assert "\n" not in message


def test_missing_file_and_bad_override(tmp_path):
    with pytest.raises(ConfigError, match="no such file"):
        load_run_config(tmp_path / "absent.yaml")
    path = write(tmp_path, "problem:\n  use: onemax\n")
    with pytest.raises(
        ConfigError,
        match=r"command line \(--set\): 'search.population': The 'population' parameter must be a whole number",
    ):
        load_run_config(path, ["search.population=many"])
    with pytest.raises(ConfigError, match="KEY=VALUE"):
        load_run_config(path, ["search.population"])
