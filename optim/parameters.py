"""The rules a parameter value can be held to, each raising :class:`~optim.errors.ParameterError`.

Every rule takes the parameter's name and its value and returns the value in its plain Python type (a
whole number given as ``5.0`` comes back as ``5``, a number as a ``float``), so that a value reads the
same whether it came from Python code or from a config file. :func:`or_none` lets a rule accept
``None`` as well.
"""

from __future__ import annotations

import math
from typing import Any, Callable, Optional, Sequence

import numpy as np

from optim.errors import ParameterError

__all__ = ["whole_number", "real_number", "flag", "text", "one_of", "or_none"]

_WHOLE_TYPES = (int, np.integer)
_NUMBER_TYPES = (int, float, np.integer, np.floating)


def whole_number(name: str, value: Any, least: Optional[int] = None) -> int:
    """``value`` as an ``int`` (a float with no fractional part is accepted), at least ``least``.

    Parameters
    ----------
    name : str
        The parameter's name, for the message.
    value : object
        The value to check.
    least : int or None
        The smallest value allowed; no bound when ``None``.

    Returns
    -------
    int
        The checked value.
    """
    expected = "a whole number" + (f" >= {least}" if least is not None else "")
    if isinstance(value, bool) or not isinstance(value, _NUMBER_TYPES):
        raise ParameterError(name, expected, value)
    if not isinstance(value, _WHOLE_TYPES) and not (math.isfinite(value) and float(value).is_integer()):
        raise ParameterError(name, expected, value)
    if least is not None and value < least:
        raise ParameterError(name, expected, value)
    return int(value)


def real_number(
    name: str,
    value: Any,
    low: Optional[float] = None,
    high: Optional[float] = None,
    low_open: bool = False,
    high_open: bool = False,
) -> float:
    """``value`` as a ``float`` (never NaN) in the interval from ``low`` to ``high``.

    Parameters
    ----------
    name : str
        The parameter's name, for the message.
    value : object
        The value to check.
    low, high : float or None
        The bounds of the interval; no bound when ``None``.
    low_open, high_open : bool
        Whether the bound itself is excluded.

    Returns
    -------
    float
        The checked value.
    """
    if low is not None and high is not None:
        expected = f"a number in {'(' if low_open else '['}{low}, {high}{')' if high_open else ']'}"
    elif low is not None:
        expected = f"a number {'>' if low_open else '>='} {low}"
    else:
        expected = "a number"
    if isinstance(value, bool) or not isinstance(value, _NUMBER_TYPES) or math.isnan(value):
        raise ParameterError(name, expected, value)
    if low is not None and (value < low or (low_open and value == low)):
        raise ParameterError(name, expected, value)
    if high is not None and (value > high or (high_open and value == high)):
        raise ParameterError(name, expected, value)
    return float(value)


def flag(name: str, value: Any) -> bool:
    """``value`` when it is ``True`` or ``False`` (a numpy bool included).

    Parameters
    ----------
    name : str
        The parameter's name, for the message.
    value : object
        The value to check.

    Returns
    -------
    bool
        The checked value.
    """
    if not isinstance(value, (bool, np.bool_)):
        raise ParameterError(name, "True or False", value)
    return bool(value)


def text(name: str, value: Any) -> str:
    """``value`` when it is a text with something besides spaces.

    Parameters
    ----------
    name : str
        The parameter's name, for the message.
    value : object
        The value to check.

    Returns
    -------
    str
        The checked value.
    """
    if not isinstance(value, str) or not value.strip():
        raise ParameterError(name, "a non-empty text", value)
    return value


def one_of(name: str, value: Any, options: Sequence[str]) -> str:
    """``value`` when it is one of ``options``.

    Parameters
    ----------
    name : str
        The parameter's name, for the message.
    value : object
        The value to check.
    options : sequence of str
        The values allowed.

    Returns
    -------
    str
        The checked value.
    """
    if not isinstance(value, str) or value not in options:
        raise ParameterError(name, "one of " + ", ".join(options), value)
    return value


def or_none(rule: Callable[..., Any], name: str, value: Any, meaning: str, **bounds) -> Any:
    """``None`` as it is, any other value checked by ``rule``; a broken rule also names ``None``.

    Parameters
    ----------
    rule : callable
        One of the rules of this module.
    name : str
        The parameter's name, for the message.
    value : object
        The value to check.
    meaning : str
        What ``None`` means for this parameter, e.g. ``"no limit"``.
    **bounds
        The rule's own options, e.g. ``least=1``.

    Returns
    -------
    object
        ``None``, or the value as ``rule`` returns it.
    """
    if value is None:
        return None
    try:
        return rule(name, value, **bounds)
    except ParameterError as error:
        raise ParameterError(name, f"{error.expected}, or None/null ({meaning})", value) from None
