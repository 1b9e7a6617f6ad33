"""Short text helpers shared by the packages."""

from __future__ import annotations

from typing import List, Optional, Sequence

__all__ = ["first_line", "markdown_table"]


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


def markdown_table(
    header: Sequence, rows: Sequence[Sequence], right_align_from: Optional[int] = None, compact_rule: bool = False
) -> List[str]:
    """A Markdown table as lines: the header, the rule under it, one line per row.

    Parameters
    ----------
    header, rows
        The cells, written with ``str``; a ``|`` inside a cell is escaped.
    right_align_from : int, optional
        Columns from this index on are right-aligned (``--:``); without it no column is aligned (``---``).
    compact_rule : bool
        Write the rule without spaces (``|---|---|``) instead of ``| --- | --- |``.
    """

    def line(cells) -> str:
        return "| " + " | ".join(str(cell).replace("|", "\\|") for cell in cells) + " |"

    rule = ["---" if right_align_from is None or i < right_align_from else "--:" for i in range(len(header))]
    rule_line = "|" + "|".join(rule) + "|" if compact_rule else line(rule)
    return [line(header), rule_line] + [line(row) for row in rows]
