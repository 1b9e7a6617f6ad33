"""Carry out a run config: build the problem, run the search, write the run folder."""

from __future__ import annotations

from pathlib import Path
from typing import Callable, Optional

from optim import __version__
from optim.config import RunConfig
from optim.errors import ConfigError
from optim.records import RunFolder
from optim.search import Search, SearchResult

__all__ = ["build_problem", "execute", "RunOutcome"]


def build_problem(config: RunConfig):
    """The config's problem; loader errors become ConfigErrors pointing at ``problem.use``."""
    import problems

    params = {k: v for k, v in config.problem.items() if k != "use"}
    # instance files named in a config are found relative to the config file
    if isinstance(params.get("path"), str) and not Path(params["path"]).expanduser().is_absolute():
        params["path"] = str(config.base_dir / params["path"])
    try:
        return problems.make_problem(config.problem["use"], params, base_dir=config.base_dir)
    except problems.ProblemError as exc:
        source = str(config.path) if config.path is not None else ""
        line = None
        if config.path is not None:
            from optim.config import read_yaml

            line = read_yaml(config.path).line(("problem", "use"))
        raise ConfigError(str(exc), source, line, "problem.use") from None


class RunOutcome:
    """A finished (or stopped) run: the result and where its records are."""

    def __init__(self, result: SearchResult, folder: RunFolder, problem):
        self.result, self.folder, self.problem = result, folder, problem


def _tree_edges_record(generation: int, model) -> Optional[dict]:
    if model is None or not hasattr(model, "edges"):
        return None
    edges = model.edges()
    return {
        "generation": generation,
        "edges": [[int(p), int(c), round(float(model.edge_information[c]), 8)] for p, c in edges],
    }


def execute(
    config: RunConfig,
    problem=None,
    on_generation: Optional[Callable] = None,
) -> RunOutcome:
    """Run ``config`` to the end, writing its run folder as it goes."""
    problem = problem if problem is not None else build_problem(config)
    folder = RunFolder.create(config.out, config.name, config.seed)
    resolved = config.to_dict()
    resolved["problem_summary"] = problem.describe()
    resolved["version"] = __version__
    folder.write_config(resolved)
    search = Search(problem, config.search, config.stop, seed=config.seed, keep_evaluated=True)

    def record(s: Search, entry: dict) -> None:
        folder.append_log(entry)
        failures = s.evaluator.take_failures()
        if failures:
            folder.append(RunFolder.FAILURES, [dict(f.to_dict(), generation=entry["generation"]) for f in failures])
        tree = _tree_edges_record(entry["generation"], s.method.model())
        if tree is not None:
            folder.append(RunFolder.TREES, [tree])
        if on_generation is not None:
            on_generation(s, entry)

    result = search.run(record)
    summary = result.to_dict()
    summary["version"] = __version__
    summary["problem"] = problem.name
    summary["variable_names"] = problem.variable_names
    folder.write_result(summary)
    folder.write_evaluated(*search.evaluated())
    if result.model is not None and hasattr(result.model, "to_networkx"):
        folder.write_tree(result.model.to_networkx(problem.variable_names))
    return RunOutcome(result, folder, problem)
