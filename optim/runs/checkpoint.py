"""Checkpoints: a search's whole state in one ``.npz`` file, written atomically.

Nested state (dicts of numpy arrays and plain values, as returned by
``Search.get_state``) is split into arrays, stored as ``.npz`` members, and
everything else, stored as one JSON document in the member ``__meta__``. No
pickle is involved, so loading a checkpoint never runs code.
"""

from __future__ import annotations

import io
import json
from pathlib import Path
from typing import Any, Dict, Tuple

import numpy as np

from optim.errors import RunFolderError
from optim.files import atomic_write

__all__ = ["FORMAT", "save_checkpoint", "load_checkpoint", "flatten_state", "unflatten_state"]

#: Identifies the layout of checkpoint files and of the method states inside them; bumped when either
#: changes incompatibly (2: the population ladder runs one population at a time).
FORMAT = "optim-checkpoint-2"

_ARRAY = "__array__"


def flatten_state(state: Any, prefix: str = "") -> Tuple[Any, Dict[str, np.ndarray]]:
    """Split nested state into a JSON-able skeleton and a dict of arrays."""
    arrays: Dict[str, np.ndarray] = {}

    def walk(value, path):
        if isinstance(value, np.ndarray):
            arrays[path] = value
            return {_ARRAY: path}
        if isinstance(value, dict):
            return {str(k): walk(v, f"{path}/{k}") for k, v in value.items()}
        if isinstance(value, (list, tuple)):
            return [walk(v, f"{path}/{i}") for i, v in enumerate(value)]
        if isinstance(value, np.generic):
            return value.item()
        return value

    return walk(state, prefix), arrays


def unflatten_state(skeleton: Any, arrays) -> Any:
    """Inverse of :func:`flatten_state`."""
    if isinstance(skeleton, dict):
        if set(skeleton) == {_ARRAY}:
            return np.array(arrays[skeleton[_ARRAY]])
        return {k: unflatten_state(v, arrays) for k, v in skeleton.items()}
    if isinstance(skeleton, list):
        return [unflatten_state(v, arrays) for v in skeleton]
    return skeleton


def save_checkpoint(path, state: dict, info: dict) -> None:
    """Write ``state`` (and descriptive ``info``) to ``path`` atomically."""
    skeleton, arrays = flatten_state(state, "s")
    meta = {"format": FORMAT, "info": info, "state": skeleton}
    members = {name: value for name, value in arrays.items()}
    members["__meta__"] = np.frombuffer(json.dumps(meta).encode("utf-8"), dtype=np.uint8)
    buffer = io.BytesIO()
    np.savez(buffer, **members)
    atomic_write(path, buffer.getvalue())


def load_checkpoint(path) -> Tuple[dict, dict]:
    """Read a checkpoint; returns ``(state, info)``. Unreadable or foreign files raise RunFolderError."""
    path = Path(path)
    try:
        with np.load(path, allow_pickle=False) as data:
            meta = json.loads(bytes(data["__meta__"]).decode("utf-8"))
            if meta.get("format") != FORMAT:
                raise RunFolderError(
                    f"{path}: checkpoint format {meta.get('format')!r} is not {FORMAT!r}; it was written by an "
                    f"incompatible version of optim ({meta.get('info', {}).get('version', 'unknown')})"
                )
            arrays = {name: data[name] for name in data.files if name != "__meta__"}
    except RunFolderError:
        raise
    except FileNotFoundError:
        raise RunFolderError(f"{path}: no checkpoint (the run stopped before its first checkpoint)") from None
    except (OSError, ValueError, KeyError, json.JSONDecodeError) as exc:
        raise RunFolderError(f"{path}: not a readable checkpoint ({exc})") from None
    return unflatten_state(meta["state"], arrays), meta.get("info", {})
