"""Figure panels: the pure builders of lopside.figures drawn on a FigureCanvasQTAgg.

Design invariants
-----------------
* matplotlib is imported the first time a panel is drawn, never at window start-up.
* A panel draws only when it is visible and only when what it shows changed: each panel
  keeps the key (identities of the result parts it reads, plus its options) of its last
  drawing and skips a redraw with the same key.
* The builders compute no statistic and neither does this module; hover and click map a
  marker back to its table row through the result's ``data.rows``.
"""

from __future__ import annotations

from dataclasses import replace

from PySide6.QtCore import Qt, Signal
from PySide6.QtWidgets import (
    QCheckBox,
    QComboBox,
    QLabel,
    QSizePolicy,
    QStackedLayout,
    QStyle,
    QVBoxLayout,
    QWidget,
)

from . import messages as M
from .flow import FlowLayout, labelled


class FigurePanel(QWidget):
    """A lazily created matplotlib canvas with a message area for what cannot be drawn."""

    drawn = Signal()

    def __init__(self, name: str, parent=None) -> None:
        super().__init__(parent)
        self.setObjectName(name)
        self.setAccessibleName(name)
        self._outer = QVBoxLayout(self)
        self._outer.setContentsMargins(2, 2, 2, 2)
        # option controls wrap in a narrow panel instead of widening the window
        self.controls = FlowLayout(h_spacing=8)
        self._outer.addLayout(self.controls)
        self._stack_host = QWidget()
        self._stack = QStackedLayout(self._stack_host)
        self.message = QLabel(M.NO_ANALYSIS)
        self.message.setWordWrap(True)
        self.message.setAlignment(Qt.AlignCenter)
        self._stack.addWidget(self.message)
        self._outer.addWidget(self._stack_host, 1)
        self.figure = None
        self.canvas = None
        self.result = None
        self._last_key = None
        self._pending = False
        self.artists: dict = {}
        self.draw_count = 0

    # ---------------------------------------------------------------- canvas

    def ensure_canvas(self) -> None:
        if self.canvas is not None:
            return
        from matplotlib.backends.backend_qtagg import FigureCanvasQTAgg
        from matplotlib.figure import Figure

        self.figure = Figure(figsize=(6, 5), dpi=100, layout="constrained")
        self.canvas = FigureCanvasQTAgg(self.figure)
        self.canvas.setSizePolicy(QSizePolicy.Expanding, QSizePolicy.Expanding)
        self.canvas.setFocusPolicy(Qt.ClickFocus)
        self.canvas.setAccessibleName(f"{self.objectName()} figure")
        self._stack.addWidget(self.canvas)
        self._connect_canvas()

    def _connect_canvas(self) -> None:
        """Subclasses hook mouse events here."""

    # ---------------------------------------------------------------- updates

    def show_result(self, result, *, force: bool = False) -> None:
        self.result = result
        if force:
            self._last_key = None
        if not self.isVisible():
            self._pending = True
            return
        self.redraw()

    def showEvent(self, event) -> None:  # noqa: N802 - Qt API
        super().showEvent(event)
        if self._pending:
            self.redraw()

    def key(self, result) -> tuple:
        """What the drawing depends on (compared with ``is``/``==``)."""
        return (result,)

    def redraw(self) -> None:
        self._pending = False
        result = self.result
        if result is None:
            self._show_message(M.NO_ANALYSIS)
            self._last_key = None
            return
        key = self.key(result)
        if self._last_key is not None and _same(key, self._last_key):
            return
        try:
            self.ensure_canvas()
        except ImportError as exc:
            self._show_message(M.NOT_AVAILABLE.format(part=getattr(exc, "name", "matplotlib")))
            return
        try:
            ok = self.build(result)
        except ModuleNotFoundError as exc:
            self._show_message(M.NOT_AVAILABLE.format(part=exc.name))
            return
        except ValueError as exc:  # FigureInputError: nothing to plot, with the reason
            text = str(exc)
            self._show_message(text[:1].upper() + text[1:])
            self._last_key = key
            return
        except Exception as exc:  # noqa: BLE001 - say so in place of stale content
            from .guards import report_exception

            log = report_exception(exc, f"the {self.objectName()} view")
            self._show_message(
                M.VIEW_FAILED.format(error=f"{type(exc).__name__}: {exc}", log=log or "-")
            )
            self._last_key = None
            return
        if ok is False:
            return
        self._last_key = key
        self._stack.setCurrentWidget(self.canvas)
        self._request_draw()
        self.draw_count += 1
        self.drawn.emit()

    def _request_draw(self) -> None:
        self.canvas.draw_idle()

    def build(self, result) -> bool | None:  # pragma: no cover - overridden
        raise NotImplementedError

    def _show_message(self, text: str) -> None:
        self.message.setText(text)
        self._stack.setCurrentWidget(self.message)

    def show_message(self, text: str) -> None:
        """Show ``text`` instead of the figure (until the next result)."""
        self.result = None
        self._last_key = None
        self._pending = False
        self._show_message(text)

    def reset(self) -> None:
        """The review changed completely: forget the figure and everything drawn on it.

        The figure is cleared, so a panel that keeps artists between draws must build
        them again on its next draw (``_last_key`` is None after this).
        """
        self.result = None
        self._last_key = None
        self._pending = False
        self.artists = {}
        if hasattr(self, "_points"):
            self._points = []
        if self.figure is not None:
            self.figure.clear()
        self._show_message(M.ANALYSING)

    def showing_figure(self) -> bool:
        return self.canvas is not None and self._stack.currentWidget() is self.canvas

    def draw_now(self) -> None:
        """Render synchronously (benchmarks, exports, screenshots)."""
        if self._pending:
            self.redraw()
        if self.canvas is not None:
            # the draw_idle queued by redraw() would draw the same figure a second time
            if hasattr(self.canvas, "_draw_pending"):
                self.canvas._draw_pending = False  # noqa: SLF001 - matplotlib's Qt canvas
            self.canvas.draw()


def _same(a: tuple, b: tuple) -> bool:
    if len(a) != len(b):
        return False
    return all(
        x is y or (isinstance(x, (str, int, float, bool, tuple)) and x == y) for x, y in zip(a, b)
    )


# --------------------------------------------------------------------------------------
# Forest and companions


#: logical pixels per inch at which the built figures are laid out for their panel
SCREEN_DPI = 96.0
#: a width change smaller than this (pixels) keeps the current layout (only rescaled)
RELAYOUT_STEP = 24


class BuiltFigurePanel(FigurePanel):
    """A panel for builders that make their own Figure (forest, cumulative, radial).

    The builder lays the figure out for the panel's width (label and plot columns sized
    from the text drawn); it grows in height with the number of studies and scrolls
    vertically inside the panel, so nothing is squeezed or cut off. A resize of more
    than ``RELAYOUT_STEP`` pixels lays it out again.
    """

    def _area(self):
        sa = getattr(self, "scroll", None)  # QWidget.scroll() until the area is made
        return sa if hasattr(sa, "viewport") else None

    def layout_px(self) -> int:
        """The panel's usable width in pixels, in steps of RELAYOUT_STEP.

        Measured on the scroll area less its frame and a vertical scroll bar, whether
        or not the bar shows, so that the bar appearing does not change the layout.
        """
        sa = self._area()
        bar = self.style().pixelMetric(QStyle.PM_ScrollBarExtent)
        if sa is None or not sa.isVisible():  # not laid out yet: the panel's own width
            avail = self.width() - 6 - bar - 8
        else:
            avail = sa.width() - 2 * sa.frameWidth() - bar - 8
        return int(max(avail, 360) // RELAYOUT_STEP * RELAYOUT_STEP)

    def layout_inches(self) -> tuple[float, float]:
        """Width and height (inches) the builder should lay the figure out for."""
        sa = self._area()
        h = sa.height() - 2 * sa.frameWidth() - 8 if sa is not None else self.height() - 60
        return self.layout_px() / SCREEN_DPI, max(h, 280) / SCREEN_DPI

    def ensure_canvas(self) -> None:
        if self.canvas is not None:
            return
        from PySide6.QtWidgets import QScrollArea

        self.scroll = QScrollArea()
        self.scroll.setWidgetResizable(False)
        self.scroll.setAlignment(Qt.AlignHCenter | Qt.AlignTop)
        self.scroll.setAccessibleName(f"{self.objectName()} figure")
        self._stack.addWidget(self.scroll)
        self.canvas = self.scroll  # what showing_figure() looks for

    def reset(self) -> None:
        super().reset()
        if self.canvas is not None:
            old = self.scroll.takeWidget()
            if old is not None:
                old.deleteLater()
            self.figure = None
            self.figure_canvas = None

    def set_figure(self, fig) -> None:
        from matplotlib.backends.backend_qtagg import FigureCanvasQTAgg

        old = self.scroll.takeWidget()
        if old is not None:
            old.deleteLater()
        self.figure = fig
        # the size the builder laid out for; the canvas's resize events must not change it
        self._fig_inches = tuple(float(v) for v in fig.get_size_inches())
        # matplotlib's Qt canvas multiplies the figure's original dpi by the screen's
        # pixel ratio (1.25 at 125 %); the original must be SCREEN_DPI, the dpi the
        # canvas is sized for, or the figure is drawn larger than its widget and cut
        fig.set_dpi(SCREEN_DPI)
        fig._original_dpi = SCREEN_DPI  # noqa: SLF001 - read by matplotlib's canvas
        canvas = FigureCanvasQTAgg(fig)
        self.scroll.setWidget(canvas)
        self.figure_canvas = canvas
        self._fit()

    def _fit(self) -> None:
        """Show the figure at SCREEN_DPI: it was laid out for the panel's width."""
        c = getattr(self, "figure_canvas", None)
        if c is None or self.figure is None:
            return
        w, h = getattr(self, "_fig_inches", None) or self.figure.get_size_inches()
        c.setFixedSize(round(w * SCREEN_DPI), round(h * SCREEN_DPI))
        self.figure.set_size_inches(w, h, forward=False)

    def resizeEvent(self, event) -> None:  # noqa: N802 - Qt API
        super().resizeEvent(event)
        if getattr(self, "figure_canvas", None) is not None:
            self._fit()
            self.figure_canvas.draw_idle()
            if self.result is not None and self.isVisible():
                self._relayout_timer().start()

    def _relayout_timer(self):
        t = getattr(self, "_relayout", None)
        if t is None:
            from PySide6.QtCore import QTimer

            t = self._relayout = QTimer(self)
            t.setSingleShot(True)
            t.setInterval(150)
            t.timeout.connect(self.redraw)  # the key holds the width: same width, no work
        return t

    def _request_draw(self) -> None:
        c = getattr(self, "figure_canvas", None)
        if c is not None:
            c.draw_idle()

    def draw_now(self) -> None:
        if self._pending:
            self.redraw()
        c = getattr(self, "figure_canvas", None)
        if c is not None:
            if hasattr(c, "_draw_pending"):
                c._draw_pending = False  # noqa: SLF001 - matplotlib's Qt canvas
            c.draw()


class ForestPanel(BuiltFigurePanel):
    def __init__(self, parent=None) -> None:
        super().__init__("Forest plot", parent)
        self.model_box = QComboBox()
        self.model_box.addItem("Fixed and random effects", "both")
        self.model_box.addItem("Random effects", "random")
        self.model_box.addItem("Fixed effect", "fixed")
        self.model_box.setAccessibleName("Pooled results shown on the forest plot")
        self.controls.addWidget(labelled("Summar&y rows:", self.model_box))
        self.controls.addStretch(1)
        self.model_box.currentIndexChanged.connect(lambda _i: self.redraw())

    def key(self, result) -> tuple:
        d = result.review.details
        return (
            result.data,
            result.fixed,
            result.random,
            d.favours,
            d.int_label,
            d.ctl_label,
            d.units,
            self.model_box.currentData(),
            self.layout_px(),
        )

    def build(self, result):
        from ..figures.adaptors import forest_input_from_result
        from ..figures.forest import forest_figure

        rows, pooled, opts = forest_input_from_result(result)
        which = self.model_box.currentData()
        opts = replace(
            opts,
            size="page",
            width=self.layout_inches()[0],
            show_fixed=which in ("both", "fixed"),
            show_random=which in ("both", "random"),
        )
        fig = forest_figure(rows, pooled, opts)
        self.set_figure(fig)
        self.artists = getattr(fig, "lopside_artists", {}) or {}
        return True


class CompanionPanel(BuiltFigurePanel):
    """Cumulative and radial (Galbraith) plots, one at a time."""

    KINDS = (("cumulative", "Cumulative meta-analysis"), ("radial", "Radial (Galbraith) plot"))

    def __init__(self, parent=None) -> None:
        super().__init__("Cumulative and radial plots", parent)
        self.kind_box = QComboBox()
        for key, text in self.KINDS:
            self.kind_box.addItem(text, key)
        self.kind_box.setAccessibleName("Companion plot")
        self.egger_box = QCheckBox("E&gger line")
        self.egger_box.setToolTip("On the radial plot, draw the Egger regression line")
        self.controls.addWidget(labelled("Plot &kind:", self.kind_box))
        self.controls.addWidget(self.egger_box)
        self.controls.addStretch(1)
        self.kind_box.currentIndexChanged.connect(lambda _i: self.redraw())
        self.egger_box.toggled.connect(lambda _c: self.redraw())

    def key(self, result) -> tuple:
        egger = result.tests.get("egger") if isinstance(result.tests, dict) else None
        return (
            result.data,
            result.cumulative,
            egger,
            result.fixed,
            self.kind_box.currentData(),
            self.egger_box.isChecked(),
            self.layout_px(),
            result.review.details.units,
        )

    def build(self, result):
        from ..figures import adaptors
        from ..figures.companions import cumulative_figure, radial_figure

        kind = self.kind_box.currentData()
        if kind == "cumulative":
            inp = adaptors.cumulative_input_from_result(result)
            if inp is None:
                raise ValueError(
                    getattr(result.cumulative, "reason", "")
                    or "The cumulative analysis could not be computed."
                )
            fig = cumulative_figure(inp, size="page", width=self.layout_inches()[0])
        else:
            w, h = self.layout_inches()
            fig = radial_figure(
                adaptors.radial_input_from_result(result),
                size="page",
                egger_line=self.egger_box.isChecked(),
                width=w,
                height=min(h, w * 0.85),
            )
        self.set_figure(fig)
        return True
