"""The application object shared by the window and scripts: one review being appraised.

Design invariants
-----------------
* A :class:`Session` owns the review, the analysis settings, the file path, the dirty flag
  and the edit history. It imports no Qt; the window wraps it and adds only UI hooks.
* Every change to the review goes through :meth:`Session.do` (or undo/redo), which goes
  through :func:`lopside.edits.apply`. Listeners hear "about to change" before and
  "changed" after, with a :class:`lopside.edits.Change` saying what changed.
* :meth:`Session.analyse` is the only way the window gets numbers. It is cached on the
  identity of the study table, the review details and the settings (all immutable), so
  an edit to the appraiser's notes does not re-run the statistics and views can tell
  from identities what needs redrawing.
* The dirty flag compares a state id: each distinct state of the review gets a new id;
  undo returns to the id it had, so undoing back to the saved state is clean again.
* A session holds a workbook: one or more outcomes (:mod:`lopside.model.workbook`), of
  which one is current. ``review`` and ``settings`` are the current outcome's; every view
  works on it. Workbook edits (:mod:`lopside.workbook_edits`: add, delete, move, rename
  outcomes, review-level details) share the one history with review edits; each step
  remembers the outcome it changed, and undoing it selects that outcome first, so an undo
  is never invisible. Choosing another outcome is not an edit (no undo step, not dirty).
"""

from __future__ import annotations

import itertools
from collections.abc import Callable
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any

from . import edits as ed
from . import workbook_edits as wbe
from .model.review import Review, ReviewDetails
from .model.workbook import Outcome, Workbook, outcome_name
from .settings import AnalysisSettings

Listener = Callable[[ed.Change], None]

_ids = itertools.count(1)
_slot_ids = itertools.count(1)


@dataclass(slots=True)
class _Step:
    """One entry of the history: the edit, its inverse, and the state ids around it."""

    edit: ed.Edit
    inverse: ed.Edit
    before: int
    after: int
    #: the id of the outcome a review edit changed (None for a workbook edit)
    slot: int | None = None


class Session:
    """One review being appraised, with undo, a dirty flag and a cached analysis.

    Parameters
    ----------
    review : Review, optional
        Starts with an empty review when omitted.
    settings : AnalysisSettings, optional
    path : str or Path, optional
        The project file the review was read from (None for a new or imported review).
    """

    def __init__(
        self,
        review: Review | None = None,
        settings: AnalysisSettings | None = None,
        path: str | Path | None = None,
    ) -> None:
        self._review = review or Review()
        self._settings = settings or AnalysisSettings()
        #: every outcome; the current one's review and settings live in _review/_settings
        #: and are written back by _sync()
        self._slots: list[wbe.Slot] = [wbe.Slot(next(_slot_ids), self._review, self._settings)]
        self._at = 0
        self._path: Path | None = Path(path) if path else None
        self._undo: list[_Step] = []
        self._redo: list[_Step] = []
        self._state = next(_ids)
        self._saved_state = self._state
        self._settings_dirty = False
        self._merge_barrier = True
        self._about: list[Listener] = []
        self._changed: list[Listener] = []
        self._cache: list[tuple[tuple, Any]] = []
        self._power: tuple[tuple, Any] | None = None
        #: the file an imported review came from (CSV, XLSX, .txt); not saved over
        self.imported_from: Path | None = None
        #: why the file on disk must not be saved over ("" when it may): a sample review,
        #: a file changed outside Lopside. Save then needs a path; saving to one clears it.
        self.read_only = ""

    # ---------------------------------------------------------------- state

    @property
    def review(self) -> Review:
        return self._review

    @property
    def settings(self) -> AnalysisSettings:
        return self._settings

    @property
    def path(self) -> Path | None:
        return self._path

    @property
    def dirty(self) -> bool:
        """True when there are changes since the last save (or since opening)."""
        return self._state != self._saved_state or self._settings_dirty

    @property
    def state_id(self) -> int:
        """Changes whenever the review changes (autosave uses it to see new work)."""
        return self._state

    # ---------------------------------------------------------------- outcomes

    def _sync(self) -> None:
        self._slots[self._at] = wbe.Slot(self._slots[self._at].id, self._review, self._settings)

    @property
    def workbook(self) -> Workbook:
        """Every outcome, with its review and settings (what Save writes)."""
        self._sync()
        return wbe.as_workbook(tuple(self._slots))

    @property
    def outcome_index(self) -> int:
        return self._at

    @property
    def outcome_names(self) -> tuple[str, ...]:
        """The names shown (read on every change by the chooser: no workbook is built)."""
        self._sync()
        n = len(self._slots)
        return tuple(outcome_name(s.review, i, n) for i, s in enumerate(self._slots))

    def outcome_reviews(self) -> tuple[tuple[Review, AnalysisSettings], ...]:
        """(review, settings) of every outcome, in order (the panel summary reads them)."""
        self._sync()
        return tuple((s.review, s.settings) for s in self._slots)

    def select_outcome(self, index: int) -> None:
        """Make outcome ``index`` the current one (not an edit: no undo step, not dirty)."""
        if not 0 <= index < len(self._slots):
            raise IndexError(f"There is no outcome {index + 1}.")
        if index == self._at:
            return
        change = ed.Change("reset")
        self._emit(self._about, change)
        self._sync()
        self._at = index
        self._review = self._slots[index].review
        self._settings = self._slots[index].settings
        self._merge_barrier = True
        self._emit(self._changed, change)

    def new_outcome_slot(self, name: str = "", review: Review | None = None) -> wbe.Slot:
        """A slot for :class:`lopside.workbook_edits.AddOutcome`: empty (carrying the shared
        details) or ``review`` under a free name."""
        book = self.workbook
        if review is None:
            review = book.new_outcome(name).review
        else:
            review = review.with_details(outcome=book.free_name(name or "New outcome"))
        return wbe.Slot(next(_slot_ids), review, AnalysisSettings())

    def duplicate_slot(self, index: int) -> wbe.Slot:
        """A copy of outcome ``index`` (its own id) named "... (copy)"."""
        book = self.workbook
        copy = book.duplicated(index).outcomes[index + 1]
        return wbe.Slot(next(_slot_ids), copy.review, self._slots[index].settings)

    def display_name(self) -> str:
        """The file name, or the review title, or "Untitled review"."""
        if self._path is not None:
            return self._path.name
        if self.imported_from is not None:
            return f"{self.imported_from.name} (imported)"
        return self._review.details.title or "Untitled review"

    # ---------------------------------------------------------------- listeners

    def add_listener(
        self, *, about_to_change: Listener | None = None, changed: Listener | None = None
    ) -> None:
        """Be told before and after each change (e.g. a Qt model brackets row inserts)."""
        if about_to_change is not None:
            self._about.append(about_to_change)
        if changed is not None:
            self._changed.append(changed)

    def remove_listener(self, fn: Listener) -> None:
        for lst in (self._about, self._changed):
            while fn in lst:
                lst.remove(fn)

    def _emit(self, which: list[Listener], change: ed.Change) -> None:
        for fn in list(which):
            fn(change)

    # ---------------------------------------------------------------- edits

    def _apply(self, edit: ed.Edit, slot: int | None = None) -> ed.Edit:
        if isinstance(edit, wbe.WORKBOOK_EDITS):
            return self._apply_workbook(edit)
        if slot is not None and slot != self._slots[self._at].id:
            # the step was made on another outcome: show it first, then change it
            self.select_outcome(next(i for i, s in enumerate(self._slots) if s.id == slot))
        new_review, inverse = ed.apply(edit, self._review)  # raises before any change
        change = ed.change_of(edit)
        self._emit(self._about, change)
        self._review = new_review
        self._emit(self._changed, change)
        return inverse

    def _apply_workbook(self, edit) -> ed.Edit:
        self._sync()
        current = self._slots[self._at].id
        slots, inverse = wbe.apply(edit, tuple(self._slots))  # raises before any change
        ids = [s.id for s in slots]
        if isinstance(edit, wbe.AddOutcome):
            at = edit.index  # a new outcome is shown at once
        elif current in ids:
            at = ids.index(current)
        else:  # the current outcome was deleted: its neighbour
            at = min(self._at, len(slots) - 1)
        if slots[at].id != current:
            change = ed.Change("reset")
        elif slots[at].review.details != self._review.details:
            change = ed.Change("details", (), getattr(edit, "field", "outcome"))
        else:
            change = ed.Change("outcomes")
        self._emit(self._about, change)
        self._slots = list(slots)
        self._at = at
        self._review = slots[at].review
        self._settings = slots[at].settings
        if change.kind == "reset":
            self._merge_barrier = True
        self._emit(self._changed, change)
        return inverse

    def do(self, edit: ed.Edit, *, merge: bool = True) -> bool:
        """Apply ``edit`` and record it; returns True when it merged into the last step.

        Raises :class:`lopside.edits.EditError` (nothing changes) when it does not fit.
        """
        if isinstance(edit, ed.SetDetail) and wbe.is_shared(edit.field) and len(self._slots) > 1:
            # a review-level detail: checked as the detail it is, set in every outcome
            checked, _ = ed.apply(edit, self._review)
            edit = wbe.SetShared(edit.field, getattr(checked.details, edit.field))
        elif isinstance(edit, ed.SetDetail) and edit.field == "outcome" and len(self._slots) > 1:
            # the outcome's name: unique in the workbook (refused when taken or empty)
            checked, _ = ed.apply(edit, self._review)
            edit = wbe.RenameOutcome(self._at, checked.details.outcome)
        slot = None if isinstance(edit, wbe.WORKBOOK_EDITS) else self._slots[self._at].id
        last = self._undo[-1] if self._undo else None
        merged_edit = None
        if merge and last is not None and not self._merge_barrier and last.slot == slot:
            if slot is not None:
                merged_edit = ed.merge(last.edit, edit)
        inverse = self._apply(edit)
        self._redo.clear()
        new_state = next(_ids)
        if merged_edit is not None and last is not None:
            last.edit = merged_edit
            last.after = new_state
            self._state = new_state
            return True
        self._undo.append(_Step(edit, inverse, self._state, new_state, slot))
        self._state = new_state
        self._merge_barrier = False
        return False

    def undo(self) -> ed.Edit | None:
        """Undo the last step; returns its edit (None when there is nothing to undo)."""
        if not self._undo:
            return None
        step = self._undo.pop()
        self._apply(step.inverse, step.slot)
        self._redo.append(step)
        self._state = step.before
        self._merge_barrier = True
        return step.edit

    def redo(self) -> ed.Edit | None:
        """Redo the last undone step; returns its edit (None when there is none)."""
        if not self._redo:
            return None
        step = self._redo.pop()
        step.inverse = self._apply(step.edit, step.slot)
        self._undo.append(step)
        self._state = step.after
        self._merge_barrier = True
        return step.edit

    @property
    def can_undo(self) -> bool:
        return bool(self._undo)

    @property
    def can_redo(self) -> bool:
        return bool(self._redo)

    def undo_text(self) -> str:
        return ed.describe(self._undo[-1].edit) if self._undo else ""

    def redo_text(self) -> str:
        return ed.describe(self._redo[-1].edit) if self._redo else ""

    def history(self) -> tuple[ed.Edit, ...]:
        """The edits that can be undone, oldest first."""
        return tuple(s.edit for s in self._undo)

    def break_merge(self) -> None:
        """The next edit starts a new undo step (e.g. the user left the cell)."""
        self._merge_barrier = True

    # ---------------------------------------------------------------- whole-review changes

    def reset(
        self,
        review: Review,
        settings: AnalysisSettings | None = None,
        path: str | Path | None = None,
        *,
        dirty: bool = False,
        imported_from: str | Path | None = None,
        read_only: str = "",
        workbook: Workbook | None = None,
    ) -> None:
        """Start over on another review (New, Open, recovery). Clears the history.

        With ``workbook``, every outcome of it is held and the first is current
        (``review`` and ``settings`` are then ignored).
        """
        change = ed.Change("reset")
        self._emit(self._about, change)
        if workbook is None:
            workbook = Workbook((Outcome(review, (settings or AnalysisSettings()).to_dict()),))
            given = [settings or AnalysisSettings()]
        else:
            given = [AnalysisSettings.from_dict(o.settings) for o in workbook.outcomes]
        self._slots = [
            wbe.Slot(next(_slot_ids), o.review, s) for o, s in zip(workbook.outcomes, given)
        ]
        self._at = 0
        self._review = self._slots[0].review
        self._settings = self._slots[0].settings
        self._path = Path(path) if path else None
        self.imported_from = Path(imported_from) if imported_from else None
        self.read_only = read_only
        self._undo.clear()
        self._redo.clear()
        self._state = next(_ids)
        self._saved_state = -1 if dirty else self._state
        self._settings_dirty = False
        self._merge_barrier = True
        self._cache.clear()
        self._power = None
        self._emit(self._changed, change)

    def new(self) -> None:
        """An empty review."""
        self.reset(Review(details=ReviewDetails()))

    def open(
        self,
        path: str | Path,
        measure: str | None = None,
        decimal: str | None = None,
        *,
        accept_changed: bool = False,
        read_only: str = "",
    ) -> None:
        """Open a project file, or import a CSV/XLSX study table or a .txt of pasted rows.

        ``decimal`` ("point"/"comma") settles numbers the file does not. ``read_only`` (a
        reason) keeps Save from writing over the file: a sample review, a file changed
        outside Lopside (opened with ``accept_changed``).

        Raises the intake/project-file errors (ValueErrors with a message for the user),
        among them :class:`lopside.cli_common.DecimalUndecided` when the caller must ask
        and ``project_file.ChangedOutside`` unless ``accept_changed``.
        """
        from .cli_common import load_review_file
        from .model.project_file import SUFFIX, load_workbook

        p = Path(path)
        if p.suffix.lower() in (SUFFIX, ".json") and p.is_file() and measure is None:
            # a project: every outcome of it
            book = load_workbook(p, accept_changed=accept_changed)
            self.reset(book.outcomes[0].review, None, p, read_only=read_only, workbook=book)
            return
        review, saved = load_review_file(p, measure, decimal=decimal, accept_changed=accept_changed)
        if decimal and review.intake.decimal_how == "option":
            # in the window the user was asked: the account says so
            review = replace(review, intake=replace(review.intake, decimal_how="asked"))
        settings = AnalysisSettings.from_dict(saved)
        if p.suffix.lower() in (SUFFIX, ".json"):
            self.reset(review, settings, p, read_only=read_only)
        else:
            self.reset(review, settings, None, dirty=True, imported_from=p)

    def save(self, path: str | Path | None = None) -> Path:
        """Save atomically to ``path`` (or the current path); the session becomes clean."""
        from .model.project_file import SUFFIX, save_workbook

        if not path and self.read_only:
            raise ValueError(f"This review is {self.read_only}.")
        target = Path(path) if path else self._path
        if target is None:
            raise ValueError("No file name yet: choose where to save the review.")
        if not target.suffix:
            target = target.with_suffix(SUFFIX)
        save_workbook(self.workbook, target)
        self._path = target
        self.imported_from = None
        self.read_only = ""
        self.mark_saved()
        return target

    def mark_saved(self) -> None:
        self._saved_state = self._state
        self._settings_dirty = False
        self._merge_barrier = True

    def set_settings(self, settings: AnalysisSettings) -> None:
        """Change the analysis settings (saved with the project; not an undo step)."""
        if settings == self._settings:
            return
        change = ed.Change("settings")
        self._emit(self._about, change)
        self._settings = settings
        self._settings_dirty = True
        self._emit(self._changed, change)

    def update_settings(self, **changes: Any) -> None:
        self.set_settings(replace(self._settings, **changes))

    # ---------------------------------------------------------------- analysis

    def analysis_key(self) -> tuple:
        """The immutable inputs of the analysis (compared by identity)."""
        return (self._review.studies, self._review.details, self._settings)

    def _lookup(self, key: tuple):
        # identity first (the usual case); equal values next, so that undo, which rebuilds
        # the table, finds the analysis of the state it returns to
        for k, result in self._cache:
            if all(a is b for a, b in zip(k, key)):
                return result
        for i, (k, result) in enumerate(self._cache):
            if all(a == b for a, b in zip(k, key)):
                self._cache[i] = (key, result)
                return result
        return None

    def analyse(self, *, allow_core: bool = False):
        """The analysis of the current review (cached; see the module docstring).

        The returned result always carries the current review (with its notes), and the
        power simulation when one was run for exactly these inputs. With ``allow_core``,
        a core-stage result of the current state (:meth:`analyse_core`) is returned while
        the full one is not ready (``result.stage`` says which).
        """
        from .analysis import analyse

        key = self.analysis_key()
        result = self._lookup(key)
        core = getattr(self, "_core", None)
        if result is None and allow_core and core is not None and _same_key(core[0], key):
            result = core[1]
        if result is None:
            result = analyse(self._review, self._settings)
            self._cache.insert(0, (key, result))
            del self._cache[8:]  # a few states back, so undo is instant
        if self._power is not None and _same_key(self._power[0], key):
            if result.power is not self._power[1]:
                result = replace(result, power=self._power[1])
        if result.review is not self._review:
            result = replace(result, review=self._review)
        return result

    def assess(self):
        """The assessment (analysis and its reading) of the current review.

        The analysis comes from :meth:`analyse` (cached); the reading is computed once per
        analysis by :func:`lopside.assessment.assessment_of`. Window, sheet and scripts read
        this one object.
        """
        from .assessment import assessment_of

        return assessment_of(self.analyse())

    def analyse_core(self):
        """The core stage of the current state (effects, pooling, tests, trim and fill),
        kept until the full analysis of that state arrives."""
        from .analysis import analyse

        key = self.analysis_key()
        core = getattr(self, "_core", None)
        if core is None or not _same_key(core[0], key):
            core = (key, analyse(self._review, self._settings, stage="core"))
            self._core = core
        return core[1]

    def has_analysis(self) -> bool:
        """True when :meth:`analyse` would return at once (the current state is cached)."""
        return self._lookup(self.analysis_key()) is not None

    def remember_analysis(self, key: tuple, result: Any) -> bool:
        """Keep an analysis computed elsewhere (a worker) for ``key``.

        ``result`` must be ``analyse(review, settings)`` for the review and settings
        that ``key`` was taken from. Returns True when ``key`` is the current state.
        """
        if self._lookup(key) is None:
            self._cache.insert(0, (key, result))
            del self._cache[8:]
        return _same_key(key, self.analysis_key())

    def store_power(self, key: tuple, power: Any) -> bool:
        """Keep a power result computed for ``key``; False (dropped) if the review moved on."""
        if not _same_key(key, self.analysis_key()):
            return False
        self._power = (key, power)
        return True

    def power_is_current(self) -> bool:
        return self._power is not None and _same_key(self._power[0], self.analysis_key())

    def run_power(self, progress=None):
        """Run the power simulation synchronously (scripts; the window uses a worker).

        Returns the power result (or NotComputable) and keeps it for this review.
        """
        from .analysis import analyse

        key = self.analysis_key()
        result = analyse(self._review, self._settings, with_power=True, power_progress=progress)
        self.store_power(key, result.power)
        return result.power

    def export_sheet(self, path: str | Path, *, include_forest: bool = False) -> Path:
        """Write the appraisal sheet (PDF) for the current review and analysis."""
        from .sheet import write_sheet

        out = Path(path)
        write_sheet(self.assess(), out, include_forest=include_forest)
        return out


def _same_key(a: tuple, b: tuple) -> bool:
    return all(x is y or x == y for x, y in zip(a, b))
