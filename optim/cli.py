"""The ``optim`` command line: ``optim COMMAND …`` (see ``optim --help``)."""

from __future__ import annotations

import argparse
import importlib
import sys
from typing import List, Optional

from optim import __version__
from optim.commands import COMMAND_MODULES
from optim.commands._common import CAUTION
from optim.errors import OptimError

__all__ = ["main", "build_parser"]


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="optim",
        description="Estimation-of-distribution search with dependency trees for discrete black-box problems.",
        epilog=CAUTION,
    )
    parser.add_argument("--version", action="version", version=f"optim {__version__}")
    commands = parser.add_subparsers(dest="command", metavar="COMMAND")
    commands.required = True
    for name in COMMAND_MODULES:
        importlib.import_module(name).register(commands)
    return parser


def main(argv: Optional[List[str]] = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        return args.handler(args)
    except OptimError as exc:
        status = getattr(exc, "exit_status", 2)
        label = "stopped" if status != 2 else "error"
        print(f"optim: {label}: {exc}", file=sys.stderr)
        return status
    except KeyboardInterrupt:
        print("optim: interrupted", file=sys.stderr)
        return 130
