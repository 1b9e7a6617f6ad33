"""Short text helpers shared by the packages."""

from __future__ import annotations

__all__ = ["first_line"]


def first_line(exc: BaseException, *, with_type: bool = True) -> str:
    """The first line of an exception, for one-line messages.

    Parameters
    ----------
    exc : BaseException
        The exception.
    with_type : bool
        Start with the exception's class name (``ValueError: bad value``);
        ``False`` gives the message alone (``bad value``, or ``""`` when empty).

    Returns
    -------
    str
    """
    text = (f"{type(exc).__name__}: {exc}" if with_type else str(exc)).strip()
    return text.splitlines()[0] if text else ""
