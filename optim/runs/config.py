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

The defaults and the rules of the ``search`` and ``stop`` keys live in
:class:`optim.search.SearchSettings` and :class:`optim.search.StopRules`
(this module only places their errors in the file); the other defaults are
in :data:`TOP_LEVEL_DEFAULTS`. Every error names the file, the line and the
key, what was found and what was expected; an unknown key comes with the
nearest valid one.
"""

from __future__ import annotations

import dataclasses
import difflib
import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable, Dict, Optional, Sequence, Tuple

import yaml

from optim.errors import ConfigError, ParameterError, parameter_message
from optim.parameters import text, whole_number
from optim.search import SearchSettings, StopRules

__all__ = [
    "RunConfig",
    "load_run_config",
    "parse_run_config",
    "read_yaml",
    "YamlDocument",
    "Checker",
    "check_problem_parameters",
    "describe_value",
    "TOP_LEVEL_DEFAULTS",
    "SEARCH_KEYS",
    "STOP_KEYS",
]

#: Defaults of the top-level keys (``name`` defaults to the config file's stem).
TOP_LEVEL_DEFAULTS = {"seed": 0, "out": "runs", "checkpoint_every": 1}

_E_NOTATION = re.compile(r"^[-+]?(\d+\.?\d*|\.\d+)[eE][-+]?\d+$")


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
                        f"given twice, on lines {first_line[key]} and {line}; keep one",
                        source,
                        line,
                        ".".join(path + (key,)),
                    )
                first_line[key] = line
                _refuse_repeated_keys(value_node, path + (key,), source)
    elif isinstance(node, yaml.SequenceNode):
        for index, item in enumerate(node.value):
            _refuse_repeated_keys(item, path + (str(index),), source)


# -- values ---------------------------------------------------------------------------------------
def describe_value(value) -> str:
    """A value as an error message shows it; e-notation read as text comes with how to write it."""
    if isinstance(value, str) and _E_NOTATION.match(value.strip()):
        return (
            f"the text {value!r} (YAML reads e-notation without a decimal point as text; "
            f"write it out, e.g. 100000, or as 1.0e+5)"
        )
    if isinstance(value, (dict, list)):
        return f"a {'mapping' if isinstance(value, dict) else 'list'}"
    return repr(value)


#: The keys of the ``search`` section: the fields of SearchSettings, which holds their defaults and rules.
SEARCH_KEYS: Tuple[str, ...] = tuple(f.name for f in dataclasses.fields(SearchSettings))

#: The keys of the ``stop`` section: the fields of StopRules, which holds their defaults and rules.
STOP_KEYS: Tuple[str, ...] = tuple(f.name for f in dataclasses.fields(StopRules))

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
            what = "nothing" if value is None else describe_value(value)
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

    def value(self, rule: Callable, value, path: Sequence[str], **bounds):
        """``rule(name, value, **bounds)``, a rule of :mod:`optim.parameters`, with its error placed at ``path``."""
        name = next((part for part in reversed(path) if not part.isdigit()), "")
        try:
            return rule(name, value, **bounds)
        except ParameterError as error:
            self.fail(path, parameter_message(error.parameter, error.expected, describe_value(value)))

    def setting(self, settings_class, key: str, value, path: Sequence[str]):
        """``value`` of the field ``key`` of ``settings_class``, checked by the class itself.

        ``settings_class`` is :class:`~optim.search.SearchSettings` or :class:`~optim.search.StopRules`;
        a broken rule is placed at ``path``.
        """
        try:
            return getattr(settings_class(**{key: value}), key)
        except ParameterError as error:
            self.fail(path, parameter_message(error.parameter, error.expected, describe_value(value)))


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


def check_problem_parameters(
    checker: Checker, problem: dict, path: Tuple[str, ...] = ("problem",), extra_keys: Sequence[str] = ()
) -> None:
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
            checker.fail(path + (key,), f"the problem '{use}' has no parameter '{key}'; {hint}its parameters: {listed}")
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
        checker.fail(
            ("problem",),
            "the 'problem' section needs a 'use' key naming a registered problem, "
            "a 'path/to/file.py:callable' or a 'package.module:callable'",
        )
    problem["use"] = checker.value(text, problem["use"], ("problem", "use"))
    for key, value in problem.items():
        if isinstance(value, str) and _E_NOTATION.match(value.strip()):
            checker.fail(("problem", key), f"found {describe_value(value)}")
    if check_problem:
        check_problem_parameters(checker, problem)

    search_data = checker.mapping(data.get("search"), ("search",), required=False)
    checker.unknown(search_data, SEARCH_KEYS, ("search",))
    search = SearchSettings(**{k: checker.setting(SearchSettings, k, v, ("search", k)) for k, v in search_data.items()})

    stop_data = checker.mapping(data.get("stop"), ("stop",), required=False)
    checker.unknown(stop_data, STOP_KEYS, ("stop",))
    stop = StopRules(**{k: checker.setting(StopRules, k, v, ("stop", k)) for k, v in stop_data.items()})
    if isinstance(search.population, int) and stop.evaluations < search.population:
        where = ("stop", "evaluations") if "evaluations" in stop_data else ("search", "population")
        checker.fail(
            where,
            f"the evaluation budget ({stop.evaluations}) is smaller than one population "
            f"({search.population}); raise stop.evaluations or lower search.population",
        )

    seed = checker.value(whole_number, data.get("seed", TOP_LEVEL_DEFAULTS["seed"]), ("seed",), least=0)
    out = checker.value(text, data.get("out", TOP_LEVEL_DEFAULTS["out"]), ("out",))
    every = checker.value(
        whole_number,
        data.get("checkpoint_every", TOP_LEVEL_DEFAULTS["checkpoint_every"]),
        ("checkpoint_every",),
        least=0,
    )
    default_name = path.stem if path is not None else "run"
    name = checker.value(text, data.get("name", default_name), ("name",))
    if re.search(r"[/\\\0]", name):
        checker.fail(("name",), parameter_message("name", "a name usable in a folder name (no slashes)", repr(name)))
    return RunConfig(
        name=name, problem=problem, search=search, stop=stop, seed=seed, out=out, checkpoint_every=every, path=path
    )


def load_run_config(path, overrides: Sequence[str] = (), check_problem: bool = True) -> RunConfig:
    """Read and validate a run config file, applying ``--set``-style overrides first."""
    path = Path(path)
    doc = read_yaml(path)
    _apply_overrides(doc, overrides)
    return parse_run_config(doc, path=path.resolve(), check_problem=check_problem)
