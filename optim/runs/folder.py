"""The run folder: resolved config, per-generation log, result, learned tree.

Layout of ``<out>/<name>-s<seed>-<UTC time>/``:

``config.yaml``
    The resolved config, every default filled in.
``log.jsonl``
    One JSON object per generation (JSON Lines).
``result.json``
    The final result.
``tree.graphml``
    The last dependency tree or forest (tree and forest methods).
``trees.jsonl``
    Each generation's tree edges as ``[parent, child, mutual information]``,
    and the number of survivors the tree was fitted on (``fitted_on``).
``failures.jsonl``
    One JSON object per failed evaluation.
``evaluated.npz``
    Every evaluated candidate (``candidates``, uint8), its score (``scores``,
    nan where the evaluation failed) and its generation (``generation``);
    while the run is going on, ``evaluated.part`` collects the same records
    (fixed-size binary rows, appended once per generation).
``run.json``
    Facts about the run: optim version, the config file it came from, the
    problem's summary.
``checkpoint.npz``
    The state to continue from (see :mod:`optim.runs.checkpoint`).

:class:`RunFolder` is the one place that knows these names and formats: each
record has its writer and its reader there. Whole files are written
atomically (a temporary file in the same folder, flushed and synced, then
renamed over the target); a log line is written with one ``write`` call and
synced, so a crash never leaves a half-written file.
"""

from __future__ import annotations

import datetime as _dt
import json
import os
import zipfile
from pathlib import Path
from typing import Iterable, List, Optional

import yaml

from optim.errors import RunFolderError
from optim.files import atomic_write, read_jsonl, to_json, to_json_document
from optim.runs.checkpoint import load_checkpoint, save_checkpoint

__all__ = ["RunFolder"]


class RunFolder:
    """One run's folder and the files in it."""

    CONFIG, LOG, RESULT, TREE, TREES, FAILURES, EVALUATED = (
        "config.yaml",
        "log.jsonl",
        "result.json",
        "tree.graphml",
        "trees.jsonl",
        "failures.jsonl",
        "evaluated.npz",
    )
    EVALUATED_PART, INFO, CHECKPOINT = "evaluated.part", "run.json", "checkpoint.npz"
    #: JSON Lines files whose records carry a ``generation`` and are cut back on resume.
    PER_GENERATION = (LOG, TREES, FAILURES)

    def __init__(self, path):
        self.path = Path(path)

    @classmethod
    def create(cls, out, name: str, seed: int, now: Optional[_dt.datetime] = None) -> "RunFolder":
        """Make ``<out>/<name>-s<seed>-<UTC time>/`` (a suffix ``-2``, ``-3`` … if it exists)."""
        now = now or _dt.datetime.now(_dt.timezone.utc)
        stamp = now.strftime("%Y%m%dT%H%M%SZ")
        out = Path(out)
        try:
            out.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise RunFolderError(f"cannot create the output folder {out}: {exc.strerror or exc}") from None
        if not os.access(out, os.W_OK | os.X_OK):
            raise RunFolderError(f"the output folder {out} is not writable")
        base = f"{name}-s{seed}-{stamp}"
        for attempt in range(1, 1000):
            path = out / (base if attempt == 1 else f"{base}-{attempt}")
            try:
                path.mkdir()
                return cls(path)
            except FileExistsError:
                continue
            except OSError as exc:
                raise RunFolderError(f"cannot create the run folder {path}: {exc.strerror or exc}") from None
        raise RunFolderError(f"too many run folders named {base} in {out}")

    def file(self, name: str) -> Path:
        return self.path / name

    # -- config.yaml ------------------------------------------------------------------------------
    def write_config(self, config: dict) -> None:
        atomic_write(self.file(self.CONFIG), yaml.safe_dump(config, sort_keys=False).encode("utf-8"))

    def read_config(self) -> dict:
        """The resolved config as written (a mapping); a missing or unreadable file raises RunFolderError."""
        path = self.file(self.CONFIG)
        try:
            data = yaml.safe_load(path.read_text(encoding="utf-8"))
        except FileNotFoundError:
            raise RunFolderError(f"{self.path}: not a run folder (no {self.CONFIG})") from None
        except yaml.YAMLError as exc:
            mark = getattr(exc, "problem_mark", None)
            line = f":{mark.line + 1}" if mark is not None else ""
            raise RunFolderError(f"{path}{line}: not valid YAML") from None
        except (OSError, UnicodeDecodeError) as exc:
            raise RunFolderError(f"{path}: cannot be read ({exc})") from None
        if not isinstance(data, dict):
            raise RunFolderError(f"{path}:1: expected a mapping (a resolved run config)")
        return data

    def read_run_config(self):
        """The resolved config checked as a :class:`~optim.runs.config.RunConfig` (to continue the run)."""
        from optim.runs.config import load_run_config

        return load_run_config(self.file(self.CONFIG))

    # -- run.json and result.json -----------------------------------------------------------------
    def _read_json_object(self, name: str) -> Optional[dict]:
        path = self.file(name)
        try:
            value = json.loads(path.read_text(encoding="utf-8"))
        except FileNotFoundError:
            return None
        except json.JSONDecodeError as exc:
            raise RunFolderError(f"{path}:{exc.lineno}: not valid JSON ({exc.msg})") from None
        except (OSError, UnicodeDecodeError) as exc:
            raise RunFolderError(f"{path}: cannot be read ({exc})") from None
        if not isinstance(value, dict):
            raise RunFolderError(f"{path}:1: expected a JSON object")
        return value

    def write_info(self, info: dict) -> None:
        atomic_write(self.file(self.INFO), to_json_document(info))

    def read_info(self, required: bool = True) -> Optional[dict]:
        """The facts about the run; without the file, RunFolderError (or ``None`` when not ``required``)."""
        info = self._read_json_object(self.INFO)
        if info is None and required:
            raise RunFolderError(f"{self.path} is not a run folder (no {self.INFO})")
        return info

    def write_result(self, result: dict) -> None:
        atomic_write(self.file(self.RESULT), to_json_document(result))

    def read_result(self) -> Optional[dict]:
        """The final result, or ``None`` while the run has not finished."""
        return self._read_json_object(self.RESULT)

    # -- the JSON Lines records -------------------------------------------------------------------
    def _append_lines(self, name: str, records: Iterable[dict]) -> None:
        """Append records to a JSON Lines file, one ``write`` and one sync for the batch."""
        lines = "".join(to_json(r) + "\n" for r in records)
        if not lines:
            return
        with self.file(name).open("a", encoding="utf-8") as handle:
            handle.write(lines)
            handle.flush()
            os.fsync(handle.fileno())

    def append_log(self, record: dict) -> None:
        self._append_lines(self.LOG, [record])

    def read_log(self) -> list:
        return read_jsonl(self.file(self.LOG))

    def append_failures(self, generation: int, failures: Iterable[dict]) -> None:
        """Record the failed evaluations of one generation (each a dict), tagged with the generation."""
        self._append_lines(self.FAILURES, [dict(failure, generation=generation) for failure in failures])

    def read_failures(self) -> list:
        return read_jsonl(self.file(self.FAILURES))

    def append_tree(self, generation: int, edges, information, fitted_on: Optional[int] = None) -> None:
        """Record one generation's tree.

        Parameters
        ----------
        generation : int
            The generation whose model this is.
        edges : array_like of int, shape (edges, 2)
            The tree's ``(parent, child)`` pairs.
        information : array_like of float, shape (edges,)
            Mutual information (nats) of each edge, written rounded to 8 decimals.
        fitted_on : int, optional
            How many survivors the tree was fitted on (left out when unknown).
        """
        import numpy as np

        pairs = np.asarray(edges, dtype=np.int64).reshape(-1, 2).tolist()
        values = np.asarray(information, dtype=np.float64).reshape(-1).tolist()
        record = {
            "generation": generation,
            "edges": [[parent, child, round(value, 8)] for (parent, child), value in zip(pairs, values, strict=True)],
        }
        if fitted_on is not None:
            record["fitted_on"] = int(fitted_on)
        self._append_lines(self.TREES, [record])

    def read_trees(self, n: int) -> List[dict]:
        """The ``trees.jsonl`` records, checked against ``n`` variables; a torn last line is ignored."""
        path = self.file(self.TREES)
        records = []
        for number, record in read_jsonl(path, with_lines=True):
            where = f"{path}:{number}"
            if (
                not isinstance(record, dict)
                or not isinstance(record.get("generation"), int)
                or not isinstance(record.get("edges"), list)
            ):
                raise RunFolderError(
                    f"{where}: expected an object with 'generation' (a whole number) and "
                    f"'edges' (a list of [parent, child, mutual information])"
                )
            for edge in record["edges"]:
                if (
                    not isinstance(edge, list)
                    or len(edge) != 3
                    or not all(isinstance(v, int) and 0 <= v < n for v in edge[:2])
                    or not isinstance(edge[2], (int, float))
                ):
                    raise RunFolderError(
                        f"{where}: expected each edge as [parent, child, mutual information] "
                        f"with variable indices 0..{n - 1}; found {edge!r}"
                    )
            fitted_on = record.get("fitted_on")
            if fitted_on is not None and (not isinstance(fitted_on, int) or fitted_on < 1):
                raise RunFolderError(f"{where}: 'fitted_on' must be a positive whole number; found {fitted_on!r}")
            records.append(record)
        return records

    # -- tree.graphml -----------------------------------------------------------------------------
    def write_tree(self, graph) -> None:
        """Write a networkx graph as GraphML, atomically."""
        import io

        import networkx as nx

        buffer = io.BytesIO()
        nx.write_graphml(graph, buffer)
        atomic_write(self.file(self.TREE), buffer.getvalue())

    def read_tree(self):
        """The last learned tree as a networkx graph (integer nodes), or ``None`` if the run wrote none.

        A file that cannot be parsed raises RunFolderError.
        """
        import networkx as nx

        path = self.file(self.TREE)
        if not path.exists():
            return None
        try:
            return nx.read_graphml(path, node_type=int)
        except Exception as exc:  # the XML parser and networkx raise many kinds of error on a damaged file
            raise RunFolderError(f"{path}: cannot be read as a tree ({exc})") from None

    # -- evaluated.npz and evaluated.part ---------------------------------------------------------
    def write_evaluated(self, candidates, scores, generation) -> None:
        """Write every evaluated candidate with its score and generation (compressed .npz), atomically."""
        import io

        import numpy as np

        buffer = io.BytesIO()
        np.savez_compressed(buffer, candidates=candidates, scores=scores, generation=generation)
        atomic_write(self.file(self.EVALUATED), buffer.getvalue())

    def read_evaluated(self, n: Optional[int] = None):
        """``(candidates, scores, generation)`` from ``evaluated.npz``, or ``None`` if absent.

        Given the number of variables ``n``, a run that has not finished is read from
        ``evaluated.part`` instead. An unreadable file raises RunFolderError.
        """
        import numpy as np

        path = self.file(self.EVALUATED)
        if path.exists():
            try:
                with np.load(path, allow_pickle=False) as data:
                    return data["candidates"], data["scores"], data["generation"]
            except (OSError, ValueError, KeyError, zipfile.BadZipFile) as exc:
                raise RunFolderError(f"{path}: cannot be read as evaluated candidates ({exc})") from None
        if n is not None and self.file(self.EVALUATED_PART).exists():
            return self.read_evaluated_part(n)
        return None

    @staticmethod
    def _evaluated_dtype(n: int):
        import numpy as np

        return np.dtype([("candidate", np.uint8, (n,)), ("score", "<f8"), ("generation", "<i4")])

    def append_evaluated(self, candidates, scores, generation: int) -> None:
        """Append one generation's candidates and scores to ``evaluated.part`` (synced)."""
        import numpy as np

        rows = np.empty(len(scores), dtype=self._evaluated_dtype(candidates.shape[1]))
        rows["candidate"], rows["score"], rows["generation"] = candidates, scores, generation
        with self.file(self.EVALUATED_PART).open("ab") as handle:
            handle.write(rows.tobytes())
            handle.flush()
            os.fsync(handle.fileno())

    def read_evaluated_part(self, n: int):
        """``(candidates, scores, generation)`` collected so far in ``evaluated.part``."""
        import numpy as np

        dtype = self._evaluated_dtype(n)
        path = self.file(self.EVALUATED_PART)
        raw = path.read_bytes() if path.exists() else b""
        rows = np.frombuffer(raw[: len(raw) // dtype.itemsize * dtype.itemsize], dtype=dtype)
        return rows["candidate"].copy(), rows["score"].copy(), rows["generation"].astype(np.int64)

    def finish_evaluated(self, n: int) -> None:
        """Turn ``evaluated.part`` into ``evaluated.npz`` (then remove the part file)."""
        self.write_evaluated(*self.read_evaluated_part(n))
        try:
            self.file(self.EVALUATED_PART).unlink()
        except FileNotFoundError:
            pass

    # -- checkpoint.npz ---------------------------------------------------------------------------
    def write_checkpoint(self, state: dict, info: dict) -> None:
        """Save the search state to continue from, with descriptive ``info`` (see :mod:`optim.runs.checkpoint`)."""
        save_checkpoint(self.file(self.CHECKPOINT), state, info)

    def read_checkpoint(self):
        """``(state, info)`` of the last checkpoint; a missing or foreign file raises RunFolderError."""
        return load_checkpoint(self.file(self.CHECKPOINT))

    # -- continuing a run -------------------------------------------------------------------------
    def cut_back(self, generation: int, evaluated_rows: int, n: int) -> None:
        """Forget everything recorded for generations >= ``generation`` (before a resume).

        JSON Lines files are rewritten atomically with the earlier records only,
        and ``evaluated.part`` is truncated to its first ``evaluated_rows`` rows.
        """
        for name in self.PER_GENERATION:
            path = self.file(name)
            if not path.exists():
                continue
            records = read_jsonl(path)
            kept = [r for r in records if r.get("generation", -1) < generation]
            if len(kept) != len(records) or not path.read_bytes().endswith(b"\n"):
                atomic_write(path, "".join(to_json(r) + "\n" for r in kept).encode("utf-8"))
        part = self.file(self.EVALUATED_PART)
        size = evaluated_rows * self._evaluated_dtype(n).itemsize
        if part.exists():
            if part.stat().st_size < size:
                raise RunFolderError(f"{part} holds fewer records than the checkpoint expects; the folder is damaged")
            with part.open("r+b") as handle:
                handle.truncate(size)
                handle.flush()
                os.fsync(handle.fileno())
        elif evaluated_rows:
            raise RunFolderError(f"{part} is missing; the folder is damaged")

    def remove_stale_temporaries(self) -> None:
        """Delete temporary files left by an atomic write that was killed before its rename."""
        for leftover in self.path.glob(".*.tmp"):
            try:
                leftover.unlink()
            except OSError:
                pass
