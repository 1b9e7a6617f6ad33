"""Read the score of one finished command, as its ``score`` option says.

The ways a number can be read are :data:`SCORE_MODES` (set out in
:mod:`optim.objectives.command`). A score that cannot be found or is not a
finite number raises :class:`~optim.evaluation.scoring.EvaluationFailure` of
kind ``no-score``, whose message says what was looked for.
"""

from __future__ import annotations

import json
import math
import re
from pathlib import Path
from typing import Any, Mapping, Optional

from optim.evaluation.scoring import EvaluationFailure
from optim.objectives.command_options import fill_fixed, plain_text
from optim.objectives.elf import ElfFormatError, elf_code_size

__all__ = ["SCORE_MODES", "ScoreReader", "quote_tail"]

#: The ways ``score`` can read a number.
SCORE_MODES = ("file_size", "elf_code_size", "regex", "last_number", "json")

#: Lines of an output quoted in a failure message.
_TAIL_LINES = 5

_NUMBER = re.compile(r"[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?")


def quote_tail(text: str, lines: int = _TAIL_LINES) -> str:
    """The last ``lines`` non-empty lines of an output, after a colon, to end a failure message."""
    kept = [line for line in text.strip().splitlines() if line.strip()][-lines:]
    return (":\n" + "\n".join(kept)) if kept else " (it was empty)"


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


class ScoreReader:
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
            self.file = plain_text(value, f"score.{self.mode}", "a file path")
            fill_fixed(self.file, config_dir, config_dir, f"score.{self.mode}")
        elif self.mode == "regex":
            pattern = plain_text(value, "score.regex", "a regular expression")
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
            self.key = plain_text(value["key"], "score.json.key", "a key such as size or timing.median")
            if "file" in value:
                self.file = plain_text(value["file"], "score.json.file", "a file path")
                fill_fixed(self.file, config_dir, config_dir, "score.json.file")

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
        text = fill_fixed(self.file, self.config_dir, folder)
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
                    "no-score", f"no match of '{self.pattern.pattern}' in {self.stream}{quote_tail(text)}"
                )
            found = match.group(1) if self.pattern.groups else match.group(0)
            return _number_from_text(found or "", f"the match of '{self.pattern.pattern}'")
        if self.mode == "last_number":
            numbers = _NUMBER.findall(text)
            if not numbers:
                raise EvaluationFailure("no-score", f"no number in {self.stream}{quote_tail(text)}")
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
                raise EvaluationFailure("no-score", f"stdout is not valid JSON ({exc}){quote_tail(text)}") from None
        value = _json_lookup(document, self.key, where)
        if isinstance(value, bool) or not isinstance(value, (int, float, str)):
            raise EvaluationFailure("no-score", f"the JSON {where} holds {value!r} at {self.key!r}, not a number")
        return _number_from_text(str(value), f"the value at {self.key!r}")
