"""``optim problems``: the registered problems and their parameters."""

from __future__ import annotations

__all__ = ["register"]


def _cmd_problems(args) -> int:
    from optim import objectives

    for name in objectives.available():
        factory = objectives.get_factory(name)
        doc = (factory.__doc__ or "").strip().splitlines()
        summary = doc[0] if doc else ""
        print(f"{name}: {summary}")
        for parameter in objectives.factory_parameters(factory):
            default = "(required)" if parameter.default is objectives.REQUIRED else f"= {parameter.default!r}"
            description = f"  {parameter.description}" if parameter.description else ""
            print(f"    {parameter.name} {default}{description}")
    print("\nAny 'path/to/file.py:callable' or 'package.module:callable' also works as problem.use.")
    return 0


def register(commands) -> None:
    listing = commands.add_parser("problems", help="list the registered problems and their parameters")
    listing.set_defaults(handler=_cmd_problems)
