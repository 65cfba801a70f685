"""The PDF appraisal sheet (reportlab): 1-3 A4 pages, print-ready, text searchable.

Importing this package is cheap; reportlab, matplotlib and svglib are imported when a
sheet is built.
"""

from __future__ import annotations

import datetime as _dt
import os

__all__ = ["sheet_bytes", "write_sheet"]


def sheet_bytes(
    result,
    *,
    include_forest: bool = False,
    date: str | _dt.date | None = None,
    timestamp: bool = False,
) -> bytes:
    """The appraisal sheet as PDF bytes.

    Parameters
    ----------
    result : Assessment or AnalysisResult
        From :func:`lopside.assessment.assess` (an analysis alone is read through
        :func:`lopside.assessment.assessment_of`).
    include_forest : bool
        Add the forest plot on its own page(s) after the three main pages.
    date : str or datetime.date, optional
        Date printed on the sheet (default today).
    timestamp : bool
        Write a creation date and random document id into the PDF metadata (off by
        default, for reproducible output).

    Returns
    -------
    bytes
    """
    from .build import build_sheet

    return build_sheet(result, include_forest=include_forest, date=date, timestamp=timestamp).pdf


def write_sheet(
    result,
    path: str | os.PathLike,
    include_forest: bool = False,
    *,
    date: str | _dt.date | None = None,
    timestamp: bool = False,
) -> None:
    """Write the appraisal sheet to ``path`` (the file is replaced atomically).

    Parameters
    ----------
    result : Assessment or AnalysisResult
    path : path-like
        Output PDF file.
    include_forest : bool
        Add the forest plot on its own page(s).
    date : str or datetime.date, optional
    timestamp : bool

    Raises
    ------
    OSError
        When the file cannot be written (the CLI reports it with the path).
    """
    pdf = sheet_bytes(result, include_forest=include_forest, date=date, timestamp=timestamp)
    from ..fileio import write_atomic

    # a temporary file beside it, then replace: a sheet open in a PDF viewer (locked on
    # Windows) raises fileio.OutputLocked with a free name to offer instead
    write_atomic(path, pdf)
