"""Sweeps: job expansion and seeding, identical results on every backend, resume after a kill, config errors."""

import hashlib
import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

from optim.cli import main
from optim.runs.config import parse_yaml_text, read_yaml
from optim.errors import ConfigError, RunFolderError
from optim.sweeps.running import SweepStore, run_sweep
from optim.sweeps.config import job_identity, load_sweep_config, parse_sweep_config

ROOT = Path(__file__).resolve().parents[1]

SMALL = """\
name: small
problems:
  - {use: trap, n: 12, k: 3, shuffle: true, seed: 3, label: trap-12}
  - {use: onemax, n: 16}
methods:
  - {method: tree, population: 60}
  - {method: hillclimb, population: 60}
seeds: 3
stop:
  evaluations: 1500
seed: 5
"""


def parse(text, name="sweep.yaml"):
    return parse_sweep_config(parse_yaml_text(text, name), path=Path("/nowhere") / name)


def write(tmp_path, text, name="sweep.yaml"):
    path = tmp_path / name
    path.write_text(text)
    return path


def comparable(store: SweepStore) -> dict:
    """Records by job id, without the wall-clock time, plus each job's curve."""
    records = {}
    for record in store.records():
        record = dict(record)
        record.pop("seconds")
        records[record["job"]] = (record, store.curve(record["job"]))
    return records


# -- expansion and seeding --------------------------------------------------------------------------
def test_a_list_value_expands_into_a_grid_with_labels():
    config = parse(
        SMALL.replace("{method: tree, population: 60}", "{method: tree, population: [60, 80], select: [0.3, 0.5]}")
    )
    labels = [m.label for m in config.methods]
    assert labels == [
        "tree population=60 select=0.3",
        "tree population=60 select=0.5",
        "tree population=80 select=0.3",
        "tree population=80 select=0.5",
        "hillclimb",
    ]
    assert [(m.settings.population, m.settings.select) for m in config.methods[:4]] == [
        (60, 0.3),
        (60, 0.5),
        (80, 0.3),
        (80, 0.5),
    ]
    assert len(config.jobs) == 2 * 5 * 3
    grid = parse(SMALL.replace("{method: tree, population: 60}", "{method: [tree, univariate], label: eda}"))
    assert [m.label for m in grid.methods] == ["eda tree", "eda univariate", "hillclimb"]


def test_seeds_are_a_count_or_a_list_of_indices():
    assert parse(SMALL).seeds == [0, 1, 2]
    assert parse(SMALL.replace("seeds: 3", "seeds: [4, 9]")).seeds == [4, 9]


def test_job_seeds_depend_on_the_job_identity_only():
    small = parse(SMALL)
    bigger = parse(
        SMALL.replace("seeds: 3", "seeds: 5")
        .replace(
            "  - {method: tree, population: 60}\n",
            "  - {method: univariate, population: 60}\n  - {method: tree, population: 60, label: renamed}\n",
        )
        .replace("problems:\n", "problems:\n  - {use: hiff, n: 16}\n")
    )
    key = lambda job: (job.problem.spec().__repr__(), json.dumps(job.method.changed(), sort_keys=True), job.seed_index)
    small_jobs = {key(j): j for j in small.jobs}
    bigger_jobs = {key(j): j for j in bigger.jobs}
    assert set(small_jobs) < set(bigger_jobs)
    for k, job in small_jobs.items():
        assert (bigger_jobs[k].job, bigger_jobs[k].run_seed) == (job.job, job.run_seed)
    assert len({j.run_seed for j in bigger.jobs}) == len(bigger.jobs)
    assert len({j.job for j in bigger.jobs}) == len(bigger.jobs)
    other_root = parse(SMALL.replace("seed: 5\n", "seed: 6\n"))
    assert {j.job for j in other_root.jobs} == {j.job for j in small.jobs}
    assert not {j.run_seed for j in other_root.jobs} & {j.run_seed for j in small.jobs}


def test_writing_a_default_value_out_does_not_change_the_job():
    plain = parse(SMALL)
    explicit = parse(SMALL.replace("{method: tree, population: 60}", "{method: tree, population: 60, select: 0.5}"))
    assert [(j.job, j.run_seed) for j in plain.jobs] == [(j.job, j.run_seed) for j in explicit.jobs]


def test_the_seeding_rule_is_the_documented_one():
    config = parse(SMALL)
    job = config.jobs[0]
    identity = job_identity(job.problem, job.method, job.seed_index)
    assert identity == (
        '{"method":{"population":60},"problem":{"k":3,"n":12,"seed":3,"shuffle":true,"use":"trap"},"seed":0}'
    )
    digest = hashlib.sha256(identity.encode()).digest()
    spawn_key = [int.from_bytes(digest[i : i + 4], "little") for i in range(0, 16, 4)]
    sequence = np.random.SeedSequence(entropy=5, spawn_key=spawn_key)
    assert job.job == digest.hex()[:16]
    assert job.run_seed == int(sequence.generate_state(1, np.uint64)[0]) >> 1


def test_adding_a_method_and_seeds_leaves_the_other_results_unchanged(tmp_path):
    first = write(tmp_path, SMALL, "first.yaml")
    second = write(
        tmp_path,
        SMALL.replace("seeds: 3", "seeds: 4").replace(
            "  - {method: hillclimb", "  - {method: univariate, population: 60}\n  - {method: hillclimb"
        ),
        "second.yaml",
    )
    a = run_sweep(load_sweep_config(first), out=tmp_path / "a")
    b = run_sweep(load_sweep_config(second), out=tmp_path / "b")
    a_records, b_records = comparable(a.store), comparable(b.store)
    assert len(a_records) == 12 and len(b_records) == 2 * 3 * 4
    for job, value in a_records.items():
        assert b_records[job] == value


# -- backends ------------------------------------------------------------------------------------------
@pytest.fixture(scope="module")
def serial_reference(tmp_path_factory):
    base = tmp_path_factory.mktemp("serial")
    config = load_sweep_config(write(base, SMALL))
    outcome = run_sweep(config, out=base / "out")
    assert outcome.ran == 12
    return config, comparable(outcome.store)


def test_serial_and_joblib_give_identical_results(tmp_path, serial_reference):
    config, reference = serial_reference
    pooled = run_sweep(config, out=tmp_path / "pooled", jobs=2)
    assert pooled.ran == 12 and len(reference) == 12
    assert comparable(pooled.store) == reference
    record = next(iter(reference.values()))[0]
    for key in (
        "job",
        "problem",
        "method",
        "params",
        "seed",
        "best_score",
        "evaluations",
        "hit_target",
        "evaluations_to_target",
    ):
        assert key in record


def test_a_dask_local_cluster_gives_identical_results(tmp_path, serial_reference):
    distributed = pytest.importorskip("distributed")
    config, reference = serial_reference
    with (
        distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None) as cluster,
        distributed.Client(cluster) as client,
    ):
        on_dask = run_sweep(config, out=tmp_path / "dask", dask=client)
    assert on_dask.ran == 12
    assert comparable(on_dask.store) == reference


# -- resuming ------------------------------------------------------------------------------------------
RESUMABLE = """\
name: resumable
problems:
  - {use: trap, n: 30, k: 3}
  - {use: four-peaks, n: 30, t: 3}
methods:
  - {method: hillclimb, population: 500}
  - {method: random, population: 500}
seeds: 8
stop:
  evaluations: 30000
seed: 3
"""


def test_a_killed_sweep_resumes_without_losing_or_duplicating_a_record(tmp_path):
    path = write(tmp_path, RESUMABLE)
    config = load_sweep_config(path)
    reference = comparable(run_sweep(config, out=tmp_path / "reference").store)
    results = tmp_path / "out" / "resumable" / "results.jsonl"
    command = [sys.executable, "-m", "optim", "sweep", str(path), "--out", str(tmp_path / "out"), "--quiet"]
    env = dict(os.environ, PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    process = subprocess.Popen(command, cwd=ROOT, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    deadline = time.monotonic() + 60
    while time.monotonic() < deadline and process.poll() is None:
        if results.exists() and results.read_bytes().count(b"\n") >= 3:
            break
        time.sleep(0.01)
    assert process.poll() is None, process.stderr.read().decode()
    process.send_signal(signal.SIGKILL)
    process.wait()
    process.stderr.close()
    lines_at_kill = results.read_bytes().count(b"\n")
    assert 3 <= lines_at_kill < len(config.jobs)
    resumed = run_sweep(config, out=tmp_path / "out")
    assert resumed.skipped == lines_at_kill and resumed.ran == len(config.jobs) - lines_at_kill
    lines = results.read_text().splitlines()
    assert len(lines) == len(config.jobs)
    assert len({json.loads(line)["job"] for line in lines}) == len(config.jobs)
    assert comparable(resumed.store) == reference


def test_a_torn_last_line_is_cut_off_and_the_job_run_again(tmp_path):
    config = load_sweep_config(write(tmp_path, SMALL))
    store = run_sweep(config, out=tmp_path).store
    reference = comparable(store)
    lines = store.results_path.read_bytes().splitlines(keepends=True)
    store.results_path.write_bytes(b"".join(lines[:5]) + lines[5][:40])
    again = run_sweep(config, out=tmp_path)
    assert (again.skipped, again.ran) == (5, 7)
    assert store.results_path.read_bytes().count(b"\n") == 12
    assert comparable(store) == reference
    assert run_sweep(config, out=tmp_path).ran == 0


def test_a_folder_of_another_budget_or_root_seed_is_refused(tmp_path):
    run_sweep(load_sweep_config(write(tmp_path, SMALL)), out=tmp_path / "out")
    for change in (("evaluations: 1500", "evaluations: 2000"), ("seed: 5\n", "seed: 7\n")):
        changed = load_sweep_config(write(tmp_path, SMALL.replace(*change), "changed.yaml"))
        changed.name = "small"
        with pytest.raises(RunFolderError, match="use another --out or name"):
            run_sweep(changed, out=tmp_path / "out")


def test_the_command_line_runs_a_sweep_and_writes_the_resolved_config(tmp_path, capsys):
    path = write(tmp_path, SMALL)
    assert main(["sweep", str(path), "--out", str(tmp_path), "--jobs", "2", "--quiet"]) == 0
    printed = capsys.readouterr().out
    assert "12 jobs, 0 already finished, 12 run now" in printed
    folder = tmp_path / "small"
    doc = read_yaml(folder / "sweep.yaml")
    assert doc.data.pop("version")
    reparsed = parse_sweep_config(doc, check_problem=True)
    assert [j.job for j in reparsed.jobs] == [j.job for j in load_sweep_config(path).jobs]
    stored = SweepStore(folder).read_config()
    assert stored["stop"]["evaluations"] == 1500 and stored["methods"][0]["select"] == 0.5
    assert [m["label"] for m in stored["methods"]] == ["tree", "hillclimb"]
    assert len(list((folder / "curves").glob("*.json"))) == 12
    assert main(["sweep", str(path), "--out", str(tmp_path), "--quiet"]) == 0
    assert "12 already finished, 0 run now" in capsys.readouterr().out


def test_the_bundled_sweeps_are_valid():
    for name in ("smoke.yaml", "tree-vs-hillclimb.yaml"):
        config = load_sweep_config(ROOT / "configs" / "sweeps" / name)
        assert config.jobs
    big = load_sweep_config(ROOT / "configs" / "sweeps" / "tree-vs-hillclimb.yaml")
    assert [m.settings.method for m in big.methods] == ["tree", "univariate", "hillclimb", "random"]
    assert len(big.seeds) == 10 and len(big.problems) == 5


# -- config errors -------------------------------------------------------------------------------------
@pytest.mark.parametrize(
    "change, line, key, words",
    [
        (
            ("population: 60}\n  - {method: hillclimb", "popualtion: 60}\n  - {method: hillclimb"),
            6,
            "methods.0.popualtion",
            "did you mean 'population'",
        ),
        (
            ("{method: tree, population: 60}", "{method: tree,\n     population: [60, 1]}"),
            7,
            "methods.0.population.1",
            "a whole number >= 2",
        ),
        (("seeds: 3", "seeds: 0"), 8, "seeds", "a whole number >= 1"),
        (("seeds: 3", "seeds: [1, 1]"), 8, "seeds.1", "listed twice"),
        (("{use: onemax, n: 16}", "{use: onemax, m: 16}"), 4, "problems.1.m", "has no parameter 'm'"),
        (("{use: onemax, n: 16}", "{use: onemax, n: 1e5}"), 4, "problems.1.n", "e-notation"),
        (("{use: onemax, n: 16}", "{use: onemx, n: 16}"), 4, "problems.1.use", "did you mean 'onemax'"),
        (("label: trap-12}", "label: onemax}"), 4, "problems.1", "distinct 'label'"),
        (
            ("{use: onemax, n: 16}", "{use: trap, n: 12, k: 3, shuffle: true, seed: 3}"),
            4,
            "problems.1",
            "the same problem as 'trap-12'",
        ),
        (
            ("{method: hillclimb, population: 60}", "{method: tree, population: 60, label: again}"),
            7,
            "methods.1",
            "are those of 'tree'",
        ),
        (("evaluations: 1500", "evaluations: 50"), 10, "stop.evaluations", "smaller than one population"),
        (("seed: 5\n", "sede: 5\n"), 11, "sede", "did you mean 'seed'"),
        (("{method: hillclimb, population: 60}", "{population: 60}"), 7, "methods.1", "needs a 'method' key"),
    ],
)
def test_config_errors_name_the_file_line_and_key(tmp_path, change, line, key, words):
    path = write(tmp_path, SMALL.replace(*change))
    assert SMALL.replace(*change) != SMALL
    with pytest.raises(ConfigError) as caught:
        load_sweep_config(path)
    message = str(caught.value)
    assert message.startswith(f"{path}:{line}: '{key}': "), message
    assert words in message


def test_missing_lists_and_cli_errors_are_one_line(tmp_path, capsys):
    path = write(tmp_path, "name: x\nmethods:\n  - {method: tree}\n")
    with pytest.raises(ConfigError, match="no 'problems' list"):
        load_sweep_config(path)
    with pytest.raises(ConfigError, match=r"sweep.yaml:2: 'problems': expected a non-empty list"):
        load_sweep_config(write(tmp_path, "name: x\nproblems: []\nmethods:\n  - {method: tree}\n"))
    assert main(["sweep", str(path)]) == 2
    error = capsys.readouterr().err
    assert error.startswith("optim: error: ") and error.count("\n") == 1
