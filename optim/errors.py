"""Errors the command line reports as one clear line (exit status 2) instead of a traceback."""

from __future__ import annotations

__all__ = ["OptimError", "ConfigError", "RunFolderError"]


class OptimError(Exception):
    """Base of the errors caused by the user's input rather than by a bug."""


class ConfigError(OptimError, ValueError):
    """A run or sweep config (or a command-line override) is not valid.

    The message names the file, the line, the key, what was found and what was expected.
    """

    def __init__(self, message: str, source: str = "", line=None, key: str = ""):
        self.source, self.line, self.key = source, line, key
        where = source if line is None else f"{source}:{line}"
        prefix = f"{where}: " if where else ""
        keypart = f"'{key}': " if key else ""
        super().__init__(f"{prefix}{keypart}{message}")


class RunFolderError(OptimError):
    """A run folder cannot be created, read or continued."""
