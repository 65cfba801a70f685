"""The main window's questions to the user (modal dialogs), each replaceable by tests
through the window's ``ask_*`` arguments; and two facts about where the window runs.
"""

from __future__ import annotations

import os

from PySide6.QtCore import Qt
from PySide6.QtWidgets import (
    QApplication,
    QFileDialog,
    QInputDialog,
    QMessageBox,
)

from ..model.project_file import SUFFIX
from ..model.review import MEASURE_NAMES, MEASURES
from . import messages as M
from .autosave import Recoverable

OPEN_FILTER = (
    "Reviews and study tables (*.lopside *.json *.csv *.xlsx *.txt *.pdf);;"
    "Lopside projects (*.lopside);;Study tables (*.csv *.xlsx);;Pasted rows (*.txt);;"
    "A review's PDF (*.pdf)"
)
ACCEPTED_SUFFIXES = (SUFFIX, ".json", ".csv", ".xlsx", ".txt", ".pdf")


def _ask_recover(window, items: list[Recoverable]):
    from .recovery import ask_recover

    return ask_recover(window, items)


def _ask_save_failed(window, name: str, error: str) -> bool:
    """True when the user wants to save elsewhere."""
    box = QMessageBox(QMessageBox.Warning, M.SAVE_FAILED_TITLE, "", parent=window)
    box.setText(M.SAVE_FAILED_TEXT.format(name=name, error=error))
    elsewhere = box.addButton(M.SAVE_ELSEWHERE, QMessageBox.AcceptRole)
    box.addButton(QMessageBox.Cancel)
    box.setDefaultButton(elsewhere)
    box.exec()
    return box.clickedButton() is elsewhere


def _ask_open_changed(window, name: str) -> bool:
    answer = QMessageBox.warning(
        window,
        M.CHANGED_OUTSIDE_TITLE,
        M.CHANGED_OUTSIDE_TEXT.format(name=name),
        QMessageBox.Open | QMessageBox.Cancel,
        QMessageBox.Cancel,
    )
    return answer == QMessageBox.Open


def _ask_locked(window, error: str, suggestion: str) -> bool:
    answer = QMessageBox.question(
        window,
        M.EXPORT_LOCKED_TITLE,
        M.EXPORT_LOCKED_TEXT.format(error=error, suggestion=suggestion),
        QMessageBox.Yes | QMessageBox.No,
        QMessageBox.Yes,
    )
    return answer == QMessageBox.Yes


def _ask_save_changes(window, name: str) -> str:
    answer = QMessageBox.question(
        window,
        M.UNSAVED_TITLE,
        M.UNSAVED_TEXT.format(name=name),
        QMessageBox.Save | QMessageBox.Discard | QMessageBox.Cancel,
        QMessageBox.Save,
    )
    return {QMessageBox.Save: "save", QMessageBox.Discard: "discard"}.get(answer, "cancel")


def _ask_open_path(window, folder: str) -> str:
    path, _ = QFileDialog.getOpenFileName(window, "Open a review", folder, OPEN_FILTER)
    return path


def _ask_save_path(window, folder: str, title: str, filt: str) -> str:
    path, _ = QFileDialog.getSaveFileName(window, title, folder, filt)
    return path


def _ask_measure(window, name: str) -> str | None:
    items = [f"{m} \u2013 {MEASURE_NAMES[m]}" for m in MEASURES]
    text, ok = QInputDialog.getItem(
        window, "Which measure?", M.ASK_MEASURE.format(name=name), items, 0, False
    )
    return text.split(" ", 1)[0] if ok else None


def _ask_decimal(window, name: str, examples) -> str | None:
    """Ask once how numbers the file does not settle are read; two readings side by side."""
    from ..cli_common import two_readings

    rows = []
    for place, text in examples[:4]:
        as_point, as_comma = two_readings(text)
        rows.append(
            f"<tr><td>{place}</td><td>{text}</td><td>{as_point}</td><td>{as_comma}</td></tr>"
        )
    box = QMessageBox(window)
    box.setWindowTitle("Decimal point or decimal comma?")
    box.setTextFormat(Qt.RichText)
    box.setText(
        M.ASK_DECIMAL.format(name=name)
        + "<table cellpadding='4'><tr><th>Where</th><th>Printed</th><th>Decimal point</th>"
        "<th>Decimal comma</th></tr>" + "".join(rows) + "</table>"
    )
    point = box.addButton("Decimal &point", QMessageBox.AcceptRole)
    comma = box.addButton("Decimal &comma", QMessageBox.AcceptRole)
    box.addButton(QMessageBox.Cancel)
    box.exec()
    if box.clickedButton() is point:
        return "point"
    if box.clickedButton() is comma:
        return "comma"
    return None


def _ask_open_sheet(window, path: str) -> bool:
    answer = QMessageBox.question(
        window,
        "Sheet written",
        M.SHEET_DONE.format(path=path) + "\n\nOpen it now?",
        QMessageBox.Yes | QMessageBox.No,
        QMessageBox.Yes,
    )
    return answer == QMessageBox.Yes


def _headless() -> bool:
    return QApplication.platformName() in ("offscreen", "minimal")


def _in_samples(folder: str) -> bool:
    """True when ``folder`` is (inside) the folder of the bundled sample reviews."""
    from ..paths import sample_reviews

    try:
        samples = sample_reviews()
    except OSError:
        return False
    if not samples or not folder:
        return False
    here = os.path.normcase(os.path.realpath(folder))
    home = os.path.normcase(os.path.realpath(samples[0].parent))
    return here == home or here.startswith(home + os.sep)
