"""A workbook: one review's outcomes, in order, each appraised on its own.

A guideline panel rates several outcomes of one review (mortality, a symptom score,
adverse events...). Each outcome is a whole :class:`~lopside.model.review.Review` of its
own (study table, measure, direction of benefit, CI level, published result, notes and
accepted rating) with its saved analysis settings; what the outcomes share (the review's
title, question, appraiser and source note) is written in each of them, so that an
outcome taken out of the workbook is complete, and :meth:`Workbook.with_shared` changes
it in all of them at once.

Design invariants
-----------------
* Immutable, like the review: every change makes a new workbook.
* An outcome's name is ``details.outcome``; when that is empty the name shown is the
  review title (a workbook of one outcome, as every file before workbooks) or
  "Outcome N". :func:`outcome_name` is the one rule.
* Names are compared without case or surrounding spaces. The window refuses a second
  outcome of the same name; a file that holds two (edited by hand) still opens, and
  :meth:`Workbook.find` then says which name is ambiguous instead of guessing.
* No Qt, no numpy.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from typing import Any

from .review import Review, StudyRow

#: Review-level details every outcome carries (edited once for the whole workbook).
SHARED_FIELDS: tuple[str, ...] = ("title", "question", "appraiser", "source_note")

#: More outcomes than any review reports; a bound for files edited by hand.
MAX_OUTCOMES = 200

#: The study columns that describe the study rather than one outcome's result: what
#: :meth:`Workbook.copy_studies` carries from one outcome to another.
STUDY_IDENTITY: tuple[str, ...] = ("study", "year", "risk_of_bias", "subgroup")


class WorkbookError(ValueError):
    """A name or place that does not fit the workbook; the message says what to do."""


@dataclass(frozen=True, slots=True)
class Outcome:
    """One outcome: its review and its saved analysis settings (the project-file form)."""

    review: Review = field(default_factory=Review)
    settings: dict[str, Any] = field(default_factory=dict)


def outcome_name(review: Review, index: int, count: int) -> str:
    """The name shown for the outcome at ``index`` of a workbook of ``count`` outcomes."""
    name = review.details.outcome.strip()
    if name:
        return name
    if count == 1 and review.details.title.strip():
        return review.details.title.strip()
    return f"Outcome {index + 1}"


def _key(name: str) -> str:
    return " ".join(name.split()).casefold()


@dataclass(frozen=True, slots=True)
class Workbook:
    """The outcomes of one review, in the order the panel reads them."""

    outcomes: tuple[Outcome, ...] = (Outcome(),)

    def __post_init__(self) -> None:
        if not self.outcomes:
            raise WorkbookError("A workbook holds at least one outcome.")

    @classmethod
    def of(cls, review: Review, settings: dict[str, Any] | None = None) -> Workbook:
        """A workbook of one outcome."""
        return cls((Outcome(review, dict(settings or {})),))

    def __len__(self) -> int:
        return len(self.outcomes)

    @property
    def names(self) -> tuple[str, ...]:
        n = len(self.outcomes)
        return tuple(outcome_name(o.review, i, n) for i, o in enumerate(self.outcomes))

    @property
    def title(self) -> str:
        return self.outcomes[0].review.details.title

    def index_of(self, name: str) -> int | None:
        """The index of the outcome called ``name`` (no case, no spaces), or None."""
        hits = [i for i, n in enumerate(self.names) if _key(n) == _key(name)]
        return hits[0] if len(hits) == 1 else None

    def find(self, name: str, where: str = "this project") -> int:
        """The index of the outcome called ``name``.

        Raises
        ------
        WorkbookError
            Naming the outcomes there are, when none or several are called ``name``.
        """
        hits = [i for i, n in enumerate(self.names) if _key(n) == _key(name)]
        if len(hits) == 1:
            return hits[0]
        listed = ", ".join(f"'{n}'" for n in self.names)
        if hits:
            raise WorkbookError(
                f"{where}: {len(hits)} outcomes are called '{name}'; rename one in the "
                f"window (its outcomes: {listed})."
            )
        near = [n for n in self.names if _key(name) in _key(n)]
        hint = f" Did you mean '{near[0]}'?" if len(near) == 1 else ""
        raise WorkbookError(
            f"{where}: has no outcome called '{name}' (its outcomes: {listed}).{hint}"
        )

    def free_name(self, base: str) -> str:
        """``base``, or ``base (2)``, ``base (3)``... : the first name not taken."""
        taken = {_key(n) for n in self.names}
        if _key(base) not in taken:
            return base
        i = 2
        while _key(f"{base} ({i})") in taken:
            i += 1
        return f"{base} ({i})"

    # ------------------------------------------------------------- changes (new values)

    def _check_index(self, index: int, *, end: bool = False) -> None:
        top = len(self.outcomes) + (1 if end else 0)
        if not 0 <= index < top:
            raise WorkbookError(f"There is no outcome {index + 1} (the workbook has {top}).")

    def with_outcome(self, index: int, outcome: Outcome) -> Workbook:
        self._check_index(index)
        items = list(self.outcomes)
        items[index] = outcome
        return Workbook(tuple(items))

    def inserted(self, index: int, outcome: Outcome) -> Workbook:
        self._check_index(index, end=True)
        if len(self.outcomes) >= MAX_OUTCOMES:
            raise WorkbookError(f"A workbook holds at most {MAX_OUTCOMES} outcomes.")
        items = list(self.outcomes)
        items.insert(index, outcome)
        return Workbook(tuple(items))

    def removed(self, index: int) -> Workbook:
        self._check_index(index)
        if len(self.outcomes) == 1:
            raise WorkbookError("The last outcome cannot be deleted; a review needs one.")
        items = list(self.outcomes)
        del items[index]
        return Workbook(tuple(items))

    def moved(self, index: int, to: int) -> Workbook:
        self._check_index(index)
        self._check_index(to)
        items = list(self.outcomes)
        items.insert(to, items.pop(index))
        return Workbook(tuple(items))

    def renamed(self, index: int, name: str) -> Workbook:
        """The outcome at ``index`` called ``name`` (refused when empty or taken)."""
        self._check_index(index)
        clean = " ".join(name.split())
        if not clean:
            raise WorkbookError("An outcome needs a name.")
        other = self.index_of(clean)
        if other is not None and other != index:
            raise WorkbookError(f"Another outcome is already called '{clean}'.")
        out = self.outcomes[index]
        return self.with_outcome(index, replace(out, review=out.review.with_details(outcome=clean)))

    def new_outcome(self, name: str = "") -> Outcome:
        """An empty outcome carrying this review's shared details, under a free name."""
        first = self.outcomes[0].review.details
        shared = {f: getattr(first, f) for f in SHARED_FIELDS}
        review = Review().with_details(**shared, outcome=self.free_name(name or "New outcome"))
        return Outcome(review, {})

    def duplicated(self, index: int) -> Workbook:
        """A copy of the outcome at ``index`` placed after it, named "... (copy)"."""
        self._check_index(index)
        out = self.outcomes[index]
        name = self.free_name(f"{self.names[index]} (copy)")
        copy = replace(out, review=out.review.with_details(outcome=name))
        return self.inserted(index + 1, copy)

    def with_shared(self, **changes: Any) -> Workbook:
        """Change review-level details (:data:`SHARED_FIELDS`) in every outcome."""
        bad = set(changes) - set(SHARED_FIELDS)
        if bad:
            raise WorkbookError(f"Not a review-level detail: {', '.join(sorted(bad))}.")
        return Workbook(
            tuple(replace(o, review=o.review.with_details(**changes)) for o in self.outcomes)
        )

    def copy_studies(self, source: int, target: int, rows: tuple[int, ...] = ()) -> Workbook:
        """Append the studies of outcome ``source`` (``rows``, or all) to ``target``.

        Only what describes the study is copied (:data:`STUDY_IDENTITY`: name, year, risk
        of bias, subgroup); the numbers belong to the other outcome and are typed anew.
        """
        self._check_index(source)
        self._check_index(target)
        studies = self.outcomes[source].review.studies
        picked = [studies[i] for i in rows] if rows else list(studies)
        new = tuple(StudyRow(**{f: getattr(s, f) for f in STUDY_IDENTITY}) for s in picked)
        out = self.outcomes[target]
        review = out.review.with_studies(out.review.studies + new)
        return self.with_outcome(target, replace(out, review=review))
