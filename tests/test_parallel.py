"""Whole runs evaluated in parallel: the same records whatever runs the objective, and faults survived.

The reference for every parallel run is the serial run of the same config
and seed (the objective evaluated in this process); a fault that ends a
worker (``os._exit``) or hangs is compared with the serial run of the same
objective raising an ordinary exception instead. Dask runs use a real
``LocalCluster`` (one per module) and, for losing the scheduler, a real
``dask scheduler`` process; they are skipped when distributed is missing.
"""

import json
import os
import re
import subprocess
import sys
import threading
import time
from pathlib import Path

import numpy as np
import pytest
import yaml

from optim import objectives
from optim.cli import main as optim_main
from optim.runs.config import load_run_config
from optim.errors import ConfigError
from optim.evaluation import Evaluator, candidate_text
from optim.files import read_jsonl
from optim.runs.folder import RunFolder
from optim.runs.runner import execute, resume
from optim.evaluation import ClusterUnavailable, WorkerError
from optim.evaluation.shipping import worker_status

ROOT = Path(__file__).resolve().parents[1]
OBJECTIVES = Path(__file__).resolve().parent / "data" / "objectives_parallel" / "objectives.py"
TIMING = ("seconds", "time")


def write_config(tmp_path, name, objective, problem=None, search=None, stop=None, seed=5):
    data = {
        "name": name,
        "problem": {"use": f"{OBJECTIVES}:{objective}", "n": 16, **(problem or {})},
        "search": {"method": "tree", "population": 40, **(search or {})},
        "stop": {"evaluations": 300, "target": None, "max_failures": None, **(stop or {})},
        "seed": seed,
        "out": str(tmp_path / name),
    }
    path = tmp_path / f"{name}.yaml"
    path.write_text(yaml.safe_dump(data, sort_keys=False))
    return path


def run(path, on_generation=None):
    return execute(load_run_config(path), on_generation=on_generation)


def contents(folder):
    """What a run records, timing fields aside."""
    folder = RunFolder(folder)
    candidates, scores, generation = folder.read_evaluated()
    return {
        "log": [{k: v for k, v in r.items() if k not in TIMING} for r in folder.read_log()],
        "result": folder.read_result(),
        "trees": read_jsonl(folder.file(RunFolder.TREES)),
        "failures": read_jsonl(folder.file(RunFolder.FAILURES)),
        "evaluated": (candidates.tobytes(), np.nan_to_num(scores, nan=-1.0).tolist(), generation.tolist()),
    }


def without_failure_kinds(found):
    """The records with each failure's kind and message left out (a crash or timeout versus an exception)."""
    found = dict(found)
    found["failures"] = [{k: v for k, v in f.items() if k not in ("kind", "message")} for f in found["failures"]]
    return found


@pytest.fixture(scope="module")
def cluster():
    distributed = pytest.importorskip("distributed")
    import dask

    with dask.config.set({"distributed.scheduler.allowed-failures": 0}):  # the first worker death fails a task
        local = distributed.LocalCluster(
            n_workers=2,
            threads_per_worker=1,
            processes=True,
            dashboard_address=None,
            scheduler_kwargs={"dashboard_address": "127.0.0.1:0"},
            silence_logs=50,
        )
    client = distributed.Client(local)
    yield local, client
    client.close()
    local.close()


# -- the same records whatever runs the objective -------------------------------------------------
def test_the_same_run_serially_with_two_jobs_and_on_a_dask_cluster(tmp_path, cluster):
    local, _ = cluster
    found = {}
    for label, search in [("serial", {}), ("jobs", {"jobs": 2}), ("dask", {"dask": local.scheduler_address})]:
        found[label] = contents(run(write_config(tmp_path, label, "score", search=search)).folder.path)
    assert found["serial"]["failures"], "the objective's occasional fault should show in this run"
    assert len(found["serial"]["log"]) > 3
    assert found["jobs"] == found["serial"]
    assert found["dask"] == found["serial"]


def test_a_local_dask_cluster_lives_as_long_as_the_run(tmp_path):
    pytest.importorskip("distributed")
    serial = contents(run(write_config(tmp_path, "serial", "score", stop={"evaluations": 120})).folder.path)
    seen = []
    outcome = run(
        write_config(tmp_path, "local", "score", search={"dask": "local"}, stop={"evaluations": 120}),
        on_generation=lambda search, record: seen.append(search.evaluator._backend),
    )
    backend = seen[0]
    assert backend.kind == "dask" and all(b is backend for b in seen)
    assert backend._client is None and backend._cluster is None  # closed with the run
    assert contents(outcome.folder.path) == serial


def test_the_objective_reaches_each_dask_worker_once_per_run(cluster):
    local, client = cluster
    problem = objectives.make_problem(f"{OBJECTIVES}:score", {"n": 16})
    X = np.random.default_rng(8).integers(0, 2, size=(30, 16), dtype=np.uint8)
    before = {w: s["installs"] for w, s in client.run(worker_status).items()}
    with Evaluator(problem, dask=local.scheduler_address) as evaluator:
        for _ in range(3):
            assert np.array_equal(evaluator(X), Evaluator(problem)(X))
        token = evaluator._backend.token
        during = client.run(worker_status)
    assert set(during) == set(before)
    for worker, status in during.items():
        assert status["installs"] == before[worker] + 1 and token in status["objectives"]
    assert all(token not in s["objectives"] for s in client.run(worker_status).values())  # removed at close


# -- faults at scale ------------------------------------------------------------------------------
@pytest.mark.parametrize("where", ["jobs", "dask"])
def test_a_worker_killed_mid_generation_is_charged_to_its_candidate(tmp_path, cluster, where):
    search = {"jobs": 2} if where == "jobs" else {"dask": cluster[0].scheduler_address}
    stop = {"evaluations": 160}
    reference = contents(
        run(write_config(tmp_path, "raise", "troublemaker", {"fault": "raise"}, stop=stop)).folder.path
    )
    crashed = contents(run(write_config(tmp_path, "exit", "troublemaker", {"fault": "exit"}, search, stop)).folder.path)
    culprit = candidate_text(np.arange(16) % 2)
    assert [(f["candidate"], f["kind"]) for f in reference["failures"]] == [(culprit, "exception")]
    assert [(f["candidate"], f["kind"]) for f in crashed["failures"]] == [(culprit, "crash")]
    assert without_failure_kinds(crashed) == without_failure_kinds(reference)


@pytest.mark.parametrize("where", ["jobs", "dask"])
def test_a_hanging_evaluation_times_out_and_the_run_goes_on(tmp_path, cluster, where):
    search = {"jobs": 2, "timeout": 1} if where == "jobs" else {"dask": cluster[0].scheduler_address, "timeout": 1}
    stop = {"evaluations": 160}
    reference = contents(
        run(write_config(tmp_path, "raise", "troublemaker", {"fault": "raise"}, stop=stop)).folder.path
    )
    started = time.monotonic()
    hung = contents(
        run(write_config(tmp_path, "hang", "troublemaker", {"fault": "hang", "seconds": 60}, search, stop)).folder.path
    )
    took = time.monotonic() - started
    culprit = candidate_text(np.arange(16) % 2)
    assert [(f["candidate"], f["kind"]) for f in hung["failures"]] == [(culprit, "timeout")]
    assert without_failure_kinds(hung) == without_failure_kinds(reference)
    assert took < 40  # the 60 s sleep was stopped after 1 s (generous: worker restarts on a busy machine)


def test_every_fault_kind_is_recorded_and_the_run_completes(tmp_path):
    module = sys.modules[objectives.make_problem(f"{OBJECTIVES}:faults", {"n": 16}).function.__module__]
    for label, search in [("serial", {}), ("jobs", {"jobs": 2})]:
        folder = RunFolder(run(write_config(tmp_path, label, "faults", search=search)).folder.path)
        result = folder.read_result()
        assert result["stop_reason"] in ("budget", "collapsed") and result["evaluations"] > 40
        candidates, scores, _ = folder.read_evaluated()
        codes = 4 * candidates[:, 0].astype(int) + 2 * candidates[:, 1] + candidates[:, 2]
        failures = read_jsonl(folder.file(RunFolder.FAILURES))
        expected = [
            (candidate_text(x), module.FAULTS[c]) for x, c in zip(candidates, codes, strict=True) if c in module.FAULTS
        ]
        assert [(f["candidate"], f["kind"]) for f in failures] == expected
        assert {kind for _, kind in expected} == {"exception", "nan", "inf", "shape", "type"}
        assert np.all(np.isnan(scores[codes < 6])) and np.all(scores[codes >= 6] == candidates[codes >= 6].sum(1))
        assert result["failures"] == len(failures)


def test_the_cache_counts_calls_and_hits_and_changes_nothing_else(tmp_path):
    stop = {"evaluations": 400}
    plain = contents(run(write_config(tmp_path, "plain", "score", {"n": 7}, {"cache": False}, stop)).folder.path)
    cached = contents(run(write_config(tmp_path, "cached", "score", {"n": 7}, {"cache": True}, stop)).folder.path)
    candidates = np.frombuffer(cached["evaluated"][0], dtype=np.uint8).reshape(-1, 7)
    generation = np.array(cached["evaluated"][2])
    for record in cached["log"]:
        so_far = candidates[generation <= record["generation"]]
        distinct = np.unique(so_far, axis=0).shape[0]
        assert record["objective_calls"] == distinct  # counted independently from the evaluated candidates
        assert record["objective_calls"] + record["cache_hits"] == record["evaluations"]
    assert cached["log"][-1]["cache_hits"] > 0
    assert all(r["cache_hits"] == 0 and r["objective_calls"] == r["evaluations"] for r in plain["log"])
    counts = ("cache_hits", "objective_calls", "failures")  # a failed candidate served again is no new fault
    assert [{k: v for k, v in r.items() if k not in counts} for r in cached["log"]] == [
        {k: v for k, v in r.items() if k not in counts} for r in plain["log"]
    ]
    assert cached["evaluated"] == plain["evaluated"]
    module = sys.modules[objectives.make_problem(f"{OBJECTIVES}:score", {"n": 7}).function.__module__]
    unlucky = np.all(candidates[:, :4] == module.UNLUCKY, axis=1)
    assert plain["log"][-1]["failures"] == len(plain["failures"]) == int(unlucky.sum())
    assert cached["log"][-1]["failures"] == len(cached["failures"]) == np.unique(candidates[unlucky], axis=0).shape[0]
    assert len(cached["failures"]) < len(plain["failures"])


# -- losing the scheduler -------------------------------------------------------------------------
def _start_scheduler_and_worker(tmp_path):
    env = dict(os.environ, PYTHONPATH=os.pathsep.join([str(ROOT), os.environ.get("PYTHONPATH", "")]))
    address_file = tmp_path / "scheduler.json"
    scheduler = subprocess.Popen(
        [
            sys.executable,
            "-m",
            "distributed.cli.dask_scheduler",
            "--port",
            "0",
            "--no-dashboard",
            "--scheduler-file",
            str(address_file),
        ],
        stdout=subprocess.DEVNULL,
        stderr=subprocess.DEVNULL,
        env=env,
    )
    give_up = time.monotonic() + 60
    while time.monotonic() < give_up:
        try:
            address = json.loads(address_file.read_text())["address"]
            break
        except (OSError, ValueError, KeyError):
            time.sleep(0.05)
    else:
        scheduler.kill()
        pytest.fail("the dask scheduler did not start")
    worker = subprocess.Popen(
        [sys.executable, "-m", "distributed.cli.dask_worker", address, "--nthreads", "1", "--no-dashboard"],
        stdout=subprocess.DEVNULL,
        stderr=subprocess.DEVNULL,
        env=env,
    )
    return scheduler, worker, address


def test_losing_the_scheduler_stops_the_run_with_a_checkpoint_to_resume(tmp_path):
    pytest.importorskip("distributed")
    scheduler, worker, address = _start_scheduler_and_worker(tmp_path)
    search, stop = {"population": 10}, {"evaluations": 30}
    try:

        def kill_soon(found, record):
            if record["generation"] == 0:
                threading.Timer(0.1, scheduler.kill).start()  # while generation 1 is being evaluated

        with pytest.raises(ClusterUnavailable, match="lost the connection to the Dask scheduler") as caught:
            run(
                write_config(tmp_path, "lost", "sleepy", search=dict(search, dask=address), stop=stop),
                on_generation=kill_soon,
            )
    finally:
        scheduler.kill()
        worker.kill()
        scheduler.wait()
        worker.wait()
    message = str(caught.value)
    assert "checkpoint saved. Continue with: optim resume " in message
    [folder] = [p for p in (tmp_path / "lost").iterdir() if p.is_dir()]
    assert len(RunFolder(folder).read_log()) == 1 and RunFolder(folder).read_result() is None
    # the checkpoint holds the state before the lost generation: resumed here (without Dask) it gives the serial run
    config = folder / RunFolder.CONFIG
    data = yaml.safe_load(config.read_text())
    data["search"]["dask"] = None
    config.write_text(yaml.safe_dump(data, sort_keys=False))
    resumed = contents(resume(folder).folder.path)
    serial = contents(run(write_config(tmp_path, "serial", "sleepy", search=search, stop=stop)).folder.path)
    assert resumed == serial


def test_an_unreachable_scheduler_is_a_clear_error_with_a_checkpoint(tmp_path, monkeypatch):
    pytest.importorskip("distributed")
    monkeypatch.setattr("optim.evaluation.dask_backend.CONNECT_TIMEOUT", 1.0)
    path = write_config(tmp_path, "nowhere", "score", search={"dask": "tcp://127.0.0.1:1"})
    with pytest.raises(ClusterUnavailable, match="cannot reach the Dask scheduler at 'tcp://127.0.0.1:1'") as caught:
        run(path)
    assert "dask scheduler" in str(caught.value) and "checkpoint saved" in str(caught.value)
    [folder] = [p for p in (tmp_path / "nowhere").iterdir() if p.is_dir()]
    assert (folder / RunFolder.CHECKPOINT).exists() and RunFolder(folder).read_log() == []


def test_dask_missing_is_a_clear_error(tmp_path, monkeypatch):
    monkeypatch.setitem(sys.modules, "distributed", None)  # what an environment without it looks like to import
    problem = objectives.make_problem(f"{OBJECTIVES}:score", {"n": 4})
    with pytest.raises(WorkerError, match=re.escape("pip install 'optim[cluster]'")):
        Evaluator(problem, dask="local")(np.zeros((2, 4), np.uint8))


# -- the command line and the config ---------------------------------------------------------------
def test_run_flags_jobs_and_dask(tmp_path, cluster, capsys):
    path = write_config(tmp_path, "flags", "score", stop={"evaluations": 80})
    address = cluster[0].scheduler_address
    assert optim_main(["run", str(path), "--jobs", "2", "--dask", address, "--quiet"]) == 0
    [folder] = [p for p in (tmp_path / "flags").iterdir() if p.is_dir()]
    saved = yaml.safe_load((folder / RunFolder.CONFIG).read_text())["search"]
    assert saved["jobs"] == 2 and saved["dask"] == address and saved["timeout"] is None
    capsys.readouterr()
    assert optim_main(["run", str(path), "--jobs", "0", "--quiet"]) == 2
    assert "'search.jobs': The 'jobs' parameter must be a whole number >= 1" in capsys.readouterr().err


@pytest.mark.parametrize(
    "key, value, expected",
    [
        ("timeout", 0, "The 'timeout' parameter must be a number > 0, or None/null (no limit)"),
        ("timeout", "soon", "The 'timeout' parameter must be a number > 0, or None/null (no limit)"),
        ("dask", 8786, "The 'dask' parameter must be a non-empty text, or None/null (evaluate on this machine)"),
    ],
)
def test_config_checks_timeout_and_dask(tmp_path, key, value, expected):
    path = write_config(tmp_path, "bad", "score", search={key: value})
    with pytest.raises(ConfigError, match=re.escape(expected)) as caught:
        load_run_config(path)
    assert f"'search.{key}'" in str(caught.value) and str(caught.value).startswith(f"{path.resolve()}:")
    good = load_run_config(write_config(tmp_path, "good", "score", search={"timeout": 2.5, "dask": "local"}))
    assert (good.search.timeout, good.search.dask) == (2.5, "local")


# -- the throughput benchmark (its figures are reported, never asserted) --------------------------
def test_throughput_benchmark_reports_consistent_figures(monkeypatch):
    from optim.bench import throughput as bench_parallel

    monkeypatch.setattr("importlib.util.find_spec", lambda name: None)  # leave the Dask mode out: quick
    found = bench_parallel.throughput_benchmark(evaluations=4)
    assert [r["mode"] for r in found["rows"]] == ["serial", "jobs 2", "jobs 2, timeout"]
    assert [s["mode"] for s in found["skipped"]] == ["dask local, 2 workers"]
    for row in found["rows"]:
        assert row["evaluations"] == 4 and row["ideal_per_second"] == row["workers"] / found["sleep_seconds"]
        assert row["per_second"] == pytest.approx(4 / row["seconds"], rel=0.01)
        ideal = found["sleep_seconds"] * 4 / row["workers"]
        assert row["overhead_ms"] == pytest.approx(1000 * (row["seconds"] - ideal) / 4, abs=0.02)
    table = bench_parallel.format_throughput(found)
    assert table.count("\n| ") == 6 and "| jobs 2, timeout | 2 | 4 |" in table and "skipped:" in table
