"""Keep the window on the screen it opens on.

At 125 % display scaling a 1366x768 screen has 1093x614 logical pixels, and Qt restores a
saved geometry as it was (ENGINEERING-NOTES): a window saved on a larger monitor or at
another scale would open with its tab row, right-hand panel and status bar out of reach.
So the saved geometry is used only on the same screen at the same scale, and whatever is
restored is then clamped to the screen's available area (without the task bar).
"""

from __future__ import annotations

from PySide6.QtCore import QRect, QSize

#: the size the window opens at when nothing fits better (a 1366x768 laptop at 100 %)
DEFAULT_SIZE = QSize(1366, 740)
#: room kept for the window frame and title bar, which are not part of geometry()
FRAME_ALLOWANCE = QSize(16, 40)


def screen_signature(screen) -> str:
    """Which screen and scale a geometry was saved on ("name 1366x768 @1.25")."""
    if screen is None:
        return ""
    g = screen.geometry()
    return f"{screen.name()} {g.width()}x{g.height()} @{screen.devicePixelRatio():g}"


def fitted(rect: QRect, avail: QRect, frame: QSize = FRAME_ALLOWANCE) -> QRect:
    """``rect`` (client area) shrunk and moved so that, with its frame, it lies in ``avail``."""
    w = min(rect.width(), max(avail.width() - frame.width(), 1))
    h = min(rect.height(), max(avail.height() - frame.height(), 1))
    left_frame = frame.width() // 2
    top_frame = frame.height() - frame.width() // 2
    x = min(max(rect.x(), avail.left() + left_frame), avail.right() + 1 - w - left_frame)
    y = min(max(rect.y(), avail.top() + top_frame), avail.bottom() + 1 - h - frame.width() // 2)
    return QRect(x, y, w, h)


def default_rect(avail: QRect, frame: QSize = FRAME_ALLOWANCE) -> QRect:
    """The default size, made to fit ``avail`` and centred in it."""
    w = min(DEFAULT_SIZE.width(), avail.width() - frame.width())
    h = min(DEFAULT_SIZE.height(), avail.height() - frame.height())
    x = avail.left() + (avail.width() - w) // 2
    y = (
        avail.top()
        + (avail.height() - h - frame.height()) // 2
        + frame.height()
        - frame.width() // 2
    )
    return QRect(x, max(y, avail.top()), w, h)


def _frame_of(window) -> QSize:
    if window.isVisible():
        fg, g = window.frameGeometry(), window.geometry()
        extra = QSize(fg.width() - g.width(), fg.height() - g.height())
        if extra.width() > 0 or extra.height() > 0:
            return extra
    return FRAME_ALLOWANCE


def place_window(window, saved_geometry, saved_signature: str) -> str:
    """Restore or choose the window's geometry; returns "restored", "clamped" or "default".

    The saved geometry is used only when it was saved on the same screen at the same
    scale; in every case the result lies within the screen's available area.
    """
    from PySide6.QtGui import QGuiApplication

    screen = window.screen() or QGuiApplication.primaryScreen()
    if screen is None:
        window.resize(DEFAULT_SIZE)
        return "default"
    avail = screen.availableGeometry()
    frame = _frame_of(window)
    how = "default"
    if saved_geometry is not None and saved_signature == screen_signature(screen):
        if window.restoreGeometry(saved_geometry):
            how = "restored"
    if how == "default":
        window.setGeometry(default_rect(avail, frame))
        return how
    if window.isMaximized() or window.isFullScreen():
        return how
    g = window.geometry()
    fit = fitted(g, avail, frame)
    if fit != g:
        window.setGeometry(fit)
        how = "clamped"
    return how


def keep_on_screen(window) -> bool:
    """After the window is shown (real frame known): pull it back inside if it sticks out."""
    if window.isMaximized() or window.isFullScreen():
        return False
    screen = window.screen()
    if screen is None:
        return False
    avail = screen.availableGeometry()
    fg = window.frameGeometry()
    if avail.contains(fg):
        return False
    window.setGeometry(fitted(window.geometry(), avail, _frame_of(window)))
    return True
