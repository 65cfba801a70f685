"""The panel summary view: every outcome of the workbook side by side.

One row per outcome, from :func:`lopside.panel.build_panel` (the same rows the PDF, DOCX,
XLSX and CSV exports write; the cells are :func:`lopside.panel.export.printed_cells`),
with a small funnel of each outcome. The outcomes are analysed in a worker thread; the
view says so while it runs and never shows a mix of old and new rows. Sorting by any
column; a click on a row opens that outcome.
"""

from __future__ import annotations

import threading

from PySide6.QtCore import QByteArray, Qt, QThread, Signal
from PySide6.QtGui import QPixmap
from PySide6.QtWidgets import (
    QAbstractItemView,
    QHBoxLayout,
    QHeaderView,
    QLabel,
    QPushButton,
    QTableWidget,
    QTableWidgetItem,
    QVBoxLayout,
    QWidget,
)

from ..panel import OutcomeInput, panel_title
from ..panel.export import printed_cells
from ..session import Session
from . import messages as M

#: the view's columns: heading, the row value it sorts by, and which printed cells it
#: shows one under the other (indices into printed_cells, the exports' own cells; the
#: printed table is too wide for the window's view pane, so its nine cells are stacked
#: into three). Cell 1 ("k · people") is spelt out by _people(). The headings break in two
#: lines: on one, they are wider than their columns at 1366 x 768 and were cut at both ends.
COLUMNS = (
    ("Outcome and\npooled result", "outcome", ((0, "{}"), (1, "{}"), (2, "{}"), (3, "I² {}"))),
    ("Small-study\nevidence", "test_p", ((4, "{}"), (5, "power: {}"), (6, "adjusted: {}"))),
    ("Suggested /\naccepted rating", "rating_suggested", ((7, "{}"), (8, "{}"))),
)
THUMB_W, THUMB_H = 96, 84


class PanelWorker(QThread):
    """Analyse every outcome (``build_panel``) and draw each one's small funnel."""

    finished_with = Signal(object, object, object)  # summary, thumbnails, key
    failed = Signal(str, object)

    def __init__(self, title: str, inputs: list[OutcomeInput], key, parent=None) -> None:
        super().__init__(parent)
        self.title, self.inputs, self.key = title, inputs, key
        self._cancel = threading.Event()

    def cancel(self) -> None:
        """Stop at the next stage of the outcome being analysed (the window is closing)."""
        self._cancel.set()

    def _go_on(self, *_stage) -> bool:
        return not self._cancel.is_set()  # False stops the analysis (AnalysisCancelled)

    def run(self) -> None:
        from ..analysis import AnalysisCancelled
        from ..panel import build_panel
        from ..panel.export import thumbnail_png

        try:
            summary = build_panel(self.title, self.inputs, progress_for=lambda *_: self._go_on)
            thumbs = [
                thumbnail_png(o.result) if o.result is not None and o.result.k > 0 else None
                for o in summary.outcomes
            ]
        except AnalysisCancelled:
            return  # nobody waits for these rows
        except Exception as exc:  # noqa: BLE001 - shown in the view
            self.failed.emit(f"{type(exc).__name__}: {exc}", self.key)
            return
        self.finished_with.emit(summary, thumbs, self.key)


def _people(row) -> str:
    """ "18 studies · 13,839 people" (or "–" for an outcome not analysed)."""
    if row.get("status") != "ok":
        return "–"
    from ..panel import fmt_cell

    k = row.get("k") or 0
    people = row.get("participants")
    text = f"{k} stud{'y' if k == 1 else 'ies'}"
    if people is not None:
        text += f" · {fmt_cell(people, 'participants')} people"
    return text


class _SortItem(QTableWidgetItem):
    """A cell that sorts by its row's value (numbers as numbers; empty cells last)."""

    def __init__(self, text: str, key) -> None:
        super().__init__(text)
        self.key = key

    def __lt__(self, other) -> bool:
        a, b = self.key, getattr(other, "key", None)
        if a is None or b is None:
            return a is not None and b is None
        if isinstance(a, str) != isinstance(b, str):
            return not isinstance(a, str)
        return a < b


class PanelSummaryPanel(QWidget):
    """The Panel view. ``open_outcome(index)`` is emitted when a row is clicked."""

    open_outcome = Signal(int)
    export_requested = Signal(str)  # "panel" or "slide"

    def __init__(self, session: Session, parent=None) -> None:
        super().__init__(parent)
        self.setObjectName("Panel")
        self.session = session
        self.summary = None
        self.worker: PanelWorker | None = None
        self._key = None
        self._pending = False
        lay = QVBoxLayout(self)
        explain = QLabel(M.PANEL_EXPLAIN)
        explain.setWordWrap(True)
        lay.addWidget(explain)
        self.state = QLabel("")
        self.state.setWordWrap(True)
        lay.addWidget(self.state)
        self.table = QTableWidget(0, len(COLUMNS) + 1)
        self.table.setAccessibleName("Panel summary: one row per outcome")
        self.table.setHorizontalHeaderLabels(["Funnel", *(h for h, _, _ in COLUMNS)])
        self.table.setEditTriggers(QAbstractItemView.NoEditTriggers)
        self.table.setSelectionBehavior(QAbstractItemView.SelectRows)
        self.table.setSelectionMode(QAbstractItemView.SingleSelection)
        self.table.setWordWrap(True)
        self.table.verticalHeader().setVisible(False)
        header = self.table.horizontalHeader()
        # the funnel keeps its size; the three text columns share the width the view has
        # (the rows grow taller on a narrow screen instead of hiding the rating)
        header.setSectionResizeMode(QHeaderView.Stretch)
        header.setSectionResizeMode(0, QHeaderView.Fixed)
        self.table.setColumnWidth(0, THUMB_W + 8)
        header.sectionResized.connect(lambda *_: self._fit_rows())
        lay.addWidget(self.table, 1)
        row = QHBoxLayout()
        self.export_button = QPushButton("E&xport the panel summary\u2026")
        self.slide_button = QPushButton("&Journal-club slide of this outcome\u2026")
        row.addWidget(self.export_button)
        row.addWidget(self.slide_button)
        row.addStretch(1)
        lay.addLayout(row)
        self.export_button.clicked.connect(lambda: self.export_requested.emit("panel"))
        self.slide_button.clicked.connect(lambda: self.export_requested.emit("slide"))
        self.table.cellClicked.connect(self._clicked)

    # ------------------------------------------------------------------ inputs

    def inputs(self) -> list[OutcomeInput]:
        names = self.session.outcome_names
        return [
            OutcomeInput(name, review, settings)
            for name, (review, settings) in zip(names, self.session.outcome_reviews())
        ]

    def _inputs_key(self) -> tuple:
        return tuple(
            (id(r.studies), id(r.details), s) for r, s in self.session.outcome_reviews()
        ) + (self.session.outcome_names,)

    # ------------------------------------------------------------------ the view protocol

    def show_result(self, _result) -> None:
        """Bring the rows up to date (the current outcome's result is not enough)."""
        key = self._inputs_key()
        if key == self._key and self.summary is not None:
            return
        if self.worker is not None and self.worker.isRunning():
            self._pending = True
            return
        self._key = key
        self._pending = False
        self.table.setRowCount(0)  # never a mix of old and new rows
        self.summary = None
        self.state.setText(M.PANEL_UPDATING.format(n=len(key) - 1))
        title = panel_title([self.session.review.details.title])
        w = PanelWorker(title, self.inputs(), key, parent=self)
        w.finished_with.connect(self._done)
        w.failed.connect(self._failed)
        w.finished.connect(self._worker_ended)
        self.worker = w
        w.start()

    def reset(self) -> None:
        """Forget the rows, unless they are still those of this workbook (another outcome
        was chosen: the panel's rows do not depend on which one is shown)."""
        if self._key is not None and self._key == self._inputs_key():
            return
        self._key = None
        self.summary = None
        self.table.setRowCount(0)
        self.state.setText("")

    def show_message(self, text: str) -> None:
        self.table.setRowCount(0)
        self.state.setText(text)

    def shutdown(self, timeout_ms: int = 30000) -> None:
        """Stop a running worker and wait for its thread (the window is closing): a
        QThread destroyed while it runs aborts the whole program."""
        w = self.worker
        if w is not None and w.isRunning():
            self._pending = False
            w.cancel()
            w.wait(timeout_ms)

    def wait(self, timeout_ms: int = 60000) -> None:
        """Until the rows are made (tests, screenshots)."""
        from PySide6.QtCore import QCoreApplication, QElapsedTimer

        clock = QElapsedTimer()
        clock.start()
        while (self.worker is not None and self.worker.isRunning()) or getattr(
            self, "_pending", False
        ):
            QCoreApplication.processEvents()
            if clock.elapsed() > timeout_ms:
                break
            QThread.msleep(10)
        QCoreApplication.processEvents()

    def _worker_ended(self) -> None:
        if getattr(self, "_pending", False):
            self._pending = False
            self.show_result(None)

    def _failed(self, message: str, key) -> None:
        if key == self._key:
            self.show_message(M.PANEL_FAILED.format(error=message))

    def _done(self, summary, thumbs, key) -> None:
        if key != self._inputs_key():
            self._key = None  # the review moved on while it ran: made again
            self._pending = True
            return
        self.summary = summary
        self.state.setText("")
        self._fill(summary, thumbs)

    def _fill(self, summary, thumbs) -> None:
        t = self.table
        t.setSortingEnabled(False)
        t.setRowCount(len(summary.outcomes))
        for r, (o, png) in enumerate(zip(summary.outcomes, thumbs)):
            thumb = _SortItem("", r)
            thumb.setData(Qt.UserRole, r)
            if png:
                pix = QPixmap()
                pix.loadFromData(QByteArray(png), "PNG")
                thumb.setData(
                    Qt.DecorationRole,
                    pix.scaled(THUMB_W, THUMB_H, Qt.KeepAspectRatio, Qt.SmoothTransformation),
                )
                thumb.setToolTip(f"Funnel plot of {o.name}")
            t.setItem(r, 0, thumb)
            cells = printed_cells(o.row)
            cells[1] = _people(o.row)
            for c, (_heading, key, parts) in enumerate(COLUMNS, start=1):
                lines = [fmt.format(cells[i]) for i, fmt in parts if cells[i] not in ("", "–")]
                text = "\n".join(lines) or "–"
                item = _SortItem(text, o.row.get(key))
                item.setData(Qt.UserRole, r)
                item.setToolTip(text)
                item.setTextAlignment(Qt.AlignLeft | Qt.AlignVCenter)
                t.setItem(r, c, item)
        t.setColumnWidth(0, THUMB_W + 8)
        self._fit_rows()
        # the outcomes' own order first; a click on a heading sorts by it
        t.horizontalHeader().setSortIndicator(0, Qt.AscendingOrder)
        t.setSortingEnabled(True)

    def _fit_rows(self) -> None:
        """Each row as tall as its wrapped text, within one and a half funnels (a longer
        reason ends in "…"; the whole text is the cell's tooltip)."""
        t = self.table
        t.resizeRowsToContents()
        low, high = THUMB_H + 6, int(1.5 * (THUMB_H + 6))
        for r in range(t.rowCount()):
            t.setRowHeight(r, min(max(t.rowHeight(r), low), high))

    def _clicked(self, row: int, _column: int) -> None:
        item = self.table.item(row, 0)
        if item is not None:
            self.open_outcome.emit(int(item.data(Qt.UserRole)))
