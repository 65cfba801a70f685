"""Edits of the workbook itself: add, delete, move and rename outcomes; shared details.

The counterpart of :mod:`lopside.edits` one floor up. Each edit is a frozen value;
:func:`apply` returns the new outcomes and the edit that undoes it, so the session keeps
one history for both kinds (an edit to a study row of one outcome and the deletion of
another undo in the order they were made).

The session holds its outcomes as :class:`Slot` values: an outcome with a stable id, so
that an undo step recorded on an outcome finds it again after outcomes were moved,
deleted and restored.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Any

from .model.review import Review
from .model.workbook import SHARED_FIELDS, Outcome, Workbook, WorkbookError
from .settings import AnalysisSettings


@dataclass(frozen=True, slots=True)
class Slot:
    """One outcome in the session: a stable id, its review and its settings."""

    id: int
    review: Review
    settings: AnalysisSettings


@dataclass(frozen=True, slots=True)
class AddOutcome:
    index: int
    slot: Slot


@dataclass(frozen=True, slots=True)
class DeleteOutcome:
    index: int


@dataclass(frozen=True, slots=True)
class MoveOutcome:
    src: int
    dst: int


@dataclass(frozen=True, slots=True)
class RenameOutcome:
    index: int
    name: str


@dataclass(frozen=True, slots=True)
class SetShared:
    """A review-level detail (title, question, appraiser, source note), in every outcome."""

    field: str
    value: str


@dataclass(frozen=True, slots=True)
class RestoreShared:
    """The inverse of :class:`SetShared`: each outcome's own earlier value, by slot id."""

    field: str
    values: tuple[tuple[int, str], ...]


WorkbookEdit = AddOutcome | DeleteOutcome | MoveOutcome | RenameOutcome | SetShared | RestoreShared
WORKBOOK_EDITS = (AddOutcome, DeleteOutcome, MoveOutcome, RenameOutcome, SetShared, RestoreShared)


def as_workbook(slots: tuple[Slot, ...]) -> Workbook:
    return Workbook(tuple(Outcome(s.review, s.settings.to_dict()) for s in slots))


def apply(edit: WorkbookEdit, slots: tuple[Slot, ...]) -> tuple[tuple[Slot, ...], WorkbookEdit]:
    """The outcomes after ``edit``, and the edit that undoes it.

    Raises :class:`~lopside.model.workbook.WorkbookError` (nothing changes) when the edit
    does not fit: a taken or empty name, the last outcome, a place that does not exist.
    """
    book = as_workbook(slots)
    items = list(slots)
    if isinstance(edit, AddOutcome):
        book.inserted(edit.index, Outcome(edit.slot.review))  # checks the place and the bound
        items.insert(edit.index, edit.slot)
        return tuple(items), DeleteOutcome(edit.index)
    if isinstance(edit, DeleteOutcome):
        book.removed(edit.index)
        gone = items.pop(edit.index)
        return tuple(items), AddOutcome(edit.index, gone)
    if isinstance(edit, MoveOutcome):
        book.moved(edit.src, edit.dst)
        items.insert(edit.dst, items.pop(edit.src))
        return tuple(items), MoveOutcome(edit.dst, edit.src)
    if isinstance(edit, RenameOutcome):
        old = slots[edit.index].review.details.outcome if 0 <= edit.index < len(slots) else ""
        renamed = book.renamed(edit.index, edit.name).outcomes[edit.index].review
        items[edit.index] = replace(items[edit.index], review=renamed)
        return tuple(items), RenameOutcome(edit.index, old or "")
    if isinstance(edit, SetShared):
        book.with_shared(**{edit.field: edit.value})  # checks the field
        before = tuple((s.id, getattr(s.review.details, edit.field)) for s in slots)
        items = [_with_detail(s, edit.field, edit.value) for s in slots]
        return tuple(items), RestoreShared(edit.field, before)
    if isinstance(edit, RestoreShared):
        values = dict(edit.values)
        items = [_with_detail(s, edit.field, values.get(s.id, "")) for s in slots]
        value = getattr(slots[0].review.details, edit.field)
        return tuple(items), SetShared(edit.field, value)
    raise WorkbookError(f"Not a workbook edit: {type(edit).__name__}.")


def _with_detail(slot: Slot, field: str, value: Any) -> Slot:
    return replace(slot, review=slot.review.with_details(**{field: value}))


def describe(edit: WorkbookEdit) -> str:
    """A short label for the Undo/Redo menu."""
    if isinstance(edit, AddOutcome):
        return f"add the outcome '{edit.slot.review.details.outcome}'"
    if isinstance(edit, DeleteOutcome):
        return f"delete outcome {edit.index + 1}"
    if isinstance(edit, MoveOutcome):
        return f"move outcome {edit.src + 1} to place {edit.dst + 1}"
    if isinstance(edit, RenameOutcome):
        return f"rename outcome {edit.index + 1}"
    return f"change the review's {edit.field.replace('_', ' ')}"


def is_shared(field: str) -> bool:
    return field in SHARED_FIELDS
