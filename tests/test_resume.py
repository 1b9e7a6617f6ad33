"""Runs that survive: kill a run at many points, resume it, and get exactly the uninterrupted run."""

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

from optim.files import read_jsonl
from optim.runs.folder import RunFolder

ROOT = Path(__file__).resolve().parents[1]
DATA = Path(__file__).resolve().parent / "data" / "resume"
TIMING = ("seconds", "time")
ENV = dict(os.environ, PYTHONPATH=os.pathsep.join([str(ROOT), os.environ.get("PYTHONPATH", "")]))


def config(tmp_path, every=1, method="tree", use="trap", extra=""):
    path = tmp_path / f"run-{method}-{every}.yaml"
    problem = (
        "problem:\n  use: trap\n  n: 30\n  shuffle: true\n  seed: 4\n"
        if use == "trap"
        else f"problem:\n  use: {DATA / 'slow_trap.py'}:score\n  n: 30\n  vectorized: true\n"
    )
    path.write_text(
        f"name: survive\n{problem}search:\n  method: {method}\n  population: 120\n"
        f"stop:\n  evaluations: 6000\n  target: null\nseed: 3\ncheckpoint_every: {every}\n{extra}"
    )
    return path


def optim_cli(*args, **kwargs):
    return subprocess.run(
        [sys.executable, "-m", "optim", *args], capture_output=True, text=True, cwd=ROOT, env=ENV, **kwargs
    )


def run_folder(out):
    folders = sorted(p for p in Path(out).iterdir() if p.is_dir())
    assert len(folders) == 1, folders
    return folders[0]


def contents(folder):
    """Everything a run records, timing fields aside."""
    folder = RunFolder(folder)
    log = [{k: v for k, v in r.items() if k not in TIMING} for r in folder.read_log()]
    result = folder.read_result()
    candidates, scores, generation = folder.read_evaluated()
    return {
        "log": log,
        "result": result,
        "trees": read_jsonl(folder.file(RunFolder.TREES)),
        "evaluated": (candidates.tobytes(), np.nan_to_num(scores, nan=-1.0).tolist(), generation.tolist()),
    }


@pytest.fixture(scope="module")
def reference(tmp_path_factory):
    found = {}
    for every, method in [(1, "tree"), (3, "tree"), (2, "hillclimb")]:
        tmp = tmp_path_factory.mktemp(f"ref-{method}-{every}")
        done = optim_cli("run", str(config(tmp, every, method)), "--out", str(tmp / "out"), "--quiet")
        assert done.returncode == 0, done.stderr
        found[(every, method)] = contents(run_folder(tmp / "out"))
    return found


KILL_POINTS = [
    ("evaluation", 1, 1, "tree"),  # before the first generation is complete: nothing to resume from yet
    ("evaluation", 4, 1, "tree"),
    ("evaluation", 9, 3, "tree"),  # between checkpoints: generations after the checkpoint are redone
    ("after-log", 5, 1, "tree"),  # the log line is written, its checkpoint is not
    ("after-log", 7, 3, "tree"),
    ("checkpoint", 3, 1, "tree"),  # half of a checkpoint written to its temporary file
    ("checkpoint", 2, 3, "tree"),
    ("evaluation", 30, 2, "hillclimb"),
    ("after-log", 4, 2, "hillclimb"),
]


@pytest.mark.parametrize("mode, k, every, method", KILL_POINTS)
def test_sigkill_then_resume_equals_the_uninterrupted_run(tmp_path, reference, mode, k, every, method):
    out = tmp_path / "out"
    killed = subprocess.run(
        [
            sys.executable,
            str(DATA / "killer.py"),
            mode,
            str(k),
            "--",
            "run",
            str(config(tmp_path, every, method)),
            "--out",
            str(out),
            "--quiet",
        ],
        capture_output=True,
        text=True,
        cwd=ROOT,
        env=ENV,
    )
    assert killed.returncode == -signal.SIGKILL, killed.stderr
    folder = run_folder(out)
    assert not (folder / "result.json").exists()
    resumed = optim_cli("resume", str(folder), "--quiet")
    if not (folder / RunFolder.CHECKPOINT).exists():
        assert resumed.returncode == 2 and "no checkpoint" in resumed.stderr
        return
    assert resumed.returncode == 0, resumed.stderr
    assert contents(folder) == reference[(every, method)]
    assert not list(folder.glob(".*.tmp")), "a temporary file was left behind"


@pytest.mark.parametrize("signum, status", [(signal.SIGINT, 130), (signal.SIGTERM, 143)])
def test_interrupt_saves_a_checkpoint_prints_the_resume_command_and_resumes_exactly(tmp_path, signum, status):
    cfg = config(tmp_path, use="slow")
    whole = optim_cli("run", str(cfg), "--out", str(tmp_path / "whole"), "--quiet")
    assert whole.returncode == 0, whole.stderr
    expected = contents(run_folder(tmp_path / "whole"))
    out = tmp_path / "out"
    process = subprocess.Popen(
        [sys.executable, "-m", "optim", "run", str(cfg), "--out", str(out), "--quiet"],
        cwd=ROOT,
        env=ENV,
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
    )
    deadline = time.monotonic() + 60
    while time.monotonic() < deadline:  # wait until a few generations are logged
        logs = list(out.glob("*/log.jsonl")) if out.exists() else []
        if logs and len(logs[0].read_text().splitlines()) >= 3:
            break
        time.sleep(0.05)
    process.send_signal(signum)
    _, err = process.communicate(timeout=60)
    assert process.returncode == status, err
    folder = run_folder(out)
    assert f"optim resume {folder}" in err
    assert len(err.strip().splitlines()) == 1
    resumed = optim_cli("resume", str(folder), "--quiet")
    assert resumed.returncode == 0, resumed.stderr
    assert contents(folder) == expected


def test_finished_and_foreign_folders_are_refused_with_a_clear_message(tmp_path):
    out = tmp_path / "out"
    assert optim_cli("run", str(config(tmp_path)), "--out", str(out), "--quiet").returncode == 0
    folder = run_folder(out)
    again = optim_cli("resume", str(folder))
    assert again.returncode == 2 and "this run is finished" in again.stderr and "Traceback" not in again.stderr
    missing = optim_cli("resume", str(tmp_path / "nowhere"))
    assert missing.returncode == 2 and "no such run folder" in missing.stderr
    (tmp_path / "empty").mkdir()
    empty = optim_cli("resume", str(tmp_path / "empty"))
    assert empty.returncode == 2 and "not a run folder" in empty.stderr


def test_checkpoint_from_another_version_is_refused(tmp_path):
    from optim.runs.checkpoint import load_checkpoint, save_checkpoint

    out = tmp_path / "out"
    process = subprocess.run(
        [
            sys.executable,
            str(DATA / "killer.py"),
            "after-log",
            "3",
            "--",
            "run",
            str(config(tmp_path)),
            "--out",
            str(out),
            "--quiet",
        ],
        cwd=ROOT,
        env=ENV,
    )
    assert process.returncode == -signal.SIGKILL
    folder = run_folder(out)
    state, info = load_checkpoint(folder / RunFolder.CHECKPOINT)
    info["version"] = "0.0.1"
    save_checkpoint(folder / RunFolder.CHECKPOINT, state, info)
    refused = optim_cli("resume", str(folder))
    assert refused.returncode == 2 and "optim 0.0.1" in refused.stderr
    (folder / RunFolder.CHECKPOINT).write_bytes(b"not a checkpoint")
    broken = optim_cli("resume", str(folder))
    assert broken.returncode == 2 and "not a readable checkpoint" in broken.stderr
