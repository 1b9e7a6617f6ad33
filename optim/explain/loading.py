"""Reading a run folder for ``optim explain``, through the run folder's own readers."""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import List, Optional

import numpy as np

from optim.errors import RunFolderError
from optim.runs.folder import RunFolder

__all__ = ["RunData", "load_run"]


@dataclass
class RunData:
    """What explain reads from a run folder."""

    path: Path
    problem: str
    goal: str
    method: str
    variable_names: List[str]
    cardinality: np.ndarray
    candidates: np.ndarray
    scores: np.ndarray
    generation: np.ndarray
    log: List[dict]
    trees: List[dict]
    search: dict
    result: Optional[dict]
    optimum: Optional[float] = None
    notes: List[str] = field(default_factory=list)

    @property
    def finished(self) -> bool:
        return self.result is not None

    @property
    def folder(self) -> RunFolder:
        """The run folder, for the records read only when needed (the last tree, for the pictures)."""
        return RunFolder(self.path)


def load_run(run_dir) -> RunData:
    """Read a finished (or stopped) run folder; a missing or incomplete folder raises RunFolderError."""
    folder = RunFolder(run_dir)
    path = folder.path
    if not path.is_dir():
        raise RunFolderError(f"{path}: no such run folder")
    config = folder.read_config()
    result = folder.read_result()
    info = folder.read_info(required=False) or {}
    described = info.get("problem") if isinstance(info.get("problem"), dict) else None
    described = described or config.get("problem_summary") or {}
    names = (result or {}).get("variable_names") or info.get("variable_names") or described.get("variable_names")
    n_hint = len(names) if names else described.get("n")
    evaluated = folder.read_evaluated(n_hint if isinstance(n_hint, int) else None)
    if evaluated is None:
        raise RunFolderError(
            f"{path}: incomplete run folder: no evaluated candidates ({RunFolder.EVALUATED}); "
            f"explain needs a run that finished or was stopped"
        )
    candidates, scores, generation = evaluated
    if (
        candidates.ndim != 2
        or not np.issubdtype(candidates.dtype, np.integer)
        or scores.shape != (candidates.shape[0],)
        or generation.shape != (candidates.shape[0],)
    ):
        raise RunFolderError(
            f"{folder.file(RunFolder.EVALUATED)}: expected candidates (count, n) of whole "
            f"numbers with one score and one generation each; found shapes "
            f"{candidates.shape}, {scores.shape}, {generation.shape}"
        )
    if candidates.shape[0] == 0:
        raise RunFolderError(f"{path}: the run evaluated no candidates; there is nothing to explain")
    n = candidates.shape[1]
    notes = []
    if not names:
        names = [f"x{i}" for i in range(n)]
        notes.append(f"The run folder does not name its variables; they are called x0 … x{n - 1}.")
    if len(names) != n:
        raise RunFolderError(f"{path}: result.json names {len(names)} variables but the candidates have {n}")
    goal = described.get("goal") or (config.get("problem") or {}).get("goal")
    if goal not in ("maximize", "minimize"):
        raise RunFolderError(
            f"{path}: cannot tell whether the run maximised or minimised (no problem goal in run.json or config.yaml)"
        )
    card = described.get("cardinality")
    if isinstance(card, int):
        cardinality = np.full(n, card, dtype=np.int64)
    elif isinstance(card, list) and len(card) == n:
        cardinality = np.asarray(card, dtype=np.int64)
    else:
        cardinality = np.maximum(candidates.max(axis=0).astype(np.int64) + 1, 2)
    if np.any(candidates.max(axis=0) >= cardinality) or candidates.min() < 0:
        raise RunFolderError(f"{folder.file(RunFolder.EVALUATED)}: candidate values exceed the variables' cardinality")
    search = config.get("search") if isinstance(config.get("search"), dict) else {}
    method = str(search.get("method") or (result or {}).get("method") or "unknown")
    return RunData(
        path=path,
        problem=str(described.get("name") or (result or {}).get("problem") or config.get("name") or "problem"),
        goal=goal,
        method=method,
        variable_names=[str(v) for v in names],
        cardinality=cardinality,
        candidates=candidates.astype(np.uint8),
        scores=scores.astype(np.float64),
        generation=generation.astype(np.int64),
        log=folder.read_log(),
        trees=folder.read_trees(n),
        search=search,
        result=result,
        optimum=float(described["optimum"]) if isinstance(described.get("optimum"), (int, float)) else None,
        notes=notes,
    )
