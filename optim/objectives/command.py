"""Score candidates by running an external program and reading a number it produces.

Each variable of a candidate is one choice among a few argument texts (for
example a compiler flag on or off). For every candidate the command is run
once, with the chosen texts put in place of its placeholders, and the score is
read from what the command printed or wrote (see ``score`` below).

**Caution.** The command runs with your user rights, many times, possibly
several at once (``search.jobs``), with whatever arguments the search picks
from the values you list. Only run configs you trust. Tuning a live production
system is at your own risk: point the command at a staging copy.

Config (everything under ``problem:``)::

    problem:
      use: command
      command: ["gcc", "-Os", "{flags}", "-c", "{config_dir}/prog.c", "-o", "out.o"]
      variables:
        - {name: inline-functions, values: ["", "-finline-functions"]}
        - {flag: -fno-jump-tables}                 # short for values ["", "-fno-jump-tables"]
        - {name: align-loops, values: ["", "-falign-loops=1", "-falign-loops=16"]}
      score: {elf_code_size: out.o}
      goal: minimize
      timeout: 30
      workdir: null
      env: {LC_ALL: C}
      start: [{}]                                  # the baseline: every variable at its first value
      rerun: false

``command``
    The program and its arguments, as a list (a text is split like a shell
    would split it, with :func:`shlex.split`, but no shell is involved).
    Placeholders: an argument that is exactly ``{flags}`` becomes the
    arguments of all variables in order, each chosen value's text split with
    :func:`shlex.split` (an empty text adds nothing); an argument that is
    exactly ``{NAME}`` becomes the arguments of variable ``NAME`` alone, and
    inside a longer argument ``{NAME}`` is replaced by the value's text as it
    is; ``{config_dir}`` is the folder of the config file and ``{workdir}``
    the folder the evaluation runs in. Write ``{{`` and ``}}`` for literal
    braces. A relative program path containing a ``/`` is resolved against
    the config folder; a bare name is looked up on ``PATH``.
``variables``
    One entry per variable: ``{name: NAME, values: [TEXT, TEXT, ...]}`` (2 to
    256 texts; the candidate's value ``k`` selects the ``k``-th text), or
    ``{flag: TEXT}`` (an on/off variable: values ``["", TEXT]``; the name
    defaults to the flag without its leading dashes).
``score``
    Where the number comes from, one of:
    ``{file_size: PATH}`` (the size in bytes of a file the command wrote);
    ``{elf_code_size: PATH}`` (the total size of the executable sections of
    an ELF object or program: ``.text``, ``.text.*`` and any other section
    flagged allocated and executable; read by :mod:`optim.objectives.elf`,
    no binutils needed);
    ``{regex: PATTERN}`` (the first match in standard output: its first group,
    or the whole match when the pattern has no group);
    ``{last_number: true}`` (the last number in standard output);
    ``{json: {key: KEY, file: PATH}}`` (the value at ``KEY`` of a JSON
    document, a dotted path such as ``timing.median`` or ``runs.0``; from
    ``PATH``, or standard output without ``file``).
    ``regex`` and ``last_number`` read standard error instead with
    ``stream: stderr``. Relative paths are taken in the evaluation's folder.
``goal``
    ``minimize`` or ``maximize`` (required: there is no safe default).
``timeout``
    Seconds one evaluation may take (``null``: no limit); the command and
    every process it started are then stopped.
``workdir``
    ``null``: each evaluation runs in a fresh temporary folder, removed
    afterwards. A path (relative to the config folder; it must exist): every
    evaluation runs there, so with ``search.jobs`` above 1 the commands must
    not overwrite each other's files.
``env``
    Variables added to the environment (``{config_dir}`` and ``{workdir}``
    may be used in the values).
``start``
    Known configurations put in the first population (so the result is never
    worse than the best of them): each a list of value indices, a text of
    digits (``"0102"``) or a mapping from variable names to a value index or
    value text (variables not named take their first value; ``{}`` is the
    all-first-values baseline).
``rerun``
    ``false`` (default): a candidate seen before is served from the run's
    cache. ``true``: run it again every time (noisy measurements such as
    timings).
``shell``
    ``true`` runs ``command`` (then one text, a script) with ``/bin/sh -c``;
    the candidate's arguments are passed as the positional parameters, so
    write ``"$@"`` where ``{flags}`` would go; only ``{config_dir}`` and
    ``{workdir}`` may appear in the script (inserted quoted). **Dangerous**:
    the shell interprets the whole script, with your rights; prefer a list
    command or a script file. Off unless set explicitly.

Failed evaluations raise :class:`optim.evaluation.scoring.EvaluationFailure`; the
evaluator records them (``failures.jsonl``) and scores the candidate worst:
kind ``exit`` (non-zero exit status, with the last lines of standard error),
``timeout``, ``no-score`` (the score was not found; the message says what was
looked for) and ``launch`` (the program could not be started).
"""

from __future__ import annotations

import math
import os
import re
import shlex
import shutil
import signal
import subprocess
import tempfile
from pathlib import Path
from typing import Any, Dict, List, Mapping, Optional

import numpy as np

from optim.evaluation.scoring import EvaluationFailure
from optim.objectives.command_options import (
    RESERVED,
    argument_text,
    fill_fixed,
    parse_start,
    parse_variables,
    plain_text,
    split_arguments,
    template_pieces,
)
from optim.objectives.scores import ScoreReader, quote_tail
from optim.problem import GOALS, Problem

__all__ = ["CommandProblem", "command"]


def _program_found(program: str) -> bool:
    if os.sep in program or (os.altsep and os.altsep in program):
        return os.path.isfile(program) and os.access(program, os.X_OK)
    return shutil.which(program) is not None


def _kill_group(process: subprocess.Popen) -> None:
    """Stop a command and every process it started (they share its new session)."""
    try:
        if hasattr(os, "killpg"):
            os.killpg(process.pid, signal.SIGKILL)
        else:  # pragma: no cover - Windows has no process groups of this kind
            process.kill()
    except (ProcessLookupError, PermissionError):
        pass


# -------------------------------------------------------------------------- the problem


class CommandProblem(Problem):
    """An objective scored by running an external command per candidate.

    See the module docstring for the options and the cautions. Built by the
    :func:`command` factory; the parameters are the same.

    Attributes
    ----------
    variables : list of optim.objectives.command_options.CommandVariable
        Names, value texts and their arguments.
    config_dir : pathlib.Path
        The folder that relative paths and ``{config_dir}`` refer to.
    """

    vectorized = False
    parallel = "threads"
    cache_by_default = True

    def __init__(
        self,
        command,
        variables,
        score,
        goal: str,
        timeout: Optional[float] = 60.0,
        workdir: Optional[str] = None,
        env: Optional[Mapping[str, Any]] = None,
        start=None,
        rerun: bool = False,
        shell: bool = False,
        config_dir: Optional[str] = None,
    ):
        if goal not in GOALS:
            raise ValueError(f"goal: expected minimize or maximize; found {goal!r}")
        for option, value in (("rerun", rerun), ("shell", shell)):
            if not isinstance(value, bool):
                raise ValueError(f"{option}: expected true or false; found {value!r}")
        self.config_dir = Path(config_dir).expanduser().resolve() if config_dir is not None else Path.cwd()
        self.variables = parse_variables(variables)
        self.shell = shell
        self._template = self._parse_command(command)
        self.score = ScoreReader(score, self.config_dir)
        if timeout is not None and (
            isinstance(timeout, bool)
            or not isinstance(timeout, (int, float))
            or not timeout > 0
            or not math.isfinite(timeout)
        ):
            raise ValueError(f"timeout: expected a positive number of seconds or null; found {timeout!r}")
        self.timeout = None if timeout is None else float(timeout)
        self.workdir = self._parse_workdir(workdir)
        self.env = self._parse_env(env)
        self.start = parse_start(start, self.variables)
        self.rerun = rerun
        self.cache_by_default = not rerun
        first = self._template[0]
        label = "sh" if shell else (Path(first[0][1]).name if len(first) == 1 and first[0][0] == "text" else "command")
        super().__init__(
            len(self.variables),
            cardinality=[len(v.values) for v in self.variables],
            goal=goal,
            name=f"command:{label}",
            variable_names=[v.name for v in self.variables],
        )
        self._check_program()

    # -- options -----------------------------------------------------------------------------
    def _parse_command(self, command):
        if self.shell:
            if not isinstance(command, str) or not command.strip():
                raise ValueError(f"command: with shell: true, expected one text (the shell script); found {command!r}")
            pieces = template_pieces(command, "command", RESERVED + tuple(v.name for v in self.variables))
            for kind, value in pieces:
                if kind == "field" and value not in ("config_dir", "workdir"):
                    raise ValueError(
                        f"command: with shell: true the candidate's arguments are the positional "
                        f'parameters; write "$@" instead of {{{value}}} (only {{config_dir}} and '
                        f"{{workdir}} may appear in the script)"
                    )
            return [pieces]
        if isinstance(command, str):
            command = list(split_arguments(command, "command"))
        if not isinstance(command, (list, tuple)) or not command:
            raise ValueError(f"command: expected a non-empty list [program, argument, ...]; found {command!r}")
        known = RESERVED + tuple(v.name for v in self.variables)
        template = []
        for index, argument in enumerate(command):
            where = f"command[{index}]"
            pieces = template_pieces(argument_text(argument, where), where, known)
            if any(kind == "field" and value == "flags" for kind, value in pieces) and len(pieces) != 1:
                raise ValueError(f"{where}: {{flags}} must be a whole argument on its own; found {argument!r}")
            template.append(pieces)
        if not any(
            kind == "field" and value not in ("config_dir", "workdir") for pieces in template for kind, value in pieces
        ):
            raise ValueError(
                "command: no placeholder takes the candidate's values; put {flags} (all variables) "
                "or {NAME} (one variable) among the arguments"
            )
        return template

    def _parse_workdir(self, workdir) -> Optional[Path]:
        if workdir is None:
            return None
        text = plain_text(workdir, "workdir", "a folder path or null")
        path = Path(fill_fixed(text, self.config_dir, self.config_dir, "workdir")).expanduser()
        path = path if path.is_absolute() else self.config_dir / path
        if not path.is_dir():
            raise ValueError(
                f"workdir: the folder {path} does not exist (create it, or use null for a fresh "
                f"temporary folder per evaluation)"
            )
        return path

    @staticmethod
    def _parse_env(env) -> Dict[str, str]:
        if env is None:
            return {}
        if not isinstance(env, Mapping):
            raise ValueError(f"env: expected a mapping of variable names to texts; found {env!r}")
        out = {}
        for key, value in env.items():
            if not isinstance(key, str) or not re.fullmatch(r"[A-Za-z_][A-Za-z0-9_]*", key):
                raise ValueError(f"env: {key!r} is not a valid environment variable name")
            out[key] = argument_text(value, f"env.{key}")
            template_pieces(out[key], f"env.{key}", ("config_dir", "workdir"))
        return out

    def _check_program(self) -> None:
        if self.shell:
            if not os.path.exists("/bin/sh"):
                raise ValueError("shell: true needs a POSIX shell at /bin/sh")
            return
        pieces = self._template[0]
        if any(kind == "field" and value not in ("config_dir",) for kind, value in pieces):
            return  # the program depends on the candidate: a missing one is a 'launch' failure
        program = self._program("".join(v if k == "text" else str(self.config_dir) for k, v in pieces))
        if not _program_found(program):
            raise ValueError(
                f"command: the program {program!r} was not found"
                + ("" if os.sep in program else " on PATH")
                + " or is not executable"
            )

    def _program(self, text: str) -> str:
        path = Path(text).expanduser()
        if not path.is_absolute() and (os.sep in text or (os.altsep and os.altsep in text)):
            return str(self.config_dir / path)
        return str(path) if text.startswith("~") else text

    # -- building one command line -------------------------------------------------------------
    def _check_candidate(self, x) -> np.ndarray:
        x = np.asarray(x).reshape(-1)
        if x.shape[0] != self.n or np.any(x < 0) or np.any(x >= self.cardinality):
            raise ValueError(f"expected {self.n} values within each variable's range; got {x.tolist()}")
        return x.astype(np.int64)

    def arguments(self, x, workdir=None) -> List[str]:
        """The argument list run for candidate ``x`` (``workdir`` fills ``{workdir}``).

        Parameters
        ----------
        x : array_like
            One candidate: a value index per variable.
        workdir : str, pathlib.Path or None
            The evaluation's folder (the config folder when ``None``, for display).

        Returns
        -------
        list of str
            Program first; with ``shell`` it is ``["/bin/sh", "-c", script, "optim-command", *arguments]``.
        """
        x = self._check_candidate(x)
        folder = Path(workdir) if workdir is not None else (self.workdir or self.config_dir)
        chosen = {v.name: (v.values[k], v.arguments[k]) for v, k in zip(self.variables, x.tolist(), strict=True)}
        flags = [argument for v in self.variables for argument in chosen[v.name][1]]
        fixed = {"config_dir": str(self.config_dir), "workdir": str(folder)}
        if self.shell:
            script = "".join(
                value if kind == "text" else shlex.quote(fixed[value]) for kind, value in self._template[0]
            )
            return ["/bin/sh", "-c", script, "optim-command", *flags]
        args: List[str] = []
        for index, pieces in enumerate(self._template):
            if len(pieces) == 1 and pieces[0][0] == "field" and pieces[0][1] not in fixed:
                name = pieces[0][1]
                args.extend(flags if name == "flags" else chosen[name][1])
                if index == 0 and not args:
                    raise EvaluationFailure("launch", f"the program placeholder {{{name}}} is empty for this candidate")
                continue
            text = "".join(
                value if kind == "text" else fixed.get(value, chosen.get(value, ("",))[0]) for kind, value in pieces
            )
            args.append(text)
        if args:
            args[0] = self._program(args[0])
        return args

    def environment(self, workdir) -> Dict[str, str]:
        """The environment of one evaluation: this process's, plus ``env``."""
        merged = dict(os.environ)
        for key, value in self.env.items():
            merged[key] = fill_fixed(value, self.config_dir, Path(workdir))
        return merged

    # -- running -------------------------------------------------------------------------------
    def evaluate_one(self, x) -> float:
        """Run the command for one candidate and return its score.

        Raises
        ------
        optim.evaluation.scoring.EvaluationFailure
            Of kind ``exit``, ``timeout``, ``no-score`` or ``launch``.
        """
        x = self._check_candidate(x)
        if self.workdir is not None:
            return self._run(x, self.workdir)
        folder = Path(tempfile.mkdtemp(prefix="optim-eval-"))
        try:
            return self._run(x, folder)
        finally:
            shutil.rmtree(folder, ignore_errors=True)

    def evaluate(self, X: np.ndarray) -> np.ndarray:
        """Scores of several candidates, one command each (the evaluator normally calls :meth:`evaluate_one`)."""
        X = np.asarray(X)
        return np.array([self.evaluate_one(x) for x in X.reshape(-1, self.n)], dtype=np.float64)

    def _run(self, x: np.ndarray, folder: Path) -> float:
        args = self.arguments(x, folder)
        try:
            process = subprocess.Popen(
                args,
                cwd=str(folder),
                env=self.environment(folder),
                stdin=subprocess.DEVNULL,
                stdout=subprocess.PIPE,
                stderr=subprocess.PIPE,
                start_new_session=True,
            )
        except OSError as exc:
            reason = exc.strerror or str(exc)
            raise EvaluationFailure("launch", f"cannot start {args[0]!r}: {reason}") from None
        try:
            out, err = process.communicate(timeout=self.timeout)
        except subprocess.TimeoutExpired:
            _kill_group(process)
            process.communicate()
            raise EvaluationFailure(
                "timeout", f"the command ran longer than the {self.timeout:g} s timeout and was stopped"
            ) from None
        except BaseException:
            _kill_group(process)
            process.wait()
            raise
        stdout = out.decode("utf-8", "replace")
        stderr = err.decode("utf-8", "replace")
        if process.returncode != 0:
            status = process.returncode
            what = f"was stopped by signal {-status}" if status < 0 else f"exited with status {status}"
            raise EvaluationFailure("exit", f"the command {what}; standard error{quote_tail(stderr)}")
        return self.score.read(stdout, stderr, folder)

    # -- records -------------------------------------------------------------------------------
    def initial_candidates(self) -> Optional[np.ndarray]:
        return None if self.start is None else self.start.copy()

    def describe(self) -> dict:
        summary = super().describe()
        summary.update(
            score=self.score.describe(),
            timeout=self.timeout,
            rerun=self.rerun,
            shell=self.shell,
            values={v.name: list(v.values) for v in self.variables},
        )
        return summary


def command(
    command,
    variables,
    score,
    goal,
    timeout=60.0,
    workdir=None,
    env=None,
    start=None,
    rerun: bool = False,
    shell: bool = False,
    config_dir=None,
) -> CommandProblem:
    """Run a program per candidate, read its score. CAUTION: your rights, many runs, in parallel; use a staging copy.

    The command runs with your user rights, many times and possibly several at
    once; tuning a live production system is at your own risk. The options are
    set out in the docstring of :mod:`optim.objectives.command`.

    Parameters
    ----------
    command : list of str
        The program and its arguments; {flags} = all variables' arguments,
        {NAME} = one variable's, {config_dir}, {workdir}.
    variables : list of mapping
        One per variable: {name: NAME, values: [TEXT, ...]} (value k = k-th text)
        or {flag: TEXT} (values "" and TEXT).
    score : mapping
        One of {file_size: PATH}, {elf_code_size: PATH}, {regex: PATTERN},
        {last_number: true}, {json: {key: KEY, file: PATH}}.
    goal : {"minimize", "maximize"}
        Direction of the score (required).
    timeout : float or None
        Seconds per evaluation before the command is stopped (a 'timeout' failure); null for no limit.
    workdir : str or None
        Folder the command runs in (relative to the config); null: a fresh temporary folder per evaluation.
    env : mapping or None
        Environment variables added for the command.
    start : list or None
        Configurations put in the first population: value-index lists, digit texts,
        or {name: value} mappings ({} = all first values).
    rerun : bool
        Run repeated candidates again instead of using the cache (for noisy measurements such as timings).
    shell : bool
        DANGER: run command as a /bin/sh script (candidate arguments as "$@"); off unless set.
    config_dir : str or None
        Folder of the config file, filled in by 'optim run'; relative paths and {config_dir} refer to it.

    Returns
    -------
    CommandProblem
    """
    return CommandProblem(
        command,
        variables,
        score,
        goal,
        timeout=timeout,
        workdir=workdir,
        env=env,
        start=start,
        rerun=rerun,
        shell=shell,
        config_dir=config_dir,
    )
