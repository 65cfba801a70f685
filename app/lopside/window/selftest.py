"""``lopside --self-test``: build the window offscreen, analyse a sample, draw, write a sheet.

Used on a built bundle to prove that Qt, matplotlib, scipy and reportlab all load and work
together. Prints each step; exits 0 on success, 1 with a message on the first failure.
User settings and autosave go to a temporary folder, so the user's own are untouched; the
folder is removed at the end, whether the test passed or failed.
"""

from __future__ import annotations

import os
import shutil
import sys
import tempfile
import time
import traceback
from pathlib import Path

#: Qt warnings that the offscreen platform prints for things it simply does not do (no
#: window manager to pass size hints to). They are not faults, but IT reading the
#: self-test's output may take them for one, so the self-test drops exactly these.
OFFSCREEN_NOISE = ("This plugin does not support propagateSizeHints()",)


def _step(name: str, t0: float) -> None:
    print(f"  ok  {name} ({(time.perf_counter() - t0) * 1000:.0f} ms)", flush=True)


def _quiet_offscreen_noise() -> None:
    """Drop :data:`OFFSCREEN_NOISE` on the offscreen platform; pass on everything else."""
    from PySide6.QtCore import qInstallMessageHandler

    previous = None

    def handler(mode, context, message):
        if message in OFFSCREEN_NOISE and os.environ.get("QT_QPA_PLATFORM") == "offscreen":
            return
        if previous is not None:
            previous(mode, context, message)
        else:
            print(message, file=sys.stderr, flush=True)

    previous = qInstallMessageHandler(handler)


def _remove_work_folder(tmp: Path) -> None:
    shutil.rmtree(tmp, ignore_errors=True)
    if tmp.exists():
        print(f"  note: could not remove the work folder {tmp}", file=sys.stderr)


def run_self_test() -> int:
    """Run the self-test; returns the exit status. The work folder is always removed."""
    os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
    tmp = Path(tempfile.mkdtemp(prefix="lopside-selftest-"))
    os.environ["LOPSIDE_SETTINGS_DIR"] = str(tmp / "settings")
    os.environ["LOPSIDE_AUTOSAVE_DIR"] = str(tmp / "autosave")
    print(f"Lopside self-test (work folder {tmp}, removed at the end)", flush=True)
    holder: dict = {}
    try:
        return _run_steps(tmp, holder)
    finally:
        _close(holder.get("window"), holder.get("app"))
        _remove_work_folder(tmp)


def _close(window, app) -> None:
    """Close the window (releasing its autosave lock and settings) before the folder goes."""
    if window is None:
        return
    try:
        window._closing_ok = True  # noqa: SLF001 - nothing to save in a self-test
        window.close()
        window.deleteLater()
        if app is not None:
            from PySide6.QtCore import QCoreApplication, QEvent

            app.processEvents()
            QCoreApplication.sendPostedEvents(None, QEvent.Type.DeferredDelete)
    except Exception:  # noqa: BLE001 - clean-up must not hide the test's own result
        pass


def _run_steps(tmp: Path, holder: dict) -> int:
    step = "start"
    try:
        step = "create the Qt application"
        t = time.perf_counter()
        _quiet_offscreen_noise()
        from .app import make_application

        app = make_application()
        holder["app"] = app
        _step(step, t)

        step = "build the window"
        t = time.perf_counter()
        from .main_window import MainWindow

        window = MainWindow(
            ask_recover=lambda items: None,
            ask_save_changes=lambda name: "discard",
            ask_open_sheet=lambda path: False,
        )
        holder["window"] = window
        window.resize(1366, 740)
        window.show()
        app.processEvents()
        _step(step, t)

        step = "find a sample review"
        from ..paths import sample_reviews

        samples = [
            p for p in sample_reviews() if p.suffix.lower() == ".lopside"
        ] or sample_reviews()
        if not samples:
            raise RuntimeError("no sample reviews are installed")
        sample = samples[0]
        print(f"      sample: {sample.name}")

        step = f"open {sample.name}"
        t = time.perf_counter()
        if not window.open_path(sample, remember=False, ask=False):
            raise RuntimeError(window.last_message)
        _step(step, t)

        step = "run the analysis"
        t = time.perf_counter()
        window.update_views()
        if window.result is None:
            raise RuntimeError(window.analysis_error or "no result")
        r = window.result
        print(f"      k = {r.k} studies, measure {r.measure}")
        _step(step, t)

        step = "render the funnel plot"
        t = time.perf_counter()
        window.views.setCurrentWidget(window.funnel)
        window.refresh_all_views()
        window.funnel.draw_now()
        if not window.funnel.showing_figure():
            raise RuntimeError(window.funnel.message.text())
        n_pts = len(window.funnel.points())
        if n_pts != r.k:
            raise RuntimeError(f"the funnel shows {n_pts} studies, the analysis has {r.k}")
        img = window.funnel.canvas.grab()
        if img.isNull():
            raise RuntimeError("the funnel canvas could not be rendered")
        print(f"      {n_pts} study markers drawn")
        _step(step, t)

        step = "write the appraisal sheet"
        t = time.perf_counter()
        try:
            import lopside.sheet  # noqa: F401
        except ImportError:
            print("  --  appraisal sheet: the sheet part is not in this build; skipped")
        else:
            out = tmp / "self-test-sheet.pdf"
            worker = window.export_sheet(str(out))
            if worker is None:
                raise RuntimeError(window.last_message)
            worker.wait(60000)
            app.processEvents()
            if not out.is_file() or not out.read_bytes().startswith(b"%PDF"):
                raise RuntimeError(window.last_message or "no PDF was written")
            print(f"      {out} ({out.stat().st_size // 1024} KB)")
            _step(step, t)

            # the PDF reader's two libraries (pdfplumber/pdfminer for the text layer,
            # pypdfium2's native library for previews) on the sheet just written
            step = "read and render a PDF"
            t = time.perf_counter()
            from ..intake.pdf import read_pdf, render_page

            doc = read_pdf(out, pages=[1])
            words = sum(len(line.text.split()) for line in doc.pages[0].lines)
            if words < 20:
                raise RuntimeError(f"only {words} words read from the sheet's first page")
            image = render_page(out, 1, scale=0.5)
            if image.width < 100 or image.getextrema() in ((255, 255), ((255, 255),) * 3):
                raise RuntimeError("the sheet's first page rendered blank")
            print(f"      {words} words read; page 1 rendered at {image.width}x{image.height}")
            _step(step, t)

        step = "close the window"
        window._closing_ok = True  # noqa: SLF001 - nothing to save in a self-test
        window.close()
        app.processEvents()
    except Exception as exc:  # noqa: BLE001 - every failure becomes a message and status 1
        print(f"  FAILED at '{step}': {type(exc).__name__}: {exc}", file=sys.stderr)
        traceback.print_exc(file=sys.stderr)
        return 1
    print("Self-test passed.")
    return 0
