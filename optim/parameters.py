"""The rules a parameter value can be held to, each raising :class:`~optim.errors.ParameterError`.

Every rule takes the parameter's name and its value and returns the value in its plain Python type (a
whole number given as ``5.0`` comes back as ``5``, a number as a ``float``), so that a value reads the
same whether it came from Python code or from a config file. With ``none`` (what ``None`` means for the
parameter) the rule also accepts ``None``.
"""

from __future__ import annotations

import math
import numbers
from typing import Optional, Sequence

import numpy as np

from optim.errors import ParameterError

__all__ = ["whole_number", "real_number", "flag", "text", "one_of"]


def _or_none(expected: str, none: Optional[str]) -> str:
    return expected if none is None else f"{expected}, or None/null ({none})"


def whole_number(name: str, value, least: Optional[int] = None, none: Optional[str] = None) -> Optional[int]:
    """``value`` as an ``int`` (a float with no fractional part is accepted), at least ``least``.

    Parameters
    ----------
    name : str
        The parameter's name, for the message.
    value : object
        The value to check.
    least : int or None
        The smallest value allowed; no bound when ``None``.
    none : str or None
        What ``None`` means for this parameter; ``None`` is refused when not given.

    Returns
    -------
    int or None
        The checked value.
    """
    if value is None and none is not None:
        return None
    expected = _or_none("a whole number" + (f" >= {least}" if least is not None else ""), none)
    if isinstance(value, bool) or not isinstance(value, numbers.Real):
        raise ParameterError(name, expected, value)
    if not isinstance(value, numbers.Integral) and not (math.isfinite(value) and float(value).is_integer()):
        raise ParameterError(name, expected, value)
    if least is not None and value < least:
        raise ParameterError(name, expected, value)
    return int(value)


def real_number(
    name: str,
    value,
    low: Optional[float] = None,
    high: Optional[float] = None,
    low_open: bool = False,
    high_open: bool = False,
    none: Optional[str] = None,
) -> Optional[float]:
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
    none : str or None
        What ``None`` means for this parameter; ``None`` is refused when not given.

    Returns
    -------
    float or None
        The checked value.
    """
    if value is None and none is not None:
        return None
    if low is not None and high is not None:
        expected = f"a number in {'(' if low_open else '['}{low}, {high}{')' if high_open else ']'}"
    elif low is not None:
        expected = f"a number {'>' if low_open else '>='} {low}"
    else:
        expected = "a number"
    expected = _or_none(expected, none)
    if isinstance(value, bool) or not isinstance(value, numbers.Real) or math.isnan(value):
        raise ParameterError(name, expected, value)
    if low is not None and (value < low or (low_open and value == low)):
        raise ParameterError(name, expected, value)
    if high is not None and (value > high or (high_open and value == high)):
        raise ParameterError(name, expected, value)
    return float(value)


def flag(name: str, value, none: Optional[str] = None) -> Optional[bool]:
    """``value`` when it is ``True`` or ``False`` (a numpy bool included).

    Parameters
    ----------
    name : str
        The parameter's name, for the message.
    value : object
        The value to check.
    none : str or None
        What ``None`` means for this parameter; ``None`` is refused when not given.

    Returns
    -------
    bool or None
        The checked value.
    """
    if value is None and none is not None:
        return None
    if not isinstance(value, (bool, np.bool_)):
        raise ParameterError(name, _or_none("True or False", none), value)
    return bool(value)


def text(name: str, value, none: Optional[str] = None) -> Optional[str]:
    """``value`` when it is a text with something besides spaces.

    Parameters
    ----------
    name : str
        The parameter's name, for the message.
    value : object
        The value to check.
    none : str or None
        What ``None`` means for this parameter; ``None`` is refused when not given.

    Returns
    -------
    str or None
        The checked value.
    """
    if value is None and none is not None:
        return None
    if not isinstance(value, str) or not value.strip():
        raise ParameterError(name, _or_none("a non-empty text", none), value)
    return value


def one_of(name: str, value, options: Sequence[str]) -> str:
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
