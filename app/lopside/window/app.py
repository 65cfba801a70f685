"""Start the window: Qt application set-up, fonts, then show first and load after.

Start-up order matters for a fast first frame (ENGINEERING-NOTES, start-up time): only Qt
and the light Lopside modules are imported before the window is shown; the file, the
recovery offer, the first analysis (scipy) and the first figure (matplotlib) follow from
the event loop.
"""

from __future__ import annotations

import os
import sys
from pathlib import Path

from . import messages as M


def _mpl_config_dir() -> None:
    # A frozen bundle would otherwise rebuild matplotlib's font cache at every launch.
    if "MPLCONFIGDIR" in os.environ or not getattr(sys, "frozen", False):
        return
    from PySide6.QtCore import QStandardPaths

    d = Path(QStandardPaths.writableLocation(QStandardPaths.CacheLocation)) / "matplotlib"
    d.mkdir(parents=True, exist_ok=True)
    os.environ["MPLCONFIGDIR"] = str(d)


def _set_icon(app) -> None:
    """Our own icon (tools/make_icon.py draws it) on every window and the task bar."""
    from PySide6.QtGui import QIcon

    from ..paths import resources_dir

    try:
        png = resources_dir() / "lopside.png"
    except (FileNotFoundError, OSError):
        return
    if png.is_file():
        app.setWindowIcon(QIcon(str(png)))


def make_application(argv: list[str] | None = None):
    """The QApplication with names, high-DPI policy and the bundled font (idempotent)."""
    from PySide6.QtCore import QCoreApplication, Qt
    from PySide6.QtGui import QFont, QGuiApplication
    from PySide6.QtWidgets import QApplication

    app = QApplication.instance()
    if app is None:
        # fractional scale factors (125 %, 150 % on hospital laptops) are passed through
        # instead of being rounded, so text and figures stay sharp and the right size
        QGuiApplication.setHighDpiScaleFactorRoundingPolicy(
            Qt.HighDpiScaleFactorRoundingPolicy.PassThrough
        )
        app = QApplication(argv if argv is not None else [sys.argv[0]])
    QCoreApplication.setOrganizationName(M.ORG_NAME)
    QCoreApplication.setOrganizationDomain(M.ORG_DOMAIN)
    QCoreApplication.setApplicationName(M.APP_NAME)
    from .. import __version__
    from .fonts import FAMILY, register_fonts

    QCoreApplication.setApplicationVersion(__version__)
    _set_icon(app)
    _mpl_config_dir()
    families = register_fonts()
    if FAMILY in families and not getattr(app, "_lopside_font_set", False):
        font = QFont(FAMILY)
        font.setPointSizeF(max(app.font().pointSizeF(), 9.0))
        app.setFont(font)
        app._lopside_font_set = True  # noqa: SLF001 - a marker on our own app object
    # never silent, no change without intent: see lopside.window.guards
    from .guards import install_exception_hook, install_wheel_guard

    install_wheel_guard(app)
    install_exception_hook()
    return app


def create_window(path: str | os.PathLike | None = None, **kwargs):
    """Build, show and start the main window; returns it (the event loop is the caller's)."""
    from PySide6.QtCore import QTimer
    from PySide6.QtWidgets import QApplication

    from .main_window import MainWindow

    window = MainWindow(**kwargs)
    window.show()
    # paint the first frame now; the file, the analysis (scipy) and the first figure
    # (matplotlib) come after, from the event loop
    QApplication.processEvents()
    QTimer.singleShot(0, lambda: window.finish_startup(str(path) if path else None))
    return window


def run_window(path: str | os.PathLike | None = None) -> int:
    """Open the Lopside window (on ``path`` if given) and run until it closes.

    Returns the application's exit status.
    """
    app = make_application()
    window = create_window(path)
    window.raise_()
    code = app.exec()
    return int(code)
