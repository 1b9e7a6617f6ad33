"""Tests of optim.objectives.command: the external-command objective.

The command is a small Python script (tests/data/commands/toy_tool.py) run
with the current interpreter, so the tests need no other program.
"""

import json
import os
import shlex
import sys
import time
from pathlib import Path

import numpy as np
import pytest
import yaml

import optim.objectives.command
import optim.objectives.loader
from optim import objectives
from optim.evaluation import EvaluationFailure, Evaluator
from optim.search import Search, SearchSettings, StopRules
from optim.objectives.command import CommandProblem, command

DATA = Path(__file__).parent / "data" / "commands"
TOOL = str(DATA / "toy_tool.py")
PYTHON = sys.executable

SWITCHES = [{"flag": "-a"}, {"flag": "-b"}, {"flag": "-c"}, {"name": "level", "values": ["", "--level=1", "--level=2"]}]


def toy(score=None, variables=None, extra=(), **options):
    """A toy-tool problem: score = 1*a + 2*b + 4*c + 10*level unless the tool is told otherwise."""
    return command(
        [PYTHON, TOOL, *extra, "{flags}"],
        variables or SWITCHES,
        score or {"regex": r"score=(\d+)"},
        options.pop("goal", "maximize"),
        **options,
    )


def toy_score(x):
    """The score the toy tool computes for SWITCHES, by hand."""
    return 1 * x[0] + 2 * x[1] + 4 * x[2] + 10 * x[3]


def failure(problem, x):
    with pytest.raises(EvaluationFailure) as caught:
        problem.evaluate_one(np.asarray(x, dtype=np.uint8))
    return caught.value


# ---------------------------------------------------------------- building the command line


def test_flags_expand_to_the_chosen_arguments_in_variable_order():
    problem = toy()
    assert problem.n == 4 and problem.cardinality.tolist() == [2, 2, 2, 3]
    assert problem.variable_names == ["a", "b", "c", "level"]
    assert problem.arguments([0, 0, 0, 0]) == [PYTHON, TOOL]
    assert problem.arguments([1, 0, 1, 2]) == [PYTHON, TOOL, "-a", "-c", "--level=2"]


def test_value_texts_are_split_like_a_shell_would_without_a_shell():
    variables = [{"name": "defs", "values": ["", "-D NAME='two words' -O2", "$(echo injected); rm -rf x"]}]
    problem = command([PYTHON, TOOL, "{flags}"], variables, {"last_number": True}, "maximize")
    assert problem.arguments([1]) == [PYTHON, TOOL] + shlex.split("-D NAME='two words' -O2")
    assert problem.arguments([1])[2:] == ["-D", "NAME=two words", "-O2"]
    assert problem.arguments([2])[2:] == ["$(echo", "injected);", "rm", "-rf", "x"]  # plain arguments


def test_single_variable_placeholders_whole_and_inside_an_argument(tmp_path):
    variables = [{"name": "opt", "values": ["s", "2"]}, {"name": "extra", "values": ["", "-x -y"]}]
    problem = command(
        [PYTHON, TOOL, "-O{opt}", "{extra}", "{config_dir}/in.txt", "out={workdir}/o", "{{literal}}"],
        variables,
        {"last_number": True},
        "minimize",
        config_dir=str(tmp_path),
    )
    args = problem.arguments([1, 1], workdir="/w")
    assert args == [PYTHON, TOOL, "-O2", "-x", "-y", f"{tmp_path.resolve()}/in.txt", "out=/w/o", "{literal}"]
    assert problem.arguments([0, 0], workdir="/w")[2:4] == ["-Os", f"{tmp_path.resolve()}/in.txt"]


def executable_tool(folder):
    """A copy of the toy tool that runs as a program of its own (with a #! line)."""
    tool = folder / "tools" / "toy_tool.py"
    tool.parent.mkdir()
    tool.write_text(f"#!{PYTHON}\n" + (DATA / "toy_tool.py").read_text())
    tool.chmod(0o755)
    return tool


def test_a_relative_program_path_is_resolved_against_the_config_folder(tmp_path):
    tool = executable_tool(tmp_path)
    problem = command(
        ["./tools/toy_tool.py", "{flags}"], SWITCHES, {"last_number": True}, "maximize", config_dir=str(tmp_path)
    )
    assert problem.arguments([0, 0, 0, 0])[0] == str(tmp_path.resolve() / "tools" / "toy_tool.py")
    assert problem.evaluate_one(np.array([1, 0, 0, 1], dtype=np.uint8)) == 11
    with pytest.raises(ValueError, match="toy_tool.py' was not found or is not executable"):
        command(
            ["tools/toy_tool.py", "{flags}"], SWITCHES, {"last_number": True}, "maximize", config_dir=str(tool.parent)
        )


def test_a_command_text_is_split_into_arguments():
    problem = command(
        f"{shlex.quote(PYTHON)} {shlex.quote(TOOL)} --level=1 {{flags}}", SWITCHES, {"last_number": True}, "maximize"
    )
    assert problem.arguments([1, 0, 0, 0]) == [PYTHON, TOOL, "--level=1", "-a"]


@pytest.mark.parametrize(
    "options, message",
    [
        (dict(command=[PYTHON, "--x={flags}"]), "must be a whole argument"),
        (dict(command=[PYTHON, "{nope}", "{flags}"]), r"unknown placeholder \{nope\}"),
        (dict(command=[PYTHON, "{config_dir}"]), "no placeholder takes the candidate"),
        (dict(command=[PYTHON, "a{b", "{flags}"]), "lone"),
        (dict(command=["no-such-program-for-optim-tests", "{flags}"]), "was not found"),
        (dict(command=[]), "non-empty list"),
        (dict(variables=[{"name": "flags", "values": ["", "-x"]}]), "reserved"),
        (dict(variables=[{"flag": "-a"}, {"name": "a", "values": ["", "-b"]}]), "also the name of variables"),
        (dict(variables=[{"name": "x", "values": ["-x"]}]), "2 to 256 texts"),
        (dict(variables=[{"name": "x", "values": ["-x", "-x"]}]), "distinct"),
        (dict(variables=[{"values": ["", "-x"]}]), "needs a 'name'"),
        (dict(variables=[{"flag": "-x", "values": ["", "-x"]}]), "not both"),
        (dict(variables=[{"name": "x y", "values": ["", "-x"]}]), "spaces or braces"),
        (dict(variables=[{"name": "x", "values": ["", "'unclosed"]}]), "cannot be split"),
        (dict(variables=[]), "non-empty list"),
        (dict(score={"regex": "(", "file_size": "x"}), "exactly one of"),
        (dict(score={"regex": "("}), "not a valid regular expression"),
        (dict(score={"size": "x"}), "unknown key 'size'"),
        (dict(score={"json": {"file": "r.json"}}), "score.json"),
        (dict(score={"file_size": "out", "stream": "stderr"}), "only regex and last_number"),
        (dict(score={"last_number": True, "stream": "stdin"}), "stdout or stderr"),
        (dict(score="score=(\\d+)"), "expected a mapping"),
        (dict(goal="smaller"), "goal"),
        (dict(timeout=0), "timeout"),
        (dict(timeout="30"), "timeout"),
        (dict(workdir="no/such/folder"), "does not exist"),
        (dict(env={"1BAD": "x"}), "not a valid environment variable name"),
        (dict(env={"X": "{nope}"}), r"env\.X: unknown placeholder \{nope\}"),
        (dict(score={"file_size": "{flags}.bin"}), r"score\.file_size: unknown placeholder \{flags\}"),
        (dict(start=[[0, 0, 0]]), "expected 4 values"),
        (dict(start=[[0, 0, 0, 3]]), r"start\[0\]\[3\] \(level\)"),
        (dict(start=[{"level": "--level=7"}]), r"start\[0\]\.level"),
        (dict(start=[{"d": 1}]), "no variable is named 'd'"),
        (dict(start=["01x0"]), "digits only"),
        (dict(rerun="yes"), "rerun"),
        (dict(shell=True), "one text"),
        (dict(shell=True, command="echo {flags}"), r"write \"\$@\" instead of \{flags\}"),
    ],
)
def test_bad_options_are_rejected_with_the_option_named(options, message):
    settings = dict(command=[PYTHON, TOOL, "{flags}"], variables=SWITCHES, score={"last_number": True}, goal="maximize")
    settings.update(options)
    with pytest.raises(ValueError, match=message):
        command(**settings)


def test_the_registry_reports_bad_options_as_one_line_problem_errors():
    with pytest.raises(objectives.ProblemError, match=r"problem 'command': goal: expected minimize or maximize") as e:
        objectives.make_problem(
            "command", dict(command=[PYTHON, "{flags}"], variables=SWITCHES, score={"last_number": True}, goal="less")
        )
    assert "\n" not in str(e.value)
    with pytest.raises(objectives.ProblemError, match="missing parameter 'goal'"):
        objectives.make_problem(
            "command", dict(command=[PYTHON, "{flags}"], variables=SWITCHES, score={"last_number": True})
        )


# ---------------------------------------------------------------- running and scoring


def test_scores_match_the_tool_for_every_candidate_of_a_small_space():
    problem = toy()
    X = np.array(
        [[a, b, c, level] for a in (0, 1) for b in (0, 1) for c in (0, 1) for level in (0, 1, 2)], dtype=np.uint8
    )
    expected = np.array([toy_score(x) for x in X.astype(int)], dtype=float)
    scores = Evaluator(problem, jobs=2)(X)  # threads, two commands at a time
    np.testing.assert_array_equal(scores, expected)
    np.testing.assert_array_equal(problem.evaluate(X[:3]), expected[:3])


@pytest.mark.parametrize(
    "score, extra",
    [
        ({"regex": r"score=(\d+)"}, ()),
        ({"regex": r"(?<=score=)\d+"}, ()),
        ({"last_number": True}, ()),
        ({"json": {"file": "r.json", "key": "result.score"}}, ("--report=r.json",)),
        ({"json": {"file": "{workdir}/r.json", "key": "runs.0"}}, ("--report=r.json",)),
        ({"file_size": "sized.bin"}, ("--bytes=sized.bin",)),
    ],
)
def test_each_score_mode_reads_the_same_number(score, extra):
    problem = toy(score=score, extra=extra)
    for x in ([1, 1, 0, 2], [0, 0, 1, 1]):
        assert problem.evaluate_one(np.array(x, dtype=np.uint8)) == toy_score(x)


def test_json_on_standard_output(tmp_path):
    script = tmp_path / "emit.py"
    script.write_text("import json, sys\nprint(json.dumps({'t': {'median': len(sys.argv) * 1.5}}))\n")
    problem = command([PYTHON, str(script), "{flags}"], SWITCHES, {"json": {"key": "t.median"}}, "minimize")
    assert problem.evaluate_one(np.array([1, 1, 0, 1], dtype=np.uint8)) == 4 * 1.5


def test_standard_error_can_be_the_score_stream(tmp_path):
    script = tmp_path / "emit.py"
    script.write_text("import sys\nprint('noise 99')\nprint('elapsed 0.25 s', file=sys.stderr)\n")
    problem = command([PYTHON, str(script), "{flags}"], SWITCHES, {"last_number": True, "stream": "stderr"}, "minimize")
    assert problem.evaluate_one(np.zeros(4, dtype=np.uint8)) == 0.25


def test_a_nonzero_exit_is_an_exit_failure_with_the_status_and_last_stderr_lines():
    problem = toy(variables=[{"name": "mode", "values": ["", "--fail=3"]}])
    fault = failure(problem, [1])
    assert fault.kind == "exit" and "status 3" in str(fault)
    assert "problem line 6" in str(fault) and "problem line 2" in str(fault)
    assert "problem line 1" not in str(fault)  # only the last five lines


def test_a_missing_score_is_a_no_score_failure_saying_what_was_looked_for():
    problem = toy(extra=("--quiet",))
    fault = failure(problem, [0, 0, 0, 0])
    assert fault.kind == "no-score" and "score=(\\d+)" in str(fault) and "stdout" in str(fault)
    missing_file = toy(score={"file_size": "never-written.bin"})
    fault = failure(missing_file, [0, 0, 0, 0])
    assert fault.kind == "no-score" and "never-written.bin" in str(fault)
    missing_key = toy(score={"json": {"file": "r.json", "key": "result.time"}}, extra=("--report=r.json",))
    fault = failure(missing_key, [0, 0, 0, 0])
    assert fault.kind == "no-score" and "'result.time'" in str(fault)
    not_elf = toy(score={"elf_code_size": "sized.bin"}, extra=("--bytes=sized.bin",))
    fault = failure(not_elf, [1, 1, 1, 2])
    assert fault.kind == "no-score" and "not a readable ELF file" in str(fault)


def test_a_program_that_cannot_be_started_is_a_launch_failure(tmp_path):
    variables = [{"name": "program", "values": [PYTHON, str(tmp_path / "missing-program")]}, {"flag": "-a"}]
    problem = command(["{program}", TOOL, "{a}"], variables, {"last_number": True}, "maximize")
    assert problem.evaluate_one(np.array([0, 1], dtype=np.uint8)) == 1
    fault = failure(problem, [1, 0])
    assert fault.kind == "launch" and "missing-program" in str(fault)


def test_a_slow_command_is_stopped_with_everything_it_started(tmp_path):
    problem = toy(variables=[{"name": "pace", "values": ["", "--sleep=30"]}], timeout=1.0, workdir=str(tmp_path))
    started = time.monotonic()
    fault = failure(problem, [1])
    assert fault.kind == "timeout" and "1 s timeout" in str(fault)
    assert time.monotonic() - started < 10
    helper = int((tmp_path / "sleeper.pid").read_text())
    deadline = time.monotonic() + 5
    while _running(helper):
        if time.monotonic() > deadline:
            pytest.fail("the helper process started by the command is still running")
        time.sleep(0.05)


def _running(pid):
    """Whether a process exists and is not a zombie waiting to be reaped."""
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    stat = Path(f"/proc/{pid}/stat")
    try:
        return stat.read_text().rsplit(")", 1)[1].split()[0] != "Z"
    except (OSError, IndexError):
        return True


def test_each_evaluation_gets_a_fresh_folder_that_is_removed_afterwards(tmp_path):
    problem = toy(score={"regex": r"cwd=(.*)"}, extra=())
    seen = []

    def record_folder(stdout, stderr, folder):
        seen.append(folder)
        assert Path(folder).is_dir() and stdout.splitlines()[1] == f"cwd={folder}"
        return 0.0

    problem.score.read = record_folder
    problem.evaluate_one(np.zeros(4, dtype=np.uint8))
    problem.evaluate_one(np.zeros(4, dtype=np.uint8))
    assert len(seen) == 2 and seen[0] != seen[1]
    assert not any(Path(folder).exists() for folder in seen)


def test_a_fixed_workdir_and_environment_additions(tmp_path):
    problem = toy(
        score={"file_size": "sized.bin"},
        extra=("--bytes=sized.bin",),
        workdir=str(tmp_path),
        env={"TOY_SETTING": "{workdir}/cache"},
    )
    assert problem.evaluate_one(np.array([0, 1, 1, 0], dtype=np.uint8)) == 6
    assert (tmp_path / "sized.bin").stat().st_size == 6
    assert problem.environment(tmp_path)["TOY_SETTING"] == f"{tmp_path}/cache"
    assert problem.environment(tmp_path)["PATH"] == os.environ["PATH"]
    printed = toy(score={"regex": r"setting=(\d+)"}, env={"TOY_SETTING": 42})
    assert printed.evaluate_one(np.zeros(4, dtype=np.uint8)) == 42


def test_shell_mode_passes_the_candidate_as_positional_parameters(tmp_path):
    variables = [{"name": "risky", "values": ["", "'$(echo injected)'"]}, {"flag": "-a"}]
    script = 'printf "%s\\n" "$@" > {workdir}/args.txt; echo "count=$#"'
    problem = command(script, variables, {"regex": r"count=(\d+)"}, "maximize", shell=True, workdir=str(tmp_path))
    assert problem.arguments([1, 1], workdir=tmp_path)[:2] == ["/bin/sh", "-c"]
    assert problem.evaluate_one(np.array([1, 1], dtype=np.uint8)) == 2
    assert (tmp_path / "args.txt").read_text().splitlines() == ["$(echo injected)", "-a"]


# ---------------------------------------------------------------- caching, starting points, runs


def test_repeated_candidates_are_cached_unless_rerun_is_set():
    assert toy().cache_by_default is True
    assert toy(rerun=True).cache_by_default is False
    assert CommandProblem.vectorized is False and CommandProblem.parallel == "threads"


def test_starting_candidates_in_every_form():
    problem = toy(start=[{}, [1, 0, 1, 2], "0101", {"b": 1, "level": "--level=2"}])
    np.testing.assert_array_equal(
        problem.initial_candidates(), [[0, 0, 0, 0], [1, 0, 1, 2], [0, 1, 0, 1], [0, 1, 0, 2]]
    )
    assert problem.initial_candidates().dtype == np.uint8
    assert toy().initial_candidates() is None
    from_numpy = toy(start=np.array([[1, 1, 0, 2]], dtype=np.int64))
    np.testing.assert_array_equal(from_numpy.initial_candidates(), [[1, 1, 0, 2]])


def test_a_search_includes_the_start_and_never_ends_worse_than_it():
    # a minimised score whose uniform random candidates are all worse than the start
    problem = toy(goal="minimize", start=[[0, 0, 0, 0]])
    search = Search(problem, SearchSettings(population=6, jobs=2), StopRules(evaluations=12, target=None), seed=3)
    evaluated = []
    result = search.run(lambda search, record: evaluated.append((search.last_candidates, search.last_scores)))
    candidates = np.concatenate([c for c, _ in evaluated])
    scores = np.concatenate([s for _, s in evaluated])
    assert candidates.shape == (12, 4)
    np.testing.assert_array_equal(candidates[0], [0, 0, 0, 0])
    assert scores[0] == 0 and result.best_score == 0
    assert result.evaluations == 12 and result.cache_hits + result.objective_calls == 12


def test_the_factory_documents_every_parameter_and_the_caution():
    documented = {p.name: p.description for p in objectives.factory_parameters(objectives.get_factory("command"))}
    assert set(documented) == {
        "command",
        "variables",
        "score",
        "goal",
        "timeout",
        "workdir",
        "env",
        "start",
        "rerun",
        "shell",
        "config_dir",
    }
    assert all(documented.values())
    assert "DANGER" in documented["shell"]
    summary = command.__doc__.strip().splitlines()[0]
    assert "CAUTION" in summary and "your rights" in summary and "staging" in summary
    assert "production" in optim.objectives.command.__doc__ and "your user rights" in optim.objectives.command.__doc__


def test_a_config_run_records_failures_and_goes_on(tmp_path):
    from optim.runs.config import load_run_config
    from optim.runs.runner import execute

    executable_tool(tmp_path)
    config = {
        "name": "toy",
        "problem": {
            "use": "command",
            "command": ["tools/toy_tool.py", "{flags}", "--report={workdir}/r.json"],
            "variables": [
                {"flag": "-a"},
                {"flag": "-b"},
                {"flag": "-c"},
                {"name": "broken", "values": ["", "--fail=4"]},
            ],
            "score": {"json": {"file": "r.json", "key": "result.score"}},
            "goal": "maximize",
            "start": [{}],
        },
        "search": {"population": 8, "jobs": 2},
        "stop": {"evaluations": 40, "target": 7, "max_failures": None},
        "seed": 2,
        "out": str(tmp_path / "runs"),
    }
    path = tmp_path / "toy.yaml"
    path.write_text(yaml.safe_dump(config))
    outcome = execute(load_run_config(path))
    assert outcome.result.best_score == 7 and outcome.result.stop_reason == "target"
    assert outcome.result.best_solution.tolist() == [1, 1, 1, 0]
    failures = outcome.folder.read_failures()
    assert failures and all(f["kind"] == "exit" and f["candidate"].endswith("1") for f in failures)
    assert all("status 4" in f["message"] for f in failures)
    candidates, scores, _ = outcome.folder.read_evaluated()
    broken = candidates[:, 3] == 1
    assert np.all(np.isnan(scores[broken])) and np.all(np.isfinite(scores[~broken]))
    np.testing.assert_array_equal(scores[~broken], candidates[~broken, :3].astype(int) @ [1, 2, 4])
    assert json.loads((outcome.folder.path / "result.json").read_text())["best_score"] == 7
