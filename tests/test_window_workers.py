"""The analysis worker: progress by stage, cancelled by the next edit."""

from __future__ import annotations

import pytest

pytest.importorskip("PySide6")

from lopside.analysis import STAGES  # noqa: E402
from lopside.cli_common import load_review_file  # noqa: E402
from lopside.paths import sample_reviews_dir  # noqa: E402
from lopside.settings import AnalysisSettings  # noqa: E402


def _sample():
    return load_review_file(str(sample_reviews_dir() / "delirium_vantoprine.lopside"), None)[0]


def test_worker_reports_stages_then_the_result(qtbot, user_state):
    from lopside.window.workers import AnalysisWorker

    w = AnalysisWorker(_sample(), AnalysisSettings(), "key-1")
    stages, done = [], []
    w.progress.connect(lambda s, i, n: stages.append(s))
    w.finished_with.connect(lambda r, key: done.append((r, key)))
    with qtbot.waitSignal(w.finished_with, timeout=30000):
        w.start()
    w.wait()
    assert stages == list(STAGES[:-1])
    assert done[0][1] == "key-1" and done[0][0].k > 0


def test_a_cancelled_worker_says_so_and_gives_no_result(qtbot, user_state):
    from lopside.window.workers import AnalysisWorker

    w = AnalysisWorker(_sample(), AnalysisSettings(), "key-2")
    results, cancelled = [], []
    w.finished_with.connect(lambda r, key: results.append(r))
    w.cancelled.connect(cancelled.append)
    w.cancel()  # the user edited before the worker got going
    with qtbot.waitSignal(w.cancelled, timeout=30000):
        w.start()
    w.wait()
    assert cancelled == ["key-2"] and results == []
