"""Pieces shared by the command modules (private)."""

from __future__ import annotations

import time

__all__ = ["CAUTION", "Progress"]

CAUTION = (
    "Caution: an objective can be any program or Python code you point the config at. optim runs it "
    "with your user rights, many times, possibly in parallel. Only run configs you trust, and tune a "
    "staging copy rather than a live production system."
)


class Progress:
    """A progress line: rewritten in place on a terminal (a few times a second at most),
    an occasional plain line otherwise."""

    def __init__(self, stream, budget: int, quiet: bool = False):
        self.stream, self.budget, self.quiet = stream, budget, quiet
        self.tty = hasattr(stream, "isatty") and stream.isatty()
        self.interval = 0.25 if self.tty else 5.0
        self.last = 0.0
        self.width = 0

    def update(self, search, record: dict, force: bool = False) -> None:
        if self.quiet:
            return
        now = time.monotonic()
        if not force and now - self.last < self.interval:
            return
        self.last = now
        entropy = record.get("model_entropy")
        parts = [
            f"gen {record['generation']:>4}",
            f"evals {record['evaluations']:>8,}/{self.budget:,}",
            f"best {record['best']:.6g}" if record.get("best") is not None else "best -",
        ]
        if entropy is not None:
            parts.append(f"entropy {entropy:8.3f}")
        if record.get("failures"):
            parts.append(f"failures {record['failures']}")
        line = "  ".join(parts)
        if self.tty:
            pad = max(0, self.width - len(line))
            self.stream.write("\r" + line + " " * pad)
            self.width = len(line)
        else:
            self.stream.write(line + "\n")
        self.stream.flush()

    def close(self) -> None:
        if self.tty and self.width and not self.quiet:
            self.stream.write("\n")
            self.stream.flush()
