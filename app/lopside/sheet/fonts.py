"""Embedded Unicode fonts for the sheet: DejaVu Sans from matplotlib's own data folder.

With reportlab's built-in Helvetica, τ², I², ≥, ≤ and − look right on screen but extract
as wrong characters (ENGINEERING-NOTES.md), so the sheet embeds a TrueType font. DejaVu
Sans ships inside matplotlib, so it is present on every machine that can draw the funnel.
The same files are registered with svglib, so text inside the vector figures is set in
the embedded font and stays searchable.
"""

from __future__ import annotations

import os

REGULAR = "LopsideSans"
BOLD = "LopsideSans-Bold"
ITALIC = "LopsideSans-Oblique"
BOLD_ITALIC = "LopsideSans-BoldOblique"

_FILES = {
    REGULAR: "DejaVuSans.ttf",
    BOLD: "DejaVuSans-Bold.ttf",
    ITALIC: "DejaVuSans-Oblique.ttf",
    BOLD_ITALIC: "DejaVuSans-BoldOblique.ttf",
}
_done = False


def font_dir() -> str:
    """matplotlib's folder of bundled TrueType fonts."""
    import matplotlib

    return os.path.join(matplotlib.get_data_path(), "fonts", "ttf")


def register_fonts() -> str:
    """Register the DejaVu family with reportlab (and svglib) once; return the family name.

    Raises
    ------
    OSError
        If matplotlib's font files are missing (a broken installation).
    """
    global _done
    if _done:
        return REGULAR
    from reportlab.lib.fonts import addMapping
    from reportlab.pdfbase import pdfmetrics
    from reportlab.pdfbase.ttfonts import TTFont

    folder = font_dir()
    for name, fname in _FILES.items():
        path = os.path.join(folder, fname)
        if not os.path.exists(path):
            raise OSError(f"font file {path} is missing; reinstall matplotlib")
        pdfmetrics.registerFont(TTFont(name, path))
    try:
        from svglib.fonts import register_font
    except ImportError:  # svglib absent: figures fall back to PNG
        pass
    else:
        # the names matplotlib writes into its SVG files
        for weight, style, name in (
            ("normal", "normal", REGULAR),
            ("bold", "normal", BOLD),
            ("normal", "italic", ITALIC),
            ("bold", "italic", BOLD_ITALIC),
        ):
            register_font(
                "DejaVu Sans",
                os.path.join(folder, _FILES[name]),
                weight=weight,
                style=style,
                rlgFontName=name,
            )
    # after svglib, which registers font families of its own under the same names
    addMapping(REGULAR, 0, 0, REGULAR)
    addMapping(REGULAR, 1, 0, BOLD)
    addMapping(REGULAR, 0, 1, ITALIC)
    addMapping(REGULAR, 1, 1, BOLD_ITALIC)
    _done = True
    return REGULAR
