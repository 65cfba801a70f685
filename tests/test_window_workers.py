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


# --------------------------------------------------------------------------------------
# Live redraw: the table repaints only what changed; the funnel reuses its layout


def _window_with_sample(make_window):
    w = make_window(_sample())
    w.wait_for_analysis()
    return w


def test_table_emits_data_changed_only_for_cells_that_changed(make_window, qtbot):
    from PySide6.QtCore import Qt

    from lopside import edits as ed

    w = _window_with_sample(make_window)
    model = w.studies.model
    spans = []
    model.dataChanged.connect(
        lambda a, b, roles=(): spans.append((a.row(), b.row(), a.column(), b.column()))
    )
    k = model.rowCount()
    row = w.session.review.studies[2]
    field = next(f for f in ("int_events", "estimate", "int_mean") if getattr(row, f) is not None)
    value = getattr(row, field) + (1 if isinstance(getattr(row, field), int) else 0.01)
    w.stack.push_edit(ed.SetCell(2, field, str(value)))
    w.wait_for_analysis()
    qtbot.waitUntil(lambda: w.result is not None and w.result.review is w.session.review)
    assert spans, "the edited row must be repainted"
    # only row 2 (its own edit, then its derived cells) was announced, never the whole table
    assert all(lo == hi == 2 for lo, hi, _, _ in spans), spans
    cells = sum((hi - lo + 1) * (c1 - c0 + 1) for lo, hi, c0, c1 in spans)
    assert cells < k * model.columnCount()
    # the shown derived value is the new analysis's
    c = model.column_of("_y")
    shown = model.data(model.index(2, c), Qt.DisplayRole)
    assert float(shown) == pytest.approx(w.result.derived[2].y, rel=1e-3)


def test_funnel_reuses_its_layout_after_an_edit_and_keeps_points_inside(make_window, qtbot):
    from lopside import edits as ed

    w = _window_with_sample(make_window)
    w.views.setCurrentWidget(w.funnel)
    w.funnel.draw_now()
    w.funnel.draw_now()  # the first draw under constrained layout gives the layout
    assert w.funnel._fixed_layout is not None
    position = w.funnel.axes.get_position().bounds
    row = w.session.review.studies[0]
    field = next(f for f in ("int_events", "estimate", "int_mean") if getattr(row, f) is not None)
    value = getattr(row, field) + (1 if isinstance(getattr(row, field), int) else 0.01)
    w.stack.push_edit(ed.SetCell(0, field, str(value)))
    w.wait_for_analysis()
    w.update_views()
    w.funnel.draw_now()
    assert w.funnel.layout_reused
    assert type(w.funnel.figure.get_layout_engine()).__name__ != "ConstrainedLayoutEngine"
    assert w.funnel.axes.get_position().bounds == pytest.approx(position)
    # the layout still holds every tick label inside the canvas
    renderer = w.funnel.canvas.get_renderer()
    assert w.funnel._fits(renderer)


def test_an_edit_shows_the_core_stage_first_then_the_full_one(make_window, qtbot):
    from lopside import edits as ed
    from lopside.window import messages as M

    w = _window_with_sample(make_window)
    w.views.setCurrentWidget(w.funnel)
    w.funnel.draw_now()
    row = w.session.review.studies[1]
    field = next(f for f in ("int_events", "estimate", "int_mean") if getattr(row, f) is not None)
    value = getattr(row, field) + (1 if isinstance(getattr(row, field), int) else 0.01)
    w.stack.push_edit(ed.SetCell(1, field, str(value)))
    w._timer.stop()
    w.refresh_soon()  # as the debounce does: core stage now, full stage in the worker
    assert w.result is not None and w.result.stage == "core"
    assert w.result.review is w.session.review
    assert w.status_label.text().endswith(M.CORE_STAGE_SUFFIX)
    core_data = w.result.data
    drawn = w.funnel.draw_count
    w.wait_for_analysis()
    qtbot.waitUntil(lambda: w.result.stage == "full", timeout=30000)
    assert w.result.data is core_data  # the full stage reused the core's objects ...
    assert w.funnel.draw_count == drawn  # ... so the funnel was not drawn again
    assert not w.status_label.text().endswith(M.CORE_STAGE_SUFFIX)


def test_funnel_drawn_in_two_parts_matches_a_whole_draw(make_window, qtbot):
    # the axes are drawn over a kept background of the rest of the figure (the key); the
    # pixels must be those of one whole draw of the same figure (common practice for a
    # blitting cache: compare with the uncached draw)
    import numpy as np

    from lopside import edits as ed

    w = _window_with_sample(make_window)
    w.views.setCurrentWidget(w.funnel)
    w.funnel.draw_now()
    row = w.session.review.studies[0]
    field = next(f for f in ("int_events", "estimate", "int_mean") if getattr(row, f) is not None)
    reused = []
    for step in (1, 2, 3):
        value = getattr(row, field) + (step if isinstance(getattr(row, field), int) else 0.01)
        w.stack.push_edit(ed.SetCell(0, field, str(value)))
        w.wait_for_analysis()
        w.update_views()
        w.funnel.draw_now()
        canvas = w.funnel.canvas
        assert w.funnel._background is not None
        reused.append(w.funnel.background_reused)
        parts = np.asarray(canvas.buffer_rgba()).copy()
        canvas.draw()  # the whole figure in one go
        whole = np.asarray(canvas.buffer_rgba()).copy()
        assert parts.shape == whole.shape and np.array_equal(parts, whole)
        w.funnel.draw_now()  # a new background for the next edit
    assert any(reused), "an edit that keeps the key's words draws only the axes"


def test_funnel_with_ticks_beyond_its_limits_settles(make_window, qtbot):
    # a mean-difference funnel whose tick locator also returns ticks outside the axis
    # limits (not drawn): they must not count as overhanging labels, or the panel lays
    # itself out again and again and shows a blank canvas
    import numpy as np

    review = load_review_file(str(sample_reviews_dir() / "knee_pain_walking.lopside"), None)[0]
    w = make_window(review)
    w.wait_for_analysis()
    w.views.setCurrentWidget(w.funnel)
    w.funnel.draw_now()
    for _ in range(5):
        qtbot.wait(20)
    count = w.funnel.draw_count
    for _ in range(5):
        qtbot.wait(20)
    assert w.funnel.draw_count == count
    w.funnel.draw_now()
    assert np.asarray(w.funnel.canvas.buffer_rgba())[..., :3].mean() < 250  # not blank


# --------------------------------------------------------------------------------------
# Exports never print the core stage: they wait for the full analysis


def _edited_with_full_stage_pending(make_window):
    """A window whose review was just edited: the core stage is shown and the full stage
    has not started yet (its start is queued), as when the user exports at once."""
    from lopside import edits as ed

    w = _window_with_sample(make_window)
    row = w.session.review.studies[0]
    field = next(f for f in ("int_events", "estimate", "int_mean") if getattr(row, f) is not None)
    value = getattr(row, field) + (1 if isinstance(getattr(row, field), int) else 0.01)
    w.stack.push_edit(ed.SetCell(0, field, str(value)))
    w._timer.stop()  # the debounce: run now, as its timeout would
    w.refresh_soon()
    assert w.result is not None and w.result.stage == "core"  # the case under test
    return w


def test_sheet_export_right_after_an_edit_prints_the_full_analysis(make_window, qtbot, tmp_path):
    """The sheet was handed the core-stage result shown at that moment: its adjustments,
    leave-one-out and other tests would have read 'updating…' on paper."""
    w = _edited_with_full_stage_pending(make_window)
    worker = w.export_sheet(str(tmp_path / "sheet.pdf"))
    assert worker is not None
    assert worker.result.stage == "full"
    assert worker.result.review is w.session.review  # the edited review, not the one before
    with qtbot.waitSignal(worker.finished_with, timeout=60000):
        pass


def test_slide_and_figure_exports_right_after_an_edit_use_the_full_analysis(
    make_window, tmp_path, monkeypatch
):
    from lopside.panel import slide as slide_module

    w = _edited_with_full_stage_pending(make_window)
    seen = []
    real = slide_module.write_slide

    def spy(result, appraisal, path, **kw):
        seen.append(result.stage)
        return real(result, appraisal, path, **kw)

    monkeypatch.setattr(slide_module, "write_slide", spy)
    assert w.export_slide(str(tmp_path / "s.png")) is not None
    assert seen == ["full"]
    from lopside.window import messages as M

    assert w.statusBar().currentMessage() != M.EXPORT_WAITS  # the wait is over: not left up


def test_causes_tab_shows_nothing_of_the_previous_reading_while_the_full_stage_runs(
    make_window,
):
    """In the core stage the reading said 'being updated' while the evidence for each
    explanation and the suggested rating still showed the data before the edit."""
    from lopside.words.numbers import UPDATING

    w = _window_with_sample(make_window)
    w.views.setCurrentWidget(w.causes)
    w.update_views()
    before = w.causes.suggested.text()
    assert before not in ("", "\u2013", UPDATING)  # a full reading was shown
    w = _edited_with_full_stage_pending(make_window)
    w.views.setCurrentWidget(w.causes)
    w.causes.show_result(w.result)
    assert w.result.stage == "core"
    assert w.causes.suggested.text() == UPDATING
    assert {ev.text() for ev in w.causes.evidence.values()} == {UPDATING}
    assert w.causes.appraisal is None
    w.wait_for_analysis()
    w.causes.show_result(w.result)
    assert w.result.stage == "full" and w.causes.suggested.text() not in (UPDATING, "\u2013")


def test_funnel_copied_right_after_an_edit_is_drawn_from_the_full_analysis(
    make_window, monkeypatch
):
    """Copy and print draw a fresh funnel; with 'adjusted estimates' shown, a core-stage
    result would lack PET-PEESE, the limit and the selection model."""
    from lopside.figures import adaptors

    w = _edited_with_full_stage_pending(make_window)
    seen = []
    real = adaptors.funnel_input_from_result

    def spy(result, opts):
        seen.append(result.stage)
        return real(result, opts)

    monkeypatch.setattr(adaptors, "funnel_input_from_result", spy)
    assert w.funnel_image() is not None
    assert seen == ["full"]
