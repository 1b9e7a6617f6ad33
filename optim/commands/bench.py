"""``optim bench [--quick] [--out DIR]``: measure speed and sample efficiency, check the targets."""

from __future__ import annotations

__all__ = ["register"]


def _cmd_bench(args) -> int:
    from optim.bench.suite import FULL, QUICK, run_bench, write_bench
    from optim.bench.report import format_text

    report = run_bench(QUICK if args.quick else FULL)
    path = write_bench(report, args.out)
    print(format_text(report), end="")
    met = sum(t["met"] for t in report["targets"])
    print(f"\n{met} of {len(report['targets'])} targets met; {report['seconds']:.0f} s; results in {path}")
    return 0


def register(commands) -> None:
    bench = commands.add_parser(
        "bench",
        help="measure the tool's speed and sample efficiency and check its targets",
        description="Measure model fitting and sampling against bare numpy operations, one generation, peak "
        "memory, and the evaluations each method needs to reach the optimum of benchmark problems; "
        "write bench.json and bench.md and print the tables. The full run takes long; --quick "
        "uses small sizes and three seeds (a few minutes).",
    )
    bench.add_argument("--quick", action="store_true", help="small sizes and three seeds (a few minutes)")
    bench.add_argument("--out", default="runs/bench", help="folder for bench.json and bench.md (default: runs/bench)")
    bench.set_defaults(handler=_cmd_bench)
