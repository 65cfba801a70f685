"""A visible focus frame that follows the keyboard focus through the whole window.

The platform's own focus marker is a thin dotted line or a faint glow, hard to find on a
busy panel (the Causes tab). One ``QFocusFrame`` moves to whichever control has the
focus and is drawn by a single style-sheet rule, so every focusable control gets the same
clear frame without restyling the controls themselves.
"""

from __future__ import annotations

from PySide6.QtCore import Qt
from PySide6.QtWidgets import QApplication, QFocusFrame, QWidget

#: focus colour: a dark blue that keeps 4.5:1 contrast on the light window grey
FOCUS_COLOUR = "#1F5FA8"
FOCUS_WIDTH_PX = 2
FOCUS_RULE = f"QFocusFrame {{ border: {FOCUS_WIDTH_PX}px solid {FOCUS_COLOUR}; }}"


def wants_frame(w: QWidget | None) -> bool:
    """Does this widget take focus from the keyboard (Tab), so it needs the frame?"""
    return (
        w is not None
        and bool(w.focusPolicy() & Qt.TabFocus)
        and not isinstance(w, QFocusFrame)
        and w.window() is not None
    )


class FocusTracker:
    """Moves one QFocusFrame to the focused control of ``window``."""

    def __init__(self, window: QWidget) -> None:
        self.window = window
        self.frame = QFocusFrame(window)
        self.frame.setObjectName("lopside focus frame")
        self.frame.setStyleSheet(FOCUS_RULE)
        self.frame.setAttribute(Qt.WA_TransparentForMouseEvents)
        app = QApplication.instance()
        app.focusChanged.connect(self._moved)

    def _moved(self, _old, new) -> None:
        try:
            if wants_frame(new) and new.window() is self.window:
                self.frame.setWidget(new)
                self.frame.show()
            else:
                self.frame.setWidget(None)
        except RuntimeError:  # the window or the control is being deleted
            pass

    def follow(self, w: QWidget) -> None:
        """Put the frame on ``w`` now (tests, and when focus moves without a signal)."""
        self._moved(None, w)
