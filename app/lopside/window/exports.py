"""Panel-summary and slide exports from the window (the formats are the core's own).

:func:`lopside.panel.export.write_panel` and :func:`lopside.panel.slide.write_slide` do the
writing; here the file name is asked, checked (never the review's own file, never a file
the dialog did not offer to replace) and the outcome is reported in the status bar.
"""

from __future__ import annotations

from pathlib import Path

from PySide6.QtCore import Qt
from PySide6.QtWidgets import QApplication

from ..fileio import KINDS, OutputRefused, check_output, kind_for_suffix
from ..panel.export import FORMATS
from . import messages as M

PANEL_FILTER = "PDF (*.pdf);;Word document (*.docx);;Excel workbook (*.xlsx);;CSV (*.csv)"
SLIDE_FILTER = "PowerPoint slide (*.pptx);;PNG image (*.png)"
PANEL_KINDS = ("pdf", "docx", "xlsx", "results")
SLIDE_KINDS = ("pptx", "png")


def _checked(window, path: str, kinds: tuple[str, ...], default: str) -> Path | None:
    p = Path(path)
    if not p.suffix:
        p = p.with_suffix(default)
    kind = kind_for_suffix(p, kinds)
    try:
        if kind is None:
            suffixes = ", ".join(s for k in kinds for s in KINDS[k][0])
            raise OutputRefused(f"{p.name}: choose a file name ending in {suffixes}.")
        # the file dialog has already asked before replacing an existing file
        check_output(p, kind, window._inputs(), force=True)
    except OutputRefused as exc:
        text = str(exc)
        if "being read" in text:
            text = M.EXPORT_IS_INPUT.format(name=p.name)
        window.say(text, 15000)
        window._warn("Not exported", text)
        return None
    return p


def _ask(window, base: str, title: str, filt: str) -> str:
    return window.ask_save_path(str(Path(window._own_folder()) / base), title, filt)


def export_panel(window, path: str | None = None) -> Path | None:
    """Write the panel summary of every outcome (PDF, DOCX, XLSX or CSV)."""
    from ..panel import build_panel
    from ..panel.export import write_panel

    stem = window.session.path.stem if window.session.path else "review"
    path = path or _ask(window, f"{stem}-panel.pdf", "Export the panel summary", PANEL_FILTER)
    if not path:
        return None
    out = _checked(window, path, PANEL_KINDS, ".pdf")
    if out is None or out.suffix.lower() not in FORMATS:
        return None
    QApplication.setOverrideCursor(Qt.WaitCursor)
    try:
        title = window.session.review.details.title or "Panel summary"
        write_panel(build_panel(title, window.panel_view.inputs()), out)
    except (OSError, ValueError) as exc:
        window.say(M.SHEET_FAILED.format(error=exc), 0)
        return None
    finally:
        QApplication.restoreOverrideCursor()
    window.say(M.PANEL_EXPORTED.format(path=out))
    return out


def export_slide(window, path: str | None = None) -> Path | None:
    """One journal-club slide of the outcome shown (PPTX or PNG)."""
    from ..assessment import assessment_of
    from ..panel.slide import write_slide

    window.update_views()
    if window.result is None or window.result.k == 0:
        window.say(M.SHEET_FAILED.format(error=window.analysis_error or M.NO_ANALYSIS))
        return None
    stem = window.session.path.stem if window.session.path else "review"
    path = path or _ask(window, f"{stem}-slide.pptx", "Export a journal-club slide", SLIDE_FILTER)
    if not path:
        return None
    out = _checked(window, path, SLIDE_KINDS, ".pptx")
    if out is None:
        return None
    s = window.session
    name = s.outcome_names[s.outcome_index]
    try:
        write_slide(window.result, assessment_of(window.result).appraisal, out, title=name)
    except (OSError, ValueError) as exc:
        window.say(M.SHEET_FAILED.format(error=exc), 0)
        return None
    window.say(M.SLIDE_EXPORTED.format(path=out))
    return out
