"""Open any file Lopside accepts: a project file, a CSV/XLSX study table, or pasted text."""

from __future__ import annotations

import stat
from pathlib import Path
from typing import Any

from .intake.errors import IntakeError
from .model.project_file import SUFFIX, ProjectFileError, load
from .model.review import MEASURES, Review, ReviewDetails, StudyRow

ACCEPTED = (SUFFIX, ".json", ".csv", ".xlsx", ".txt", ".pdf")
MAX_TEXT_BYTES = 50 * 2**20


class InputError(ValueError):
    """Bad input for a headless command; the message names the file and what to do."""


def guess_measure(rows: tuple[StudyRow, ...]) -> str | None:
    """OR for count tables, MD for mean/SD tables; None when the rows carry only estimates."""
    if rows and all(r.has_counts() for r in rows):
        return "OR"
    if rows and all(r.has_means() for r in rows):
        return "MD"
    return None


def review_from_rows(rows, measure: str | None, name: str) -> Review:
    m = measure or guess_measure(tuple(rows))
    if m is None:
        raise InputError(
            f"{name}: the rows give effect estimates but the file does not say which measure "
            f"they are. Add --measure with one of {', '.join(MEASURES)}."
        )
    return Review(details=ReviewDetails(title=Path(name).stem, measure=m), studies=tuple(rows))


def load_pdf_review(
    path: Path, measure: str | None = None, page: str | None = None, progress=None
) -> tuple[Review, list[str]]:
    """Rows from a review's PDF: the page(s) ``page`` ('7', '7-8'), else the page with the
    most study rows. Returns the review and what to tell the user (which page was read,
    which others hold rows, footnote marks left out, lines not read)."""
    from .intake.pdf import choose_pages, read_pdf, rows_from_pages

    try:
        from .intake.pdf import parse_pages

        wanted = parse_pages(page) if page else None
    except ValueError as exc:
        raise InputError(f"--page {page}: {exc}.") from exc
    doc = read_pdf(path, pages=wanted, progress=progress)
    pages, notes = choose_pages(doc, page)
    got = rows_from_pages(doc, pages, measure)
    notes = notes + list(got.notes)
    paste = got.paste
    where = f"page {pages[0]}" if len(pages) == 1 else f"pages {pages[0]}-{pages[-1]}"
    if not paste.rows:
        raise InputError(f"{path.name}: no study rows could be read on {where}.\n{paste.account()}")
    prose = 0
    for r in paste.not_understood:
        if not any(ch.isdigit() for ch in r.text):
            prose += 1  # text without a number cannot be a study row (titles, prose)
            continue
        notes.append(
            f"{path.name}, page {got.line_pages[r.line_no - 1]}: line not read: "
            f"{r.text.strip()[:80]} ({r.reason})"
        )
    if prose:
        notes.append(f"{path.name}: {prose} line(s) of text without numbers passed over.")
    review = review_from_rows(paste.rows, measure or paste.measure_hint, path.name)
    review = review.with_details(
        title=f"{path.stem} ({where})", source_note=got.source_note(path.name)
    )
    if paste.published is not None:
        review = review.with_details(published=paste.published)
    return review, notes


def load_review_file(path: str | Path, measure: str | None = None) -> tuple[Review, dict[str, Any]]:
    """Read FILE into a review; ``measure`` overrides (or supplies) the measure.

    Raises :class:`InputError` (or the intake/project errors, which are ValueErrors) with a
    message that names the file and, where it applies, the row and field. A PDF is read
    from the page with the most study rows (:func:`load_pdf_review` says which).
    """
    p = Path(path)
    if measure is not None and measure not in MEASURES:
        raise InputError(f"--measure {measure}: use one of {', '.join(MEASURES)}.")
    if not p.exists():
        raise InputError(f"{p}: no such file.")
    if p.is_dir():
        raise InputError(f"{p}: is a folder; give a project file, CSV, XLSX or .txt file.")
    info = p.stat()
    if not stat.S_ISREG(info.st_mode):
        raise InputError(f"{p}: not a file; give a project file, CSV, XLSX or .txt file.")
    suffix = p.suffix.lower()
    if suffix == ".txt" and info.st_size > MAX_TEXT_BYTES:
        raise InputError(f"{p.name}: the file is larger than pasted text can be (more than 50 MB).")
    if suffix in (SUFFIX, ".json"):
        review, settings = load(p)
        if measure:
            review = review.with_details(measure=measure)
        return review, settings
    if suffix in (".csv", ".xlsx"):
        from .intake.table import read_table

        table = read_table(p)
        return review_from_rows(table.rows, measure, p.name), {}
    if suffix == ".txt":
        from .intake.paste import read_pasted

        try:
            text = p.read_text(encoding="utf-8-sig")
        except UnicodeDecodeError:
            text = p.read_text(encoding="cp1252", errors="replace")
        pasted = read_pasted(text, measure)
        if not pasted.rows:
            raise InputError(f"{p.name}: no study rows could be read.\n{pasted.account()}")
        review = review_from_rows(pasted.rows, measure or pasted.measure_hint, p.name)
        if pasted.published is not None:
            review = review.with_details(published=pasted.published)
        return review, {}
    if suffix == ".pdf":
        return load_pdf_review(p, measure)[0], {}
    raise InputError(
        f"{p.name}: Lopside opens {', '.join(ACCEPTED)} files; this one is '{suffix or 'none'}'."
    )


INPUT_ERRORS = (InputError, IntakeError, ProjectFileError)
