"""Screenshots of the window on a 1366x768 screen at 100 % and 125 % scaling.

For each sample review (all invented) and each tab of the right-hand views, the window is
shown as a first start would show it (fresh settings: default geometry fitted to the
screen) and the whole screen is saved to docs/screens/<scale>/ as a reduced-colour PNG;
one more picture per review shows the Review details tab. The script also checks what it
can measure and prints a line for each failure: the window's frame lies on the screen, the
study table needs no sideways scrolling at 100 %.

The screen is Qt's offscreen platform configured as one 1366x768 screen; 125 % is
``QT_SCALE_FACTOR=1.25`` (1093x614 logical pixels). The title bar and border that a window
manager would add are drawn in plain grey where the window's frame would be.

Run:  PYTHONPATH=app python tools/make_screens.py [--out docs/screens] [--scales 100 125]
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
SCREEN = (1366, 768)
#: colours kept in each PNG; the octree method keeps small areas of colour (markers,
#: diamonds) that a median cut merges into grey
COLOURS = 64


def _child_env(scale: int, tmp: Path) -> dict[str, str]:
    cfg = tmp / "screen.json"
    cfg.write_text(
        json.dumps(
            {
                "synchronousWindowSystemEvents": True,
                "windowFrameMargins": False,
                "screens": [
                    {
                        "name": "laptop",
                        "x": 0,
                        "y": 0,
                        "width": SCREEN[0],
                        "height": SCREEN[1],
                        "logicalDpi": 96,
                        "logicalBaseDpi": 96,
                        "dpr": 1,
                    }
                ],
            }
        ),
        encoding="utf-8",
    )
    env = dict(os.environ)
    env["QT_QPA_PLATFORM"] = f"offscreen:configfile={cfg}"
    env["QT_SCALE_FACTOR"] = f"{scale / 100:g}"
    env["LOPSIDE_SETTINGS_DIR"] = str(tmp / f"settings{scale}")
    env["LOPSIDE_AUTOSAVE_DIR"] = str(tmp / f"autosave{scale}")
    env["PYTHONPATH"] = os.pathsep.join(
        [str(ROOT / "app"), *[p for p in env.get("PYTHONPATH", "").split(os.pathsep) if p]]
    )
    env.setdefault("OPENBLAS_NUM_THREADS", "1")
    return env


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--out", default=str(ROOT / "docs" / "screens"))
    ap.add_argument("--scales", nargs="+", type=int, default=[100, 125])
    ap.add_argument("--child", type=int, default=0, help=argparse.SUPPRESS)
    args = ap.parse_args(argv)
    if args.child:
        return shoot(args.child, Path(args.out))
    failures = 0
    with tempfile.TemporaryDirectory(prefix="lopside-screens-") as t:
        for scale in args.scales:
            cmd = [sys.executable, __file__, "--child", str(scale), "--out", args.out]
            failures += subprocess.call(cmd, env=_child_env(scale, Path(t)))
    return 1 if failures else 0


# ---------------------------------------------------------------------------- child


def _settle(app, ms: int = 350) -> None:
    end = time.monotonic() + ms / 1000
    while time.monotonic() < end:
        app.processEvents()
        time.sleep(0.02)


def _screen_image(window, app):
    """The whole screen as a user would see it: desktop, frame, title bar, window."""
    from PySide6.QtCore import QRect, Qt
    from PySide6.QtGui import QColor, QFont, QImage, QPainter

    screen = window.screen()
    dpr = screen.devicePixelRatio()
    img = QImage(SCREEN[0], SCREEN[1], QImage.Format_RGB32)
    img.fill(QColor("#3E4C59"))
    g = window.geometry()  # logical pixels, client area
    p = QPainter(img)
    p.scale(dpr, dpr)
    # a plain frame where a window manager would draw one
    frame = QRect(g.x() - 8, g.y() - 32, g.width() + 16, g.height() + 40)
    p.fillRect(frame, QColor("#CBD2D9"))
    p.setPen(QColor("#1F2933"))
    f = QFont(app.font())
    f.setBold(True)
    p.setFont(f)
    p.drawText(
        QRect(frame.x() + 10, frame.y(), frame.width() - 20, 30),
        Qt.AlignVCenter,
        window.windowTitle().replace("[*]", ""),
    )
    pix = window.grab()
    pix.setDevicePixelRatio(dpr)
    p.drawPixmap(g.topLeft(), pix)
    p.end()
    return img, frame, screen.availableGeometry()


def _save_png(img, path: Path) -> None:
    from PySide6.QtCore import QBuffer, QIODevice

    buf = QBuffer()
    buf.open(QIODevice.WriteOnly)
    img.save(buf, "PNG")
    data = bytes(buf.data())
    try:
        import io

        from PIL import Image

        im = Image.open(io.BytesIO(data)).convert("RGB")
        im = im.quantize(colors=COLOURS, method=Image.Quantize.FASTOCTREE, dither=Image.Dither.NONE)
        im.save(path, optimize=True)
    except ImportError:  # pragma: no cover - Pillow comes with matplotlib
        path.write_bytes(data)


def shoot(scale: int, out: Path) -> int:
    from lopside.paths import sample_reviews
    from lopside.window.app import make_application
    from lopside.window.main_window import MainWindow

    app = make_application()
    folder = out / str(scale)
    folder.mkdir(parents=True, exist_ok=True)
    for old in folder.glob("*.png"):
        old.unlink()
    problems: list[str] = []
    samples = [p for p in sample_reviews() if p.suffix == ".lopside"]
    for sample in samples:
        window = MainWindow(
            ask_recover=lambda items: None,
            ask_save_changes=lambda name: "discard",
            ask_open_sheet=lambda path: False,
            autosave=False,
        )
        window.show()
        _settle(app)
        if not window.open_path(sample, remember=False, ask=False):
            problems.append(f"{sample.name}: did not open ({window.last_message})")
            continue
        window.update_views()
        _settle(app)
        stem = sample.stem
        shots = [(0, i) for i in range(window.views.count())] + [(1, 0)]
        for left, view in shots:
            window.left.setCurrentIndex(left)
            window.views.setCurrentIndex(view)
            _settle(app, 200)
            window.refresh_all_views()
            panel = window.views.currentWidget()
            if hasattr(panel, "draw_now"):
                panel.draw_now()
            _settle(app)
            img, frame, avail = _screen_image(window, app)
            tab = window.views.tabText(view).lower().replace("/", "-")
            name = f"{stem}-{'details' if left else f'{view + 1}-{tab}'}.png"
            _save_png(img, folder / name)
            if not avail.contains(frame):
                problems.append(f"{scale}% {name}: the window is not wholly on the screen")
            if left == 0 and scale == 100 and view == 0:
                bar = window.studies.table.horizontalScrollBar()
                if bar.maximum() > 0:
                    mode = window.studies.model.mode
                    problems.append(f"{scale}% {stem}: the table scrolls sideways ({mode} mode)")
        window._closing_ok = True  # noqa: SLF001 - nothing to save here
        window.close()
        _settle(app, 50)
    n = len(list(folder.glob("*.png")))
    size = sum(p.stat().st_size for p in folder.glob("*.png"))
    print(f"{scale}%: {n} screenshots in {folder} ({size / 1024:.0f} KB)")
    for p in problems:
        print(f"  PROBLEM {p}")
    return 1 if problems else 0


if __name__ == "__main__":
    raise SystemExit(main())
