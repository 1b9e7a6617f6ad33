"""Atomic writes and JSON Lines.

A whole file is written atomically: a temporary file in the same folder,
flushed and synced, then renamed over the target, so a reader sees the old or
the new file and a crash never leaves a half-written one. A JSON Lines file
holds one compact JSON object per line; a torn last line (no newline, left by
a write that was killed) is ignored when reading.
"""

from __future__ import annotations

import json
import os
import tempfile
from pathlib import Path

from optim.errors import RunFolderError

__all__ = ["atomic_write", "read_jsonl", "to_json", "to_json_document"]


def _fsync_folder(folder: Path) -> None:
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


def atomic_write(path, data: bytes) -> None:
    """Replace ``path`` with ``data`` so that readers see the old or the new file, never a mix."""
    path = Path(path)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    try:
        os.fchmod(fd, 0o666 & ~_umask())  # mkstemp makes 0600; give the file the usual permissions
        with os.fdopen(fd, "wb") as handle:
            handle.write(data)
            handle.flush()
            os.fsync(handle.fileno())
        os.replace(tmp, path)
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise
    _fsync_folder(path.parent)


def read_jsonl(path, with_lines: bool = False) -> list:
    """Records of a JSON Lines file (none if it does not exist); a torn last line (no newline) is ignored.

    With ``with_lines``, each entry is ``(line number, record)`` so callers can report where a bad record is.
    A line that is not valid JSON raises :class:`~optim.errors.RunFolderError` naming the file and line.
    """
    path = Path(path)
    if not path.exists():
        return []
    records = []
    with path.open("r", encoding="utf-8") as handle:
        for number, line in enumerate(handle, 1):
            if not line.endswith("\n"):
                break
            if line.strip():
                try:
                    record = json.loads(line)
                except json.JSONDecodeError as exc:
                    raise RunFolderError(f"{path}:{number}: not valid JSON ({exc.msg})") from None
                records.append((number, record) if with_lines else record)
    return records


def _json_default(value):
    import numpy as np

    if isinstance(value, np.integer):
        return int(value)
    if isinstance(value, np.floating):
        return float(value)
    if isinstance(value, np.ndarray):
        return value.tolist()
    raise TypeError(f"cannot write {type(value).__name__} as JSON")


def to_json(value) -> str:
    """``value`` as one compact line of JSON (numpy numbers and arrays as plain ones; NaN refused)."""
    return json.dumps(value, default=_json_default, allow_nan=False, separators=(",", ":"))


def to_json_document(value) -> bytes:
    """``value`` as an indented JSON document ending in a newline, UTF-8 (numpy numbers and arrays as plain ones)."""
    return (json.dumps(value, default=_json_default, indent=2) + "\n").encode()
