"""Errors the command line reports as one clear line (exit status 2) instead of a traceback."""

from __future__ import annotations

__all__ = ["OptimError", "ConfigError", "ParameterError", "RunFolderError", "parameter_message"]


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


def parameter_message(parameter: str, expected: str, shown: str) -> str:
    """The one sentence every broken parameter rule is reported with.

    Parameters
    ----------
    parameter : str
        The parameter's name.
    expected : str
        What the value should have been, e.g. ``"a number in (0, 1]"``.
    shown : str
        The value that was given, as shown to the user (usually its ``repr``).

    Returns
    -------
    str
        ``The 'select' parameter must be a number in (0, 1]. Got 1.5 instead.``
    """
    return f"The '{parameter}' parameter must be {expected}. Got {shown} instead."


class ParameterError(OptimError, ValueError):
    """A parameter of a search, a stop rule or a problem has a value outside its rule.

    Parameters
    ----------
    parameter : str
        The parameter's name.
    expected : str
        What the value should have been.
    value : object
        The value that was given.
    """

    def __init__(self, parameter: str, expected: str, value):
        self.parameter, self.expected, self.value = parameter, expected, value
        super().__init__(parameter_message(parameter, expected, repr(value)))

    def renamed(self, parameter: str) -> "ParameterError":
        """The same error reported under another name (an entry point's own name for the parameter)."""
        return ParameterError(parameter, self.expected, self.value)


class RunFolderError(OptimError):
    """A run folder cannot be created, read or continued."""
