"""Slow work off the GUI thread: the power simulation and the PDF sheet.

Both are plain core functions (``analyse(..., with_power=True, power_progress=...)`` and
``write_sheet``); a worker only runs one in a QThread and reports through signals. Workers
are created unstarted so that callers (and tests) connect their signals first.
"""

from __future__ import annotations

import threading
from pathlib import Path

from PySide6.QtCore import QThread, Signal


class AnalysisWorker(QThread):
    """Run ``analyse(review, settings)`` off the GUI thread (typing stays responsive).

    Signals
    -------
    progress(stage, index, total)
        A stage of :data:`lopside.analysis.STAGES` starts.
    finished_with(result, key)
    failed(message, key)
    cancelled(key)
        :meth:`cancel` was called; the analysis stopped at the next stage.
    """

    progress = Signal(str, int, int)
    finished_with = Signal(object, object)
    failed = Signal(str, object)
    cancelled = Signal(object)

    def __init__(self, review, settings, key, parent=None, core=None) -> None:
        super().__init__(parent)
        self.review = review
        self.settings = settings
        self.key = key
        self.core = core  # a core-stage result of the same inputs, reused by the full stage
        self._cancel = threading.Event()

    def cancel(self) -> None:
        """Stop at the next stage (the user edited again; this result would be stale)."""
        self._cancel.set()

    def _progress(self, stage: str, index: int, total: int) -> bool:
        if self._cancel.is_set():
            return False
        self.progress.emit(stage, int(index), int(total))
        return True

    def run(self) -> None:
        try:
            from ..analysis import AnalysisCancelled, analyse

            try:
                result = analyse(
                    self.review, self.settings, progress=self._progress, core=self.core
                )
            except AnalysisCancelled:
                self.cancelled.emit(self.key)
                return
        except ModuleNotFoundError as exc:
            self.failed.emit(f"missing part: {exc.name}", self.key)
            return
        except Exception as exc:  # noqa: BLE001 - reported to the user, never a crash
            self.failed.emit(f"{type(exc).__name__}: {exc}", self.key)
            return
        self.finished_with.emit(result, self.key)


class PowerWorker(QThread):
    """Simulate the power of the recommended test for a fixed review and settings.

    Signals
    -------
    progress(done, total)
    finished_with(power_result, key)
        The power result (or NotComputable, e.g. "cancelled") and the session's analysis
        key it belongs to.
    failed(message)
    """

    progress = Signal(int, int)
    finished_with = Signal(object, object)
    failed = Signal(str)

    def __init__(self, review, settings, key, parent=None) -> None:
        super().__init__(parent)
        self.review = review
        self.settings = settings
        self.key = key
        self._cancel = threading.Event()

    def cancel(self) -> None:
        self._cancel.set()

    @property
    def cancelled(self) -> bool:
        return self._cancel.is_set()

    def _progress(self, done: int, total: int) -> bool:
        self.progress.emit(int(done), int(total))
        return not self._cancel.is_set()  # False asks the simulation to stop

    def run(self) -> None:
        try:
            from ..analysis import analyse

            result = analyse(
                self.review, self.settings, with_power=True, power_progress=self._progress
            )
        except Exception as exc:  # noqa: BLE001 - reported to the user, never a crash
            self.failed.emit(f"{type(exc).__name__}: {exc}")
            return
        self.finished_with.emit(result.power, self.key)


class SheetWorker(QThread):
    """Write the appraisal sheet (PDF) for one analysis result."""

    finished_with = Signal(str)
    failed = Signal(str)

    def __init__(self, result, path: str | Path, include_forest: bool = False, parent=None) -> None:
        super().__init__(parent)
        self.result = result
        self.path = Path(path)
        self.include_forest = include_forest
        #: the exception when writing failed (an OutputLocked offers another name)
        self.error: Exception | None = None

    def run(self) -> None:
        try:
            from ..sheet import write_sheet

            write_sheet(self.result, self.path, include_forest=self.include_forest)
        except ModuleNotFoundError as exc:
            self.failed.emit(f"the sheet part ({exc.name}) is missing from this build")
            return
        except OSError as exc:
            self.error = exc
            self.failed.emit(f"{self.path.name}: {exc.strerror or exc}")
            return
        except Exception as exc:  # noqa: BLE001 - reported to the user, never a crash
            self.failed.emit(f"{type(exc).__name__}: {exc}")
            return
        self.finished_with.emit(str(self.path))
