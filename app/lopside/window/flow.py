"""A layout that wraps its widgets onto more lines when the panel is narrow.

Rows of buttons and option controls are what keeps a window from shrinking: in a plain
row layout their combined width becomes the window's minimum width, and on a 1366-pixel
screen at 125 % scaling (1093 logical pixels) that pushes the window off the screen. In a
flow layout the minimum width is that of the widest single item; the height follows the
width (``heightForWidth``), so the panel gains a line instead of losing its right half.
"""

from __future__ import annotations

from PySide6.QtCore import QMargins, QPoint, QRect, QSize, Qt
from PySide6.QtWidgets import QHBoxLayout, QLabel, QLayout, QWidget, QWidgetItem


class FlowLayout(QLayout):
    """Left-to-right items that wrap; spacers (``addStretch``) are ignored."""

    def __init__(self, parent=None, h_spacing: int = 6, v_spacing: int = 4) -> None:
        super().__init__(parent)
        self._items: list = []
        self._h = h_spacing
        self._v = v_spacing
        self.setContentsMargins(0, 0, 0, 0)

    # QLayout API ----------------------------------------------------------
    def addItem(self, item) -> None:  # noqa: N802 - Qt API
        self._items.append(item)

    def addStretch(self, _stretch: int = 0) -> None:  # noqa: N802 - mirrors QBoxLayout
        """Accepted for code written for a row layout; a flow has no stretch."""

    def insertWidget(self, index: int, widget: QWidget) -> None:  # noqa: N802 - QBoxLayout
        self.addChildWidget(widget)
        self._items.insert(index, QWidgetItem(widget))
        self.invalidate()

    def count(self) -> int:
        return len(self._items)

    def itemAt(self, index: int):  # noqa: N802 - Qt API
        return self._items[index] if 0 <= index < len(self._items) else None

    def takeAt(self, index: int):  # noqa: N802 - Qt API
        return self._items.pop(index) if 0 <= index < len(self._items) else None

    def expandingDirections(self):  # noqa: N802 - Qt API
        return Qt.Orientation(0)

    def hasHeightForWidth(self) -> bool:  # noqa: N802 - Qt API
        return True

    def heightForWidth(self, width: int) -> int:  # noqa: N802 - Qt API
        return self._do_layout(QRect(0, 0, width, 0), apply=False)

    def setGeometry(self, rect: QRect) -> None:  # noqa: N802 - Qt API
        super().setGeometry(rect)
        self._do_layout(rect, apply=True)

    def sizeHint(self) -> QSize:  # noqa: N802 - Qt API
        # one line of everything: what the row would like when there is room
        w = sum(i.sizeHint().width() for i in self._visible()) + self._h * max(
            0, len(self._visible()) - 1
        )
        h = max([i.sizeHint().height() for i in self._visible()] or [0])
        m = self.contentsMargins()
        return QSize(w + m.left() + m.right(), h + m.top() + m.bottom())

    def minimumSize(self) -> QSize:  # noqa: N802 - Qt API
        size = QSize()
        for item in self._visible():
            size = size.expandedTo(item.minimumSize())
        m = self.contentsMargins()
        return size + QSize(m.left() + m.right(), m.top() + m.bottom())

    # ---------------------------------------------------------------------
    def _visible(self) -> list:
        out = []
        for item in self._items:
            w = item.widget()
            if item.spacerItem() is not None:
                continue
            if w is not None and w.testAttribute(Qt.WA_WState_ExplicitShowHide) and w.isHidden():
                continue  # hidden on purpose (not merely not shown yet)
            out.append(item)
        return out

    def _do_layout(self, rect: QRect, apply: bool) -> int:
        m: QMargins = self.contentsMargins()
        eff = rect.adjusted(m.left(), m.top(), -m.right(), -m.bottom())
        x, y, line_h = eff.x(), eff.y(), 0
        for item in self._visible():
            hint = item.sizeHint()
            w = min(hint.width(), max(eff.width(), item.minimumSize().width()))
            nxt = x + w
            if nxt > eff.right() + 1 and line_h > 0:
                x = eff.x()
                y += line_h + self._v
                line_h = 0
                nxt = x + w
            if apply:
                item.setGeometry(QRect(QPoint(x, y), QSize(w, hint.height())))
            x = nxt + self._h
            line_h = max(line_h, hint.height())
        return y + line_h - rect.y() + m.bottom()


def labelled(text: str, widget: QWidget, name: str = "") -> QWidget:
    """A label and its control kept together on one line of a flow (the label is the buddy)."""
    box = QWidget()
    if name:
        box.setObjectName(name)
    lay = QHBoxLayout(box)
    lay.setContentsMargins(0, 0, 0, 0)
    lay.setSpacing(4)
    lab = QLabel(text)
    lab.setBuddy(widget)
    lay.addWidget(lab)
    lay.addWidget(widget, 1)
    box.label = lab  # for tests and tab order
    return box
