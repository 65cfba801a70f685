"""The one shape every summary block has: a frozen :class:`Section` of plain strings.

Renderers (the CLI text, the window's HTML, the sheet's tables) choose fonts and column
widths, not content. ``LIST_LIMIT`` caps the lists a section shows (the JSON lists all).
"""

from __future__ import annotations

from dataclasses import dataclass

#: How many list items (problem rows, excluded studies) a section shows before "and N more".
LIST_LIMIT = 6


@dataclass(frozen=True, slots=True)
class Section:
    """One block of the summary.

    Attributes
    ----------
    key : str
        Stable identifier ("data", "pooled", ...).
    title : str
        Heading as printed.
    rows : tuple of tuple of str
        Table body. A section without ``header`` is a list of (label, value) pairs.
    header : tuple of str
        Column headings ("" for none).
    notes : tuple of str
        Sentences printed under the table (definitions, cautions, where a value is missing).
    emphasis : tuple of int
        Row indices a renderer should emphasise (e.g. the recommended test).
    widths : tuple of float
        Relative column widths (a hint; renderers may ignore it).
    """

    key: str
    title: str
    rows: tuple[tuple[str, ...], ...]
    header: tuple[str, ...] = ()
    notes: tuple[str, ...] = ()
    emphasis: tuple[int, ...] = ()
    widths: tuple[float, ...] = ()


def _limit(items: list[str], limit: int = LIST_LIMIT) -> list[str]:
    if len(items) <= limit:
        return items
    return items[:limit] + [f"… and {len(items) - limit} more"]
