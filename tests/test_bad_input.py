"""A catalogue of malformed run configs: each gives one line naming file, line and key, exit status 2,
no traceback, and nothing written."""

import math

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from optim.cli import main
from optim.runs.config import load_run_config, parse_yaml_text, parse_run_config
from optim.errors import ConfigError

GOOD = """\
name: ok
problem:
  use: onemax
  n: 20
search:
  method: tree
  population: 50
stop:
  evaluations: 1000
seed: 1
"""

# (label, config text, expected line or None, fragment of the message)
CATALOGUE = [
    ("yaml syntax", "problem:\n  use: onemax\n   n: 3\n", 3, "not valid YAML"),
    ("tab indentation", "problem:\n\tuse: onemax\n", 2, "not valid YAML"),
    ("unclosed quote", "name: 'oops\nproblem:\n  use: onemax\n", None, "not valid YAML"),
    ("empty file", "", 1, "no 'problem' section"),
    ("a section twice", "problem:\n  use: onemax\n  n: 5\nproblem:\n  use: trap\n", 4, "given twice, on lines 1 and 4"),
    ("a key twice", "problem:\n  use: onemax\n  n: 5\n  n: 6\n", 4, "'problem.n': given twice, on lines 3 and 4"),
    ("top level list", "- problem\n", 1, "expected a mapping"),
    ("top level scalar", "just text\n", 1, "expected a mapping"),
    ("missing problem", "search:\n  method: tree\n", 1, "no 'problem' section"),
    ("problem not a mapping", "problem: onemax\n", 1, "'problem': expected a mapping"),
    ("problem without use", "problem:\n  n: 5\n", 1, "needs a 'use' key"),
    ("use not text", "problem:\n  use: 12\n", 2, "The 'use' parameter must be a non-empty text"),
    ("unknown top key", GOOD + "seeds: 3\n", 11, "unknown key; did you mean 'seed'"),
    ("unknown search key", GOOD.replace("method: tree", "methd: tree"), 6, "did you mean 'method'"),
    ("unknown stop key", GOOD.replace("evaluations: 1000", "evals: 1000"), 9, "'stop.evals': unknown key"),
    ("search not a mapping", "problem:\n  use: onemax\nsearch: tree\n", 3, "'search': expected a mapping"),
    ("stop as list", "problem:\n  use: onemax\nstop: [1, 2]\n", 3, "'stop': expected a mapping"),
    ("e-notation budget", GOOD.replace("evaluations: 1000", "evaluations: 1e5"), 9, "e-notation"),
    ("fractional budget", GOOD.replace("evaluations: 1000", "evaluations: 1000.5"), 9, "a whole number >= 1"),
    ("budget as text", GOOD.replace("evaluations: 1000", "evaluations: many"), 9, "Got 'many' instead"),
    ("zero population", GOOD.replace("population: 50", "population: 0"), 7, "a whole number >= 2"),
    ("negative population", GOOD.replace("population: 50", "population: -10"), 7, "a whole number >= 2"),
    ("population as bool", GOOD.replace("population: 50", "population: yes"), 7, "Got True instead"),
    ("select above one", GOOD.replace("method: tree", "method: tree\n  select: 1.2"), 7, "a number in (0, 1]"),
    ("select zero value", GOOD.replace("method: tree", "method: tree\n  select: 0"), 7, "a number in (0, 1]"),
    ("negative prior", GOOD.replace("method: tree", "method: tree\n  prior: -1"), 7, "a number >= 0"),
    ("alpha one", GOOD.replace("method: tree", "method: tree\n  alpha: 1"), 7, "a number in (0, 1)"),
    ("jobs zero", GOOD.replace("method: tree", "method: tree\n  jobs: 0"), 7, "a whole number >= 1"),
    ("unknown method", GOOD.replace("method: tree", "method: genetic"), 6, "one of tree, forest, univariate"),
    ("budget below population", GOOD.replace("evaluations: 1000", "evaluations: 10"), 9, "smaller than one population"),
    (
        "patience zero",
        GOOD.replace("evaluations: 1000", "evaluations: 1000\n  patience: 0"),
        10,
        "a whole number >= 1, or None/null",
    ),
    ("bad target", GOOD.replace("evaluations: 1000", "evaluations: 1000\n  target: best"), 10, "'optimum'"),
    (
        "max failures fraction",
        GOOD.replace("evaluations: 1000", "evaluations: 1000\n  max_failures: 2.5"),
        10,
        "a whole number of failures",
    ),
    ("negative seed", GOOD.replace("seed: 1", "seed: -4"), 10, "a whole number >= 0"),
    ("seed as text", GOOD.replace("seed: 1", "seed: abc"), 10, "Got 'abc' instead"),
    ("name with slash", GOOD.replace("name: ok", "name: a/b"), 1, "no slashes"),
    ("unknown problem", GOOD.replace("use: onemax", "use: onemaks"), 3, "did you mean 'onemax'"),
    ("unknown problem parameter", GOOD.replace("n: 20", "size: 20"), 4, "has no parameter 'size'"),
    ("bad problem value", GOOD.replace("n: 20", "n: -3"), 4, "'problem.n': problem 'onemax': n must be"),
    (
        "bad command option",
        "problem:\n  use: command\n  command: [echo, '{flags}']\n  variables:\n"
        "    - {flag: -a}\n    - {flg: -b}\n  score: {last_number: true}\n  goal: minimize\n",
        6,
        "'problem.variables.1': problem 'command': variables[1]: unknown key 'flg'",
    ),
    ("problem e-notation", GOOD.replace("n: 20", "n: 2e1"), 4, "e-notation"),
    ("objective file missing", GOOD.replace("use: onemax", "use: nowhere.py:score"), 3, "nowhere.py"),
    ("callable missing", GOOD.replace("use: onemax", "use: objective.py:absent"), 3, "absent"),
    ("module missing", GOOD.replace("use: onemax", "use: no_such_module_xyz:score"), 3, "no_such_module_xyz"),
    ("checkpoint negative", GOOD + "checkpoint_every: -1\n", 11, "a whole number >= 0"),
]


def _write(tmp_path, text):
    (tmp_path / "objective.py").write_text("def score(x):\n    return float(x.sum())\n")
    path = tmp_path / "bad.yaml"
    path.write_text(text)
    return path


@pytest.mark.parametrize("label, text, line, fragment", CATALOGUE, ids=[c[0] for c in CATALOGUE])
def test_each_bad_config_gives_one_clear_line_and_status_2(tmp_path, capsys, label, text, line, fragment):
    path = _write(tmp_path, text)
    out = tmp_path / "out"
    status = main(["run", str(path), "--out", str(out), "--quiet"])
    err = capsys.readouterr().err.strip()
    assert status == 2, err
    assert len(err.splitlines()) == 1, err
    assert err.startswith(f"optim: error: {path}" + (f":{line}: " if line else ""))
    assert fragment in err
    assert "Traceback" not in err
    assert not out.exists(), "nothing may be written for a bad config"


def test_catalogue_is_large_enough():
    assert len(CATALOGUE) >= 30


def test_unwritable_output_folder(tmp_path, capsys):
    path = _write(tmp_path, GOOD)
    blocker = tmp_path / "taken"
    blocker.write_text("a file where the output folder should be")
    status = main(["run", str(path), "--out", str(blocker / "runs"), "--quiet"])
    err = capsys.readouterr().err.strip()
    assert status == 2 and "cannot create the output folder" in err and len(err.splitlines()) == 1
    assert blocker.read_text().startswith("a file")


def test_config_given_as_a_folder_or_unreadable(tmp_path, capsys):
    assert main(["run", str(tmp_path)]) == 2
    assert "is a folder" in capsys.readouterr().err
    binary = tmp_path / "binary.yaml"
    binary.write_bytes(b"\xff\xfe\x00garbage")
    assert main(["run", str(binary)]) == 2
    assert "cannot be read" in capsys.readouterr().err


# -- property-based: the loader accepts or raises ConfigError, never anything else ------------------------------
yaml_scalars = st.one_of(
    st.none(),
    st.booleans(),
    st.integers(-(10**6), 10**6),
    st.floats(allow_nan=True, allow_infinity=True),
    st.text(max_size=12),
)
yaml_values = st.recursive(
    yaml_scalars,
    lambda inner: st.one_of(st.lists(inner, max_size=4), st.dictionaries(st.text(max_size=10), inner, max_size=4)),
    max_leaves=12,
)
keys = st.sampled_from(
    [
        "name",
        "problem",
        "search",
        "stop",
        "seed",
        "out",
        "use",
        "n",
        "method",
        "population",
        "select",
        "prior",
        "evaluations",
        "target",
        "patience",
        "collapse",
        "x",
    ]
)


def _is_whole(value, low):
    return isinstance(value, (int, float)) and not isinstance(value, bool) and value == int(value) and value >= low


def _is_fraction(value, low_open=True):
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        return False
    return (0 < value if low_open else 0 <= value) and value <= 1


def _check_documented_rules(config):
    """Restate the README's rules for every setting independently of the loader: an accepted config obeys them."""
    search, stop = config.search, config.stop
    assert search.method in ("tree", "forest", "univariate", "hillclimb", "random")
    assert search.population == "auto" or _is_whole(search.population, 2)
    assert _is_fraction(search.select)
    assert isinstance(search.prior, (int, float)) and not isinstance(search.prior, bool) and search.prior >= 0
    assert isinstance(search.elitism, bool) and isinstance(stop.collapse, bool)
    assert _is_fraction(search.alpha) and search.alpha < 1
    assert _is_whole(search.jobs, 1)
    assert _is_whole(stop.evaluations, 1)
    assert stop.target is None or stop.target == "optimum" or isinstance(stop.target, (int, float))
    assert stop.patience is None or _is_whole(stop.patience, 1)
    assert isinstance(config.problem.get("use"), str) and config.problem["use"]


def _loads(text):
    """Load ``text``; a config either fails with a ConfigError or obeys every documented rule."""
    try:
        doc = parse_yaml_text(text, "fuzz.yaml")
        config = parse_run_config(doc)
    except ConfigError:
        return False
    _check_documented_rules(config)
    return True


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.text(max_size=200))
def test_random_text_is_accepted_or_rejected_cleanly(text):
    _loads(text)


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.lists(st.tuples(st.sampled_from(["", "problem", "search", "stop"]), keys, yaml_values), max_size=5))
def test_mutations_of_a_valid_config_are_accepted_or_rejected_cleanly(mutations):
    import yaml

    data = yaml.safe_load(GOOD)
    for section, key, value in mutations:
        target = data if not section else data.setdefault(section, {})
        if isinstance(target, dict):
            target[key] = value
    try:
        text = yaml.safe_dump(data)
    except yaml.YAMLError:
        return
    _loads(text)


@pytest.mark.parametrize(
    "section, key, value",
    [
        ("search", "select", 1.5),
        ("search", "select", 0),
        ("search", "select", "half"),
        ("search", "population", 1),
        ("search", "population", "many"),
        ("search", "alpha", 1.0),
        ("search", "method", "annealing-of-doom"),
        ("search", "jobs", 0),
        ("search", "prior", -1),
        ("stop", "evaluations", 0),
        ("stop", "patience", 0),
        ("stop", "collapse", "sometimes"),
        ("", "nonsense", 1),
        ("search", "nonsense", 1),
    ],
)
def test_the_fuzzed_mutations_can_be_refused(section, key, value):
    """The property tests above would pass for a loader that accepted everything; these mutations must fail."""
    import yaml

    data = yaml.safe_load(GOOD)
    (data if not section else data[section])[key] = value
    assert _loads(yaml.safe_dump(data)) is False
    assert _loads(GOOD) is True


def test_valid_config_loads(tmp_path):
    assert load_run_config(_write(tmp_path, GOOD)).search.population == 50
