"""App-wide guards: no change without intent, no failure without a report.

Design invariants
-----------------
* **Wheel.** A combo box, spin box or slider changes the review only when the user meant
  it: every such widget gets ``Qt.StrongFocus`` (the wheel no longer gives it focus) and
  an application-wide event filter drops wheel events sent to one that has no keyboard
  focus, passing them to the scroll area around it instead, so the page scrolls as the
  user expected (ENGINEERING-NOTES: the usual Qt cure). Scroll bars are not guarded.
* **Exceptions.** An exception that escapes a Qt slot is printed and swallowed by Qt, and
  the view keeps its old content. :func:`install_exception_hook` chains a
  ``sys.excepthook`` that writes the report to the log file and shows it in a dialog the
  user can copy from; views that catch their own failure call :func:`report_exception`
  and say so in place of their content.
* ``show_report`` is a module attribute so tests can replace the dialog.
"""

from __future__ import annotations

import datetime as _dt
import os
import sys
import traceback
from pathlib import Path

from PySide6.QtCore import QEvent, QObject, Qt
from PySide6.QtWidgets import (
    QAbstractScrollArea,
    QAbstractSlider,
    QAbstractSpinBox,
    QApplication,
    QComboBox,
    QDialog,
    QDialogButtonBox,
    QLabel,
    QPlainTextEdit,
    QPushButton,
    QScrollBar,
    QVBoxLayout,
    QWidget,
)

from . import messages as M

# --------------------------------------------------------------------------------------
# Wheel


def is_guarded(obj) -> bool:
    """A widget whose value the wheel would change: combo, spin box, slider (not scroll bar)."""
    return isinstance(obj, (QComboBox, QAbstractSpinBox, QAbstractSlider)) and not isinstance(
        obj, QScrollBar
    )


def _scroll_area_around(w: QWidget) -> QAbstractScrollArea | None:
    p = w.parentWidget()
    while p is not None:
        if isinstance(p, QAbstractScrollArea) and not isinstance(p, QComboBox):
            return p
        p = p.parentWidget()
    return None


class WheelGuard(QObject):
    """The application-wide event filter described in the module docstring."""

    def eventFilter(self, obj, event) -> bool:  # noqa: N802 - Qt API
        t = event.type()
        if t == QEvent.Wheel and is_guarded(obj) and not obj.hasFocus():
            area = _scroll_area_around(obj)
            if area is not None:
                QApplication.sendEvent(area.viewport(), event)
            event.ignore()
            return True  # the value does not change
        if t == QEvent.Polish and is_guarded(obj):
            guard_widget(obj)
        return False


def guard_widget(w: QWidget) -> None:
    if w.focusPolicy() & Qt.WheelFocus == Qt.WheelFocus:
        w.setFocusPolicy(Qt.StrongFocus)


def guard_tree(root: QWidget) -> None:
    """Give every guarded widget under ``root`` strong focus (widgets made before the filter)."""
    for w in root.findChildren(QWidget):
        if is_guarded(w):
            guard_widget(w)


def install_wheel_guard(app: QApplication | None = None) -> WheelGuard:
    """Install the filter once on the application; returns it."""
    app = app or QApplication.instance()
    guard = getattr(app, "_lopside_wheel_guard", None)
    if guard is None:
        guard = WheelGuard(app)
        app.installEventFilter(guard)
        app._lopside_wheel_guard = guard  # noqa: SLF001 - a marker on our own app object
    return guard


# --------------------------------------------------------------------------------------
# Exceptions


def log_folder() -> Path:
    """The per-user log folder: the same file the frozen build sends its messages to."""
    d = os.environ.get("LOPSIDE_LOG_DIR")
    if d:
        return Path(d)
    from ..frozen import user_cache_dir

    return user_cache_dir() / "logs"


def log_file() -> Path:
    return log_folder() / "lopside.log"


def _write_log(text: str) -> str:
    """Append ``text`` to the log; returns the log's path ("" when it cannot be written)."""
    path = log_file()
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        with open(path, "a", encoding="utf-8", errors="backslashreplace") as fh:
            fh.write(text.rstrip("\n") + "\n\n")
        return str(path)
    except OSError:
        return ""


def format_report(exc: BaseException, where: str = "") -> str:
    from .. import __version__

    stamp = _dt.datetime.now().isoformat(timespec="seconds")
    head = f"{stamp} Lopside {__version__}, Python {sys.version.split()[0]}, {sys.platform}"
    if where:
        head += f"\nWhere: {where}"
    body = "".join(traceback.format_exception(type(exc), exc, exc.__traceback__))
    return f"{head}\n{body}"


class ReportDialog(QDialog):
    """The report of an unexpected error, selectable and with a Copy button."""

    def __init__(self, summary: str, report: str, log: str, parent=None) -> None:
        super().__init__(parent)
        self.setWindowTitle(M.ERROR_TITLE)
        lay = QVBoxLayout(self)
        text = QLabel(M.ERROR_TEXT.format(summary=summary, log=log or M.ERROR_NO_LOG))
        text.setWordWrap(True)
        text.setTextInteractionFlags(Qt.TextSelectableByMouse)
        lay.addWidget(text)
        self.report = QPlainTextEdit(report)
        self.report.setReadOnly(True)
        self.report.setAccessibleName("Error report")
        lay.addWidget(self.report, 1)
        buttons = QDialogButtonBox(QDialogButtonBox.Close)
        copy = QPushButton("&Copy the report")
        buttons.addButton(copy, QDialogButtonBox.ActionRole)
        copy.clicked.connect(lambda: QApplication.clipboard().setText(self.report.toPlainText()))
        buttons.rejected.connect(self.close)
        lay.addWidget(buttons)
        self.resize(640, 420)
        self.setAttribute(Qt.WA_DeleteOnClose)


_open_dialogs: list[ReportDialog] = []


def _show_report_dialog(summary: str, report: str, log: str) -> None:
    if QApplication.instance() is None or QApplication.platformName() in ("offscreen", "minimal"):
        return  # nobody could see it (self-test, test runs): the log has the report
    for d in list(_open_dialogs):
        try:
            if d.isVisible():  # one dialog: later reports are appended to it
                d.report.appendPlainText("\n" + report)
                return
        except RuntimeError:  # deleted on close
            pass
        _open_dialogs.remove(d)
    dlg = ReportDialog(summary, report, log)
    _open_dialogs.append(dlg)
    dlg.show()


#: replaced by tests: show_report(summary, report, log_path)
show_report = _show_report_dialog


def report_exception(exc: BaseException, where: str = "") -> str:
    """Log ``exc`` and show the report dialog; returns the log file's path ("" if none)."""
    report = format_report(exc, where)
    log = _write_log(report)
    summary = f"{type(exc).__name__}: {exc}"
    try:
        show_report(summary, report, log)
    except Exception:  # noqa: BLE001 - the report must never raise in its turn
        pass
    return log


def install_exception_hook() -> None:
    """Chain a ``sys.excepthook`` that reports unexpected exceptions (once per process)."""
    if getattr(sys.excepthook, "_lopside", False):
        return
    previous = sys.excepthook

    def hook(etype, value, tb):
        if issubclass(etype, KeyboardInterrupt):
            return previous(etype, value, tb)
        if value is not None and value.__traceback__ is None:
            value = value.with_traceback(tb)
        report_exception(value, "unexpected error in the window")
        if getattr(sys.stderr, "name", None) == str(log_file()):
            return  # the windowed build's stderr is the log: written once already
        try:
            previous(etype, value, tb)  # stderr where there is one (and test harnesses)
        except Exception:  # noqa: BLE001 - no stderr in a windowed build
            pass

    hook._lopside = True  # type: ignore[attr-defined]
    sys.excepthook = hook
