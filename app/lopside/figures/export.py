"""Saving figures: PNG (300 dpi), SVG (text kept as text) and PDF, reproducibly.

Two saves of the same figure give identical bytes: no date is written, the software
string is fixed (:data:`lopside.figures.style.SOFTWARE`), SVG ids come from a fixed salt.
"""

from __future__ import annotations

import io
import os
from pathlib import Path
from typing import TYPE_CHECKING, BinaryIO

from . import style

if TYPE_CHECKING:  # pragma: no cover
    from matplotlib.figure import Figure

#: Formats written by :func:`save_figure`.
FORMATS: tuple[str, ...] = ("png", "svg", "pdf")
#: Resolution of PNG files (vector formats ignore it).
PNG_DPI = 300


def format_for(path: str | os.PathLike) -> str:
    """The format implied by a file name's suffix ("png", "svg" or "pdf").

    Raises
    ------
    ValueError
        For any other suffix, naming the ones accepted.
    """
    suffix = Path(path).suffix.lower().lstrip(".")
    if suffix not in FORMATS:
        raise ValueError(
            f"cannot tell the figure format from {Path(path).name!r}: "
            f"end the file name with .png, .svg or .pdf"
        )
    return suffix


def _metadata(fmt: str) -> dict[str, object]:
    if fmt == "png":
        return {"Software": style.SOFTWARE}
    if fmt == "svg":
        return {"Creator": style.SOFTWARE, "Date": None}
    return {"Creator": style.SOFTWARE, "Producer": style.SOFTWARE, "CreationDate": None}


def save_figure(
    fig: Figure,
    target: str | os.PathLike | BinaryIO,
    fmt: str | None = None,
    *,
    dpi: float | None = None,
) -> None:
    """Write ``fig`` as PNG, SVG or PDF.

    Parameters
    ----------
    fig : matplotlib.figure.Figure
    target : path or binary file object
        Where to write. A path's suffix gives the format when ``fmt`` is None.
    fmt : {"png", "svg", "pdf"}, optional
        Required when ``target`` is a file object.
    dpi : float, optional
        PNG resolution (default :data:`PNG_DPI`).

    Raises
    ------
    ValueError
        Unknown format.
    OSError
        The file cannot be written.
    """
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    if fmt is None:
        if isinstance(target, (str, os.PathLike)):
            fmt = format_for(target)
        else:
            raise ValueError("give fmt ('png', 'svg' or 'pdf') when saving to a file object")
    fmt = fmt.lower()
    if fmt not in FORMATS:
        raise ValueError(f"unknown figure format {fmt!r}; use png, svg or pdf")
    if not isinstance(fig.canvas, FigureCanvasAgg) and type(fig.canvas).__name__ == (
        "FigureCanvasBase"
    ):
        # a bare Figure has a placeholder canvas; Agg can print every format we write
        FigureCanvasAgg(fig)
    import matplotlib

    # only the file-format keys: fonts and sizes were fixed when the artists were made
    rc = {k: v for k, v in style.rc_params().items() if k.split(".")[0] in ("svg", "pdf", "ps")}
    with matplotlib.rc_context(rc):
        fig.savefig(
            target,
            format=fmt,
            dpi=dpi or PNG_DPI,
            metadata=_metadata(fmt),
            facecolor=style.PAPER,
        )


def figure_bytes(fig: Figure, fmt: str = "png", *, dpi: float | None = None) -> bytes:
    """The figure encoded as ``fmt`` (for the sheet, the clipboard, tests)."""
    buf = io.BytesIO()
    save_figure(fig, buf, fmt, dpi=dpi)
    return buf.getvalue()
