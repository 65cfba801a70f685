"""A matplotlib figure drawn straight onto the sheet's reportlab canvas (vector, text as text).

The figure is drawn by matplotlib's own drawing code with a renderer that turns each path,
marker and text into reportlab canvas operations: no SVG is written and parsed again (the
SVG → svglib path cost about as much as drawing the figure). Text is set in the sheet's
embedded DejaVu Sans (the font matplotlib measured it with), so labels stay searchable.

Supported: paths (lines, polygons, curves) with stroke and fill colours, alpha, dashes,
caps and joins, clipping to rectangles and paths, markers and collections (through
matplotlib's generic loops), plain text at any angle, and images. Hatching and Gouraud
shading are not used by Lopside's figures; a figure that uses them raises
:class:`Unsupported`, and the caller falls back to the SVG path.
"""

from __future__ import annotations

from matplotlib.backend_bases import GraphicsContextBase
from matplotlib.backends._backend_pdf_ps import RendererPDFPSBase
from matplotlib.path import Path

from . import fonts

_CAPS = {"butt": 0, "round": 1, "projecting": 2}
_JOINS = {"miter": 0, "round": 1, "bevel": 2}


class Unsupported(Exception):
    """The figure uses a drawing feature this renderer does not draw."""


class ReportlabRenderer(RendererPDFPSBase):
    """matplotlib renderer that draws on a reportlab canvas, in points, origin lower left."""

    _afm_font_dir = None  # text metrics from the TrueType fonts (as pdf.fonttype 42)
    _use_afm_rc_name = "pdf.use14corefonts"

    def __init__(self, canv, width_in: float, height_in: float) -> None:
        super().__init__(width_in, height_in)  # inches, as matplotlib's PDF renderer
        self.canv = canv

    def new_gc(self):
        return GraphicsContextBase()

    # ---------------------------------------------------------------- state

    def _clip(self, gc) -> None:
        c = self.canv
        rect = gc.get_clip_rectangle()
        if rect is not None:
            x0, y0, w, h = rect.bounds
            c._code.append(f"{x0:.3f} {y0:.3f} {w:.3f} {h:.3f} re W n")  # noqa: SLF001
        tpath, affine = gc.get_clip_path()
        if tpath is not None:
            c._code.append(self._ops(tpath, affine, None) + " W n")  # noqa: SLF001

    @staticmethod
    def _ops(path, transform, clip) -> str:
        """PDF path operators of ``path`` transformed to points (3 decimals: 1/1000 pt)."""
        out = []
        add = out.append
        last = (0.0, 0.0)
        for verts, code in path.iter_segments(
            transform, remove_nans=True, clip=clip, simplify=False, curves=True
        ):
            if code == Path.MOVETO:
                add(f"{verts[0]:.3f} {verts[1]:.3f} m")
            elif code == Path.LINETO:
                add(f"{verts[0]:.3f} {verts[1]:.3f} l")
            elif code == Path.CURVE3:  # a quadratic Bézier as the equivalent cubic
                (qx, qy), (x, y) = (verts[0], verts[1]), (verts[2], verts[3])
                x0, y0 = last
                c1 = (x0 + 2 / 3 * (qx - x0), y0 + 2 / 3 * (qy - y0))
                c2 = (x + 2 / 3 * (qx - x), y + 2 / 3 * (qy - y))
                add(f"{c1[0]:.3f} {c1[1]:.3f} {c2[0]:.3f} {c2[1]:.3f} {x:.3f} {y:.3f} c")
            elif code == Path.CURVE4:
                add(" ".join(f"{v:.3f}" for v in verts[:6]) + " c")
            elif code == Path.CLOSEPOLY:
                add("h")
                continue
            if len(verts) >= 2:
                last = (verts[-2], verts[-1])
        return " ".join(out)

    def _stroke_state(self, gc) -> bool:
        c = self.canv
        lw = gc.get_linewidth()
        rgb = gc.get_rgb()
        alpha = gc.get_alpha() if gc.get_forced_alpha() else (rgb[3] if len(rgb) > 3 else 1.0)
        if lw <= 0 or alpha <= 0:
            return False
        c.setStrokeColorRGB(rgb[0], rgb[1], rgb[2])
        c.setStrokeAlpha(alpha)
        c.setLineWidth(lw)
        c.setLineCap(_CAPS.get(gc.get_capstyle(), 0))
        c.setLineJoin(_JOINS.get(gc.get_joinstyle(), 0))
        offset, dashes = gc.get_dashes()
        if dashes:
            c.setDash([float(d) for d in dashes], float(offset or 0.0))
        else:
            c.setDash()
        return True

    def _fill_state(self, gc, rgb_face) -> bool:
        if rgb_face is None:
            return False
        alpha = (
            gc.get_alpha() if gc.get_forced_alpha() else (rgb_face[3] if len(rgb_face) > 3 else 1.0)
        )
        if alpha <= 0:
            return False
        self.canv.setFillColorRGB(rgb_face[0], rgb_face[1], rgb_face[2])
        self.canv.setFillAlpha(alpha)
        return True

    # ---------------------------------------------------------------- drawing

    def draw_path(self, gc, path, transform, rgbFace=None):  # noqa: N803 - matplotlib API
        if gc.get_hatch() is not None:
            raise Unsupported("hatching")
        c = self.canv
        c.saveState()
        try:
            self._clip(gc)
            fill = self._fill_state(gc, rgbFace)
            stroke = self._stroke_state(gc)
            if not (fill or stroke):
                return
            clip = (0.0, 0.0, self.width * 72.0, self.height * 72.0) if rgbFace is None else None
            op = "B" if fill and stroke else ("f" if fill else "S")  # non-zero winding
            c._code.append(self._ops(path, transform, clip) + " " + op)  # noqa: SLF001
        finally:
            c.restoreState()

    def draw_gouraud_triangles(self, gc, triangles_array, colors_array, transform):
        raise Unsupported("Gouraud shading")

    def draw_image(self, gc, x, y, im, transform=None):
        from PIL import Image
        from reportlab.lib.utils import ImageReader

        h, w = im.shape[:2]
        if w == 0 or h == 0:
            return
        c = self.canv
        c.saveState()
        try:
            self._clip(gc)
            img = Image.fromarray(im[::-1], "RGBA")  # matplotlib gives rows bottom-up
            if transform is None:  # pixels at the figure's 72 dpi: points
                c.drawImage(ImageReader(img), x, y, w, h, mask="auto")
            else:
                a, b, cc, d, e, f = transform.frozen().to_values()
                c.transform(a, b, cc, d, e + x, f + y)
                c.drawImage(ImageReader(img), 0, 0, 1, 1, mask="auto")
        finally:
            c.restoreState()

    def draw_text(self, gc, x, y, s, prop, angle, ismath=False, mtext=None):
        if ismath or not s:
            if s:
                super().draw_text(gc, x, y, s, prop, angle, ismath, mtext)
            return
        c = self.canv
        rgb = gc.get_rgb()
        alpha = gc.get_alpha() if gc.get_forced_alpha() else (rgb[3] if len(rgb) > 3 else 1.0)
        bold = prop.get_weight() in ("bold", "heavy", "extra bold", "black", "semibold", 600, 700)
        italic = prop.get_style() in ("italic", "oblique")
        name = _font_name(bold, italic)
        c.saveState()
        try:
            self._clip(gc)
            c.setFillColorRGB(rgb[0], rgb[1], rgb[2])
            c.setFillAlpha(alpha)
            c.translate(x, y)
            if angle:
                c.rotate(angle)
            t = c.beginText(0, 0)
            t.setFont(name, prop.get_size_in_points())
            t.textOut(s)
            c.drawText(t)
        finally:
            c.restoreState()

    def option_image_nocomposite(self):
        return True


def _font_name(bold: bool, italic: bool) -> str:
    if bold and italic:
        return fonts.BOLD_ITALIC
    if bold:
        return fonts.BOLD
    if italic:
        return fonts.ITALIC
    return fonts.REGULAR


def draw_figure(canv, fig) -> None:
    """Draw ``fig`` on ``canv`` with its lower-left corner at the current origin, 1 pt
    per point (scale the canvas first to fit)."""
    from matplotlib import cbook

    renderer = ReportlabRenderer(canv, fig.get_figwidth(), fig.get_figheight())
    with cbook._setattr_cm(fig, dpi=72.0):  # noqa: SLF001 - as savefig does for vector output
        fig.draw(renderer)


def figure_flowable(fig, scale: float = 1.0):
    """A reportlab flowable drawing ``fig`` in vector form at ``scale``."""
    from reportlab.platypus import Flowable

    class FigureFlowable(Flowable):
        def __init__(self):
            super().__init__()
            self.fig = fig
            self.width = fig.get_figwidth() * 72.0 * scale
            self.height = fig.get_figheight() * 72.0 * scale

        def wrap(self, avail_w, avail_h):
            return self.width, self.height

        def draw(self):
            c = self.canv
            c.saveState()
            c.scale(scale, scale)
            draw_figure(c, self.fig)
            c.restoreState()

    return FigureFlowable()


def drawable(fig) -> bool:
    """True when every artist of ``fig`` uses only what this renderer draws."""
    for a in fig.findobj():
        hatch = getattr(a, "get_hatch", None)
        if hatch is not None and hatch():
            return False
        if getattr(a, "_shading", None) == "gouraud":
            return False
    return True
