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

from PySide6.QtCore import QPoint, Qt, Signal
from PySide6.QtGui import QCursor
from PySide6.QtWidgets import (
    QCheckBox,
    QComboBox,
    QLabel,
    QSizePolicy,
    QStackedLayout,
    QStyle,
    QToolTip,
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
# Funnel


FUNNEL_OPTION_KEYS = (
    "axis",
    "contours",
    "colour_by",
    "egger_line",
    "show_filled",
    "labels",
    "adjusted_line",
    "limit_line",
)


class FunnelPanel(FigurePanel):
    """The contour-enhanced funnel plot with its options as controls.

    ``point_clicked(row)`` is emitted with the table row of a clicked study.
    """

    point_clicked = Signal(int)
    options_changed = Signal()
    model_changed = Signal(str)

    def __init__(self, parent=None) -> None:
        super().__init__("Funnel plot", parent)
        self.options = None  # a FunnelOptions, created with the first drawing
        self._opts_state = {
            "axis": "se",
            "model": "fixed",
            "contours": True,
            "colour_by": "none",
            "egger_line": False,
            "show_filled": True,
            "adjusted_line": False,
            "limit_line": False,
            "labels": "none",
        }
        self.selected_rows: tuple[int, ...] = ()
        self._points: list[tuple[float, float, int]] = []  # data x, data y, table row
        self._highlight = None
        row1 = self.controls
        self.axis_box = QComboBox()
        for key, text in (
            ("se", "Standard error"),
            ("precision", "Precision"),
            ("variance", "Variance"),
            ("size", "Participants"),
        ):
            self.axis_box.addItem(text, key)
        self.axis_box.setAccessibleName("Vertical axis of the funnel")
        self.axis_box.setToolTip("What the vertical axis shows")
        self.model_box = QComboBox()
        self.model_box.addItem("Fixed effect", "fixed")
        self.model_box.addItem("Random effects", "random")
        self.model_box.setAccessibleName("Model the funnel is centred on")
        self.model_box.setToolTip("Which pooled estimate the funnel is centred on")
        self.colour_box = QComboBox()
        for key, text in (
            ("none", "No colours"),
            ("subgroup", "Colour by subgroup"),
            ("risk_of_bias", "Colour by risk of bias"),
        ):
            self.colour_box.addItem(text, key)
        self.colour_box.setAccessibleName("Colour the studies by")
        self.labels_box = QComboBox()
        for key, text in (("none", "No names"), ("selected", "Name selected"), ("all", "Name all")):
            self.labels_box.addItem(text, key)
        self.labels_box.setAccessibleName("Study names on the plot")
        for lab, w in (("A&xis:", self.axis_box), ("Centre:", self.model_box)):
            row1.addWidget(labelled(lab, w))
        row1.addWidget(self.colour_box)
        row1.addWidget(self.labels_box)
        row2 = row1
        self.contours_box = QCheckBox("Significance &bands")
        self.egger_box = QCheckBox("E&gger line")
        self.filled_box = QCheckBox("Sho&w trim-and-fill studies")
        self.adjusted_box = QCheckBox("Ad&justed estimates")
        for w, tip in (
            (self.contours_box, "Shade where a study would be significant at p < 0.10/0.05/0.01"),
            (self.egger_box, "Draw the Egger regression line"),
            (self.filled_box, "Show the studies imputed by trim and fill (hollow)"),
            (self.adjusted_box, "Mark the trim-and-fill and limit meta-analysis estimates"),
        ):
            w.setToolTip(tip)
            row2.addWidget(w)
        self.hint = QLabel("Hover over a study to see it; click to select its row.")
        self.hint.setStyleSheet("color: #616E7C;")
        self._outer.addWidget(self.hint)
        self._sync_controls()
        for box in (self.axis_box, self.colour_box, self.labels_box):
            box.currentIndexChanged.connect(self._controls_changed)
        self.model_box.currentIndexChanged.connect(self._model_changed)
        for cb in (self.contours_box, self.egger_box, self.filled_box, self.adjusted_box):
            cb.toggled.connect(self._controls_changed)

    # ---------------------------------------------------------------- options

    def option_state(self) -> dict:
        return dict(self._opts_state)

    def set_option_state(self, state: dict) -> None:
        for k, v in state.items():
            if k in self._opts_state and type(v) is type(self._opts_state[k]):
                self._opts_state[k] = v
        self._sync_controls()

    def _sync_controls(self) -> None:
        s = self._opts_state
        widgets = (
            self.axis_box,
            self.model_box,
            self.colour_box,
            self.labels_box,
            self.contours_box,
            self.egger_box,
            self.filled_box,
            self.adjusted_box,
        )
        for w in widgets:
            w.blockSignals(True)
        for box, key in (
            (self.axis_box, "axis"),
            (self.model_box, "model"),
            (self.colour_box, "colour_by"),
            (self.labels_box, "labels"),
        ):
            i = box.findData(s[key])
            if i >= 0:
                box.setCurrentIndex(i)
        self.contours_box.setChecked(s["contours"])
        self.egger_box.setChecked(s["egger_line"])
        self.filled_box.setChecked(s["show_filled"])
        self.adjusted_box.setChecked(s["adjusted_line"])
        for w in widgets:
            w.blockSignals(False)

    def _controls_changed(self, *_args) -> None:
        s = self._opts_state
        s["axis"] = self.axis_box.currentData()
        s["colour_by"] = self.colour_box.currentData()
        s["labels"] = self.labels_box.currentData()
        s["contours"] = self.contours_box.isChecked()
        s["egger_line"] = self.egger_box.isChecked()
        s["show_filled"] = self.filled_box.isChecked()
        s["adjusted_line"] = s["limit_line"] = self.adjusted_box.isChecked()
        self.options_changed.emit()
        self.redraw()

    def _model_changed(self, *_args) -> None:
        self._opts_state["model"] = self.model_box.currentData()
        self.model_changed.emit(self._opts_state["model"])  # the window updates the settings
        self.options_changed.emit()

    def set_model(self, model: str) -> None:
        if model in ("fixed", "random") and model != self._opts_state["model"]:
            self._opts_state["model"] = model
            self._sync_controls()

    def funnel_options(self, result):
        from ..figures.funnel import FunnelOptions

        s = self._opts_state
        labels: object = ()
        if s["labels"] == "all":
            labels = "all"
        elif s["labels"] == "selected" and result is not None:
            rows = set(self.selected_rows)
            labels = tuple(lab for lab, r in zip(result.data.labels, result.data.rows) if r in rows)
        return FunnelOptions(
            axis=s["axis"],
            model=s["model"],
            contours=s["contours"],
            colour_by=s["colour_by"],
            egger_line=s["egger_line"],
            show_filled=s["show_filled"],
            adjusted_line=s["adjusted_line"],
            limit_line=s["limit_line"],
            labels=labels,
        )

    # ---------------------------------------------------------------- drawing

    def key(self, result) -> tuple:
        labels = self.selected_rows if self._opts_state["labels"] == "selected" else ()
        # the funnel reads the data, pooled results, tests and trim and fill only
        return (
            result.data,
            result.fixed,
            result.random,
            result.trim_fill,
            tuple(sorted(self._opts_state.items())),
            labels,
        )

    def build(self, result):
        from ..figures.adaptors import funnel_input_from_result as adaptor
        from ..figures.funnel import draw_funnel

        opts = self.funnel_options(result)
        inp = adaptor(result, opts)
        c = self.canvas
        # the builder lays out the key for the figure's width: make it the size the canvas
        # has (or, when just created, the area it will fill), not the size it was made with
        host = c if c.isVisible() else self._stack_host
        if host.width() > 50 and host.height() > 50:
            px = (c.devicePixelRatioF() or 1.0) / self.figure.dpi
            self.figure.set_size_inches(host.width() * px, host.height() * px, forward=False)
        self.figure.clear()
        # the builder puts the key below the axes as a figure legend when the layout engine
        # makes room for it: build under constrained layout, then fix the layout if known
        self.figure.set_layout_engine("constrained")
        self._highlight = None
        ax = self.figure.add_subplot()
        self.artists = draw_funnel(ax, inp, opts, size="page")
        self.axes = ax
        self._collect_points(result, inp)
        from ..figures.flag_marks import flagged_points, mark_flagged  # rows to check

        mark_flagged(ax, flagged_points(result, opts.axis), size="page")
        self._draw_highlight()
        self._use_fixed_layout()
        return True

    # ---------------------------------------------------------------- fixed layout
    #
    # Constrained layout measures every tick label on every draw (about half of a funnel
    # draw). The layout depends on the canvas size, the options and the texts around the
    # axes, not on where the points lie: it is computed once for those and reused; a
    # later draw whose tick labels no longer fit brings constrained layout back.

    def _layout_key(self) -> tuple:
        fig = self.figure
        texts = []
        for leg in fig.legends:
            texts += [t.get_text() for t in leg.get_texts()]
        for ax in fig.axes:
            texts += [ax.get_xlabel(), ax.get_ylabel(), ax.get_title()]
            leg = ax.get_legend()
            if leg is not None:
                texts += [t.get_text() for t in leg.get_texts()]
        texts += [t.get_text() for t in fig.texts]
        return (
            tuple(self.canvas.get_width_height()),
            float(fig.dpi),
            tuple(sorted(self._opts_state.items())),
            tuple(texts),
            len(fig.axes),
        )

    def _use_fixed_layout(self) -> None:
        key = self._layout_key()
        saved = getattr(self, "_fixed_layout", None)
        if saved is not None and saved[0] == key:
            self.figure.set_layout_engine("none")
            for ax, pos in zip(self.figure.axes, saved[1]):
                ax.set_position(pos)
            self._capture_key = None
            self.layout_reused = True
        else:
            self._capture_key = key  # the next (constrained) draw gives the layout
            self.layout_reused = False

    def _after_draw(self, event) -> None:
        fig = self.figure
        if fig is None or not fig.axes:
            return
        engine = fig.get_layout_engine()
        if type(engine).__name__ == "ConstrainedLayoutEngine":
            if getattr(self, "_capture_key", None) is not None:
                # the key at draw time: the canvas may have been resized since the build
                self._fixed_layout = (
                    self._layout_key(),
                    [ax.get_position().frozen() for ax in fig.axes],
                )
                self._capture_key = None
            return
        if getattr(self, "layout_reused", False) and not self._fits(event.renderer):
            # longer tick labels than when the layout was made: lay out afresh
            self._fixed_layout = None
            self.layout_reused = False
            fig.set_layout_engine("constrained")
            self._capture_key = self._layout_key()
            self.canvas.draw_idle()

    def _fits(self, renderer) -> bool:
        """True when the tick labels of the axes lie inside the figure."""
        w, h = self.canvas.get_width_height(physical=True)
        for ax in self.figure.axes:
            for axis in (ax.xaxis, ax.yaxis):
                for tick in axis.get_ticklabels():
                    if not tick.get_visible() or not tick.get_text():
                        continue
                    bb = tick.get_window_extent(renderer)
                    if bb.x0 < -0.5 or bb.y0 < -0.5 or bb.x1 > w + 0.5 or bb.y1 > h + 0.5:
                        return False
        return True

    def _on_resize(self, event) -> None:
        # a new size needs a new layout: constrained for the next draw, captured after it
        if self.figure is not None and getattr(self, "layout_reused", False):
            self.figure.set_layout_engine("constrained")
            self.layout_reused = False
            self._capture_key = self._layout_key()

    def _collect_points(self, result, inp) -> None:
        """Marker positions (data coordinates) and the table row of each."""
        import numpy as np

        self._points = []
        ys = np.asarray(inp.y, dtype=float)
        rows = result.data.rows
        for coll in self.artists.get("studies") or ():
            try:
                offs = np.asarray(coll.get_offsets(), dtype=float)
            except AttributeError:
                continue
            for x, v in offs:
                # a marker's x is the study's effect: find the study it belongs to
                matches = np.flatnonzero(np.isclose(ys, x, rtol=0, atol=1e-12))
                if matches.size:
                    i = int(matches[0])
                    if matches.size > 1:  # equal effects: tell them apart by the SE axis
                        i = int(min(matches, key=lambda j: abs(self._vpos(inp, j) - v)))
                    self._points.append((float(x), float(v), rows[i] if i < len(rows) else i))

    def _vpos(self, inp, j: int) -> float:
        import numpy as np

        se = float(np.asarray(inp.se, dtype=float)[j])
        axis = self._opts_state["axis"]
        if axis == "precision":
            return 1.0 / se
        if axis == "variance":
            return se * se
        if axis == "size":
            n = np.asarray(inp.n, dtype=float)
            return float(n[j]) if n.size > j else se
        return se

    def points(self) -> list[tuple[float, float, int]]:
        return list(self._points)

    def row_at(self, px: float, py: float, radius: float = 8.0) -> int | None:
        """The table row of the marker nearest to display point (px, py), within radius."""
        if not self._points or getattr(self, "axes", None) is None:
            return None
        import numpy as np

        pts = np.array([(x, v) for x, v, _ in self._points])
        disp = self.axes.transData.transform(pts)
        d = np.hypot(disp[:, 0] - px, disp[:, 1] - py)
        i = int(np.argmin(d))
        return self._points[i][2] if d[i] <= radius else None

    def display_point_of_row(self, row: int) -> tuple[float, float] | None:
        for x, v, r in self._points:
            if r == row:
                px, py = self.axes.transData.transform((x, v))
                return float(px), float(py)
        return None

    def _connect_canvas(self) -> None:
        self.canvas.mpl_connect("motion_notify_event", self._on_move)
        self.canvas.mpl_connect("button_press_event", self._on_click)
        self.canvas.mpl_connect("draw_event", self._after_draw)
        self.canvas.mpl_connect("resize_event", self._on_resize)

    def _on_move(self, event) -> None:
        if event.inaxes is None or self.result is None:
            QToolTip.hideText()
            return
        row = self.row_at(event.x, event.y)
        if row is None:
            QToolTip.hideText()
            return
        QToolTip.showText(QCursor.pos() + QPoint(12, 12), self.describe_row(row), self.canvas)

    def describe_row(self, row: int) -> str:
        """Label and values of the study in ``row`` (words from the summary formatter)."""
        res = self.result
        study = res.review.studies[row]
        d = res.derived[row]
        try:
            from ..words.numbers import fmt_effect, fmt_se

            eff = fmt_effect(d.y, res.measure)
            se = fmt_se(d.se)
        except (ImportError, TypeError):
            eff, se = f"{d.y:.3g}", f"{d.se:.3g}"
        label = study.study or f"Row {row + 1}"
        if study.year:
            label += f" ({study.year})"
        return f"{label}\n{res.measure} {eff}, SE {se} (analysis scale)\nRow {row + 1}"

    def _on_click(self, event) -> None:
        if event.inaxes is None:
            return
        row = self.row_at(event.x, event.y)
        if row is not None:
            self.point_clicked.emit(row)

    def set_selected_rows(self, rows) -> None:
        rows = tuple(sorted(set(rows)))
        if rows == self.selected_rows:
            return
        self.selected_rows = rows
        if self._opts_state["labels"] == "selected":
            self.redraw()
            return
        if self.canvas is not None and self.showing_figure():
            self._draw_highlight()
            self.canvas.draw_idle()

    def _draw_highlight(self) -> None:
        if getattr(self, "axes", None) is None:
            return
        if self._highlight is not None:
            try:
                self._highlight.remove()
            except (ValueError, AttributeError):
                pass
            self._highlight = None
        pts = [(x, v) for x, v, r in self._points if r in set(self.selected_rows)]
        if not pts:
            return
        from ..figures import style

        xs, vs = zip(*pts)
        self._highlight = self.axes.scatter(
            xs, vs, s=260, facecolors="none", edgecolors=style.INK, linewidths=1.6, zorder=6
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
