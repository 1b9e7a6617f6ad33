"""The command line: a complete run folder, and bad input as one line with exit status 2."""

import json
import subprocess
import sys
from pathlib import Path

import networkx as nx
import pytest
import yaml

from optim.cli import main

ROOT = Path(__file__).resolve().parents[1]


def small_config(tmp_path, method="tree", extra=""):
    path = tmp_path / "small.yaml"
    path.write_text(
        "name: small\nproblem:\n  use: trap\n  n: 24\n  shuffle: true\n  seed: 3\n"
        f"search:\n  method: {method}\n  population: 300\nstop:\n  evaluations: 30000\nseed: 5\n{extra}"
    )
    return path


def only_run_folder(out):
    folders = [p for p in Path(out).iterdir() if p.is_dir()]
    assert len(folders) == 1
    return folders[0]


def test_run_writes_a_complete_run_folder(tmp_path, capsys):
    out = tmp_path / "out"
    assert main(["run", str(small_config(tmp_path)), "--out", str(out), "--quiet"]) == 0
    printed = capsys.readouterr().out
    folder = only_run_folder(out)
    assert folder.name.startswith("small-s5-") and folder.name.endswith("Z")
    assert str(folder) in printed and "best score" in printed and "solution" in printed
    config = yaml.safe_load((folder / "config.yaml").read_text())
    assert config["search"]["select"] == 0.5 and config["stop"]["target"] == "optimum"
    log = [json.loads(line) for line in (folder / "log.jsonl").read_text().splitlines()]
    for key in ("generation", "evaluations", "best", "mean", "model_entropy", "seconds"):
        assert all(key in record for record in log)
    result = json.loads((folder / "result.json").read_text())
    assert result["best_score"] == 24 and result["stop_reason"] == "target"
    assert result["best_solution"] == "1" * 24
    assert result["evaluations"] == log[-1]["evaluations"] and result["generations"] == len(log)
    for key in ("evaluations", "generations", "seed", "version"):
        assert key in result
    from optim.runs.folder import RunFolder

    candidates, scores, generation = RunFolder(folder).read_evaluated()
    assert candidates.shape == (result["evaluations"], 24) and scores.shape == (result["evaluations"],)
    assert scores.max() == 24 and generation.max() == result["generations"] - 1
    tree = nx.read_graphml(folder / "tree.graphml", node_type=int)
    assert nx.is_tree(tree) and tree.number_of_nodes() == 24


def test_seed_and_set_overrides(tmp_path, capsys):
    out = tmp_path / "out"
    args = [
        "run",
        str(small_config(tmp_path, method="hillclimb")),
        "--out",
        str(out),
        "--quiet",
        "--seed",
        "8",
        "--set",
        "stop.evaluations=2000",
        "--set",
        "stop.target=null",
    ]
    assert main(args) == 0
    folder = only_run_folder(out)
    assert folder.name.startswith("small-s8-")
    result = json.loads((folder / "result.json").read_text())
    assert result["evaluations"] == 2000 and result["seed"] == 8 and result["stop_reason"] == "budget"
    assert not (folder / "tree.graphml").exists()  # the hill climber learns no tree


@pytest.mark.parametrize(
    "args, fragment",
    [
        (["run", "missing.yaml"], "missing.yaml: no such file"),
        (["run", "{cfg}", "--set", "search.population=0"], "command line (--set): 'search.population'"),
        (["run", "{cfg}", "--set", "problem.n=25"], "n must be a positive multiple of k"),
        (["run", "{cfg}", "--set", "problem.use=nowhere.py:f"], "nowhere.py"),
    ],
)
def test_bad_input_gives_one_line_and_status_2(tmp_path, capsys, args, fragment):
    cfg = small_config(tmp_path)
    out = tmp_path / "out"
    args = [a.replace("{cfg}", str(cfg)) for a in args] + ["--out", str(out)]
    assert main(args) == 2
    captured = capsys.readouterr()
    err = captured.err.strip()
    assert err.startswith("optim: error: ") and fragment in err
    assert len(err.splitlines()) == 1 and "Traceback" not in err
    assert not out.exists()  # nothing written


def test_module_entry_point_and_problem_listing():
    run = subprocess.run([sys.executable, "-m", "optim", "problems"], capture_output=True, text=True, cwd=ROOT)
    assert run.returncode == 0
    for name in ("onemax", "trap", "four-peaks", "hiff", "ising-ring"):
        assert f"{name}:" in run.stdout
    assert "shuffle" in run.stdout
    helped = subprocess.run([sys.executable, "-m", "optim", "run", "--help"], capture_output=True, text=True)
    assert helped.returncode == 0 and "Caution" in helped.stdout
    bad = subprocess.run([sys.executable, "-m", "optim", "run", "nope.yaml"], capture_output=True, text=True)
    assert bad.returncode == 2 and "Traceback" not in bad.stderr
