"""Check the options of the external-command objective: its variables, argument templates and start candidates.

Every mistake is a :class:`ValueError` whose message names the option
(``variables[2].values``, ``command[1]``, ``start[0]`` …) and the expected
form; the options themselves are set out in :mod:`optim.objectives.command`.
"""

from __future__ import annotations

import numbers
import re
import shlex
from pathlib import Path
from typing import List, Mapping, NamedTuple, Optional, Tuple

import numpy as np

__all__ = [
    "CommandVariable",
    "RESERVED",
    "argument_text",
    "fill_fixed",
    "parse_start",
    "parse_variables",
    "plain_text",
    "split_arguments",
    "template_pieces",
]

#: Placeholders with a fixed meaning; no variable may use these names.
RESERVED = ("flags", "config_dir", "workdir")

_PLACEHOLDER = re.compile(r"\{\{|\}\}|\{([^{}\s]+)\}|[{}]")


class CommandVariable(NamedTuple):
    """One variable: its name, the text of each value and that text split into arguments."""

    name: str
    values: Tuple[str, ...]
    arguments: Tuple[Tuple[str, ...], ...]


def plain_text(value, where: str, expected: str) -> str:
    if isinstance(value, bool) or not isinstance(value, (str, int, float)) or str(value) == "":
        raise ValueError(f"{where}: expected {expected}; found {value!r}")
    return str(value)


def argument_text(value, where: str) -> str:
    if isinstance(value, bool) or not isinstance(value, (str, int, float)):
        raise ValueError(f"{where}: expected a text; found {value!r}")
    return str(value)


def split_arguments(text: str, where: str) -> Tuple[str, ...]:
    try:
        return tuple(shlex.split(text))
    except ValueError as exc:
        raise ValueError(f"{where}: {text!r} cannot be split into arguments ({exc})") from None


def parse_variables(variables) -> List[CommandVariable]:
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
            flag = plain_text(entry["flag"], f"{where}.flag", "a non-empty text")
            values = ["", flag]
            default_name = flag.lstrip("-")
        else:
            raw = entry["values"]
            if not isinstance(raw, (list, tuple)) or not 2 <= len(raw) <= 256:
                raise ValueError(f"{where}.values: expected a list of 2 to 256 texts; found {raw!r}")
            values = [argument_text(v, f"{where}.values[{k}]") for k, v in enumerate(raw)]
            if len(set(values)) != len(values):
                raise ValueError(f"{where}.values: the texts must be distinct; found {raw!r}")
            default_name = None
        name = entry.get("name", default_name)
        if name is None:
            raise ValueError(f"{where}: a variable with 'values' needs a 'name'")
        name = plain_text(name, f"{where}.name", "a name")
        if re.search(r"[{}\s]", name):
            raise ValueError(f"{where}.name: {name!r} may not contain spaces or braces")
        if name in RESERVED:
            raise ValueError(f"{where}.name: {name!r} is reserved for the placeholder {{{name}}}; choose another")
        if name in seen:
            raise ValueError(f"{where}.name: {name!r} is also the name of variables[{seen[name]}]")
        seen[name] = index
        arguments = tuple(split_arguments(v, f"{where}.values") for v in values)
        parsed.append(CommandVariable(name, tuple(values), arguments))
    return parsed


def template_pieces(text: str, where: str, known) -> List[Tuple[str, str]]:
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


def fill_fixed(text: str, config_dir: Path, workdir: Path, where: str = "path") -> str:
    """Replace ``{config_dir}`` and ``{workdir}`` in a text (braces doubled are literal)."""
    out = []
    for kind, value in template_pieces(text, where, ("config_dir", "workdir")):
        out.append(value if kind == "text" else str(config_dir if value == "config_dir" else workdir))
    return "".join(out)


def parse_start(start, variables: List[CommandVariable]) -> Optional[np.ndarray]:
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
