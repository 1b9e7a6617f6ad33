"""Peak memory of a run, for ``optim bench``: measured in a child process.

The child imports optim, notes its peak resident set size so far, runs a
few generations of the tree method on OneMax, and reports the peak resident
set size of the whole process: ``VmHWM`` of ``/proc/self/status`` where there
is one (Linux), else ``resource.getrusage(RUSAGE_SELF).ru_maxrss``. (On Linux
``ru_maxrss`` is no use here: it keeps the peak of the parent the child was
forked from across ``exec``.) The peak includes the interpreter and numpy;
the peak after the imports is reported beside it, so the run's own share is
their difference.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path
from typing import Sequence

__all__ = ["measure_memory", "child_main", "MEMORY_METHOD"]

#: How the figure is obtained, as written to bench.json.
MEMORY_METHOD = "peak resident set size of a child process (VmHWM of /proc/self/status, else ru_maxrss)"


def _peak_megabytes() -> float:
    try:
        with open("/proc/self/status", encoding="ascii") as status:
            for line in status:
                if line.startswith("VmHWM:"):
                    return int(line.split()[1]) / 1024.0  # kB
    except OSError:
        pass
    import resource

    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    # Linux reports kibibytes, macOS bytes.
    return peak / (1024.0 * 1024.0) if sys.platform == "darwin" else peak / 1024.0


def child_main(arguments: Sequence[str]) -> None:
    """Entry point of the child: ``n population generations seed``; prints one JSON line."""
    n, population, generations, seed = (int(a) for a in arguments)
    from optim.objectives import make_problem
    from optim.search import SearchSettings, StopRules, open_search

    baseline = _peak_megabytes()
    with open_search(
        make_problem("onemax", {"n": n}),
        SearchSettings(method="tree", population=population),
        StopRules(evaluations=10**12, target=None, collapse=False),
        seed=seed,
    ) as search:
        for _ in range(generations):
            search.step()
    print(json.dumps({"baseline_mb": baseline, "peak_mb": _peak_megabytes(), "evaluations": search.evaluations}))


def measure_memory(n: int, population: int, generations: int, seed: int = 0, timeout: float = 1800.0) -> dict:
    """Run the child and return its figures (``peak_mb``, ``baseline_mb``, ``run_mb``) with the settings."""
    if sys.platform.startswith("win"):  # no resource module
        return {"n": n, "population": population, "method": MEMORY_METHOD, "error": "not available on Windows"}
    root = str(Path(__file__).resolve().parent.parent)
    env = dict(os.environ)
    env["PYTHONPATH"] = root + (os.pathsep + env["PYTHONPATH"] if env.get("PYTHONPATH") else "")
    code = "import sys; from optim.bench.memory import child_main; child_main(sys.argv[1:])"
    completed = subprocess.run(
        [sys.executable, "-c", code, str(n), str(population), str(generations), str(seed)],
        capture_output=True,
        text=True,
        env=env,
        timeout=timeout,
    )
    row = {"n": n, "population": population, "generations": generations, "method": MEMORY_METHOD}
    if completed.returncode != 0:
        last = (completed.stderr.strip().splitlines() or ["no output"])[-1]
        row["error"] = f"the child process failed (status {completed.returncode}): {last}"
        return row
    figures = json.loads(completed.stdout.strip().splitlines()[-1])
    row.update(
        peak_mb=figures["peak_mb"],
        baseline_mb=figures["baseline_mb"],
        run_mb=figures["peak_mb"] - figures["baseline_mb"],
        evaluations=figures["evaluations"],
    )
    return row
