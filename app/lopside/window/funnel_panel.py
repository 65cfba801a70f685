"""The funnel panel: the contour-enhanced funnel with its options, drawn live.

Design invariants
-----------------
* An edit moves the drawing in place (:func:`lopside.figures.funnel.update_funnel`):
  the axes and artists are kept, their offsets, sizes, polygons, line data and words
  change. A new drawing is made only when the structure changes (options, groups, overlays
  present, the key's shape) or the canvas changes size.
* The layout (the axes' place in the figure) is computed once per canvas size and options
  by constrained layout, before the drawing that is shown, and then fixed: constrained
  layout measures every tick label on every draw (about half of a draw). A draw whose
  tick labels no longer fit lays the figure out afresh.
* Hover and click map a marker back to its table row through the result's ``data.rows``.
"""

from __future__ import annotations

from PySide6.QtCore import QPoint, QTimer, Signal
from PySide6.QtGui import QCursor
from PySide6.QtWidgets import QCheckBox, QComboBox, QLabel, QToolTip

from .flow import labelled
from .plots import FigurePanel

#: a resized canvas gets its new drawing once it has kept its size this long
RESIZE_SETTLE_MS = 120

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
        self._fixed_layout = None  # (layout key, axes position) from constrained layout
        self._layout_in_use = None  # the layout key of the drawing on screen
        self._flag_artists: list = []
        self.layout_reused = False
        self._draw_queued = False
        self._splitting = False
        self._relaid_for = None  # the layout key last laid out afresh for a misfit
        self._relayout_timer = None
        self._draw_timer = None
        self._background = None  # (key, the canvas without the axes) of the last draw
        self.background_reused = False
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

        opts = self.funnel_options(result)
        inp = adaptor(result, opts)
        self._size_figure()
        key = self._layout_key()
        if not self._update_in_place(key, inp, opts):
            self._build_afresh(key, inp, opts)
        self._collect_points(result, inp)
        self._mark_flagged(result, opts)
        self._draw_highlight()
        return True

    def _size_figure(self) -> None:
        """The builder lays out the key for the figure's width: make it the size the canvas
        has (or, when just created, the area it will fill), not the size it was made with."""
        c = self.canvas
        host = c if c.isVisible() else self._stack_host
        if host.width() > 50 and host.height() > 50:
            px = (c.devicePixelRatioF() or 1.0) / self.figure.dpi
            self.figure.set_size_inches(host.width() * px, host.height() * px, forward=False)

    def _update_in_place(self, key: tuple, inp, opts) -> bool:
        """Move the drawing on screen to the new data (True), or say it cannot (False)."""
        from ..figures.funnel import update_funnel

        art = self.artists
        ax = getattr(self, "axes", None)
        if not art or ax is None or ax not in self.figure.axes or self._layout_in_use != key:
            return False
        if not update_funnel(ax, art, inp, opts, size="page"):
            return False
        self.layout_reused = True
        return True

    def _build_afresh(self, key: tuple, inp, opts) -> None:
        """A new drawing at the fixed layout for ``key`` (computed first when new)."""
        from ..figures.flag_marks import flagged_points, mark_flagged
        from ..figures.funnel import draw_funnel

        fig = self.figure
        saved = self._fixed_layout
        self.layout_reused = saved is not None and saved[0] == key
        if not self.layout_reused:
            # the layout for this size and these options: constrained layout, once
            fig.clear()
            fig.set_layout_engine("constrained")
            ax = fig.add_subplot()
            draw_funnel(ax, inp, opts, size="page")
            mark_flagged(ax, flagged_points(self.result, opts.axis), size="page")
            fig.draw_without_rendering()
            self._fixed_layout = (key, ax.get_position().frozen())
        fig.clear()
        # the builder puts the key below the axes as a figure key when the layout engine
        # makes room for it: build under constrained layout at the fixed place, then fix it
        fig.set_layout_engine("constrained")
        self._highlight = None
        self._flag_artists = []
        ax = fig.add_subplot()
        ax.set_position(self._fixed_layout[1])
        self.artists = draw_funnel(ax, inp, opts, size="page")
        fig.set_layout_engine("none")
        self.axes = ax
        self._layout_in_use = key

    def _mark_flagged(self, result, opts) -> None:
        """Rings and words for the rows to check, drawn again for each result."""
        from ..figures.flag_marks import flagged_points, mark_flagged

        for a in getattr(self, "_flag_artists", ()):
            try:
                a.remove()
            except (ValueError, AttributeError, NotImplementedError):
                pass
        self._flag_artists = mark_flagged(self.axes, flagged_points(result, opts.axis), size="page")

    # ---------------------------------------------------------------- fixed layout
    #
    # The layout depends on the canvas size and the options, not on where the points lie
    # or which numbers the key prints: it is computed once for those and reused; a draw
    # whose tick labels no longer fit lays the figure out afresh.

    def _layout_key(self) -> tuple:
        return (
            tuple(self.canvas.get_width_height()),
            float(self.figure.dpi),
            tuple(sorted(self._opts_state.items())),
        )

    def _after_draw(self, event) -> None:
        if self._splitting:
            return  # the axes are drawn after the rest: checked in _paint
        self._background = None  # a draw of the canvas's own (a resize): no background kept
        self._check_fits(event.renderer)

    def _check_fits(self, renderer) -> None:
        fig = self.figure
        if (
            fig is None
            or not fig.axes
            or type(fig.get_layout_engine()).__name__ != ("PlaceHolderLayoutEngine")
        ):
            return
        if self._fits(renderer):
            self._relaid_for = None
        else:
            # longer tick labels than when the layout was made: lay out afresh, once (a
            # layout constrained layout has just made is kept even if a label overhangs)
            key = self._layout_key()
            if self._relaid_for != key:
                self._relaid_for = key
                self._relayout()

    # ---------------------------------------------------------------- drawing on screen
    #
    # An edit changes what lies on the axes (and their tick labels), seldom the key below
    # them: the canvas is drawn in two parts, everything but the axes (kept as a
    # background while the key's words stay the same) and the axes drawn over it. The
    # pixels are those of a whole draw: nothing of the axes overlaps the figure key.

    def _request_draw(self) -> None:
        if not self._draw_queued:
            self._draw_queued = True
            if self._draw_timer is None:
                # a child timer: it goes with the panel (a queued draw never reaches a
                # panel whose window has closed)
                self._draw_timer = QTimer(self)
                self._draw_timer.setSingleShot(True)
                self._draw_timer.timeout.connect(self._draw_if_queued)
            self._draw_timer.start(0)

    def _draw_if_queued(self) -> None:
        if self._draw_queued:
            self._draw_queued = False
            self._paint()

    def draw_now(self) -> None:
        """Render synchronously (benchmarks, exports, screenshots)."""
        if self._relayout_timer is not None and self._relayout_timer.isActive():
            self._relayout_timer.stop()  # a new layout is due: make it now
            self.redraw()
        if self._pending:
            self.redraw()
        if self.canvas is not None:
            self._draw_queued = False
            self._paint()

    def _background_key(self) -> tuple:
        words = tuple(t.get_text() for leg in self.figure.legends for t in leg.get_texts())
        return (words, self.canvas.get_width_height(physical=True), self.figure.dpi, id(self.axes))

    def _paint(self) -> None:
        c, fig, ax = self.canvas, self.figure, getattr(self, "axes", None)
        if hasattr(c, "_draw_pending"):
            c._draw_pending = False  # noqa: SLF001 - a queued draw_idle would draw it again
        if ax is None or fig.axes != [ax] or not self.showing_figure():
            c.draw()
            return
        key = self._background_key()
        if self._background is None or self._background[0] != key:
            self._splitting = True
            ax.set_animated(True)  # the figure draws everything but the axes
            try:
                c.draw()
            finally:
                ax.set_animated(False)
                self._splitting = False
            self._background = (key, c.copy_from_bbox(fig.bbox))
            self.background_reused = False
        else:
            c.restore_region(self._background[1])
            self.background_reused = True
        fig.draw_artist(ax)
        c.update()
        self._check_fits(c.get_renderer())

    def _relayout(self, delay_ms: int = 0) -> None:
        """Forget the layout and draw afresh after ``delay_ms`` (a later call restarts it)."""
        self._fixed_layout = None
        self._layout_in_use = None
        self.layout_reused = False
        self._last_key = None
        if self._relayout_timer is None:
            self._relayout_timer = QTimer(self)
            self._relayout_timer.setSingleShot(True)
            self._relayout_timer.timeout.connect(self.redraw)
        self._relayout_timer.start(delay_ms)

    def _fits(self, renderer) -> bool:
        """True when the tick labels drawn (ticks inside the axis limits) lie inside the
        figure."""
        w, h = self.canvas.get_width_height(physical=True)
        for ax in self.figure.axes:
            for axis in (ax.xaxis, ax.yaxis):
                lo, hi = sorted(axis.get_view_interval())
                eps = 1e-9 * max(abs(lo), abs(hi), 1.0)
                for tick in axis.get_major_ticks():
                    if not lo - eps <= tick.get_loc() <= hi + eps:
                        continue  # not drawn
                    label = tick.label1
                    if not label.get_visible() or not label.get_text():
                        continue
                    bb = label.get_window_extent(renderer)
                    if bb.x0 < -0.5 or bb.y0 < -0.5 or bb.x1 > w + 0.5 or bb.y1 > h + 0.5:
                        return False
        return True

    def _on_resize(self, event) -> None:
        # a new size needs a new layout: constrained for the draw the resize asks for, and a
        # new drawing at the new fixed layout right after it
        # (while a window edge is dragged, one new drawing when it rests)
        if self.figure is not None and self.figure.axes and self.artists:
            self.figure.set_layout_engine("constrained")
            self._relayout(RESIZE_SETTLE_MS)

    def _collect_points(self, result, inp) -> None:
        """Marker positions (data coordinates) and the table row of each."""
        import numpy as np

        self._points = []
        ys = np.asarray(inp.y, dtype=float)
        rows = result.data.rows
        # a marker's x is the study's effect (an exact copy): find the study it belongs to
        by_x: dict[float, list[int]] = {}
        for i, x in enumerate(ys.tolist()):
            by_x.setdefault(x, []).append(i)
        for coll in self.artists.get("studies") or ():
            try:
                offs = np.asarray(coll.get_offsets(), dtype=float)
            except AttributeError:
                continue
            for x, v in offs.tolist():
                matches = by_x.get(x)
                if not matches:
                    near = np.flatnonzero(np.isclose(ys, x, rtol=0, atol=1e-12))
                    matches = near.tolist()
                if matches:
                    i = matches[0]
                    if len(matches) > 1:  # equal effects: tell them apart by the SE axis
                        i = min(matches, key=lambda j: abs(self._vpos(inp, j) - v))
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
            self._request_draw()

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
