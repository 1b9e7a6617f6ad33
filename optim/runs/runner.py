"""Carry out a run config: build the problem, run the search, write the run folder."""

from __future__ import annotations

import re
import shlex
import signal
import threading
from pathlib import Path
from typing import Callable, Optional, Tuple

from optim import __version__
from optim.runs.config import RunConfig
from optim.errors import ConfigError, OptimError, RunFolderError
from optim.runs.folder import RunFolder
from optim.search import SearchResult, open_search
from optim.evaluation import WorkerError

__all__ = ["build_problem", "execute", "resume", "RunOutcome", "Interrupted"]


def build_problem(config: RunConfig):
    """The config's problem; loader errors become ConfigErrors pointing at ``problem.use``."""
    from optim import objectives

    params = {k: v for k, v in config.problem.items() if k != "use"}
    # instance files named in a config are found relative to the config file
    if isinstance(params.get("path"), str) and not Path(params["path"]).expanduser().is_absolute():
        params["path"] = str(config.base_dir / params["path"])
    # a registered factory with a 'config_dir' parameter is told the config file's folder
    use = config.problem["use"]
    if "config_dir" not in params and use in objectives.PROBLEMS:
        if any(p.name == "config_dir" for p in objectives.factory_parameters(objectives.get_factory(use))):
            params["config_dir"] = str(config.base_dir)
    try:
        return objectives.make_problem(config.problem["use"], params, base_dir=config.base_dir)
    except objectives.ProblemError as exc:
        source = str(config.path) if config.path is not None else ""
        line, key = None, "problem.use"
        if config.path is not None and config.path.exists():
            from optim.runs.config import read_yaml

            doc = read_yaml(config.path)
            line = doc.line(("problem", "use"))
            named = _parameter_named_in(str(exc), params)
            if named is not None and ("problem",) + named[:1] in doc.lines:
                line, key = doc.line(("problem",) + named), "problem." + ".".join(named)
        raise ConfigError(str(exc), source, line, key) from None


_KEY_PATH = re.compile(r"(?:^|: )([A-Za-z_]\w*(?:\[\d+\]|\.[A-Za-z_]\w*)*)(?:: | must )")


def _parameter_named_in(message: str, params: dict):
    """The config key path a factory's message starts with (``variables[1].values: …``, ``n must …``).

    Returns the path as a tuple of keys (list indices as text) when its first key is one of the
    problem's parameters, else ``None``; used to point an error at the right line.
    """
    for match in _KEY_PATH.finditer(message):
        parts = tuple(p for p in re.split(r"[.\[\]]+", match.group(1)) if p)
        if parts and parts[0] in params:
            return parts
    return None


class RunOutcome:
    """A finished run: the result and where its records are."""

    def __init__(self, result: SearchResult, folder: RunFolder, problem):
        self.result, self.folder, self.problem = result, folder, problem


class Interrupted(OptimError):
    """The run was stopped by a signal after saving a checkpoint; ``resume_command`` continues it."""

    def __init__(self, signum: int, folder: RunFolder):
        self.signum, self.folder = signum, folder
        self.resume_command = f"optim resume {shlex.quote(str(folder.path))}"
        name = signal.Signals(signum).name
        super().__init__(f"stopped by {name}; checkpoint saved. Continue with: {self.resume_command}")

    @property
    def exit_status(self) -> int:
        return 128 + self.signum


def _record_tree(folder: RunFolder, generation: int, method) -> None:
    """Append the generation's tree to ``trees.jsonl`` when the method's model is a tree or forest."""
    model = method.model()
    if model is None or not hasattr(model, "edges"):
        return
    edges = model.edges()
    folder.append_tree(generation, edges, model.edge_information[edges[:, 1]], method.fitted_on)


class _SignalGuard:
    """Turns SIGINT/SIGTERM into an orderly stop.

    During a generation's search step the signal aborts the step at once (its
    partial work is discarded and the state from before it is saved); while
    records are being written it only sets a flag, so every write completes.
    """

    SIGNALS = (signal.SIGINT, signal.SIGTERM)

    def __init__(self):
        self.received: Optional[int] = None
        self.in_step = False
        self._previous = {}

    def _handle(self, signum, frame):
        self.received = signum
        if self.in_step:
            self.in_step = False
            raise _StepAborted()

    def __enter__(self):
        if threading.current_thread() is threading.main_thread():
            for sig in self.SIGNALS:
                self._previous[sig] = signal.signal(sig, self._handle)
        return self

    def __exit__(self, *exc):
        for sig, previous in self._previous.items():
            signal.signal(sig, previous)
        return False


class _StepAborted(BaseException):
    """Raised inside a search step by the signal handler (not an Exception, so user code cannot swallow it)."""


def _checkpoint(folder: RunFolder, state: dict, rows: int) -> None:
    info = {
        "version": __version__,
        "generation": state["generation"],
        "evaluations": state["evaluations"],
        "evaluated_rows": rows,
    }
    folder.write_checkpoint(state, info)


def _drive(
    config: RunConfig,
    problem,
    folder: RunFolder,
    on_generation: Optional[Callable],
    checkpoint: Optional[Tuple[dict, int]] = None,
) -> RunOutcome:
    """The loop shared by new and resumed runs: step, record, checkpoint, stop cleanly on signals.

    ``checkpoint`` is ``(state, evaluated_rows)`` of a resumed run; the folder is cut back to it.
    """
    every, rows = config.checkpoint_every, 0
    with _SignalGuard() as guard, open_search(problem, config.search, config.stop, config.seed) as search:
        if checkpoint is not None:
            state, rows = checkpoint
            search.set_state(state)
            folder.cut_back(search.generation, rows, problem.n)
            folder.remove_stale_temporaries()
        while not search.finished and guard.received is None:
            before = search.get_state()
            try:
                guard.in_step = True
                entry = search.step()
                guard.in_step = False
            except _StepAborted:
                search.evaluator.take_failures()
                _checkpoint(folder, before, rows)
                raise Interrupted(guard.received, folder) from None
            except WorkerError as exc:  # e.g. the Dask scheduler was lost: keep what came before this step
                search.evaluator.take_failures()
                _checkpoint(folder, before, rows)
                raise type(exc)(
                    f"{exc}; checkpoint saved. Continue with: optim resume {shlex.quote(str(folder.path))}"
                ) from None
            finally:
                guard.in_step = False
            folder.append_evaluated(search.last_candidates, search.last_scores, entry["generation"])
            rows += search.last_candidates.shape[0]
            failures = search.evaluator.take_failures()
            if failures:
                folder.append_failures(entry["generation"], [f.to_dict() for f in failures])
            _record_tree(folder, entry["generation"], search.method)
            folder.append_log(entry)
            if search.finished or guard.received is not None or (every and search.generation % every == 0):
                _checkpoint(folder, search.get_state(), rows)
            if on_generation is not None:
                on_generation(search, entry)
        if guard.received is not None and not search.finished:
            raise Interrupted(guard.received, folder)
    result = search.result()
    summary = result.to_dict()
    summary["version"] = __version__
    summary["problem"] = problem.name
    summary["variable_names"] = problem.variable_names
    folder.finish_evaluated(problem.n)
    if result.model is not None and hasattr(result.model, "to_networkx"):
        folder.write_tree(result.model.to_networkx(problem.variable_names))
    folder.write_result(summary)
    return RunOutcome(result, folder, problem)


def execute(
    config: RunConfig, problem=None, on_generation: Optional[Callable] = None, on_start: Optional[Callable] = None
) -> RunOutcome:
    """Run ``config`` to the end, writing its run folder as it goes (``on_start(folder)`` once it exists)."""
    problem = problem if problem is not None else build_problem(config)
    folder = RunFolder.create(config.out, config.name, config.seed)
    if on_start is not None:
        on_start(folder)
    folder.write_config(config.to_dict())
    folder.write_info(
        {
            "version": __version__,
            "config_file": str(config.path) if config.path is not None else None,
            "config_dir": str(config.base_dir),
            "problem": problem.describe(),
            "variable_names": problem.variable_names,
        }
    )
    return _drive(config, problem, folder, on_generation)


def resume(run_dir, on_generation: Optional[Callable] = None) -> RunOutcome:
    """Continue a stopped run from its last checkpoint, exactly as if it had never stopped."""
    folder = RunFolder(run_dir)
    if not folder.path.is_dir():
        raise RunFolderError(f"{folder.path}: no such run folder")
    info = folder.read_info()
    finished = folder.read_result()
    if finished is not None:
        raise RunFolderError(
            f"{folder.path}: this run is finished ({finished.get('stop_reason')}, best score "
            f"{finished.get('best_score')}); there is nothing to resume"
        )
    state, saved = folder.read_checkpoint()
    if saved.get("version") != __version__:
        raise RunFolderError(
            f"{folder.path}: the run was made by optim {saved.get('version')}, this is optim "
            f"{__version__}; resume it with that version"
        )
    config = folder.read_run_config()
    config.path = Path(info["config_dir"]) / "config.yaml"  # relative problem paths as in the original run
    problem = build_problem(config)
    return _drive(config, problem, folder, on_generation, (state, int(saved["evaluated_rows"])))
