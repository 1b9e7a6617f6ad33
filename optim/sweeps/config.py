"""Sweep configs: many problems × many methods × many seeds, validated with file:line errors.

A sweep config has the top-level keys ``name``, ``problems``, ``methods``,
``seeds``, ``stop``, ``seed`` and ``out``::

    name: tree-vs-hillclimb
    problems:                  # each entry is a run config's 'problem' plus an optional label
      - {use: trap, n: 60, shuffle: true, seed: 7, label: trap-3}
      - {use: onemax, n: 200}
    methods:                   # each entry is a run config's 'search' plus an optional label
      - {method: tree, population: [500, 1000]}   # a list expands into a grid
      - {method: hillclimb}
    seeds: 10                  # a count (seed indices 0..9) or a list of indices
    stop: {evaluations: 100000}
    seed: 0                    # root entropy of every job's seed

Seeding rule
------------
A job is identified by its *identity*: the problem (``use`` and its
parameters, as written), the method's settings (only those that differ from
the defaults of :class:`optim.search.SearchSettings`) and the seed index.
Labels, the order of the entries and the other jobs play no part. The
SHA-256 digest of the identity's canonical JSON (sorted keys, no spaces)
gives the job id (its first 16 hex digits) and four 32-bit words that
become the ``spawn_key`` of ``numpy.random.SeedSequence(entropy=seed,
spawn_key=...)``; the run's seed is the first 64-bit word that sequence
generates, shifted right by one bit (so it fits a signed 64-bit integer).
Adding a problem, a method or a seed therefore never changes another job's
seed or result.
"""

from __future__ import annotations

import dataclasses
import hashlib
import itertools
import json
import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Dict, List, Optional, Sequence, Tuple

import numpy as np

from optim.runs.config import (
    SEARCH_KEYS,
    STOP_KEYS,
    Checker,
    YamlDocument,
    check_problem_parameters,
    describe_value,
    read_yaml,
)
from optim.errors import ConfigError, parameter_message
from optim.methods import METHODS
from optim.parameters import text, whole_number
from optim.search import SearchSettings, StopRules

__all__ = [
    "ProblemEntry",
    "MethodEntry",
    "Job",
    "SweepConfig",
    "load_sweep_config",
    "parse_sweep_config",
    "job_identity",
    "job_seed",
    "expand_jobs",
    "SWEEP_KEYS",
]

#: The top-level keys of a sweep config.
SWEEP_KEYS = ("name", "problems", "methods", "seeds", "stop", "seed", "out")

_E_NOTATION = re.compile(r"^[-+]?(\d+\.?\d*|\.\d+)[eE][-+]?\d+$")
_SETTINGS_DEFAULTS = dataclasses.asdict(SearchSettings())


@dataclass(frozen=True)
class ProblemEntry:
    """One problem of a sweep: its label, ``use`` and parameters (as written)."""

    label: str
    use: str
    params: Dict[str, Any]

    def spec(self) -> dict:
        """``{"use": ..., **params}``, the problem part of a job's identity."""
        return {"use": self.use, **self.params}


@dataclass(frozen=True)
class MethodEntry:
    """One method of a sweep after grid expansion: its label and complete settings."""

    label: str
    settings: SearchSettings

    def changed(self) -> dict:
        """The settings that differ from the defaults (the method part of a job's identity)."""
        values = dataclasses.asdict(self.settings)
        return {k: v for k, v in values.items() if k not in _SETTINGS_DEFAULTS or v != _SETTINGS_DEFAULTS[k]}


@dataclass(frozen=True)
class Job:
    """One run of a sweep: a problem, a method and a seed index, with its id and derived seed."""

    job: str
    problem: ProblemEntry
    method: MethodEntry
    seed_index: int
    run_seed: int


@dataclass
class SweepConfig:
    """A validated sweep config with every default filled in."""

    name: str
    problems: List[ProblemEntry]
    methods: List[MethodEntry]
    seeds: List[int]
    stop: StopRules
    seed: int = 0
    out: str = "runs/sweeps"
    path: Optional[Path] = None
    jobs: List[Job] = field(default_factory=list)

    @property
    def base_dir(self) -> Path:
        """The folder relative problem paths are resolved against (the sweep file's folder)."""
        return self.path.parent if self.path is not None else Path.cwd()

    def to_dict(self) -> dict:
        """The resolved config, as written beside the results (``sweep.yaml``)."""
        return {
            "name": self.name,
            "problems": [dict(p.spec(), label=p.label) for p in self.problems],
            "methods": [dict(dataclasses.asdict(m.settings), label=m.label) for m in self.methods],
            "seeds": list(self.seeds),
            "stop": dataclasses.asdict(self.stop),
            "seed": self.seed,
            "out": self.out,
        }


# -- seeding ------------------------------------------------------------------------------------
def job_identity(problem: ProblemEntry, method: MethodEntry, seed_index: int) -> str:
    """The canonical JSON text that identifies a job (see the module's seeding rule)."""
    identity = {"problem": problem.spec(), "method": method.changed(), "seed": int(seed_index)}
    return json.dumps(identity, sort_keys=True, separators=(",", ":"))


def job_seed(identity: str, root: int) -> Tuple[str, int]:
    """``(job id, run seed)`` of a job from its identity and the sweep's root entropy."""
    digest = hashlib.sha256(identity.encode("utf-8")).digest()
    words = tuple(int.from_bytes(digest[i : i + 4], "little") for i in range(0, 16, 4))
    sequence = np.random.SeedSequence(entropy=int(root), spawn_key=words)
    run_seed = int(sequence.generate_state(1, np.uint64)[0]) >> 1
    return digest.hex()[:16], run_seed


def expand_jobs(
    problems: Sequence[ProblemEntry], methods: Sequence[MethodEntry], seeds: Sequence[int], root: int
) -> List[Job]:
    """Every (problem, method, seed index) job, problems outermost, with ids and seeds."""
    jobs = []
    for problem, method, seed_index in itertools.product(problems, methods, seeds):
        job_id, run_seed = job_seed(job_identity(problem, method, seed_index), root)
        jobs.append(Job(job_id, problem, method, int(seed_index), run_seed))
    return jobs


# -- validation ---------------------------------------------------------------------------------
def _parse_problems(checker: Checker, data, check_problem: bool) -> List[ProblemEntry]:
    if not isinstance(data, list) or not data:
        checker.fail(
            ("problems",),
            "expected a non-empty list of problems, each like a run config's "
            "'problem' (e.g. '- {use: onemax, n: 100}')",
        )
    entries = []
    for index, raw in enumerate(data):
        path = ("problems", str(index))
        problem = dict(checker.mapping(raw, path))
        if "use" not in problem:
            checker.fail(
                path,
                "each problem needs a 'use' key naming a registered problem, "
                "a 'path/to/file.py:callable' or a 'package.module:callable'",
            )
        use = checker.value(text, problem["use"], path + ("use",)).strip()
        for key, value in problem.items():
            if isinstance(value, str) and _E_NOTATION.match(value.strip()):
                checker.fail(path + (key,), f"found {describe_value(value)}")
        if check_problem:
            check_problem_parameters(checker, problem, path, extra_keys=("label",))
        label = checker.value(text, problem["label"], path + ("label",)) if "label" in problem else None
        params = {k: v for k, v in problem.items() if k not in ("use", "label")}
        entries.append((label, use, params, path))
    uses = [use for _, use, _, _ in entries]
    problems: List[ProblemEntry] = []
    specs: List[str] = []
    for label, use, params, path in entries:
        if label is None:
            label = use if uses.count(use) == 1 else " ".join([use] + [f"{k}={v}" for k, v in params.items()])
        problem = ProblemEntry(label, use, params)
        spec = json.dumps(problem.spec(), sort_keys=True)
        if spec in specs:
            checker.fail(
                path,
                f"this is the same problem as {problems[specs.index(spec)].label!r} "
                f"(each problem must differ in 'use' or in a parameter)",
            )
        problems.append(problem)
        specs.append(spec)
        _check_unique(checker, [p.label for p in problems], path, "problem label")
    return problems


def _check_unique(checker: Checker, labels: List[str], path, what: str) -> None:
    if labels.count(labels[-1]) > 1:
        checker.fail(path, f"two entries have the {what} {labels[-1]!r}; give each a distinct 'label'")


def _parse_methods(checker: Checker, data) -> List[MethodEntry]:
    if not isinstance(data, list) or not data:
        checker.fail(
            ("methods",),
            "expected a non-empty list of methods, each like a run config's 'search' "
            "(e.g. '- {method: tree, population: 1000}')",
        )
    methods: List[MethodEntry] = []
    identities: List[str] = []
    for index, raw in enumerate(data):
        path = ("methods", str(index))
        entry = checker.mapping(raw, path)
        checker.unknown(entry, SEARCH_KEYS + ("label",), path)
        if "method" not in entry:
            checker.fail(path, f"each method needs a 'method' key: one of {', '.join(METHODS)}")
        label = checker.value(text, entry["label"], path + ("label",)) if "label" in entry else None
        axes = []
        for key, value in entry.items():
            if key == "label":
                continue
            if isinstance(value, list):
                if not value:
                    checker.fail(path + (key,), "an empty list gives no settings to try; give at least one value")
                values = [checker.setting(SearchSettings, key, v, path + (key, str(i))) for i, v in enumerate(value)]
                axes.append((key, values, True))
            else:
                axes.append((key, [checker.setting(SearchSettings, key, value, path + (key,))], False))
        axes.sort(key=lambda axis: axis[0] != "method")
        method_is_grid = any(is_grid for key, _, is_grid in axes if key == "method")
        for combination in itertools.product(*[values for _, values, _ in axes]):
            settings = dict(zip([key for key, _, _ in axes], combination, strict=True))
            parts = [] if label is None and method_is_grid else [label or settings["method"]]
            parts += [
                settings[key] if key == "method" else f"{key}={settings[key]}" for key, _, is_grid in axes if is_grid
            ]
            method = MethodEntry(" ".join(parts), SearchSettings(**settings))
            identity = json.dumps(method.changed(), sort_keys=True)
            if identity in identities:
                other = methods[identities.index(identity)].label
                checker.fail(
                    path,
                    f"the settings of {method.label!r} are those of {other!r} "
                    f"(each method must differ in at least one setting)",
                )
            methods.append(method)
            identities.append(identity)
            _check_unique(checker, [m.label for m in methods], path, "method label")
    return methods


def _parse_seeds(checker: Checker, data) -> List[int]:
    if isinstance(data, list):
        if not data:
            checker.fail(("seeds",), "expected at least one seed index")
        seeds = [checker.value(whole_number, v, ("seeds", str(i)), least=0) for i, v in enumerate(data)]
        for i, value in enumerate(seeds):
            if value in seeds[:i]:
                checker.fail(("seeds", str(i)), f"the seed index {value} is listed twice")
        return seeds
    count = checker.value(whole_number, data, ("seeds",), least=1)
    return list(range(count))


def parse_sweep_config(doc: YamlDocument, path: Optional[Path] = None, check_problem: bool = True) -> SweepConfig:
    """Validate a parsed document into a :class:`SweepConfig` with its expanded jobs."""
    checker = Checker(doc)
    data = checker.mapping(doc.data, ())
    checker.unknown(data, SWEEP_KEYS, ())
    for key in ("problems", "methods"):
        if key not in data:
            checker.fail((), f"the sweep config has no '{key}' list")
    problems = _parse_problems(checker, data["problems"], check_problem)
    methods = _parse_methods(checker, data["methods"])
    seeds = _parse_seeds(checker, data.get("seeds", 1))

    stop_data = checker.mapping(data.get("stop"), ("stop",), required=False)
    checker.unknown(stop_data, STOP_KEYS, ("stop",))
    stop = StopRules(**{k: checker.setting(StopRules, k, v, ("stop", k)) for k, v in stop_data.items()})
    for method in methods:
        population = method.settings.population
        if isinstance(population, int) and stop.evaluations < population:
            checker.fail(
                ("stop", "evaluations") if "evaluations" in stop_data else ("methods",),
                f"the evaluation budget ({stop.evaluations}) is smaller than one population "
                f"({method.settings.population}) of {method.label!r}",
            )

    root = checker.value(whole_number, data.get("seed", 0), ("seed",), least=0)
    out = checker.value(text, data.get("out", "runs/sweeps"), ("out",))
    name = checker.value(text, data.get("name", path.stem if path is not None else "sweep"), ("name",))
    if re.search(r"[/\\\0]", name) or name in (".", ".."):
        checker.fail(("name",), parameter_message("name", "a name usable as a folder name (no slashes)", repr(name)))
    config = SweepConfig(
        name=name, problems=problems, methods=methods, seeds=seeds, stop=stop, seed=root, out=out, path=path
    )
    config.jobs = expand_jobs(problems, methods, seeds, root)
    return config


def load_sweep_config(path, check_problem: bool = True) -> SweepConfig:
    """Read and validate a sweep config file."""
    path = Path(path)
    doc = read_yaml(path)
    if doc.data is None:
        raise ConfigError("the file is empty; a sweep config needs 'problems' and 'methods' lists", str(path), 1)
    return parse_sweep_config(doc, path=path.resolve(), check_problem=check_problem)
