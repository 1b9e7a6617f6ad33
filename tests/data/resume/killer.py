"""Run `optim run` and SIGKILL this very process at a chosen point (used by tests/test_resume.py).

Usage: python killer.py MODE K -- ARGS...
MODE is one of
  evaluation  - die inside the K-th call of the objective's evaluate()
  after-log   - die right after the K-th log line is appended (before its checkpoint)
  checkpoint  - die in the middle of writing the K-th checkpoint (temporary file half written)
"""

import os
import signal
import sys

mode, k = sys.argv[1], int(sys.argv[2])
args = sys.argv[sys.argv.index("--") + 1 :]
count = {"n": 0}


def die():
    os.kill(os.getpid(), signal.SIGKILL)


def tick():
    count["n"] += 1
    return count["n"] == k


import optim.runs.checkpoint as checkpoint  # noqa: E402
import optim.runs.folder as records  # noqa: E402
import optim.search as search  # noqa: E402

if mode == "evaluation":
    original = search.Search._fitness

    def fitness(self, X):
        if tick():
            die()
        return original(self, X)

    search.Search._fitness = fitness
elif mode == "after-log":
    original_append = records.RunFolder.append_log

    def append_log(self, record):
        original_append(self, record)
        if tick():
            die()

    records.RunFolder.append_log = append_log
elif mode == "checkpoint":
    original_write = checkpoint.atomic_write

    def atomic_write(path, data):
        if str(path).endswith("checkpoint.npz") and tick():
            with open(os.path.join(os.path.dirname(path), ".checkpoint.npz.killed.tmp"), "wb") as handle:
                handle.write(data[: len(data) // 2])
                handle.flush()
            die()
        original_write(path, data)

    checkpoint.atomic_write = atomic_write
else:
    raise SystemExit(f"unknown mode {mode}")

from optim.cli import main  # noqa: E402

raise SystemExit(main(args))
