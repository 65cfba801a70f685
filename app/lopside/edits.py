"""Edits to a review, as values.

Design invariants
-----------------
* Every change a user makes to a review is one of the frozen dataclasses below, and all of
  them go through :func:`apply`. ``apply(edit, review) -> (new_review, inverse)`` is pure:
  it never mutates, and applying ``inverse`` to ``new_review`` gives back a review equal
  to ``review``. Undo/redo (pure in :mod:`lopside.session`, Qt in the window) is built
  on that alone.
* :class:`SetCell` carries the *text* the user typed. Text that is not a number is kept in
  ``StudyRow.unread`` (field -> text) and the typed field is cleared, so nothing typed is
  ever lost and the row check can say what is wrong.
* An edit that does not fit the review (row out of range, unknown field) raises
  :class:`EditError`; it never half-applies. Text that could not be saved or printed (a
  lone surrogate, a control character; :mod:`lopside.model.text`) is refused here, at
  entry, with a message naming the field, so a save never fails on it later.
* :func:`merge` says when two consecutive edits are one step for the user (typing in one
  cell, one notes box, one details field).
* No Qt here.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, fields, replace
from typing import Any

from .model.review import (
    CAUSES,
    DOMAIN_RATINGS,
    FAVOURS_SOURCES,
    JUDGEMENTS,
    MEASURES,
    NUMERIC_FIELDS,
    RISK_OF_BIAS_LEVELS,
    TABLE_COLUMNS,
    CauseNote,
    IntakeAccount,
    PublishedResult,
    Review,
    ReviewClaim,
    ReviewDetails,
    StudyRow,
)
from .model.text import text_problem


class EditError(ValueError):
    """An edit that does not fit the review (the message says why)."""


# --------------------------------------------------------------------------------------
# The edits


@dataclass(frozen=True, slots=True)
class SetCell:
    """Type ``text`` into one cell of the study table (``field`` is a TABLE_COLUMNS name)."""

    row: int
    field: str
    text: str


@dataclass(frozen=True, slots=True)
class SetRow:
    """Replace one row as a whole (the exact inverse of :class:`SetCell`)."""

    row: int
    value: StudyRow


@dataclass(frozen=True, slots=True)
class AddRows:
    """Insert ``rows`` so that the first lands at index ``at`` (``at == len`` appends)."""

    at: int
    rows: tuple[StudyRow, ...]


@dataclass(frozen=True, slots=True)
class PasteBlock:
    """Insert rows read from pasted text (one undo step, labelled as a paste)."""

    at: int
    rows: tuple[StudyRow, ...]


@dataclass(frozen=True, slots=True)
class DeleteRows:
    """Delete the rows at ``indices`` (any order, no repeats)."""

    indices: tuple[int, ...]


@dataclass(frozen=True, slots=True)
class RestoreRows:
    """Put rows back at the positions they had (the inverse of :class:`DeleteRows`).

    ``items`` are (final index, row) in ascending index order.
    """

    items: tuple[tuple[int, StudyRow], ...]


@dataclass(frozen=True, slots=True)
class MoveRow:
    """Take the row at ``src`` out and insert it so that it ends up at index ``dst``."""

    src: int
    dst: int


@dataclass(frozen=True, slots=True)
class SetExclude:
    """Leave a study out of the analysis (kept in the table, marked) or bring it back."""

    row: int
    exclude: bool


@dataclass(frozen=True, slots=True)
class SetDetail:
    """Change one review detail. ``field`` is a ReviewDetails field or ``published.X``.

    ``value`` is typed already (the form reads text into numbers before making the edit);
    ``None`` clears an optional number.
    """

    field: str
    value: Any


@dataclass(frozen=True, slots=True)
class SetCauseNote:
    """The appraiser's judgement and notes for one alternative explanation."""

    key: str
    note: CauseNote


@dataclass(frozen=True, slots=True)
class SetRatingOverride:
    """The appraiser's own rating of the publication-bias domain ("" = take the suggestion)."""

    rating: str
    reason: str


@dataclass(frozen=True, slots=True)
class SetGeneralNotes:
    """The appraiser's general notes."""

    text: str


@dataclass(frozen=True, slots=True)
class SetFavours:
    """Set the direction of benefit and where it came from (the account says so)."""

    favours: str
    source: str = "window"


@dataclass(frozen=True, slots=True)
class SetIntake:
    """Replace the account of what was read on the way in (a paste adds to it)."""

    account: IntakeAccount


@dataclass(frozen=True, slots=True)
class ReplaceStudies:
    """Replace the whole study table (used as the inverse of a measure-wide change)."""

    studies: tuple[StudyRow, ...]


Edit = (
    SetCell
    | SetRow
    | AddRows
    | PasteBlock
    | DeleteRows
    | RestoreRows
    | MoveRow
    | SetExclude
    | SetDetail
    | SetCauseNote
    | SetRatingOverride
    | SetGeneralNotes
    | ReplaceStudies
)

# --------------------------------------------------------------------------------------
# Reading typed text into a field

_TRUE_WORDS = frozenset({"yes", "y", "true", "1", "x", "excluded", "exclude"})
_FALSE_WORDS = frozenset({"no", "n", "false", "0", "", "included", "include"})
_P_BOUNDS = (("<=", "<="), ("\u2264", "<="), ("<", "<"), (">", ">"))
_DETAIL_FIELDS = frozenset(f.name for f in fields(ReviewDetails)) - {"published", "claim"}
_CLAIM_FIELDS = frozenset(f.name for f in fields(ReviewClaim))
_PUBLISHED_FIELDS = frozenset(f.name for f in fields(PublishedResult))


def format_number(value: float | None) -> str:
    """A stored number as text for a cell ("0.8", "12", "" for none)."""
    if value is None:
        return ""
    if isinstance(value, float) and value.is_integer() and abs(value) < 1e15:
        return str(int(value))
    return f"{value:.10g}"


def cell_text(row: StudyRow, field: str) -> str:
    """What a cell shows for editing: the unread text if any, else the stored value."""
    unread = row.unread_dict()
    if field in unread:
        return unread[field]
    if field == "study":
        return row.study
    if field == "year":
        return "" if row.year is None else str(row.year)
    if field == "p":
        if row.p is None:
            return ""
        return f"{row.p_bound or ''}{format_number(row.p)}"
    if field in ("risk_of_bias", "subgroup"):
        return getattr(row, field) or ""
    if field == "exclude":
        return "yes" if row.exclude else ""
    if field == "reported":
        return "" if row.reported else "no"
    if field in NUMERIC_FIELDS:
        return format_number(getattr(row, field))
    raise EditError(f"'{field}' is not a column of the study table.")


def _without_unread(row: StudyRow, field: str) -> tuple[tuple[str, str], ...]:
    return tuple((k, v) for k, v in row.unread if k != field)


def _with_unread(row: StudyRow, field: str, text: str) -> tuple[tuple[str, str], ...]:
    # keep the table order of fields so that equal rows compare equal
    d = dict(row.unread)
    d[field] = text
    return tuple(sorted(d.items(), key=lambda kv: _field_order(kv[0])))


def _field_order(name: str) -> int:
    try:
        return TABLE_COLUMNS.index(name)
    except ValueError:
        return len(TABLE_COLUMNS)


def set_cell(row: StudyRow, field: str, text: str) -> StudyRow:
    """Read ``text`` into ``field`` of ``row`` (pure).

    Blank text clears the field. Text that is not a valid value for the field leaves the
    field empty and is kept in ``unread`` so that the user sees it and the row check
    reports it.
    """
    from .intake.numbers import parse_number

    if field not in TABLE_COLUMNS:
        raise EditError(f"'{field}' is not a column of the study table.")
    raw = text
    s = text.strip()
    clean = _without_unread(row, field)
    if field == "study":
        return replace(row, study=s, unread=clean)
    if field in ("risk_of_bias", "subgroup"):
        value: Any = s or None
        if field == "risk_of_bias" and value is not None:
            for level in RISK_OF_BIAS_LEVELS:
                if s.casefold() == level:
                    value = level
        return replace(row, **{field: value}, unread=clean)
    if field == "reported":
        low = s.casefold()
        if not low or low in ("yes", "y", "true", "1", "reported"):
            return replace(row, reported=True, unread=clean)
        if low in ("no", "n", "false", "0", "not reported", "unreported", "missing"):
            return replace(row, reported=False, unread=clean)
        return replace(row, reported=True, unread=_with_unread(row, field, raw))
    if field == "exclude":
        low = s.casefold()
        if low in _TRUE_WORDS:
            return replace(row, exclude=True, unread=clean)
        if low in _FALSE_WORDS:
            return replace(row, exclude=False, unread=clean)
        # unreadable: kept as text and the study stays in (so that typing merges exactly)
        return replace(row, exclude=False, unread=_with_unread(row, field, raw))
    if not s:
        extra = {"p_bound": None} if field == "p" else {}
        return replace(row, **{field: None}, **extra, unread=clean)
    bound = None
    body = s
    if field == "p":
        low = s.casefold().replace(" ", "")
        if low.startswith("p"):
            low = low[1:].lstrip("=")
        for sign, stored in _P_BOUNDS:
            if low.startswith(sign):
                bound = stored
                low = low[len(sign) :]
                break
        body = low
    reading = parse_number(body)
    value = reading.value
    ok = reading.ok and value is not None and math.isfinite(value)
    if ok and field == "year":
        ok = float(value).is_integer() and 1000 <= value <= 2999
        if ok:
            value = int(value)
    if not ok:
        extra = {"p_bound": None} if field == "p" else {}
        return replace(row, **{field: None}, **extra, unread=_with_unread(row, field, raw))
    if field == "p":
        return replace(row, p=float(value), p_bound=bound, unread=clean)
    if field == "year":
        return replace(row, year=value, unread=clean)
    return replace(row, **{field: float(value)}, unread=clean)


def _claim_value(name: str, value: Any) -> Any:
    from .model.review import CLAIM_CONCLUSIONS

    if name == "test":
        return "" if value is None else str(value)
    if name == "conclusion":
        if value not in CLAIM_CONCLUSIONS:
            raise EditError(
                f"'{value}' is not one of {', '.join(c for c in CLAIM_CONCLUSIONS if c)}."
            )
        return value
    number = _optional_number(value)
    if name == "p" and number is not None and not 0.0 <= number <= 1.0:
        raise EditError("The review's P value must be between 0 and 1.")
    if name == "k" and number is not None:
        if number != int(number) or number < 0:
            raise EditError("The number of studies must be a whole number.")
        return int(number)
    return number


def _detail_value(field: str, value: Any) -> Any:
    if field == "measure" and value not in MEASURES:
        raise EditError(f"'{value}' is not one of {', '.join(MEASURES)}.")
    if field == "favours" and value not in ("lower", "higher"):
        raise EditError("favours must be 'lower' or 'higher'.")
    if field == "favours_source" and value not in FAVOURS_SOURCES:
        raise EditError(f"'{value}' is not a source of the direction of benefit.")
    if field == "ci_level":
        if not isinstance(value, (int, float)) or not 50.0 < float(value) < 100.0:
            raise EditError("The CI level must be a percentage between 50 and 100.")
        return float(value)
    return value


# --------------------------------------------------------------------------------------
# Applying


def _check_row(review: Review, row: int) -> None:
    if not 0 <= row < len(review.studies):
        raise EditError(f"There is no row {row + 1} (the table has {len(review.studies)}).")


def apply(edit: Edit, review: Review) -> tuple[Review, Edit]:
    """Apply ``edit`` to ``review``; return the new review and the edit that undoes it.

    Raises
    ------
    EditError
        When the edit does not fit the review (nothing is changed).
    """
    _check_text(edit)
    studies = review.studies
    if isinstance(edit, SetCell):
        _check_row(review, edit.row)
        old = studies[edit.row]
        new = set_cell(old, edit.field, edit.text)
        return _replace_row(review, edit.row, new), SetRow(edit.row, old)
    if isinstance(edit, SetRow):
        _check_row(review, edit.row)
        old = studies[edit.row]
        return _replace_row(review, edit.row, edit.value), SetRow(edit.row, old)
    if isinstance(edit, (AddRows, PasteBlock)):
        if not 0 <= edit.at <= len(studies):
            raise EditError(f"Rows cannot be inserted at position {edit.at + 1}.")
        rows = tuple(edit.rows)
        new_studies = studies[: edit.at] + rows + studies[edit.at :]
        inverse = DeleteRows(tuple(range(edit.at, edit.at + len(rows))))
        return review.with_studies(new_studies), inverse
    if isinstance(edit, DeleteRows):
        idx = sorted(set(edit.indices))
        if len(idx) != len(edit.indices):
            raise EditError("A row is listed twice in one deletion.")
        for i in idx:
            _check_row(review, i)
        gone = set(idx)
        kept = tuple(r for i, r in enumerate(studies) if i not in gone)
        return review.with_studies(kept), RestoreRows(tuple((i, studies[i]) for i in idx))
    if isinstance(edit, RestoreRows):
        items = sorted(edit.items, key=lambda it: it[0])
        out = list(studies)
        total = len(studies) + len(items)
        for i, row in items:
            if not 0 <= i < total or i > len(out):
                raise EditError(f"Row {i + 1} cannot be restored here.")
            out.insert(i, row)
        return review.with_studies(out), DeleteRows(tuple(i for i, _ in items))
    if isinstance(edit, MoveRow):
        _check_row(review, edit.src)
        _check_row(review, edit.dst)
        out = list(studies)
        row = out.pop(edit.src)
        out.insert(edit.dst, row)
        return review.with_studies(out), MoveRow(edit.dst, edit.src)
    if isinstance(edit, SetExclude):
        _check_row(review, edit.row)
        old = studies[edit.row]
        new = replace(old, exclude=bool(edit.exclude), unread=_without_unread(old, "exclude"))
        return _replace_row(review, edit.row, new), SetRow(edit.row, old)
    if isinstance(edit, SetDetail):
        d = review.details
        if edit.field.startswith("published."):
            name = edit.field.split(".", 1)[1]
            if name not in _PUBLISHED_FIELDS:
                raise EditError(f"'{edit.field}' is not a detail of the published result.")
            old_value = getattr(d.published, name)
            value = edit.value if name == "model" else _optional_number(edit.value)
            new_details = replace(d, published=replace(d.published, **{name: value}))
        elif edit.field.startswith("claim."):
            name = edit.field.split(".", 1)[1]
            if name not in _CLAIM_FIELDS:
                raise EditError(f"'{edit.field}' is not a detail of the review's own claim.")
            old_value = getattr(d.claim, name)
            value = _claim_value(name, edit.value)
            new_details = replace(d, claim=replace(d.claim, **{name: value}))
        elif edit.field == "published":
            if not isinstance(edit.value, PublishedResult):
                raise EditError("The published result must be a PublishedResult.")
            old_value = d.published
            new_details = replace(d, published=edit.value)
        elif edit.field in _DETAIL_FIELDS:
            old_value = getattr(d, edit.field)
            new_details = replace(d, **{edit.field: _detail_value(edit.field, edit.value)})
        else:
            raise EditError(f"'{edit.field}' is not a review detail.")
        return replace(review, details=new_details), SetDetail(edit.field, old_value)
    if isinstance(edit, SetFavours):
        if edit.favours not in ("lower", "higher"):
            raise EditError("favours must be 'lower' or 'higher'.")
        if edit.source not in FAVOURS_SOURCES:
            raise EditError(f"'{edit.source}' is not a source of the direction of benefit.")
        d = review.details
        new_details = replace(d, favours=edit.favours, favours_source=edit.source)
        return replace(review, details=new_details), SetFavours(d.favours, d.favours_source)
    if isinstance(edit, SetIntake):
        if not isinstance(edit.account, IntakeAccount):
            raise EditError("The intake account must be an IntakeAccount.")
        return replace(review, intake=edit.account), SetIntake(review.intake)
    if isinstance(edit, SetCauseNote):
        if edit.key not in CAUSES:
            raise EditError(f"'{edit.key}' is not one of the explanations {', '.join(CAUSES)}.")
        if edit.note.judgement not in JUDGEMENTS:
            raise EditError(f"'{edit.note.judgement}' is not one of {', '.join(JUDGEMENTS)}.")
        old_note = review.notes.cause(edit.key)
        return (
            review.with_notes(review.notes.with_cause(edit.key, edit.note)),
            SetCauseNote(edit.key, old_note),
        )
    if isinstance(edit, SetRatingOverride):
        if edit.rating and edit.rating not in DOMAIN_RATINGS:
            raise EditError(f"'{edit.rating}' is not one of {', '.join(DOMAIN_RATINGS)}.")
        n = review.notes
        inverse = SetRatingOverride(n.rating_override, n.rating_reason)
        new_notes = replace(n, rating_override=edit.rating, rating_reason=edit.reason)
        return review.with_notes(new_notes), inverse
    if isinstance(edit, SetGeneralNotes):
        n = review.notes
        return review.with_notes(replace(n, general=edit.text)), SetGeneralNotes(n.general)
    if isinstance(edit, ReplaceStudies):
        return review.with_studies(edit.studies), ReplaceStudies(studies)
    raise EditError(f"Unknown edit {type(edit).__name__}.")


_DETAIL_NAMES = {
    "title": "Title",
    "question": "Question",
    "outcome": "Outcome",
    "int_label": "Intervention label",
    "ctl_label": "Control label",
    "appraiser": "Appraiser",
    "source_note": "Source note",
    "published.model": "Published model",
}


def _refuse_text(where: str, text: Any, *, controls: bool = True) -> None:
    if isinstance(text, str):
        problem = text_problem(text, controls=controls)
        if problem:
            raise EditError(f"{where}: {problem}. Nothing was changed.")


def _check_text(edit: Edit) -> None:
    """Refuse text that could not be saved (see the module docstring)."""
    if isinstance(edit, SetCell):
        _refuse_text(f"Row {edit.row + 1}, {edit.field}", edit.text)
    elif isinstance(edit, SetDetail):
        _refuse_text(_DETAIL_NAMES.get(edit.field, edit.field), edit.value)
    elif isinstance(edit, SetCauseNote):
        _refuse_text(f"Notes on {edit.key}", edit.note.notes)
    elif isinstance(edit, SetRatingOverride):
        _refuse_text("Reason for your rating", edit.reason)
    elif isinstance(edit, SetGeneralNotes):
        _refuse_text("General notes", edit.text)
    elif isinstance(edit, (AddRows, PasteBlock)):
        # rows read from a paste or a file: only what cannot be saved at all is refused
        for i, row in enumerate(edit.rows):
            for f in ("study", "risk_of_bias", "subgroup"):
                _refuse_text(f"Row {edit.at + i + 1}, {f}", getattr(row, f), controls=False)
            for f, text in row.unread:
                _refuse_text(f"Row {edit.at + i + 1}, {f}", text, controls=False)


def _optional_number(value: Any) -> float | None:
    if value is None:
        return None
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise EditError("Expected a number.")
    if not math.isfinite(float(value)):
        raise EditError("Expected a finite number.")
    return float(value)


def _replace_row(review: Review, index: int, row: StudyRow) -> Review:
    studies = review.studies
    return review.with_studies(studies[:index] + (row,) + studies[index + 1 :])


# --------------------------------------------------------------------------------------
# Merging and describing


def merge(earlier: Edit, later: Edit) -> Edit | None:
    """The single edit equal to ``earlier`` then ``later``, when the user sees one step.

    Consecutive typing in one cell, one detail field, one cause's notes or the rating
    reason merge; anything else returns ``None``.
    """
    if isinstance(earlier, SetCell) and isinstance(later, SetCell):
        if (earlier.row, earlier.field) == (later.row, later.field):
            return later
    if isinstance(earlier, SetDetail) and isinstance(later, SetDetail):
        if earlier.field == later.field:
            return later
    if isinstance(earlier, SetCauseNote) and isinstance(later, SetCauseNote):
        if earlier.key == later.key:
            return later
    if isinstance(earlier, SetRatingOverride) and isinstance(later, SetRatingOverride):
        return later
    if isinstance(earlier, SetGeneralNotes) and isinstance(later, SetGeneralNotes):
        return later
    return None


#: merge ids for QUndoCommand.id(): edits of the same kind share an id; merge() decides.
MERGE_IDS: dict[type, int] = {
    SetCell: 1,
    SetDetail: 2,
    SetCauseNote: 3,
    SetRatingOverride: 4,
    SetGeneralNotes: 5,
}


@dataclass(frozen=True, slots=True)
class Change:
    """What an edit changes, so that views can bracket their updates.

    ``kind`` is one of "row" (rows changed in place), "insert" (``rows`` are the new
    indices), "remove" (``rows`` are the old indices), "move" (``rows`` = (src, dst)),
    "details", "notes", "studies" (the whole table), "reset" (a new review), "settings".
    """

    kind: str
    rows: tuple[int, ...] = ()
    field: str = ""


def change_of(edit: Edit) -> Change:
    """Describe what ``edit`` will change (computed before applying it)."""
    if isinstance(edit, SetCell):
        return Change("row", (edit.row,), edit.field)
    if isinstance(edit, (SetRow, SetExclude)):
        return Change("row", (edit.row,))
    if isinstance(edit, (AddRows, PasteBlock)):
        return Change("insert", tuple(range(edit.at, edit.at + len(edit.rows))))
    if isinstance(edit, DeleteRows):
        return Change("remove", tuple(sorted(edit.indices)))
    if isinstance(edit, RestoreRows):
        return Change("insert", tuple(sorted(i for i, _ in edit.items)))
    if isinstance(edit, MoveRow):
        return Change("move", (edit.src, edit.dst))
    if isinstance(edit, SetDetail):
        return Change("details", (), edit.field)
    if isinstance(edit, SetIntake):
        return Change("details", (), "intake")
    if isinstance(edit, SetFavours):
        return Change("details", (), "favours")
    if isinstance(edit, ReplaceStudies):
        return Change("studies")
    return Change("notes")


def describe(edit: Edit) -> str:
    """A short label for the Undo/Redo menu ("Undo type in Study 3, estimate")."""
    from . import workbook_edits as wbe

    if isinstance(edit, wbe.WORKBOOK_EDITS):
        return wbe.describe(edit)
    if isinstance(edit, SetCell):
        return f"edit row {edit.row + 1}, {edit.field.replace('_', ' ')}"
    if isinstance(edit, SetRow):
        return f"change row {edit.row + 1}"
    if isinstance(edit, PasteBlock):
        n = len(edit.rows)
        return f"paste {n} row{'s' if n != 1 else ''}"
    if isinstance(edit, AddRows):
        n = len(edit.rows)
        return f"add {n} row{'s' if n != 1 else ''}"
    if isinstance(edit, DeleteRows):
        n = len(edit.indices)
        return f"delete {n} row{'s' if n != 1 else ''}"
    if isinstance(edit, RestoreRows):
        return "restore rows"
    if isinstance(edit, MoveRow):
        return f"move row {edit.src + 1}"
    if isinstance(edit, SetExclude):
        return f"{'exclude' if edit.exclude else 'include'} row {edit.row + 1}"
    if isinstance(edit, SetIntake):
        return "record what was read"
    if isinstance(edit, SetFavours):
        return "change favours"
    if isinstance(edit, SetDetail):
        name = edit.field.replace("published.", "published ").replace("claim.", "review's ")
        return f"change {name.replace('_', ' ')}"
    if isinstance(edit, SetCauseNote):
        return f"notes on {edit.key}"
    if isinstance(edit, SetRatingOverride):
        return "rating override"
    if isinstance(edit, SetGeneralNotes):
        return "general notes"
    if isinstance(edit, ReplaceStudies):
        return "replace the study table"
    return "edit"
