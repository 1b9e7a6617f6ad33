"""The subcommands of ``optim``; each module has ``register(subparsers)``."""

#: Modules whose ``register`` adds a subcommand, in the order ``optim --help`` lists them.
COMMAND_MODULES = (
    "optim.commands.run",
    "optim.commands.resume",
    "optim.commands.problems",
    "optim.commands.explain",
    "optim.commands.sweep",
    "optim.commands.report",
    "optim.commands.bench",
)
