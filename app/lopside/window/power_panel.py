"""The power view: run the simulation in a worker, with a progress bar and Cancel."""

from __future__ import annotations

from PySide6.QtCore import Signal
from PySide6.QtWidgets import (
    QHBoxLayout,
    QLabel,
    QProgressBar,
    QPushButton,
    QVBoxLayout,
    QWidget,
)

from ..session import Session
from . import messages as M
from .sections import SectionsPanel
from .workers import PowerWorker


def _power_sections(result):
    from ..summary import power_section

    return (power_section(result),)


class PowerPanel(QWidget):
    """Start/cancel the power simulation; show its result from the summary."""

    power_done = Signal(object)

    def __init__(self, session: Session, parent=None) -> None:
        super().__init__(parent)
        self.setObjectName("Power")
        self.session = session
        lay = QVBoxLayout(self)
        explain = QLabel(M.POWER_EXPLAIN)
        explain.setWordWrap(True)
        lay.addWidget(explain)
        row = QHBoxLayout()
        self.run_button = QPushButton("Simulate po&wer")
        self.run_button.setAccessibleName("Simulate the power of the recommended test")
        self.cancel_button = QPushButton("Cancel")
        self.cancel_button.setEnabled(False)
        self.bar = QProgressBar()
        self.bar.setAccessibleName("Power simulation progress")
        self.bar.setRange(0, 100)
        self.bar.setValue(0)
        row.addWidget(self.run_button)
        row.addWidget(self.cancel_button)
        row.addWidget(self.bar, 1)
        lay.addLayout(row)
        self.state = QLabel("")
        self.state.setWordWrap(True)
        lay.addWidget(self.state)
        self.sections = SectionsPanel("Power result", _power_sections)
        lay.addWidget(self.sections, 1)
        self.worker: PowerWorker | None = None
        self.run_button.clicked.connect(self.start)
        self.cancel_button.clicked.connect(self.cancel)

    def make_worker(self) -> PowerWorker:
        """A worker for the current review, not started (tests connect to it first)."""
        s = self.session
        return PowerWorker(s.review, s.settings, s.analysis_key(), self)

    def start(self, worker: PowerWorker | None = None) -> PowerWorker:
        if self.worker is not None and self.worker.isRunning():
            return self.worker
        w = worker if isinstance(worker, PowerWorker) else self.make_worker()
        self.worker = w
        w.progress.connect(self._progress)
        w.finished_with.connect(self._finished)
        w.failed.connect(self._failed)
        self.run_button.setEnabled(False)
        self.cancel_button.setEnabled(True)
        self.bar.setValue(0)
        self.state.setText("Simulating\u2026")
        w.start()
        return w

    def cancel(self) -> None:
        if self.worker is not None:
            self.worker.cancel()
            self.state.setText("Cancelling\u2026")

    def _progress(self, done: int, total: int) -> None:
        self.bar.setRange(0, max(total, 1))
        self.bar.setValue(done)

    def _finished(self, power, key) -> None:
        self._reset_buttons()
        from ..stats.results import NotComputable

        if isinstance(power, NotComputable) and "cancel" in power.reason.lower():
            self.state.setText(M.POWER_CANCELLED)
            self.bar.setValue(0)
            self.power_done.emit(power)
            return
        kept = self.session.store_power(key, power)
        self.state.setText("" if kept else M.STALE_POWER)
        self.power_done.emit(power)

    def _failed(self, message: str) -> None:
        self._reset_buttons()
        from .errors import plain

        self.state.setText(M.ANALYSIS_FAILED.format(error=plain(message)))

    def _reset_buttons(self) -> None:
        self.run_button.setEnabled(True)
        self.cancel_button.setEnabled(False)

    def show_result(self, result) -> None:
        if result is not None and result.power is None:
            self.sections.show_message(M.POWER_NOT_RUN)
        else:
            self.sections.show_result(result)
        if result is not None and not self.session.power_is_current() and result.power is None:
            if self.worker is None or not self.worker.isRunning():
                self.state.setText("")

    def show_message(self, text: str) -> None:
        self.sections.show_message(text)

    def reset(self) -> None:
        """The review changed completely: no progress, no state, no old result."""
        if self.worker is not None and self.worker.isRunning():
            self.worker.cancel()  # its result would be dropped anyway (another review)
        self.bar.setRange(0, 100)
        self.bar.setValue(0)
        self.state.setText("")
        self.sections.reset()

    def shutdown(self) -> None:
        """Stop a running simulation before the window closes."""
        if self.worker is not None and self.worker.isRunning():
            self.worker.cancel()
            self.worker.wait(5000)
