"""Plain text (the ``lopside check`` output): each section wrapped to a width, then the
caution and the data fingerprint."""

from __future__ import annotations

import textwrap

from .contents import all_sections
from .section import Section

WIDTH = 100


def _wrap(text: str, width: int) -> list[str]:
    out: list[str] = []
    for para in str(text).split("\n"):
        if not para:
            out.append("")
            continue
        out.extend(
            textwrap.wrap(para, width=max(width, 8), break_long_words=True, break_on_hyphens=False)
            or [""]
        )
    return out


def _col_widths(section: Section, width: int) -> list[int]:
    ncol = max(len(r) for r in (section.rows + ((section.header,) if section.header else ())))
    gap = 2
    natural = [0] * ncol
    for r in section.rows + ((section.header,) if section.header else ()):
        for j, cell in enumerate(r):
            longest = max((len(line) for line in str(cell).split("\n")), default=0)
            natural[j] = max(natural[j], longest)
    avail = width - gap * (ncol - 1)
    if sum(natural) <= avail:
        return natural
    # shrink the widest columns first, but keep every column at least 8 wide
    widths = natural[:]
    while sum(widths) > avail:
        j = max(range(ncol), key=lambda i: widths[i])
        if widths[j] <= 8:
            break
        widths[j] -= 1
    return widths


def _render_causes(section: Section, width: int) -> list[str]:
    """The explanations as blocks (a four-column table is unreadable at 100 columns)."""
    lines: list[str] = []
    for title, evidence, judgement, notes in section.rows:
        lines.append(f"{title}  [appraiser: {judgement}]")
        for item in evidence.split("\n"):
            wrapped = _wrap(item, width - 4)
            lines.append("  " + wrapped[0])
            lines.extend("    " + w for w in wrapped[1:])
        if notes:
            wrapped = _wrap("Notes: " + notes, width - 4)
            lines.extend("  " + w for w in wrapped)
        lines.append("")
    return lines


def render_text(section: Section, width: int = WIDTH) -> str:
    """One section as plain text, wrapped to ``width`` columns."""
    lines = [section.title, "-" * len(section.title)]
    if not section.rows:
        lines.append("(nothing to show)")
    elif section.key == "causes":
        lines.extend(_render_causes(section, width))
    elif not section.header and all(len(r) == 2 for r in section.rows):
        label_w = min(max(len(r[0]) for r in section.rows), 30)
        for label, value in section.rows:
            lab_lines = _wrap(label, label_w)
            val_lines = _wrap(value, width - label_w - 2)
            for i in range(max(len(lab_lines), len(val_lines))):
                a = lab_lines[i] if i < len(lab_lines) else ""
                b = val_lines[i] if i < len(val_lines) else ""
                lines.append(f"{a:<{label_w}}  {b}".rstrip())
    else:
        widths = _col_widths(section, width)
        table = ([section.header] if section.header else []) + list(section.rows)
        for n, row in enumerate(table):
            cells = [_wrap(c, widths[j]) for j, c in enumerate(row)]
            for i in range(max(len(c) for c in cells)):
                parts = [
                    f"{(c[i] if i < len(c) else ''):<{widths[j]}}" for j, c in enumerate(cells)
                ]
                lines.append("  ".join(parts).rstrip())
            if section.header and n == 0:
                lines.append("  ".join("-" * w for w in widths))
    for note in section.notes:
        if note:
            lines.extend(_wrap(note, width))
    return "\n".join(lines)


def text_summary(result, width: int = WIDTH) -> str:
    """The ``lopside check`` output: every section and the appraisal, then the caution.

    Parameters
    ----------
    result : Assessment or AnalysisResult
    width : int
        Terminal columns to wrap to.

    Returns
    -------
    str
        Text ending in a newline.
    """
    from .. import CAUTION, __version__
    from ..assessment import assessment_of

    assessment = assessment_of(result)
    result = assessment.analysis
    title = f"Lopside {__version__}: small-study effects appraisal"
    out = [title, "=" * len(title), ""]
    for sec in all_sections(assessment):
        out.append(render_text(sec, width))
        out.append("")
    out.append("Caution")
    out.append("-------")
    out.extend(_wrap(CAUTION, width))
    out.append("")
    out.append(f"Data fingerprint (SHA-256): {result.fingerprint}")
    return "\n".join(out) + "\n"
