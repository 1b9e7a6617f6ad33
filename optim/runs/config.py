"""Run configs: YAML (safe loading only) into typed settings, with clear errors.

A run config has the top-level keys ``name``, ``problem``, ``search``,
``stop``, ``seed`` and ``out``::

    name: trap-demo
    problem:
      use: trap          # a registered name, path/to/file.py:callable or package.module:callable
      n: 60              # every other key is a parameter of the problem's factory
    search:
      method: tree       # tree | forest | univariate | hillclimb | random
      population: 1000
    stop:
      evaluations: 100000
    seed: 1

Defaults live in :class:`optim.search.SearchSettings` and
:class:`optim.search.StopRules` and in :data:`TOP_LEVEL_DEFAULTS`. Every
error names the file, the line and the key, what was found and what was
expected; an unknown key comes with the nearest valid one.
"""

from __future__ import annotations

import dataclasses
import difflib
import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable, Dict, Optional, Sequence, Tuple

import yaml

from optim.errors import ConfigError
from optim.methods import METHODS
from optim.search import SearchSettings, StopRules

__all__ = [
    "RunConfig",
    "load_run_config",
    "parse_run_config",
    "read_yaml",
    "YamlDocument",
    "Checker",
    "check_problem_parameters",
    "integer",
    "number",
    "boolean",
    "text",
    "choice",
    "optional",
    "TOP_LEVEL_DEFAULTS",
    "SEARCH_KEYS",
    "STOP_KEYS",
]

#: Defaults of the top-level keys (``name`` defaults to the config file's stem).
TOP_LEVEL_DEFAULTS = {"seed": 0, "out": "runs", "checkpoint_every": 1}

_E_NOTATION = re.compile(r"^[-+]?(\d+\.?\d*|\.\d+)[eE][-+]?\d+$")


class _Bad(Exception):
    """Raised by a validator: ``expected`` says what the value should have been."""

    def __init__(self, expected: str):
        super().__init__(expected)
        self.expected = expected


# -- reading YAML with line numbers ------------------------------------------------------------
@dataclass
class YamlDocument:
    """Parsed YAML data plus the 1-based line of every mapping key, by key path."""

    data: Any
    source: str
    lines: Dict[Tuple[str, ...], int] = field(default_factory=dict)
    overridden: set = field(default_factory=set)

    def line(self, path: Sequence[str]) -> Optional[int]:
        """The line of ``path`` or of its nearest ancestor that has one."""
        path = tuple(path)
        while path:
            if path in self.lines:
                return self.lines[path]
            path = path[:-1]
        return self.lines.get((), None)


def _record_lines(node, path, lines):
    if isinstance(node, yaml.MappingNode):
        for key_node, value_node in node.value:
            if isinstance(key_node, yaml.ScalarNode):
                child = path + (str(key_node.value),)
                lines[child] = key_node.start_mark.line + 1
                _record_lines(value_node, child, lines)
    elif isinstance(node, yaml.SequenceNode):
        for index, item in enumerate(node.value):
            child = path + (str(index),)
            lines[child] = item.start_mark.line + 1
            _record_lines(item, child, lines)


def read_yaml(path) -> YamlDocument:
    """Read a YAML file with ``yaml.safe_load``; syntax errors become :class:`ConfigError`."""
    path = Path(path)
    source = str(path)
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise ConfigError("no such file", source) from None
    except IsADirectoryError:
        raise ConfigError("is a folder, not a config file", source) from None
    except (OSError, UnicodeDecodeError) as exc:
        raise ConfigError(f"cannot be read ({exc})", source) from None
    return parse_yaml_text(text, source)


def parse_yaml_text(text: str, source: str) -> YamlDocument:
    """Parse YAML text (safe loading only) and remember where each key stands."""
    try:
        data = yaml.safe_load(text)
        node = yaml.compose(text, Loader=yaml.SafeLoader)
    except yaml.YAMLError as exc:
        mark = getattr(exc, "problem_mark", None) or getattr(exc, "context_mark", None)
        line = mark.line + 1 if mark is not None else None
        problem = getattr(exc, "problem", None) or str(exc).splitlines()[0]
        context, context_mark = getattr(exc, "context", None), getattr(exc, "context_mark", None)
        if context and context_mark is not None and context_mark.line + 1 != line:
            problem += f" ({context} at line {context_mark.line + 1})"
        raise ConfigError(f"this is not valid YAML: {problem}", source, line) from None
    lines: Dict[Tuple[str, ...], int] = {(): 1}
    if node is not None:
        _refuse_repeated_keys(node, (), source)
        _record_lines(node, (), lines)
    return YamlDocument(data, source, lines)


def _refuse_repeated_keys(node, path: Tuple[str, ...], source: str) -> None:
    """Raise :class:`ConfigError` at the second of two equal keys of one mapping (YAML keeps the last silently)."""
    if isinstance(node, yaml.MappingNode):
        first_line: Dict[str, int] = {}
        for key_node, value_node in node.value:
            if isinstance(key_node, yaml.ScalarNode):
                key, line = str(key_node.value), key_node.start_mark.line + 1
                if key in first_line:
                    raise ConfigError(
                        f"given twice, on lines {first_line[key]} and {line}; keep one", source, line,
                        ".".join(path + (key,)),
                    )
                first_line[key] = line
                _refuse_repeated_keys(value_node, path + (key,), source)
    elif isinstance(node, yaml.SequenceNode):
        for index, item in enumerate(node.value):
            _refuse_repeated_keys(item, path + (str(index),), source)


# -- validators ---------------------------------------------------------------------------------
def _describe(value) -> str:
    if isinstance(value, str) and _E_NOTATION.match(value.strip()):
        return (f"the text {value!r} (YAML reads e-notation without a decimal point as text; "
                f"write it out, e.g. 100000, or as 1.0e+5)")
    if isinstance(value, (dict, list)):
        return f"a {'mapping' if isinstance(value, dict) else 'list'}"
    return repr(value)


def integer(low: Optional[int] = None, high: Optional[int] = None) -> Callable:
    """Validator for whole numbers (a float with no fractional part is accepted)."""
    bounds = (f" >= {low}" if low is not None else "") + (f" and <= {high}" if high is not None else "")
    expected = f"a whole number{bounds}"

    def check(value):
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise _Bad(expected)
        if isinstance(value, float) and (not value.is_integer()):
            raise _Bad(expected)
        value = int(value)
        if (low is not None and value < low) or (high is not None and value > high):
            raise _Bad(expected)
        return value

    return check


def number(low=None, high=None, low_open=False, high_open=False) -> Callable:
    """Validator for real numbers in an interval."""
    left = "(" if low_open else "["
    right = ")" if high_open else "]"
    if low is not None and high is not None:
        expected = f"a number in {left}{low}, {high}{right}"
    elif low is not None:
        expected = f"a number {'>' if low_open else '>='} {low}"
    else:
        expected = "a number"

    def check(value):
        if isinstance(value, bool) or not isinstance(value, (int, float)) or value != value:
            raise _Bad(expected)
        value = float(value)
        if low is not None and (value < low or (low_open and value == low)):
            raise _Bad(expected)
        if high is not None and (value > high or (high_open and value == high)):
            raise _Bad(expected)
        return value

    return check


def boolean(value):
    if not isinstance(value, bool):
        raise _Bad("true or false")
    return value


def text(value):
    if not isinstance(value, str) or not value.strip():
        raise _Bad("a non-empty text")
    return value


def choice(options: Sequence[str]) -> Callable:
    def check(value):
        if value not in options:
            raise _Bad("one of " + ", ".join(options))
        return value

    return check


def optional(check: Callable, expected_null: str = "null") -> Callable:
    def wrapped(value):
        if value is None:
            return None
        try:
            return check(value)
        except _Bad as bad:
            raise _Bad(f"{bad.expected}, or {expected_null}") from None

    return wrapped


def _target(value):
    if value is None or value == "optimum":
        return value
    try:
        return number()(value)
    except _Bad:
        raise _Bad("a number, 'optimum' (the problem's known optimum) or null (no target)") from None


def _failure_limit(value):
    expected = "a whole number of failures (>= 1) or a fraction of the evaluations in [0, 1)"
    if isinstance(value, bool) or not isinstance(value, (int, float)) or value != value or value < 0:
        raise _Bad(expected)
    if value >= 1 and not float(value).is_integer():
        raise _Bad(expected)
    return int(value) if value >= 1 else float(value)


def _population(value):
    if value == "auto":
        return value
    try:
        return integer(2)(value)
    except _Bad:
        raise _Bad("a whole number >= 2, or 'auto' (no fixed population: runs of doubling size share "
                   "the budget)") from None


#: Validators of the ``search`` keys; defaults come from SearchSettings.
SEARCH_KEYS: Dict[str, Callable] = {
    "method": choice(METHODS),
    "population": _population,
    "select": number(0, 1, low_open=True),
    "prior": number(0),
    "elitism": boolean,
    "alpha": number(0, 1, low_open=True, high_open=True),
    "jobs": integer(1),
    "cache": optional(boolean, "null (the problem decides)"),
    "timeout": optional(number(0, low_open=True), "null (no limit)"),
    "dask": optional(text, "null (evaluate on this machine)"),
}

#: Validators of the ``stop`` keys; defaults come from StopRules.
STOP_KEYS: Dict[str, Callable] = {
    "evaluations": integer(1),
    "target": _target,
    "patience": optional(integer(1)),
    "collapse": boolean,
    "max_failures": optional(_failure_limit),
}

_TOP_KEYS = ("name", "problem", "search", "stop", "seed", "out", "checkpoint_every")


@dataclass
class RunConfig:
    """A validated run config with every default filled in."""

    name: str
    problem: Dict[str, Any]
    search: SearchSettings
    stop: StopRules
    seed: int = 0
    out: str = "runs"
    checkpoint_every: int = 1
    path: Optional[Path] = None

    @property
    def base_dir(self) -> Path:
        """The folder user-objective paths are resolved against (the config file's folder)."""
        return self.path.parent if self.path is not None else Path.cwd()

    def to_dict(self) -> dict:
        """The resolved config, as written to a run folder's ``config.yaml``."""
        return {
            "name": self.name,
            "problem": dict(self.problem),
            "search": dataclasses.asdict(self.search),
            "stop": dataclasses.asdict(self.stop),
            "seed": self.seed,
            "out": self.out,
            "checkpoint_every": self.checkpoint_every,
        }


class Checker:
    """Validates one document and raises the first problem as a ConfigError."""

    def __init__(self, doc: YamlDocument):
        self.doc = doc

    def fail(self, path: Sequence[str], message: str):
        key = ".".join(path)
        if tuple(path) in self.doc.overridden:
            raise ConfigError(message, "command line (--set)", None, key)
        raise ConfigError(message, self.doc.source, self.doc.line(path), key)

    def mapping(self, value, path: Sequence[str], required: bool = True) -> dict:
        if value is None and not required:
            return {}
        if not isinstance(value, dict):
            what = "nothing" if value is None else _describe(value)
            self.fail(path, f"expected a mapping of keys to values; found {what}")
        for key in value:
            if not isinstance(key, str):
                self.fail(path, f"keys must be text; found {key!r}")
        return value

    def unknown(self, section: dict, valid: Sequence[str], path: Sequence[str]):
        for key in section:
            if key not in valid:
                close = difflib.get_close_matches(key, valid, n=1, cutoff=0.5)
                hint = f"did you mean '{close[0]}'? " if close else ""
                self.fail(tuple(path) + (key,), f"unknown key; {hint}valid keys here: {', '.join(valid)}")

    def value(self, check: Callable, value, path: Sequence[str]):
        try:
            return check(value)
        except _Bad as bad:
            self.fail(path, f"expected {bad.expected}; found {_describe(value)}")


def _apply_overrides(doc: YamlDocument, overrides: Sequence[str]) -> None:
    """Apply ``KEY.PATH=VALUE`` overrides (values parsed as YAML scalars) to ``doc.data``."""
    if doc.data is not None and not isinstance(doc.data, dict):
        return  # the document itself is wrong; validation says so
    for item in overrides:
        if "=" not in item:
            raise ConfigError(f"expected KEY=VALUE, e.g. search.population=800; found {item!r}", "--set")
        key, raw = item.split("=", 1)
        parts = key.strip().split(".")
        if not all(parts):
            raise ConfigError(f"expected a dotted key such as stop.evaluations; found {key!r}", "--set")
        try:
            value = yaml.safe_load(raw) if raw.strip() else None
        except yaml.YAMLError:
            value = raw
        if doc.data is None:
            doc.data = {}
        target = doc.data
        for part in parts[:-1]:
            if not isinstance(target, dict):
                break
            target = target.setdefault(part, {})
        if not isinstance(target, dict):
            raise ConfigError(f"cannot set {key!r}: '{'.'.join(parts[:-1])}' is not a mapping", "--set")
        target[parts[-1]] = value
        doc.overridden.add(tuple(parts))


def check_problem_parameters(checker: Checker, problem: dict, path: Tuple[str, ...] = ("problem",),
                             extra_keys: Sequence[str] = ()) -> None:
    """For registered problems, check the parameter names under ``path`` against the factory's signature.

    ``use`` and ``extra_keys`` (such as a sweep's ``label``) are not parameters.
    """
    from optim import objectives as registry

    path = tuple(path)
    use = problem["use"]
    if use not in registry.PROBLEMS:
        if ":" not in use:
            try:
                registry.get_factory(use)
            except registry.ProblemError as exc:
                checker.fail(path + ("use",), str(exc))
        return
    parameters = registry.factory_parameters(registry.get_factory(use))
    names = [p.name for p in parameters]
    for key in problem:
        if key != "use" and key not in extra_keys and key not in names:
            close = difflib.get_close_matches(key, names, n=1, cutoff=0.5)
            hint = f"did you mean '{close[0]}'? " if close else ""
            listed = ", ".join(names) if names else "none"
            checker.fail(path + (key,), f"the problem '{use}' has no parameter '{key}'; {hint}"
                                        f"its parameters: {listed}")
    for parameter in parameters:
        if parameter.default is registry.REQUIRED and parameter.name not in problem:
            checker.fail(path, f"the problem '{use}' needs the parameter '{parameter.name}'")


def parse_run_config(doc: YamlDocument, path: Optional[Path] = None, check_problem: bool = True) -> RunConfig:
    """Validate a parsed document into a :class:`RunConfig`."""
    checker = Checker(doc)
    data = checker.mapping(doc.data, ())
    checker.unknown(data, _TOP_KEYS, ())
    if "problem" not in data:
        checker.fail((), "the config has no 'problem' section; add one, e.g. 'problem: {use: onemax, n: 100}'")
    problem = dict(checker.mapping(data["problem"], ("problem",)))
    if "use" not in problem:
        checker.fail(("problem",), "the 'problem' section needs a 'use' key naming a registered problem, "
                                   "a 'path/to/file.py:callable' or a 'package.module:callable'")
    problem["use"] = checker.value(text, problem["use"], ("problem", "use"))
    for key, value in problem.items():
        if isinstance(value, str) and _E_NOTATION.match(value.strip()):
            checker.fail(("problem", key), f"found {_describe(value)}")
    if check_problem:
        check_problem_parameters(checker, problem)

    search_data = checker.mapping(data.get("search"), ("search",), required=False)
    checker.unknown(search_data, list(SEARCH_KEYS), ("search",))
    search_values = {k: checker.value(SEARCH_KEYS[k], v, ("search", k)) for k, v in search_data.items()}
    search = SearchSettings(**search_values)

    stop_data = checker.mapping(data.get("stop"), ("stop",), required=False)
    checker.unknown(stop_data, list(STOP_KEYS), ("stop",))
    stop_values = {k: checker.value(STOP_KEYS[k], v, ("stop", k)) for k, v in stop_data.items()}
    stop = StopRules(**stop_values)
    if isinstance(search.population, int) and stop.evaluations < search.population:
        where = ("stop", "evaluations") if "evaluations" in stop_data else ("search", "population")
        checker.fail(where, f"the evaluation budget ({stop.evaluations}) is smaller than one population "
                            f"({search.population}); raise stop.evaluations or lower search.population")

    seed = checker.value(integer(0), data.get("seed", TOP_LEVEL_DEFAULTS["seed"]), ("seed",))
    out = checker.value(text, data.get("out", TOP_LEVEL_DEFAULTS["out"]), ("out",))
    every = checker.value(integer(0), data.get("checkpoint_every", TOP_LEVEL_DEFAULTS["checkpoint_every"]),
                          ("checkpoint_every",))
    default_name = path.stem if path is not None else "run"
    name = checker.value(text, data.get("name", default_name), ("name",))
    if re.search(r"[/\\\0]", name):
        checker.fail(("name",), f"expected a name usable in a folder name (no slashes); found {name!r}")
    return RunConfig(name=name, problem=problem, search=search, stop=stop, seed=seed, out=out,
                     checkpoint_every=every, path=path)


def load_run_config(path, overrides: Sequence[str] = (), check_problem: bool = True) -> RunConfig:
    """Read and validate a run config file, applying ``--set``-style overrides first."""
    path = Path(path)
    doc = read_yaml(path)
    _apply_overrides(doc, overrides)
    return parse_run_config(doc, path=path.resolve(), check_problem=check_problem)
