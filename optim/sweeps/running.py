"""Run every job of a sweep, locally or on a Dask cluster, into a resumable results store.

The store is the folder ``<out>/<name>/``:

``sweep.yaml``
    The resolved sweep config (every default filled in, every label explicit).
``results.jsonl``
    One JSON object per finished job (see :func:`run_job` for the keys),
    appended by the parent process only, each as one ``write`` of a whole
    line followed by ``fsync``.
``curves/<job>.json``
    The job's best-so-far curve, ``{"evaluations": [...], "best": [...]}``
    with one pair per generation, written atomically *before* the job's
    results line.

Running a sweep again skips the jobs already in ``results.jsonl`` (a torn
last line, left by a kill in the middle of a write, is cut off first), so a
sweep stopped at any moment resumes without losing or duplicating a record.
Each job's seed depends on its identity only (see :mod:`optim.sweeps.config`),
so the results are the same whatever the number of workers or the backend;
only ``seconds`` (wall-clock time) differs.
"""

from __future__ import annotations

import contextlib
import dataclasses
import os
import sys
import time
from dataclasses import dataclass
from pathlib import Path
from typing import Iterator, List, Optional, Tuple

import yaml

from optim import __version__
from optim.errors import ConfigError, OptimError, RunFolderError
from optim.files import atomic_write, read_jsonl, to_json
from optim.search import StopRules, run_search
from optim.sweeps.config import Job, SweepConfig

__all__ = ["SweepStore", "SweepOutcome", "SweepProgress", "run_job", "run_sweep", "build_job_problem"]


def build_job_problem(use: str, params: dict, base_dir):
    """The problem of a job; a relative ``path`` parameter is resolved against ``base_dir``."""
    from optim import objectives

    params = dict(params)
    if isinstance(params.get("path"), str) and not Path(params["path"]).expanduser().is_absolute():
        params["path"] = str(Path(base_dir) / params["path"])
    return objectives.make_problem(use, params, base_dir=base_dir)


def _finite_or_none(value) -> Optional[float]:
    value = float(value)
    return value if value == value and abs(value) != float("inf") else None


def run_job(job: Job, stop: StopRules, base_dir: str) -> Tuple[dict, dict]:
    """Run one job to its end and return ``(record, curve)``.

    The record has the keys ``job``, ``problem`` and ``method`` (labels),
    ``use``, ``problem_params``, ``params`` (the method's complete settings),
    ``seed`` (the seed index), ``run_seed``, ``goal``, ``target``, ``budget``,
    ``best_score``, ``evaluations``, ``generations``, ``hit_target``,
    ``evaluations_to_target`` (null when the target was not reached),
    ``stop_reason``, ``failures``, ``seconds`` and ``version``.
    """
    started = time.perf_counter()
    problem = build_job_problem(job.problem.use, job.problem.params, base_dir)
    result = run_search(problem, job.method.settings, stop, seed=job.run_seed)
    seconds = time.perf_counter() - started
    record = {
        "job": job.job,
        "problem": job.problem.label,
        "method": job.method.label,
        "use": job.problem.use,
        "problem_params": dict(job.problem.params),
        "params": dataclasses.asdict(job.method.settings),
        "seed": job.seed_index,
        "run_seed": job.run_seed,
        "goal": problem.goal,
        "target": None if result.target is None else float(result.target),
        "budget": int(stop.evaluations),
        "best_score": _finite_or_none(result.best_score),
        "evaluations": int(result.evaluations),
        "generations": int(result.generations),
        "hit_target": result.evaluations_to_target is not None,
        "evaluations_to_target": result.evaluations_to_target,
        "stop_reason": result.stop_reason,
        "failures": int(result.failures),
        "seconds": round(seconds, 4),
        "version": __version__,
    }
    curve = {
        "job": job.job,
        "evaluations": [int(entry["evaluations"]) for entry in result.history],
        "best": [None if entry["best"] is None else _finite_or_none(entry["best"]) for entry in result.history],
    }
    return record, curve


class SweepStore:
    """The folder of one sweep's results (see the module docstring for its layout)."""

    CONFIG, RESULTS, CURVES = "sweep.yaml", "results.jsonl", "curves"

    def __init__(self, path):
        self.path = Path(path)

    @property
    def results_path(self) -> Path:
        return self.path / self.RESULTS

    def curve_path(self, job_id: str) -> Path:
        return self.path / self.CURVES / f"{job_id}.json"

    def prepare(self, config: SweepConfig) -> None:
        """Create the folder, check it holds the same kind of sweep, write ``sweep.yaml``, cut a torn line."""
        try:
            (self.path / self.CURVES).mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise RunFolderError(f"cannot create the sweep folder {self.path}: {exc.strerror or exc}") from None
        resolved = config.to_dict()
        stored = self.read_config()
        if stored is not None:
            self._check_compatible(stored, resolved)
        resolved["version"] = __version__
        atomic_write(self.path / self.CONFIG, yaml.safe_dump(resolved, sort_keys=False).encode("utf-8"))
        self._cut_torn_line()

    def _check_compatible(self, stored: dict, resolved: dict) -> None:
        where = self.path / self.CONFIG
        if stored.get("seed") != resolved["seed"]:
            raise RunFolderError(
                f"{where}: the finished jobs here used the root seed {stored.get('seed')!r}, the config now "
                f"says {resolved['seed']!r}; use another --out or name, or restore the seed"
            )
        old_stop, new_stop = stored.get("stop") or {}, resolved["stop"]
        for key in sorted(set(old_stop) & set(new_stop)):
            if old_stop[key] != new_stop[key]:
                raise RunFolderError(
                    f"{where}: the finished jobs here used stop.{key} = {old_stop[key]!r}, the config now says "
                    f"{new_stop[key]!r}; use another --out or name, or restore the stop rules"
                )

    def _cut_torn_line(self) -> None:
        path = self.results_path
        if not path.exists():
            return
        data = path.read_bytes()
        if data and not data.endswith(b"\n"):
            with path.open("r+b") as handle:
                handle.truncate(data.rfind(b"\n") + 1)
                handle.flush()
                os.fsync(handle.fileno())

    def read_config(self) -> Optional[dict]:
        path = self.path / self.CONFIG
        if not path.exists():
            return None
        return yaml.safe_load(path.read_text(encoding="utf-8"))

    def records(self) -> List[dict]:
        """The finished jobs' records, first record of each job id, in file order."""
        seen, unique = set(), []
        for record in read_jsonl(self.results_path):
            if record.get("job") not in seen:
                seen.add(record.get("job"))
                unique.append(record)
        return unique

    def finished_jobs(self) -> set:
        return {record["job"] for record in self.records()}

    def add(self, record: dict, curve: dict) -> None:
        """Write the job's curve, then append its record as one synced write of a whole line."""
        atomic_write(self.curve_path(record["job"]), (to_json(curve) + "\n").encode("utf-8"))
        line = (to_json(record) + "\n").encode("utf-8")
        fd = os.open(self.results_path, os.O_WRONLY | os.O_APPEND | os.O_CREAT, 0o644)
        try:
            written = os.write(fd, line)
            while written < len(line):
                written += os.write(fd, line[written:])
            os.fsync(fd)
        finally:
            os.close(fd)

    def curve(self, job_id: str) -> Optional[dict]:
        import json

        path = self.curve_path(job_id)
        if not path.exists():
            return None
        return json.loads(path.read_text(encoding="utf-8"))


class SweepProgress:
    """``jobs done/total`` with an estimate of the time left, on one line (a few updates a second at most)."""

    def __init__(self, stream, total: int, done: int, quiet: bool = False):
        self.stream, self.total, self.done, self.quiet = stream, total, done, quiet
        self.start_done = done
        self.tty = hasattr(stream, "isatty") and stream.isatty()
        self.interval = 0.25 if self.tty else 5.0
        self.started = time.monotonic()
        self.last = -float("inf")
        self.width = 0

    def line(self, now: float) -> str:
        elapsed = now - self.started
        ran = self.done - self.start_done
        left = self.total - self.done
        if ran and left:
            estimate = f"about {_duration(elapsed / ran * left)} left"
        else:
            estimate = "estimating time left" if left else "done"
        return f"jobs {self.done}/{self.total}  elapsed {_duration(elapsed)}  {estimate}"

    def advance(self, count: int = 1, force: bool = False) -> None:
        self.done += count
        if self.quiet:
            return
        now = time.monotonic()
        if not force and now - self.last < self.interval and self.done < self.total:
            return
        self.last = now
        text = self.line(now)
        if self.tty:
            self.stream.write("\r" + text + " " * max(0, self.width - len(text)))
            self.width = len(text)
        else:
            self.stream.write(text + "\n")
        self.stream.flush()

    def close(self) -> None:
        if self.tty and self.width and not self.quiet:
            self.stream.write("\n")
            self.stream.flush()


def _duration(seconds: float) -> str:
    seconds = int(round(seconds))
    hours, rest = divmod(seconds, 3600)
    minutes, seconds = divmod(rest, 60)
    return f"{hours}:{minutes:02d}:{seconds:02d}" if hours else f"{minutes}:{seconds:02d}"


@dataclass
class SweepOutcome:
    """What :func:`run_sweep` did: the store, the job counts."""

    store: SweepStore
    total: int
    skipped: int
    ran: int


def _check_problems(config: SweepConfig) -> None:
    """Build every problem once in the parent, so a bad one fails before any job runs."""
    from optim import objectives

    for index, entry in enumerate(config.problems):
        try:
            build_job_problem(entry.use, entry.params, config.base_dir)
        except (objectives.ProblemError, ValueError, TypeError) as exc:
            from optim.runs.config import read_yaml

            source = str(config.path) if config.path is not None else ""
            line = read_yaml(config.path).line(("problems", str(index), "use")) if config.path else None
            raise ConfigError(str(exc), source, line, f"problems.{index}.use") from None


@contextlib.contextmanager
def _dask_client(dask, workers: int):
    """A ``distributed.Client``: the one given, one for an address, or one over a new LocalCluster."""
    try:
        import distributed
    except ImportError:
        raise OptimError(
            "running on Dask needs dask and distributed; install them with pip install 'optim[cluster]'"
        ) from None
    if isinstance(dask, distributed.Client):
        yield dask
        return
    if dask == "local":
        with (
            distributed.LocalCluster(
                n_workers=workers, threads_per_worker=1, processes=True, dashboard_address=None
            ) as cluster,
            distributed.Client(cluster) as client,
        ):
            yield client
        return
    try:
        client = distributed.Client(dask, timeout="20s")
    except OSError as exc:
        raise OptimError(f"cannot reach the Dask scheduler at {dask!r}: {exc}") from None
    with client:
        yield client


def _outcomes(pending: List[Job], config: SweepConfig, jobs: int, dask) -> Iterator[Tuple[dict, dict]]:
    from joblib import Parallel, delayed, parallel_config

    base_dir = str(config.base_dir)
    if dask is None and jobs == 1:
        for job in pending:
            yield run_job(job, config.stop, base_dir)
        return
    calls = (delayed(run_job)(job, config.stop, base_dir) for job in pending)
    if dask is None:
        yield from Parallel(n_jobs=jobs, return_as="generator_unordered")(calls)
        return
    with _dask_client(dask, jobs) as client, parallel_config(backend="dask", client=client):
        yield from Parallel(n_jobs=-1, return_as="generator_unordered")(calls)


def run_sweep(
    config: SweepConfig, out=None, jobs: Optional[int] = None, dask=None, progress_stream=None, quiet: bool = True
) -> SweepOutcome:
    """Run the jobs of ``config`` not yet in its results store.

    Parameters
    ----------
    config : SweepConfig
        The validated sweep.
    out : path, optional
        The folder the sweep's folder ``<name>/`` is made in (default: the config's ``out``).
    jobs : int, optional
        Local worker processes (joblib); with ``dask="local"`` the number of
        Dask workers (default 1 locally, 2 on a local Dask cluster).
    dask : str or distributed.Client, optional
        ``"local"`` for a new two-worker ``LocalCluster``, a scheduler address,
        or a client to use as it is.
    progress_stream : file, optional
        Where the progress line goes (default ``sys.stderr``); ``quiet`` turns it off.
    """
    if jobs is not None and jobs < 1:
        raise OptimError(f"--jobs must be at least 1; got {jobs}")
    workers = jobs if jobs is not None else (2 if dask == "local" else 1)
    store = SweepStore(Path(out if out is not None else config.out) / config.name)
    _check_problems(config)
    store.prepare(config)
    finished = store.finished_jobs()
    pending = [job for job in config.jobs if job.job not in finished]
    skipped = len(config.jobs) - len(pending)
    progress = SweepProgress(progress_stream or sys.stderr, len(config.jobs), skipped, quiet=quiet)
    ran = 0
    try:
        if pending:
            for record, curve in _outcomes(pending, config, workers, dask):
                store.add(record, curve)
                ran += 1
                progress.advance()
    finally:
        progress.close()
    return SweepOutcome(store, len(config.jobs), skipped, ran)
