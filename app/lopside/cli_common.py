"""Open any file Lopside accepts: a project file, a CSV/XLSX study table, or pasted text.

Every import keeps an account (:class:`lopside.model.review.IntakeAccount`): what was not
read, how the decimal mark, the measure and the direction of benefit were decided. A file
whose decimal mark cannot be settled is refused with :class:`DecimalUndecided` naming
the two readings, so that the caller asks (window) or names an option (CLI).
"""

from __future__ import annotations

import stat
from dataclasses import replace
from pathlib import Path
from typing import Any

from .intake.errors import IntakeError
from .model.project_file import SUFFIX, ProjectFileError, load, load_workbook
from .model.review import (
    MEASURE_NAMES,
    MEASURES,
    IntakeAccount,
    Review,
    ReviewDetails,
    StudyRow,
)
from .model.workbook import WorkbookError

ACCEPTED = (SUFFIX, ".json", ".csv", ".xlsx", ".txt", ".pdf")
MAX_TEXT_BYTES = 50 * 2**20


class InputError(ValueError):
    """Bad input for a headless command; the message names the file and what to do."""


class DecimalUndecided(InputError):
    """Nothing in the file settles the decimal mark of some numbers ("1,105").

    ``examples`` holds (place, text) pairs; :func:`two_readings` shows both readings.
    """

    def __init__(self, message: str, examples: tuple[tuple[str, str], ...]) -> None:
        super().__init__(message)
        self.examples = examples


def two_readings(text: str) -> tuple[str, str]:
    """``1,105`` read with a decimal point (thousands comma) and with a decimal comma."""
    from .intake.numbers import parse_number

    point = parse_number(text, "point")
    comma = parse_number(text, "comma")
    return (
        f"{point.value:g}" if point.ok else "not a number",
        f"{comma.value:g}" if comma.ok else "not a number",
    )


def _undecided_error(name: str, undecided, unit: str) -> DecimalUndecided:
    examples = tuple((f"{unit} {n}", t) for n, t in undecided)
    shown = []
    for place, text in examples[:3]:
        as_point, as_comma = two_readings(text)
        shown.append(
            f"'{text}' ({place}) is {as_point} with a decimal point, {as_comma} with a decimal comma"
        )
    more = f" and {len(examples) - 3} more" if len(examples) > 3 else ""
    return DecimalUndecided(
        f"{name}: nothing in the file settles the decimal mark: {'; '.join(shown)}{more}. "
        "Say which it is with --decimal-comma or --decimal-point.",
        examples,
    )


def guess_measure(rows: tuple[StudyRow, ...]) -> str | None:
    """OR for count tables, MD for mean/SD tables; None when the rows carry only estimates."""
    if rows and all(r.has_counts() for r in rows):
        return "OR"
    if rows and all(r.has_means() for r in rows):
        return "MD"
    return None


#: how an assumed measure is described in the account
MEASURE_ASSUMED = {
    "OR": "not given: odds ratio assumed (events and totals in every row)",
    "MD": "not given: mean difference assumed (means and SDs in every row)",
}


def review_from_rows(
    rows,
    measure: str | None,
    name: str,
    *,
    hint: str | None = None,
    why: str = "",
    unknown_columns: tuple[str, ...] = (),
) -> Review:
    """A review of ``rows``; the measure is the one given, else the file's, else guessed.

    The details record how the measure was chosen (``details`` never guess silently).
    """
    if measure:
        m, how = measure, "given"
    elif hint:
        m, how = hint, f"named in the file ({MEASURE_NAMES[hint]})"
    else:
        m = guess_measure(tuple(rows))
        how = MEASURE_ASSUMED.get(m or "", "")
    if m is None and not any(r.estimate is not None for r in rows):
        # e.g. columns named in a way we do not read: asking for --measure would send the
        # user the wrong way
        unread = [*unknown_columns, *sorted({f for r in rows for f, _ in r.unread})]
        hint_cols = f" Columns not read: {', '.join(unread)}." if unread else ""
        raise InputError(
            f"{name}: no row gives an effect to analyse (an estimate, events and totals of "
            f"both arms, or means, SDs and sizes of both arms).{hint_cols} Name the columns "
            "as the README lists them."
        )
    if m is None:
        looks = f" They look like: {why}." if why else ""
        raise InputError(
            f"{name}: the rows give effect estimates but the file does not say which measure "
            f"they are.{looks} Add --measure with one of {', '.join(MEASURES)}."
        )
    review = Review(details=ReviewDetails(title=Path(name).stem, measure=m), studies=tuple(rows))
    return replace(review, intake=replace(review.intake, measure_how=how))


def _with_favours(review: Review, favours: str | None, from_file: str = "") -> Review:
    if favours:
        return review.with_details(favours=favours, favours_source="option")
    if from_file:
        return review.with_details(favours=from_file, favours_source="table")
    return review.with_details(favours="lower", favours_source="assumed")


def load_pdf_review(
    path: Path,
    measure: str | None = None,
    page: str | None = None,
    progress=None,
    *,
    decimal: str | None = None,
    favours: str | None = None,
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
    got = rows_from_pages(doc, pages, measure, decimal=decimal)
    notes = notes + list(got.notes)
    paste = got.paste
    where = got.where()
    unread = doc.unread_pages()
    # a page whose text could not be read is said on stderr and listed in the account
    notes += [f"{path.name}: page {pg.number} was not read: {pg.problem}." for pg in unread]
    if not paste.rows:
        why = "".join(f" Page {pg.number}: {pg.problem}." for pg in unread if pg.number in pages)
        raise InputError(
            f"{path.name}: no study rows could be read on {where}.{why}\n{paste.account()}"
        )
    if paste.undecided and not decimal:
        raise _undecided_error(path.name, paste.undecided, "line")
    prose = got.prose_count(paste)
    if prose:
        notes.append(f"{path.name}: {prose} line(s) of text without numbers passed over.")
    review = review_from_rows(
        paste.rows, measure, path.name, hint=paste.measure_hint, why=paste.measure_why
    )
    review = review.with_details(
        title=f"{path.stem} ({where})", source_note=got.source_note(path.name)
    )
    account = got.intake_account(path.name, review.intake.measure_how, unread_pages=unread)
    review = replace(review, intake=account)
    if paste.published is not None:
        review = review.with_details(published=paste.published)
    return _with_favours(review, favours), notes


def load_review_file(
    path: str | Path,
    measure: str | None = None,
    *,
    decimal: str | None = None,
    favours: str | None = None,
    accept_changed: bool = False,
    outcome: str | None = None,
) -> tuple[Review, dict[str, Any]]:
    """Read FILE into a review; ``measure`` overrides (or supplies) the measure.

    ``outcome`` names the outcome of a project that holds several (a workbook); without
    it such a project is refused with :class:`~lopside.model.project_file.SeveralOutcomes`,
    which lists them. A study table, pasted text or PDF holds one outcome, named by the
    file's stem.

    ``decimal`` ("point"/"comma") settles numbers the file itself does not; ``favours``
    ("lower"/"higher") sets the direction of benefit. The review carries the intake
    account of what was read and decided (:attr:`Review.intake`).

    Raises :class:`InputError` (or the intake/project errors, which are ValueErrors) with a
    message that names the file and, where it applies, the row and field;
    :class:`DecimalUndecided` when the decimal mark is needed and not settled. A PDF is
    read from the page with the most study rows (:func:`load_pdf_review` says which).
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
        review, settings = _project_outcome(p, outcome, accept_changed)
        if measure:
            review = review.with_details(measure=measure)
        if favours:
            review = review.with_details(favours=favours, favours_source="option")
        return review, settings
    if outcome and outcome.strip().casefold() != p.stem.strip().casefold():
        raise InputError(
            f"{p.name}: a study table holds one outcome (called '{p.stem}' after the file); "
            f"--outcome '{outcome}' is for project files that hold several."
        )
    if suffix in (".csv", ".xlsx"):
        from .intake.table import read_table

        table = read_table(p, measure, decimal)
        if table.undecided and not decimal:
            raise _undecided_error(p.name, table.undecided, "row")
        review = review_from_rows(
            table.rows,
            measure,
            p.name,
            hint=table.measure_hint,
            unknown_columns=table.unknown_columns,
        )
        review = replace(review, intake=table.intake_account(review.intake.measure_how))
        return _with_favours(review, favours, table.favours), {}
    if suffix == ".txt":
        from .intake.paste import read_pasted

        try:
            text = p.read_text(encoding="utf-8-sig")
        except UnicodeDecodeError:
            text = p.read_text(encoding="cp1252", errors="replace")
        pasted = read_pasted(text, measure, decimal)
        if not pasted.rows:
            raise InputError(f"{p.name}: no study rows could be read.\n{pasted.account()}")
        if pasted.undecided and not decimal:
            raise _undecided_error(p.name, pasted.undecided, "line")
        review = review_from_rows(
            pasted.rows,
            measure,
            p.name,
            hint=pasted.measure_hint,
            why=pasted.measure_why if pasted.measure_guess else "",
        )
        review = replace(review, intake=pasted.intake_account(p.name, review.intake.measure_how))
        if pasted.published is not None:
            review = review.with_details(published=pasted.published)
        return _with_favours(review, favours), {}
    if suffix == ".pdf":
        return load_pdf_review(p, measure, decimal=decimal, favours=favours)[0], {}
    raise InputError(
        f"{p.name}: Lopside opens {', '.join(ACCEPTED)} files; this one is '{suffix or 'none'}'."
    )


def _project_outcome(
    p: Path, outcome: str | None, accept_changed: bool
) -> tuple[Review, dict[str, Any]]:
    """One outcome of a project: the one named, or the only one."""
    if not outcome:
        return load(p, accept_changed=accept_changed)
    workbook = load_workbook(p, accept_changed=accept_changed)
    try:
        chosen = workbook.outcomes[workbook.find(outcome, p.name)]
    except WorkbookError as exc:
        raise InputError(str(exc)) from None
    return chosen.review, chosen.settings


def load_outcomes(
    path: str | Path,
    measure: str | None = None,
    *,
    decimal: str | None = None,
    favours: str | None = None,
    accept_changed: bool = False,
) -> list[tuple[str, Review, dict[str, Any]]]:
    """Every outcome of FILE as (name, review, saved settings), in the file's order.

    A project gives each of its outcomes (under :attr:`Workbook.names`; an untitled
    project of one outcome is named by its file); any other file gives one outcome named
    by the file's stem. ``measure`` and ``favours`` apply to every outcome, as in
    :func:`load_review_file`, whose errors this raises.
    """
    p = Path(path)
    if p.suffix.lower() not in (SUFFIX, ".json") or not p.is_file():
        review, settings = load_review_file(
            p, measure, decimal=decimal, favours=favours, accept_changed=accept_changed
        )
        return [(p.stem, review, settings)]
    workbook = load_workbook(p, accept_changed=accept_changed)
    out = []
    for name, o in zip(workbook.names, workbook.outcomes):
        review = o.review
        if measure:
            review = review.with_details(measure=measure)
        if favours:
            review = review.with_details(favours=favours, favours_source="option")
        details = review.details
        if len(workbook) == 1 and not (details.outcome.strip() or details.title.strip()):
            name = p.stem
        out.append((name, review, o.settings))
    return out


def is_project(path: str | Path) -> bool:
    return Path(path).suffix.lower() in (SUFFIX, ".json")


def unread_report(account: IntakeAccount) -> str:
    """The study-looking input that was not read, one per line, for stderr."""
    return "\n".join(f"  {n.where}: {n.text}  ({n.reason})" for n in account.study_looking())


INPUT_ERRORS = (InputError, IntakeError, ProjectFileError)
