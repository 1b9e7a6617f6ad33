"""``optim run CONFIG``: one search from a YAML run config."""

from __future__ import annotations

import json
import sys

from optim.commands._common import CAUTION, Progress, print_run_summary

__all__ = ["register"]


def _cmd_run(args) -> int:
    from optim.runs.config import load_run_config
    from optim.runs.runner import build_problem, execute

    overrides = list(args.set or [])
    if args.seed is not None:
        overrides.append(f"seed={args.seed}")
    if args.out is not None:
        overrides.append(f"out={args.out}")
    if args.jobs is not None:
        overrides.append(f"search.jobs={args.jobs}")
    if args.dask is not None:
        overrides.append(f"search.dask={json.dumps(args.dask)}")  # quoted: an address is never read as a number
    config = load_run_config(args.config, overrides)
    problem = build_problem(config)
    progress = Progress(sys.stderr, config.stop.evaluations, quiet=args.quiet)
    try:
        outcome = execute(config, problem, on_generation=progress.update, on_start=progress.started)
    finally:
        progress.close()
    print_run_summary(outcome)
    return 0


def register(commands) -> None:
    run = commands.add_parser(
        "run",
        help="run one search from a YAML config",
        description="Run one search from a YAML run config.",
        epilog=CAUTION,
    )
    run.add_argument("config", help="the run config (YAML)")
    run.add_argument("--seed", type=int, help="override the config's seed")
    run.add_argument("--out", help="override the output folder (default: the config's 'out', else runs/)")
    run.add_argument(
        "--set",
        action="append",
        metavar="KEY=VALUE",
        help="override one config value, e.g. --set search.population=800 (repeatable)",
    )
    run.add_argument(
        "--jobs",
        type=int,
        metavar="N",
        help="evaluate per-candidate objectives in N parallel workers (sets search.jobs)",
    )
    run.add_argument(
        "--dask",
        metavar="ADDRESS|local",
        help="evaluate on a Dask cluster: a scheduler address, or 'local' for a local cluster "
        "started for this run (sets search.dask)",
    )
    run.add_argument("--quiet", action="store_true", help="no progress line")
    run.set_defaults(handler=_cmd_run)
