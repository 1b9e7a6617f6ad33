"""``optim resume RUN_DIR``: continue a stopped run from its last checkpoint."""

from __future__ import annotations

import sys

from optim.commands._common import CAUTION, Progress, print_run_summary

__all__ = ["register"]


def _cmd_resume(args) -> int:
    from optim.runs.runner import resume

    progress = Progress(sys.stderr, 0, quiet=args.quiet)
    try:
        outcome = resume(args.run_dir, on_generation=progress.update)
    finally:
        progress.close()
    print_run_summary(outcome)
    return 0


def register(commands) -> None:
    parser = commands.add_parser(
        "resume",
        help="continue a stopped run from its last checkpoint",
        description="Continue a stopped run (Ctrl-C, SIGTERM, a crash) from its last checkpoint. The resumed run's "
        "log and result are those an uninterrupted run would have written.",
        epilog=CAUTION,
    )
    parser.add_argument("run_dir", help="the run folder (printed when the run started and when it stopped)")
    parser.add_argument("--quiet", action="store_true", help="no progress line")
    parser.set_defaults(handler=_cmd_resume)
