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
    flagged allocated and executable; read with :func:`elf_sections`, no
    binutils needed);
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

import json
import math
import numbers
import os
import re
import shlex
import shutil
import signal
import struct
import subprocess
import tempfile
from pathlib import Path
from typing import Any, Dict, List, Mapping, NamedTuple, Optional, Tuple

import numpy as np

from optim.evaluation.scoring import EvaluationFailure
from optim.problem import GOALS, Problem

__all__ = [
    "CommandProblem",
    "CommandVariable",
    "ElfFormatError",
    "ElfSection",
    "SCORE_MODES",
    "command",
    "elf_code_size",
    "elf_sections",
]

#: The ways ``score`` can read a number.
SCORE_MODES = ("file_size", "elf_code_size", "regex", "last_number", "json")

#: Placeholders with a fixed meaning; no variable may use these names.
_RESERVED = ("flags", "config_dir", "workdir")

#: Lines of standard error quoted when a command exits with a non-zero status.
_STDERR_TAIL = 5

_PLACEHOLDER = re.compile(r"\{\{|\}\}|\{([^{}\s]+)\}|[{}]")
_NUMBER = re.compile(r"[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?")


class CommandVariable(NamedTuple):
    """One variable: its name, the text of each value and that text split into arguments."""

    name: str
    values: Tuple[str, ...]
    arguments: Tuple[Tuple[str, ...], ...]


# -------------------------------------------------------------------------- ELF section sizes

#: Section flags (ELF specification, "System V Application Binary Interface", 1997/2013).
_SHF_ALLOC, _SHF_EXECINSTR = 0x2, 0x4
_SHT_NOBITS = 8
_SHN_XINDEX = 0xFFFF


class ElfFormatError(ValueError):
    """A file is not a well-formed ELF file; the message names the file and the fault."""


class ElfSection(NamedTuple):
    """One section header of an ELF file."""

    name: str
    type: int
    flags: int
    size: int

    @property
    def is_code(self) -> bool:
        """Allocated, executable and stored in the file (like ``.text``)."""
        return (self.flags & (_SHF_ALLOC | _SHF_EXECINSTR)) == (_SHF_ALLOC | _SHF_EXECINSTR) and (
            self.type != _SHT_NOBITS
        )


def elf_sections(path) -> List[ElfSection]:
    """The section headers of an ELF file (32 or 64 bit, either byte order).

    Reads the ELF header and the section header table with :mod:`struct`,
    following the layout of the System V ABI (``e_shoff``, ``e_shentsize``,
    ``e_shnum``, ``e_shstrndx``, with the extended numbering kept in section
    0 when a file has 0xff00 sections or more), and names each section from
    the section-name string table.

    Parameters
    ----------
    path : str or pathlib.Path
        The file.

    Returns
    -------
    list of ElfSection
        In file order, section 0 (the null section) included.

    Raises
    ------
    ElfFormatError
        When the file is not ELF or its headers point outside the file.
    """
    path = Path(path)
    data = path.read_bytes()

    def bad(reason: str) -> ElfFormatError:
        return ElfFormatError(f"{path}: not a readable ELF file: {reason}")

    if len(data) < 16 or data[:4] != b"\x7fELF":
        raise bad("it does not start with the ELF magic bytes")
    width, order = data[4], data[5]
    if width not in (1, 2) or order not in (1, 2):
        raise bad(f"unknown class {width} or data encoding {order}")
    endian = "<" if order == 1 else ">"
    header = struct.Struct(endian + ("16sHHIIIIIHHHHHH" if width == 1 else "16sHHIQQQIHHHHHH"))
    entry = struct.Struct(endian + ("IIIIIIIIII" if width == 1 else "IIQQQQIIQQ"))
    if len(data) < header.size:
        raise bad("the file ends inside the ELF header")
    fields = header.unpack_from(data, 0)
    shoff, shentsize, shnum, shstrndx = fields[6], fields[11], fields[12], fields[13]
    if shoff == 0:
        return []
    if shentsize < entry.size:
        raise bad(f"section headers of {shentsize} bytes; expected at least {entry.size}")

    def read_header(index: int):
        start = shoff + index * shentsize
        if start + entry.size > len(data):
            raise bad(f"section header {index} lies outside the file")
        name, kind, flags, _addr, offset, size, link, _info, _align, _entsize = entry.unpack_from(data, start)
        return name, kind, flags, offset, size, link

    first = read_header(0)
    if shnum == 0:
        shnum = first[4]
    if shstrndx == _SHN_XINDEX:
        shstrndx = first[5]
    if shnum * shentsize > len(data):
        raise bad(f"{shnum} section headers cannot fit in the file")
    headers = [read_header(i) for i in range(shnum)]
    if not 0 <= shstrndx < shnum:
        raise bad(f"the section-name table index {shstrndx} is out of range")
    _, _, _, names_offset, names_size, _ = headers[shstrndx]
    if names_offset + names_size > len(data):
        raise bad("the section-name table lies outside the file")
    names = data[names_offset : names_offset + names_size]
    sections = []
    for index, (name_at, kind, flags, _offset, size, _link) in enumerate(headers):
        end = names.find(b"\0", name_at)
        if name_at >= len(names) or end < 0:
            if name_at == 0 and index == 0:
                end = name_at
            else:
                raise bad(f"the name of section {index} lies outside the section-name table")
        sections.append(ElfSection(names[name_at:end].decode("utf-8", "replace"), kind, flags, size))
    return sections


def elf_code_size(path) -> int:
    """Total size in bytes of the code sections of an ELF file (see :attr:`ElfSection.is_code`)."""
    return int(sum(section.size for section in elf_sections(path) if section.is_code))


# -------------------------------------------------------------------------- reading the score


def _number_from_text(text: str, what: str) -> float:
    try:
        value = float(text.strip())
    except ValueError:
        raise EvaluationFailure("no-score", f"{what} is {text.strip()[:80]!r}, not a number") from None
    if not math.isfinite(value):
        raise EvaluationFailure("no-score", f"{what} is {value}, not a finite number")
    return value


def _json_lookup(document: Any, key: str, where: str) -> Any:
    value = document
    for part in key.split("."):
        if isinstance(value, dict) and part in value:
            value = value[part]
        elif isinstance(value, list) and re.fullmatch(r"-?\d+", part) and -len(value) <= int(part) < len(value):
            value = value[int(part)]
        else:
            raise EvaluationFailure("no-score", f"the JSON {where} has no key {key!r} (missing at {part!r})")
    return value


class _ScoreReader:
    """Reads the score of one finished command, as set out by the ``score`` option."""

    def __init__(self, spec, config_dir: Path):
        if not isinstance(spec, Mapping):
            raise ValueError(
                f"score: expected a mapping such as {{file_size: out.o}} or {{regex: 'size=(\\d+)'}}; found {spec!r}"
            )
        modes = [key for key in spec if key in SCORE_MODES]
        others = [key for key in spec if key not in SCORE_MODES and key != "stream"]
        if others:
            raise ValueError(
                f"score: unknown key {others[0]!r}; expected one of {', '.join(SCORE_MODES)} "
                f"(and 'stream' with regex or last_number)"
            )
        if len(modes) != 1:
            raise ValueError(
                f"score: expected exactly one of {', '.join(SCORE_MODES)}; found "
                f"{', '.join(modes) if modes else 'none'}"
            )
        self.mode = modes[0]
        value = spec[self.mode]
        self.config_dir = config_dir
        self.stream = spec.get("stream", "stdout")
        if "stream" in spec and self.mode not in ("regex", "last_number"):
            raise ValueError(f"score.stream: only regex and last_number read a stream, not {self.mode}")
        if self.stream not in ("stdout", "stderr"):
            raise ValueError(f"score.stream: expected stdout or stderr; found {self.stream!r}")
        self.file: Optional[str] = None
        self.key: Optional[str] = None
        if self.mode in ("file_size", "elf_code_size"):
            self.file = _plain_text(value, f"score.{self.mode}", "a file path")
            _fill_fixed(self.file, config_dir, config_dir, f"score.{self.mode}")
        elif self.mode == "regex":
            pattern = _plain_text(value, "score.regex", "a regular expression")
            try:
                self.pattern = re.compile(pattern, re.MULTILINE)
            except re.error as exc:
                raise ValueError(f"score.regex: {pattern!r} is not a valid regular expression ({exc})") from None
        elif self.mode == "last_number":
            if value is not True:
                raise ValueError(f"score.last_number: expected true; found {value!r}")
        else:
            if not isinstance(value, Mapping) or "key" not in value or set(value) - {"key", "file"}:
                raise ValueError(
                    f"score.json: expected a mapping {{key: KEY}} or {{key: KEY, file: PATH}}; found {value!r}"
                )
            self.key = _plain_text(value["key"], "score.json.key", "a key such as size or timing.median")
            if "file" in value:
                self.file = _plain_text(value["file"], "score.json.file", "a file path")
                _fill_fixed(self.file, config_dir, config_dir, "score.json.file")

    def describe(self) -> str:
        """What is looked for, in words (used in messages)."""
        if self.mode == "file_size":
            return f"the size of {self.file}"
        if self.mode == "elf_code_size":
            return f"the code size of the ELF file {self.file}"
        if self.mode == "regex":
            return f"a match of '{self.pattern.pattern}' in {self.stream}"
        if self.mode == "last_number":
            return f"a number in {self.stream}"
        return f"the key {self.key!r} of the JSON in {self.file or 'stdout'}"

    def _path(self, folder: Path) -> Path:
        text = _fill_fixed(self.file, self.config_dir, folder)
        path = Path(text).expanduser()
        return path if path.is_absolute() else folder / path

    def _existing(self, folder: Path) -> Path:
        path = self._path(folder)
        if not path.is_file():
            raise EvaluationFailure("no-score", f"looked for {self.describe()}, but the command wrote no file {path}")
        return path

    def read(self, stdout: str, stderr: str, folder: Path) -> float:
        if self.mode == "file_size":
            return float(self._existing(folder).stat().st_size)
        if self.mode == "elf_code_size":
            try:
                return float(elf_code_size(self._existing(folder)))
            except ElfFormatError as exc:
                raise EvaluationFailure("no-score", str(exc)) from None
        text = stderr if self.stream == "stderr" else stdout
        if self.mode == "regex":
            match = self.pattern.search(text)
            if match is None:
                raise EvaluationFailure(
                    "no-score", f"no match of '{self.pattern.pattern}' in {self.stream}{_quote_tail(text)}"
                )
            found = match.group(1) if self.pattern.groups else match.group(0)
            return _number_from_text(found or "", f"the match of '{self.pattern.pattern}'")
        if self.mode == "last_number":
            numbers = _NUMBER.findall(text)
            if not numbers:
                raise EvaluationFailure("no-score", f"no number in {self.stream}{_quote_tail(text)}")
            return _number_from_text(numbers[-1], f"the last number in {self.stream}")
        if self.file is not None:
            path = self._existing(folder)
            where = f"file {path}"
            try:
                document = json.loads(path.read_text(encoding="utf-8"))
            except (ValueError, UnicodeDecodeError) as exc:
                raise EvaluationFailure("no-score", f"{path} is not valid JSON ({exc})") from None
        else:
            where = "on stdout"
            try:
                document = json.loads(text)
            except ValueError as exc:
                raise EvaluationFailure("no-score", f"stdout is not valid JSON ({exc}){_quote_tail(text)}") from None
        value = _json_lookup(document, self.key, where)
        if isinstance(value, bool) or not isinstance(value, (int, float, str)):
            raise EvaluationFailure("no-score", f"the JSON {where} holds {value!r} at {self.key!r}, not a number")
        return _number_from_text(str(value), f"the value at {self.key!r}")


# -------------------------------------------------------------------------- validating options


def _plain_text(value, where: str, expected: str) -> str:
    if isinstance(value, bool) or not isinstance(value, (str, int, float)) or str(value) == "":
        raise ValueError(f"{where}: expected {expected}; found {value!r}")
    return str(value)


def _argument_text(value, where: str) -> str:
    if isinstance(value, bool) or not isinstance(value, (str, int, float)):
        raise ValueError(f"{where}: expected a text; found {value!r}")
    return str(value)


def _split(text: str, where: str) -> Tuple[str, ...]:
    try:
        return tuple(shlex.split(text))
    except ValueError as exc:
        raise ValueError(f"{where}: {text!r} cannot be split into arguments ({exc})") from None


def _parse_variables(variables) -> List[CommandVariable]:
    if not isinstance(variables, (list, tuple)) or not variables:
        raise ValueError("variables: expected a non-empty list of {name: ..., values: [...]} or {flag: ...}")
    parsed, seen = [], {}
    for index, entry in enumerate(variables):
        where = f"variables[{index}]"
        if not isinstance(entry, Mapping):
            raise ValueError(
                f"{where}: expected a mapping {{name: NAME, values: [TEXT, ...]}} or {{flag: TEXT}}; found {entry!r}"
            )
        unknown = set(entry) - {"name", "values", "flag"}
        if unknown:
            raise ValueError(f"{where}: unknown key {sorted(unknown)[0]!r}; expected name, values or flag")
        if ("values" in entry) == ("flag" in entry):
            raise ValueError(
                f"{where}: give either 'values' (a list of texts) or 'flag' (one text), not "
                f"{'both' if 'values' in entry else 'neither'}"
            )
        if "flag" in entry:
            flag = _plain_text(entry["flag"], f"{where}.flag", "a non-empty text")
            values = ["", flag]
            default_name = flag.lstrip("-")
        else:
            raw = entry["values"]
            if not isinstance(raw, (list, tuple)) or not 2 <= len(raw) <= 256:
                raise ValueError(f"{where}.values: expected a list of 2 to 256 texts; found {raw!r}")
            values = [_argument_text(v, f"{where}.values[{k}]") for k, v in enumerate(raw)]
            if len(set(values)) != len(values):
                raise ValueError(f"{where}.values: the texts must be distinct; found {raw!r}")
            default_name = None
        name = entry.get("name", default_name)
        if name is None:
            raise ValueError(f"{where}: a variable with 'values' needs a 'name'")
        name = _plain_text(name, f"{where}.name", "a name")
        if re.search(r"[{}\s]", name):
            raise ValueError(f"{where}.name: {name!r} may not contain spaces or braces")
        if name in _RESERVED:
            raise ValueError(f"{where}.name: {name!r} is reserved for the placeholder {{{name}}}; choose another")
        if name in seen:
            raise ValueError(f"{where}.name: {name!r} is also the name of variables[{seen[name]}]")
        seen[name] = index
        arguments = tuple(_split(v, f"{where}.values") for v in values)
        parsed.append(CommandVariable(name, tuple(values), arguments))
    return parsed


def _tokens(text: str, where: str, known) -> List[Tuple[str, str]]:
    """Split an argument template into ``("text", ...)`` and ``("field", name)`` pieces."""
    pieces = []
    position = 0
    for match in _PLACEHOLDER.finditer(text):
        if match.start() > position:
            pieces.append(("text", text[position : match.start()]))
        token = match.group(0)
        if token in ("{{", "}}"):
            pieces.append(("text", token[0]))
        elif match.group(1) is None:
            raise ValueError(f"{where}: a lone {token!r} in {text!r}; write {token * 2!r} for a literal brace")
        else:
            name = match.group(1)
            if name not in known:
                raise ValueError(
                    f"{where}: unknown placeholder {{{name}}} in {text!r}; known: "
                    + ", ".join("{" + k + "}" for k in known)
                )
            pieces.append(("field", name))
        position = match.end()
    if position < len(text):
        pieces.append(("text", text[position:]))
    return pieces


def _fill_fixed(text: str, config_dir: Path, workdir: Path, where: str = "path") -> str:
    """Replace ``{config_dir}`` and ``{workdir}`` in a text (braces doubled are literal)."""
    out = []
    for kind, value in _tokens(text, where, ("config_dir", "workdir")):
        out.append(value if kind == "text" else str(config_dir if value == "config_dir" else workdir))
    return "".join(out)


def _parse_start(start, variables: List[CommandVariable]) -> Optional[np.ndarray]:
    if start is None:
        return None
    if isinstance(start, np.ndarray):
        start = start.tolist()
    if not isinstance(start, (list, tuple)) or not start:
        raise ValueError(
            "start: expected a list of candidates (each a list of value indices, a text of digits, "
            "or a mapping from variable names to values)"
        )
    n = len(variables)
    by_name = {v.name: i for i, v in enumerate(variables)}
    rows = np.zeros((len(start), n), dtype=np.uint8)
    for r, item in enumerate(start):
        where = f"start[{r}]"
        if isinstance(item, Mapping):
            for name, value in item.items():
                if name not in by_name:
                    raise ValueError(f"{where}: no variable is named {name!r}")
                variable = variables[by_name[name]]
                if isinstance(value, str) and value in variable.values:
                    rows[r, by_name[name]] = variable.values.index(value)
                elif _is_index(value, len(variable.values)):
                    rows[r, by_name[name]] = int(value)
                else:
                    raise ValueError(
                        f"{where}.{name}: expected a value index 0..{len(variable.values) - 1} or one "
                        f"of the texts {list(variable.values)}; found {value!r}"
                    )
            continue
        if isinstance(item, str):
            if not re.fullmatch(r"[0-9]*", item):
                raise ValueError(f"{where}: a text candidate must be digits only; found {item!r}")
            values = [int(c) for c in item]
        elif isinstance(item, (list, tuple)):
            values = item
        else:
            raise ValueError(f"{where}: expected a list, a text of digits or a mapping; found {item!r}")
        if len(values) != n:
            raise ValueError(f"{where}: expected {n} values (one per variable); found {len(values)}")
        for i, value in enumerate(values):
            limit = len(variables[i].values)
            if not _is_index(value, limit):
                raise ValueError(
                    f"{where}[{i}] ({variables[i].name}): expected a value index 0..{limit - 1}; found {value!r}"
                )
            rows[r, i] = value
    return rows


def _is_index(value, limit: int) -> bool:
    """Whether ``value`` is a whole number (not a bool) in ``0 … limit - 1``."""
    return isinstance(value, numbers.Integral) and not isinstance(value, bool) and 0 <= int(value) < limit


def _program_found(program: str) -> bool:
    if os.sep in program or (os.altsep and os.altsep in program):
        return os.path.isfile(program) and os.access(program, os.X_OK)
    return shutil.which(program) is not None


def _quote_tail(text: str, lines: int = _STDERR_TAIL) -> str:
    kept = [line for line in text.strip().splitlines() if line.strip()][-lines:]
    return (":\n" + "\n".join(kept)) if kept else " (it was empty)"


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
    variables : list of CommandVariable
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
        self.variables = _parse_variables(variables)
        self.shell = shell
        self._template = self._parse_command(command)
        self.score = _ScoreReader(score, self.config_dir)
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
        self.start = _parse_start(start, self.variables)
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
            pieces = _tokens(command, "command", _RESERVED + tuple(v.name for v in self.variables))
            for kind, value in pieces:
                if kind == "field" and value not in ("config_dir", "workdir"):
                    raise ValueError(
                        f"command: with shell: true the candidate's arguments are the positional "
                        f'parameters; write "$@" instead of {{{value}}} (only {{config_dir}} and '
                        f"{{workdir}} may appear in the script)"
                    )
            return [pieces]
        if isinstance(command, str):
            command = list(_split(command, "command"))
        if not isinstance(command, (list, tuple)) or not command:
            raise ValueError(f"command: expected a non-empty list [program, argument, ...]; found {command!r}")
        known = _RESERVED + tuple(v.name for v in self.variables)
        template = []
        for index, argument in enumerate(command):
            where = f"command[{index}]"
            pieces = _tokens(_argument_text(argument, where), where, known)
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
        text = _plain_text(workdir, "workdir", "a folder path or null")
        path = Path(_fill_fixed(text, self.config_dir, self.config_dir, "workdir")).expanduser()
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
            out[key] = _argument_text(value, f"env.{key}")
            _tokens(out[key], f"env.{key}", ("config_dir", "workdir"))
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
            merged[key] = _fill_fixed(value, self.config_dir, Path(workdir))
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
            raise EvaluationFailure("exit", f"the command {what}; standard error{_quote_tail(stderr)}")
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
