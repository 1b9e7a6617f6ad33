"""``optim sweep SWEEP.yaml``: every problem × method × seed of a sweep config, resumable."""

from __future__ import annotations

import sys

from optim.commands._common import CAUTION

__all__ = ["register"]


def _cmd_sweep(args) -> int:
    from optim.sweeps.running import run_sweep
    from optim.sweeps.config import load_sweep_config

    config = load_sweep_config(args.config)
    outcome = run_sweep(
        config, out=args.out, jobs=args.jobs, dask=args.dask, progress_stream=sys.stderr, quiet=args.quiet
    )
    print(f"sweep {config.name}: {outcome.total} jobs, {outcome.skipped} already finished, {outcome.ran} run now")
    print(f"results      {outcome.store.results_path}")
    print(f"next         optim report {outcome.store.path}")
    return 0


def register(commands) -> None:
    sweep = commands.add_parser(
        "sweep",
        help="run a seeded comparison of methods on problems (resumable)",
        description="Run every problem x method x seed job of a sweep config. Finished jobs are kept in "
        "<out>/<name>/results.jsonl; running the same sweep again runs only the missing ones.",
        epilog=CAUTION,
    )
    sweep.add_argument("config", help="the sweep config (YAML)")
    sweep.add_argument(
        "--jobs",
        type=int,
        metavar="N",
        help="worker processes (default 1; with --dask local, the number of Dask workers, default 2)",
    )
    sweep.add_argument(
        "--dask",
        metavar="ADDRESS|local",
        help="run on a Dask cluster: a scheduler address, or 'local' for a new local cluster",
    )
    sweep.add_argument("--out", metavar="DIR", help="where the sweep folder is made (default: the config's 'out')")
    sweep.add_argument("--quiet", action="store_true", help="no progress line")
    sweep.set_defaults(handler=_cmd_sweep)
