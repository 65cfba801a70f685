"""Issue-16 targets as ratios measured in one run (a script, not a test).

Run from the repository root (``--app`` measures another checkout's ``app/`` folder, so a
before/after table comes from two runs of this same script)::

    PYTHONPATH=app python tests/bench/bench_targets.py [--only funnel,sheet,rows]
    PYTHONPATH=app python tests/bench/bench_targets.py --app /path/to/other/app

1. **funnel**: edit -> funnel drawn in the window (staged, as the window runs it: one
   value typed into the table, the core stage analysed and the funnel canvas drawn; the
   full stage runs in the worker and is waited for outside the timing), against a bare
   matplotlib funnel built and drawn on an Agg canvas of the same size
   (bench_window.bare_funnel_ms), at 30 and 200 invented studies. The two alternate edit
   by edit, so machine load hits both alike. Target <= 1.0.
2. **sheet**: the appraisal sheet (3 pages) against drawing its figures alone: the same
   builders make the same figures (funnel with its rows-to-check marks; the selection
   curve when the sheet has one) and matplotlib saves each as SVG with text kept as text
   (its cheapest vector output; the PDF backend's font subsetting costs more than the
   whole sheet). Alternating, at 30 and 120 invented studies. Target <= 1.2.
3. **rows**: effect derivation and row checks of k = 3,000 invented 2x2 rows
   (``derive_all`` + ``check_rows``) against the same log odds ratios and SEs computed
   with numpy from the counts (what a user's script does). Alternating.

Medians of the alternating timings and their ratio are printed. The funnel is timed by
the wall clock (the window's worker thread runs beside it, as in use); the sheet and the
rows, single-threaded, by the CPU time of this process, which a machine shared with other
work disturbs far less. Nothing is asserted.
"""

from __future__ import annotations

import argparse
import os
import statistics
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent

for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")


def _row(what: str, a: list[float], b: list[float]) -> str:
    ma, mb = statistics.median(a), statistics.median(b)
    return f"  {what:<34} {ma:9.1f} {mb:9.1f} {ma / mb:7.2f}"


# --------------------------------------------------------------------------------------
# 1. Edit -> funnel drawn


def funnel(k: int, n: int) -> str:
    from bench_window import bare_funnel_ms, invented_review

    from lopside import edits as ed
    from lopside.session import Session
    from lopside.window.app import make_application
    from lopside.window.main_window import MainWindow

    app = make_application()
    w = MainWindow(
        Session(invented_review(k)),
        ask_recover=lambda items: None,
        ask_save_changes=lambda name: "discard",
    )
    w.resize(1366, 740)
    w.show()
    app.processEvents()
    w.finish_startup(None)
    w.views.setCurrentWidget(w.funnel)
    app.processEvents()
    w.funnel.draw_now()
    width, height = w.funnel.canvas.get_width_height()
    row = w.session.review.studies[0]
    ours, bare = [], []
    for i in range(n + 3):
        value = f"{row.estimate * (0.97 + 0.001 * i):.4f}"  # a new value inside its CI
        t0 = time.perf_counter()
        w.stack.push_edit(ed.SetCell(0, "estimate", value))
        w.session.break_merge()
        w._timer.stop()  # noqa: SLF001 - the 50 ms debounce is waiting, not work
        w.refresh_soon()
        w.funnel.draw_now()
        app.processEvents()
        t = (time.perf_counter() - t0) * 1000
        w.wait_for_analysis()
        b = bare_funnel_ms(k, width, height, 1)
        if i >= 3:  # the first edits warm caches
            ours.append(t)
            bare += b
    w._closing_ok = True  # noqa: SLF001 - nothing to save
    w.close()
    app.processEvents()
    return _row(f"edit -> funnel drawn, k = {k}", ours, bare)


# --------------------------------------------------------------------------------------
# 2. Sheet against its figures alone


def _sheet_figures(result):
    """The figures the sheet draws, built as the sheet builds them."""
    from lopside.figures.adaptors import funnel_input_from_result
    from lopside.figures.flag_marks import flagged_points, mark_flagged
    from lopside.figures.funnel import FunnelOptions, funnel_figure

    rob = {x for x in result.data.risk_of_bias if x}
    opts = FunnelOptions(colour_by="risk_of_bias" if len(rob) >= 2 else "none")
    fig = funnel_figure(funnel_input_from_result(result, opts), opts, size="column")
    mark_flagged(fig.axes[0], flagged_points(result, opts.axis), size="column")
    figs = [fig]
    try:
        from lopside.figures.selection import (
            selection_curve_figure,
            selection_curve_input_from_result,
        )

        sel = selection_curve_input_from_result(result)
        if sel is not None:
            figs.append(selection_curve_figure(sel, size="column"))
    except ImportError:
        pass
    return figs


def sheet(k: int, n: int) -> str:
    from bench_analyse import invented_review

    from lopside.analysis import analyse
    from lopside.figures.export import figure_bytes
    from lopside.sheet import sheet_bytes

    result = analyse(invented_review(k))

    def figures_alone():
        for fig in _sheet_figures(result):
            figure_bytes(fig, "svg")

    sheet_bytes(result, date="2026-01-01")  # warm-up: fonts, imports
    figures_alone()
    ours, bare = [], []
    for _ in range(n):
        t0 = time.process_time()
        sheet_bytes(result, date="2026-01-01")
        t1 = time.process_time()
        figures_alone()
        t2 = time.process_time()
        ours.append((t1 - t0) * 1000)
        bare.append((t2 - t1) * 1000)
    return _row(f"sheet / its figures alone, k = {k}", ours, bare)


# --------------------------------------------------------------------------------------
# 3. Effect derivation and row checks


def rows(k: int, n: int) -> str:
    import numpy as np
    from bench_analyse import invented_review

    from lopside.intake.checks import check_rows
    from lopside.stats.effects import derive_all

    studies = invented_review(k).studies

    def numpy_script():
        a = np.array([r.int_events for r in studies], dtype=float)
        n1 = np.array([r.int_total for r in studies], dtype=float)
        c = np.array([r.ctl_events for r in studies], dtype=float)
        n0 = np.array([r.ctl_total for r in studies], dtype=float)
        b, d = n1 - a, n0 - c
        zero = (a == 0) | (b == 0) | (c == 0) | (d == 0)
        a, b, c, d = (x + 0.5 * zero for x in (a, b, c, d))
        return np.log(a * d / (b * c)), np.sqrt(1 / a + 1 / b + 1 / c + 1 / d)

    def ours_once():
        derive_all(studies, "OR")
        check_rows(studies, "OR")

    ours_once()
    numpy_script()
    ours, bare = [], []
    for _ in range(n):
        t0 = time.process_time()
        ours_once()
        t1 = time.process_time()
        numpy_script()
        t2 = time.process_time()
        ours.append((t1 - t0) * 1000)
        bare.append((t2 - t1) * 1000)
    return _row(f"derive + check rows, k = {k:,}", ours, bare)


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--app", default=str(HERE.parents[1] / "app"), help="app/ folder to measure")
    ap.add_argument("--only", default="funnel,sheet,rows")
    ap.add_argument("--edits", type=int, default=30, help="edits per funnel size")
    ap.add_argument("--repeats", type=int, default=9, help="sheets / row runs per size")
    args = ap.parse_args(argv)
    sys.path.insert(0, args.app)
    sys.path.insert(0, str(HERE))
    os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
    tmp = tempfile.mkdtemp(prefix="lopside-bench-")
    os.environ["LOPSIDE_SETTINGS_DIR"] = str(Path(tmp) / "settings")
    os.environ["LOPSIDE_AUTOSAVE_DIR"] = str(Path(tmp) / "autosave")
    import lopside

    only = set(args.only.split(","))
    print(f"code: {Path(lopside.__file__).parent}  (platform {os.environ['QT_QPA_PLATFORM']})")
    print(f"  {'':<34} {'ours ms':>9} {'bare ms':>9} {'ratio':>7}   (medians, alternating)")
    if "funnel" in only:
        for k in (30, 200):
            print(funnel(k, args.edits), flush=True)
    if "sheet" in only:
        for k in (30, 120):
            print(sheet(k, args.repeats), flush=True)
    if "rows" in only:
        print(rows(3000, args.repeats), flush=True)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
