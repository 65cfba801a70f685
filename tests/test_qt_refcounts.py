"""Qt's Python binding must not lose references to None, True or False.

PySide6 6.12.0's ``SignalInstance.emit()`` hands back ``True`` without a reference of its
own (seen here on 2026-12-03: 100 emits took exactly 100 from ``sys.getrefcount(True)``;
6.11.3 took none), and it loses a reference to ``None`` for each call of a Python override
returning None from C++ (a table model's ``data()``: 300 calls, -300) and two for each
timer callback (200 singleShots, -400). Every progress line of the analysis worker is an emit, so after a few
thousand of them the interpreter freed ``True`` and aborted at exit with
``Fatal Python error: bool_dealloc`` (exit 134), after all tests had passed, and a
long-running window would abort the same way. pyproject.toml excludes that release; this
test tells at once, with the reason, if a future release does the same.

The check runs in a child process so that a broken binding cannot corrupt this one. On
Python 3.12 and later None/True/False are immortal and their counts never move, so the
check passes there without meaning much (the bug is harmless there too).
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import textwrap

import pytest

pytest.importorskip("PySide6")

CHILD = textwrap.dedent(
    """
    import json, sys, threading
    from PySide6.QtCore import (
        QAbstractTableModel, QCoreApplication, QModelIndex, QObject, Qt, QThread, QTimer,
        Signal,
    )

    app = QCoreApplication([])

    class Source(QObject):
        plain = Signal()
        one = Signal(object)
        three = Signal(str, int, int)

    class Worker(QThread):
        done = Signal(object, object)
        def run(self):
            for _ in range(N):
                self.done.emit(None, None)

    N = 300
    def counts():
        return [sys.getrefcount(None), sys.getrefcount(True), sys.getrefcount(False)]

    got = []
    s = Source()
    s.one.connect(lambda x: None)
    s.three.connect(lambda a, b, c: None)
    class Model(QAbstractTableModel):
        def rowCount(self, parent=QModelIndex()):
            return 3

        def columnCount(self, parent=QModelIndex()):
            return 3

        def data(self, index, role=Qt.DisplayRole):
            return "x" if role == Qt.DisplayRole else None

    model = Model()
    cell = model.index(1, 1)
    fired = []
    cases = {
        "emit, no receiver": lambda: s.plain.emit(),
        "emit None to a slot": lambda: s.one.emit(None),
        "emit a progress line": lambda: s.three.emit("pooling", 1, 7),
        # a Python override returning None, called from C++ (a table model's data())
        "a virtual returning None": lambda: cell.data(Qt.ToolTipRole),
        # a Python callable run by a timer (returns None)
        "a timer's callback": lambda: (
            QTimer.singleShot(0, lambda: fired.append(1)),
            app.processEvents(),
        ),
    }
    out = {}
    for name, fn in cases.items():  # emits first: a broken emit aborts before the rest
        fn()
        before = counts()
        for _ in range(N):
            fn()
        out[name] = [b - a for a, b in zip(before, counts())]

    w = Worker()
    w.done.connect(lambda a, b: got.append(1), Qt.QueuedConnection)
    before = counts()
    w.start(); w.wait()
    app.processEvents()
    out["emit from a thread, queued"] = [b - a for a, b in zip(before, counts())]
    print(json.dumps({"counts": out, "received": len(got), "fired": len(fired)}))
    """
)


def test_qt_calls_keep_the_references_of_none_true_and_false():
    env = dict(os.environ, QT_QPA_PLATFORM="offscreen")
    run = subprocess.run(
        [sys.executable, "-c", CHILD], capture_output=True, text=True, env=env, timeout=120
    )
    if "_dealloc" in run.stderr:  # the child ran out of references to True or None
        pytest.fail(
            "this PySide6 loses references (signal emits, overrides or timer callbacks): the "
            "child process aborted "
            f"({run.stderr.splitlines()[0]}). Exclude this release in pyproject.toml."
        )
    assert run.returncode == 0, run.stderr[-2000:]
    report = json.loads(run.stdout.strip().splitlines()[-1])
    assert report["received"] == 300  # the queued emits did arrive: the check ran for real
    assert report["fired"] == 301  # ... and so did the timers' callbacks
    lost = {name: d for name, d in report["counts"].items() if any(x < 0 for x in d)}
    assert not lost, (
        "this PySide6 loses references to None/True/False (emits, overrides, timers) "
        f"(deltas [None, True, False] over 300 emits: {lost}); the interpreter will abort "
        "with bool_dealloc/none_dealloc. Exclude this release in pyproject.toml."
    )
