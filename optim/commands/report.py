"""``optim report SWEEP_DIR``: the statistical report of a sweep (report.md and PNG plots)."""

from __future__ import annotations

__all__ = ["register"]


def _cmd_report(args) -> int:
    from optim.sweeps.report import write_report

    report = write_report(args.folder, baseline=args.baseline, plots=not args.no_plots)
    print(report.table, end="")
    for note in report.notes:
        print(f"note: {note}")
    print(f"report       {report.path}")
    if report.plots:
        print(f"plots        {len(report.plots)} in {report.plots[0].parent}")
    return 0


def register(commands) -> None:
    report = commands.add_parser(
        "report",
        help="write the statistical report of a sweep",
        description="Write report.md and PNG plots into a sweep folder and print the main table: successes, "
        "evaluations to target, expected running time, final scores with bootstrap intervals, and "
        "Mann-Whitney tests with Vargha-Delaney effect sizes against the baseline method.",
    )
    report.add_argument("folder", metavar="SWEEP_DIR", help="the sweep folder (<out>/<name>, made by optim sweep)")
    report.add_argument(
        "--baseline",
        metavar="LABEL",
        help="the method every other one is compared with (default: the first tree method)",
    )
    report.add_argument("--no-plots", action="store_true", help="write report.md without plots")
    report.set_defaults(handler=_cmd_report)
