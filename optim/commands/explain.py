"""``optim explain RUN_DIR``: which settings matter and which act together, from a run's records."""

from __future__ import annotations

import argparse
import json

__all__ = ["register"]


def _positive(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a positive whole number; found {text!r}") from None
    if value < 1:
        raise argparse.ArgumentTypeError(f"expected a positive whole number; found {text!r}")
    return value


def _cmd_explain(args) -> int:
    from optim.explain import explain_run, short_lines, to_document, write_pictures, write_reports

    explanation = explain_run(args.run_dir, top=args.top)
    if args.no_pictures:
        pictures, note = {}, "Pictures skipped (--no-pictures)."
    else:
        pictures, note = write_pictures(explanation)
    written = write_reports(explanation, pictures, note)
    if args.format == "json":
        print(json.dumps(to_document(explanation, pictures, note), indent=2, allow_nan=False))
        return 0
    for line in short_lines(explanation):
        print(line)
    if note:
        print(note)
    names = ", ".join(list(written) + list(pictures))
    print(f"wrote {names} in {explanation.data.path}")
    return 0


def register(commands) -> None:
    explain = commands.add_parser(
        "explain",
        help="what a run learned: important settings, interacting pairs, how sure",
        description="Read a finished (or stopped) run folder and report which settings the best candidates "
        "agree on, which pairs of settings act together, and how sure that is. Writes explain.md, "
        "explain.json and (with matplotlib) tree.png, interactions.png and convergence.png into the "
        "run folder, and prints a short form. The objective is never run again.",
    )
    explain.add_argument("run_dir", metavar="RUN_DIR", help="the run folder (made by optim run)")
    explain.add_argument(
        "--top",
        type=_positive,
        default=10,
        metavar="K",
        help="settings and pairs in the printed summary and the report's tables (default 10)",
    )
    explain.add_argument(
        "--format",
        choices=("md", "json"),
        default="md",
        help="what to print: the short text form (md, default) or the full JSON document; "
        "both files are written either way",
    )
    explain.add_argument("--no-pictures", action="store_true", help="do not draw the pictures")
    explain.set_defaults(handler=_cmd_explain)
