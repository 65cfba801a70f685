"""The panel summary written for the documents a panel already works with.

* CSV and XLSX: machine-readable (numbers as numbers, unrounded, natural scale); the XLSX's
  second sheet holds every study of every outcome.
* DOCX: an editable Word table to paste into the recommendation's draft.
* PDF: A4 landscape, a small funnel per outcome, the cautions and a reproducibility footer.

Every file carries the caution; text cells a spreadsheet could run are written as text
(:func:`lopside.intake.table.spreadsheet_safe`). Files are written atomically.
"""

from __future__ import annotations

import csv
import datetime as _dt
import io
import os
from collections.abc import Callable
from pathlib import Path
from typing import Any

from .. import CAUTION, __version__
from . import DEFAULT_TITLE, PANEL_COLUMNS, STUDY_COLUMNS, PanelSummary, fmt_cell

#: Columns of the printed table (PDF and DOCX): (heading, columns shown in that cell)
PRINTED = (
    ("Outcome", ("outcome",)),
    ("Studies · people", ("k", "participants")),
    ("Pooled (95% CI)", ("estimate", "ci_low", "ci_high")),
    ("I² · prediction interval", ("i2", "pi_low", "pi_high")),
    ("Small-study test (p)", ("recommended_test", "test_p")),
    ("Power", ("power",)),
    ("Adjusted range", ("adjusted_low", "adjusted_high")),
    ("Rating: suggested / accepted", ("rating_suggested", "rating_accepted")),
    ("Why", ("reason",)),
)
FORMATS = (".pdf", ".docx", ".xlsx", ".csv")


def _document_title(title: str) -> str:
    """'Panel summary: <title>', without saying 'Panel summary' twice."""
    if title.strip().casefold() in ("", DEFAULT_TITLE.casefold()):
        return DEFAULT_TITLE
    return f"{DEFAULT_TITLE}: {title}"


def _atomic(path: Path, write: Callable[[Path], None]) -> None:
    tmp = path.with_name(f".{path.name}.{os.getpid()}.tmp")
    try:
        write(tmp)
        os.replace(tmp, path)
    finally:
        if tmp.exists():
            tmp.unlink()


def _safe(value: Any) -> Any:
    from ..intake.table import spreadsheet_safe

    return spreadsheet_safe(value) if isinstance(value, str) else value


def printed_cells(row: dict[str, Any]) -> list[str]:
    """The printed table's cells for one outcome (one place for PDF and DOCX)."""
    if row.get("status") != "ok":
        return [
            str(row.get("outcome") or ""),
            "–",
            str(row.get("reason") or row.get("status") or ""),
            *(["–"] * (len(PRINTED) - 3)),
        ]
    m = row.get("measure") or ""
    pooled = (
        f"{m} {fmt_cell(row['estimate'], 'estimate')} "
        f"({fmt_cell(row['ci_low'], 'ci_low')} to {fmt_cell(row['ci_high'], 'ci_high')})"
    )
    pi = (
        f" · PI {fmt_cell(row['pi_low'], 'pi_low')} to {fmt_cell(row['pi_high'], 'pi_high')}"
        if row.get("pi_low") is not None
        else ""
    )
    if not row.get("recommended_test"):
        test = "none suits these data"
    elif row.get("test_p") is None:
        # recommended, but these data do not let it run (e.g. too few studies)
        test = f"{fmt_cell(row['recommended_test'], 'recommended_test')}: could not be run"
    else:
        test = (
            f"{fmt_cell(row['recommended_test'], 'recommended_test')} "
            f"(p {fmt_cell(row['test_p'], 'test_p')})"
        )
    adjusted = (
        f"{fmt_cell(row['adjusted_low'], 'x')} to {fmt_cell(row['adjusted_high'], 'x')}"
        if row.get("adjusted_low") is not None
        else "–"
    )
    participants = fmt_cell(row.get("participants"), "participants")
    return [
        str(row["outcome"]),
        f"{row['k']} · {participants}",
        pooled,
        f"{fmt_cell(row['i2'], 'i2')}{pi}",
        test,
        fmt_cell(row.get("power"), "power") if row.get("power") is not None else "not run",
        adjusted,
        f"{row.get('rating_suggested') or '–'} / {row.get('rating_accepted') or 'not yet'}",
        str(row.get("reason") or ""),
    ]


def write_panel(summary: PanelSummary, path: str | os.PathLike[str], *, date=None) -> Path:
    """Write the summary in the format its suffix names (.pdf, .docx, .xlsx, .csv)."""
    out = Path(path)
    suffix = out.suffix.lower()
    date = str(date or _dt.date.today().isoformat())
    writers = {".csv": _csv, ".xlsx": _xlsx, ".docx": _docx, ".pdf": _pdf}
    if suffix not in writers:
        raise ValueError(
            f"{out.name}: the panel summary is written as .pdf, .docx, .xlsx or .csv "
            f"(the suffix says which); '{suffix or 'none'}' is none of them"
        )
    _atomic(out, lambda tmp: writers[suffix](summary, tmp, date))
    return out


def _csv(summary: PanelSummary, tmp: Path, date: str) -> None:
    buf = io.StringIO(newline="")
    w = csv.writer(buf, lineterminator="\r\n")
    w.writerow(PANEL_COLUMNS)
    for row in summary.rows:
        w.writerow(["" if row.get(c) is None else _safe(row.get(c)) for c in PANEL_COLUMNS])
    tmp.write_text(buf.getvalue(), encoding="utf-8-sig", newline="")


def _xlsx(summary: PanelSummary, tmp: Path, date: str) -> None:
    import openpyxl

    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "outcomes"
    ws.append(list(PANEL_COLUMNS))
    for row in summary.rows:
        ws.append([_safe(row.get(c)) for c in PANEL_COLUMNS])
    st = wb.create_sheet("studies")
    st.append(list(STUDY_COLUMNS))
    for row in summary.study_rows():
        st.append([_safe(row.get(c)) for c in STUDY_COLUMNS])
    about = wb.create_sheet("about")
    for line in (
        _document_title(summary.title),
        f"Made by Lopside {__version__} on {date}. Estimates on the natural scale.",
        f"Caution: {CAUTION}",
    ):
        about.append([_safe(line)])
    wb.save(tmp)


def _docx(summary: PanelSummary, tmp: Path, date: str) -> None:
    from docx import Document
    from docx.enum.section import WD_ORIENT
    from docx.shared import Cm, Pt

    doc = Document()
    sec = doc.sections[0]
    sec.orientation = WD_ORIENT.LANDSCAPE
    sec.page_width, sec.page_height = Cm(29.7), Cm(21.0)
    for side in ("left_margin", "right_margin", "top_margin", "bottom_margin"):
        setattr(sec, side, Cm(1.5))
    doc.add_heading(f"Small-study effects by outcome: {summary.title}", level=1)
    table = doc.add_table(rows=1, cols=len(PRINTED))
    table.style = "Table Grid"
    for cell, (heading, _) in zip(table.rows[0].cells, PRINTED):
        cell.text = heading
        for p in cell.paragraphs:
            for r in p.runs:
                r.bold = True
                r.font.size = Pt(8)
    for row in summary.rows:
        cells = table.add_row().cells
        for cell, text in zip(cells, printed_cells(row)):
            cell.text = text
            for p in cell.paragraphs:
                for r in p.runs:
                    r.font.size = Pt(8)
    p = doc.add_paragraph()
    p.add_run("Caution. ").bold = True
    p.add_run(CAUTION)
    foot = doc.add_paragraph(
        f"Lopside {__version__} · {date} · estimates and intervals on the natural scale; "
        "ratings are suggestions for the publication-bias domain that the panel confirms."
    )
    for r in foot.runs:
        r.font.size = Pt(7)
    doc.save(tmp)


def thumbnail_png(result) -> bytes | None:
    """A small funnel (PNG) for an outcome's row; None when it cannot be drawn."""
    try:
        from ..figures.adaptors import funnel_input_from_result
        from ..figures.export import figure_bytes
        from ..figures.funnel import FunnelOptions, funnel_figure

        opts = FunnelOptions(legend="none", caption=False, band_labels="key")
        fig = funnel_figure(funnel_input_from_result(result, opts), opts, size="column")
        fig.set_size_inches(2.4, 2.0)
        return figure_bytes(fig, "png", dpi=150)
    except Exception:  # noqa: BLE001 - a thumbnail that cannot be drawn is left blank
        return None


def _pdf(summary: PanelSummary, tmp: Path, date: str) -> None:
    from reportlab.lib import colors
    from reportlab.lib.pagesizes import A4, landscape
    from reportlab.lib.units import cm
    from reportlab.platypus import Image, Paragraph, SimpleDocTemplate, Spacer, Table, TableStyle

    from ..sheet import fonts, layout

    fonts.register_fonts()
    st = layout.styles()
    small = st["small"]
    story = [
        Paragraph(f"Small-study effects by outcome: {layout.markup(summary.title)}", st["title"]),
        Paragraph(
            "One row per outcome. Estimates are on the natural scale with 95% confidence "
            "intervals; the rating is a suggestion for the publication-bias domain of the "
            "certainty of evidence, which the panel confirms or changes.",
            small,
        ),
        Spacer(1, 0.3 * cm),
    ]
    head = [Paragraph(f"<b>{layout.markup(h)}</b>", small) for h, _ in PRINTED] + [
        Paragraph("<b>Funnel</b>", small)
    ]
    data = [head]
    for o in summary.outcomes:
        cells = [Paragraph(layout.markup(t), st["cell"]) for t in printed_cells(o.row)]
        png = thumbnail_png(o.result) if o.result is not None and o.result.k > 0 else None
        cells.append(Image(io.BytesIO(png), width=2.5 * cm, height=2.1 * cm) if png else "")
        data.append(cells)
    widths = [3.2, 1.8, 3.2, 2.8, 2.4, 1.4, 2.0, 2.6, 4.6, 2.7]
    table = Table(data, colWidths=[w * cm for w in widths], repeatRows=1)
    table.setStyle(
        TableStyle(
            [
                ("GRID", (0, 0), (-1, -1), 0.3, colors.HexColor("#B8C2CC")),
                ("BACKGROUND", (0, 0), (-1, 0), colors.HexColor("#E3F2EF")),
                ("VALIGN", (0, 0), (-1, -1), "TOP"),
            ]
        )
    )
    story += [table, Spacer(1, 0.4 * cm)]
    story.append(Paragraph(f"<b>Caution.</b> {layout.markup(CAUTION)}", small))
    fps = " · ".join(
        f"{i}. {(o.row.get('fingerprint') or '–')[:10]}" for i, o in enumerate(summary.outcomes, 1)
    )
    footer = f"Lopside {__version__} · {date} · estimates on the natural scale, 95% CIs"
    story.append(Spacer(1, 0.2 * cm))
    story.append(Paragraph(f"Data SHA-256 per outcome (first characters): {fps}", st["muted"]))

    def on_page(canvas, doc) -> None:
        canvas.saveState()
        canvas.setFont(fonts.REGULAR, 6.5)
        canvas.drawString(1.5 * cm, 0.9 * cm, footer)
        canvas.drawRightString(
            landscape(A4)[0] - 1.5 * cm, 0.9 * cm, f"page {canvas.getPageNumber()}"
        )
        canvas.restoreState()

    doc = SimpleDocTemplate(
        str(tmp),
        pagesize=landscape(A4),
        leftMargin=1.5 * cm,
        rightMargin=1.5 * cm,
        topMargin=1.3 * cm,
        bottomMargin=1.5 * cm,
        title=_document_title(summary.title),
        author="Lopside",
    )
    doc.build(story, onFirstPage=on_page, onLaterPages=on_page)
