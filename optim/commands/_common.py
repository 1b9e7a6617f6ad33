"""Pieces shared by the command modules (private)."""

from __future__ import annotations

import time

__all__ = ["CAUTION", "Progress", "print_run_summary"]

CAUTION = (
    "Caution: an objective can be any program or Python code you point the config at. optim runs it "
    "with your user rights, many times, possibly in parallel. Only run configs you trust, and tune a "
    "staging copy rather than a live production system."
)


class Progress:
    """A progress line: rewritten in place on a terminal (a few times a second at most),
    an occasional plain line otherwise."""

    def __init__(self, stream, budget: int, quiet: bool = False):
        self.stream, self.budget, self.quiet = stream, budget, quiet
        self.tty = hasattr(stream, "isatty") and stream.isatty()
        self.interval = 0.25 if self.tty else 5.0
        self.last = 0.0
        self.width = 0

    def update(self, search, record: dict, force: bool = False) -> None:
        if self.quiet:
            return
        self.budget = search.stop.evaluations
        now = time.monotonic()
        if not force and now - self.last < self.interval:
            return
        self.last = now
        entropy = record.get("model_entropy")
        parts = [
            f"gen {record['generation']:>4}",
            f"evals {record['evaluations']:>8,}/{self.budget:,}",
            f"best {record['best']:.6g}" if record.get("best") is not None else "best -",
        ]
        if entropy is not None:
            parts.append(f"entropy {entropy:8.3f}")
        if record.get("failures"):
            parts.append(f"failures {record['failures']}")
        line = "  ".join(parts)
        if self.tty:
            pad = max(0, self.width - len(line))
            self.stream.write("\r" + line + " " * pad)
            self.width = len(line)
        else:
            self.stream.write(line + "\n")
        self.stream.flush()

    def started(self, folder) -> None:
        if not self.quiet:
            self.stream.write(f"run folder {folder.path}\n")
            self.stream.flush()

    def close(self) -> None:
        if self.tty and self.width and not self.quiet:
            self.stream.write("\n")
            self.stream.flush()


def print_run_summary(outcome) -> None:
    """The lines ``optim run`` and ``optim resume`` end with."""
    from optim.search import STOP_REASONS

    result, problem = outcome.result, outcome.problem
    reason = STOP_REASONS.get(result.stop_reason, result.stop_reason)
    print(
        f"best score   {result.best_score:.10g}  ({problem.goal}; stopped because it {reason})"
        if result.stop_reason in ("target", "budget")
        else f"best score   {result.best_score:.10g}  ({problem.goal}; stopped: {reason})"
    )
    if problem.optimum is not None:
        print(f"optimum      {problem.optimum:.10g}  ({problem.optimum_source or 'known'})")
    start = _first_start_score(outcome)
    if start is not None:
        print(f"vs start     {_compare_with_start(result.best_score, start, problem.goal)}")
    print(f"solution     {result.solution_text}")
    print(
        f"evaluations  {result.evaluations:,} in {result.generations} generations"
        + (
            f", target first reached at {result.evaluations_to_target:,}"
            if result.evaluations_to_target is not None
            else ""
        )
    )
    if result.failures:
        print(f"failures     {result.failures} (see failures.jsonl)")
    print(f"run folder   {outcome.folder.path}")
    from optim.errors import OptimError
    from optim.explain import run_summary

    try:
        lines = run_summary(outcome.folder.path)
    except OptimError as exc:  # a summary that cannot be made never fails the finished run
        lines = [f"(no summary: {exc})"]
    for line in lines:
        print(line)


def _first_start_score(outcome):
    """The score of the problem's first starting candidate in this run, or None if it has none or it failed."""
    import numpy as np

    start = outcome.problem.initial_candidates()
    evaluated = outcome.folder.read_evaluated()
    if start is None or len(start) == 0 or evaluated is None:
        return None
    candidates, scores, _ = evaluated
    first = np.asarray(start, dtype=np.uint8).reshape(-1, outcome.problem.n)[0]
    where = np.flatnonzero(np.all(candidates == first, axis=1))
    if where.size == 0 or not np.isfinite(scores[where[0]]):
        return None
    return float(scores[where[0]])


def _compare_with_start(best: float, start: float, goal: str) -> str:
    """How the best score compares with the first starting candidate's, in words."""
    gain = start - best if goal == "minimize" else best - start
    if gain <= 0:
        return f"{start:.10g} (the first starting candidate); the search found nothing better"
    word = "smaller" if goal == "minimize" else "larger"
    share = f" ({100 * gain / abs(start):.1f} %)" if start != 0 else ""
    return f"{start:.10g} (the first starting candidate); the best is {gain:.10g}{share} {word}"
