"""Fixtures for the window tests: user state isolated in tmp_path, widgets registered, leaks.

Every window test gets its own settings and autosave folders (``LOPSIDE_SETTINGS_DIR`` /
``LOPSIDE_AUTOSAVE_DIR``) and Qt's test mode for QStandardPaths, so nothing a test does
reaches the real user's preferences, recent files or autosaves; a check after each test
makes sure of that and that no window or dialog was left open.
"""

from __future__ import annotations

import os
from pathlib import Path

import pytest

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")


def _real_settings_file() -> Path | None:
    try:
        from PySide6.QtCore import QSettings
    except ImportError:  # pragma: no cover - the window tests skip without PySide6
        return None
    return Path(QSettings("Lopside", "Lopside").fileName())


@pytest.fixture
def user_state(tmp_path, monkeypatch):
    """Point settings and autosave at tmp_path; yield the two folders."""
    from PySide6.QtCore import QStandardPaths

    QStandardPaths.setTestModeEnabled(True)
    settings = tmp_path / "settings"
    autosave = tmp_path / "autosave"
    monkeypatch.setenv("LOPSIDE_SETTINGS_DIR", str(settings))
    monkeypatch.setenv("LOPSIDE_AUTOSAVE_DIR", str(autosave))
    monkeypatch.setenv("LOPSIDE_LOG_DIR", str(tmp_path / "logs"))
    real = _real_settings_file()
    before = real.stat().st_mtime_ns if real is not None and real.exists() else None
    yield {"settings": settings, "autosave": autosave}
    if real is not None:
        after = real.stat().st_mtime_ns if real.exists() else None
        assert after == before, f"a test touched the user's own settings file {real}"


@pytest.fixture
def make_window(qtbot, user_state):
    """Factory for a shown MainWindow with the modal questions answered by the test."""
    from lopside.session import Session
    from lopside.window.app import make_application
    from lopside.window.main_window import MainWindow

    make_application()
    made = []

    def factory(review=None, **kwargs):
        kwargs.setdefault("ask_recover", lambda items: None)
        kwargs.setdefault("ask_save_changes", lambda name: "discard")
        kwargs.setdefault("ask_open_sheet", lambda path: False)
        kwargs.setdefault("open_url", lambda url: True)
        w = MainWindow(Session(review) if review is not None else None, **kwargs)
        qtbot.addWidget(w)
        w.resize(1366, 740)
        w.show()
        qtbot.waitExposed(w)
        w.finish_startup(None)
        made.append(w)
        return w

    yield factory

    from PySide6.QtWidgets import QApplication

    for w in made:
        w._closing_ok = True  # the test has checked what it wanted; no save prompt
        w.power.shutdown()
        w.close()
    QApplication.processEvents()
    left = [t for t in QApplication.topLevelWidgets() if t.isVisible()]
    assert not left, f"windows or dialogs left open: {[t.windowTitle() for t in left]}"
