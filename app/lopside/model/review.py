"""The review: details, an ordered table of study rows, and the appraiser's notes.

Design invariants
-----------------
* Everything here is immutable (frozen dataclasses, tuples). An edit makes a new value.
* A :class:`StudyRow` holds what the user entered, on the natural scale as printed in
  the paper (an odds ratio of 0.8, not its log). Derived values (``y``, ``se``) are never
  stored here: :mod:`lopside.stats.effects` computes them from the row and the measure.
* Text the user typed that could not be read as a number is kept in ``StudyRow.unread``
  (field name -> text) so nothing typed is ever lost; the row check reports it.
* No Qt, no numpy: this module is importable from a plain Python prompt.
"""

from __future__ import annotations

import operator
from dataclasses import dataclass, field, fields, replace
from typing import Any

#: Effect measures the tool understands.
MEASURES: tuple[str, ...] = ("OR", "RR", "HR", "RD", "MD", "SMD")
#: Measures analysed on the natural-log scale.
RATIO_MEASURES: frozenset[str] = frozenset({"OR", "RR", "HR"})
#: Measures that can be computed from 2x2 counts.
BINARY_MEASURES: frozenset[str] = frozenset({"OR", "RR", "RD"})
#: Measures that can be computed from means/SDs.
CONTINUOUS_MEASURES: frozenset[str] = frozenset({"MD", "SMD"})

MEASURE_NAMES: dict[str, str] = {
    "OR": "odds ratio",
    "RR": "risk ratio",
    "HR": "hazard ratio",
    "RD": "risk difference",
    "MD": "mean difference",
    "SMD": "standardised mean difference (Hedges' g)",
}

#: Risk-of-bias levels (the trade's usual three), lower case as stored.
RISK_OF_BIAS_LEVELS: tuple[str, ...] = ("low", "some concerns", "high")

#: Numeric study-table columns (DESIGN.md section 3), in display order.
NUMERIC_FIELDS: tuple[str, ...] = (
    "estimate",
    "lower",
    "upper",
    "level",
    "se",
    "p",
    "int_events",
    "int_total",
    "ctl_events",
    "ctl_total",
    "int_mean",
    "int_sd",
    "int_n",
    "ctl_mean",
    "ctl_sd",
    "ctl_n",
    "n",
)
#: Text columns.
TEXT_FIELDS: tuple[str, ...] = ("study", "risk_of_bias", "subgroup")
#: All study-table columns in the order of the contract.
TABLE_COLUMNS: tuple[str, ...] = (
    "study",
    "year",
    *NUMERIC_FIELDS,
    "risk_of_bias",
    "subgroup",
    "exclude",
    "reported",
)


@dataclass(frozen=True, slots=True)
class StudyRow:
    """One study as entered (natural scale, as printed in the paper).

    Any subset of the entry routes may be filled: estimate + lower/upper (+ level),
    estimate + se, estimate + p, 2x2 counts per arm, or means/SDs/ns per arm.
    ``level`` is the CI level in percent (``None`` means the review's level).
    ``p_bound`` is ``"<"`` when the paper printed "P < 0.05" rather than a value.
    """

    study: str = ""
    year: int | None = None
    estimate: float | None = None
    lower: float | None = None
    upper: float | None = None
    level: float | None = None
    se: float | None = None
    p: float | None = None
    p_bound: str | None = None
    int_events: float | None = None
    int_total: float | None = None
    ctl_events: float | None = None
    ctl_total: float | None = None
    int_mean: float | None = None
    int_sd: float | None = None
    int_n: float | None = None
    ctl_mean: float | None = None
    ctl_sd: float | None = None
    ctl_n: float | None = None
    n: float | None = None
    risk_of_bias: str | None = None
    subgroup: str | None = None
    exclude: bool = False
    #: False for a trial known to exist (registered, presented, listed as ongoing) that
    #: never reported results: only its size is entered, and it enters only the
    #: missing-trial scenarios, never the main analysis
    reported: bool = True
    #: field name -> text the user typed that could not be read (kept, never lost)
    unread: tuple[tuple[str, str], ...] = ()

    def with_values(self, **changes: Any) -> StudyRow:
        """Return a copy with fields changed (a new value; rows are immutable)."""
        return replace(self, **changes)

    def unread_dict(self) -> dict[str, str]:
        return dict(self.unread)

    def has_counts(self) -> bool:
        return all(
            v is not None
            for v in (self.int_events, self.int_total, self.ctl_events, self.ctl_total)
        )

    def has_means(self) -> bool:
        return all(
            v is not None
            for v in (
                self.int_mean,
                self.int_sd,
                self.int_n,
                self.ctl_mean,
                self.ctl_sd,
                self.ctl_n,
            )
        )

    def total_n(self) -> float | None:
        """Total participants: ``n`` if given, else the arm totals, else ``None``."""
        if self.n is not None:
            return self.n
        if self.int_total is not None and self.ctl_total is not None:
            return self.int_total + self.ctl_total
        if self.int_n is not None and self.ctl_n is not None:
            return self.int_n + self.ctl_n
        return None

    def to_dict(self) -> dict[str, Any]:
        """The fields that are set, in field order: None, an empty ``unread``,
        ``exclude=False`` and ``reported=True`` (the defaults) are left out."""
        out = {k: v for k, v in zip(_ROW_FIELDS, _row_values(self)) if v is not None}
        unread = out.pop("unread", ())
        if out.get("exclude") is False:
            del out["exclude"]
        if out.get("reported") is True:
            del out["reported"]
        if unread:
            out["unread"] = dict(unread)
        return out


def plain_number(x: object) -> bool:
    """True for a plain int or float that converts to a float (an int beyond the float
    range, e.g. 10**400 from a script, does not: it is left to the one-row path, which
    reports it)."""
    t = type(x)
    if t is float:
        return True
    if t is int:
        try:
            float(x)  # type: ignore[arg-type]
        except OverflowError:
            return False
        return True
    return False


#: the row's field names in order (dataclasses.fields is slow on every call)
_ROW_FIELDS: tuple[str, ...] = tuple(f.name for f in fields(StudyRow))
_row_values = operator.attrgetter(*_ROW_FIELDS)


@dataclass(frozen=True, slots=True)
class PublishedResult:
    """The pooled result as printed in the paper (natural scale)."""

    estimate: float | None = None
    lower: float | None = None
    upper: float | None = None
    #: the model as printed, free text ("random effects", "Mantel-Haenszel fixed", ...)
    model: str = ""
    #: I² as printed on the paper's heterogeneity line (percent), reconciled with the rows
    i2: float | None = None

    def is_complete(self) -> bool:
        return None not in (self.estimate, self.lower, self.upper)


#: What a review may have concluded about small-study effects ("" = not entered).
CLAIM_CONCLUSIONS: tuple[str, ...] = ("", "none found", "found", "not assessed", "not reported")


@dataclass(frozen=True, slots=True)
class ReviewClaim:
    """What the review itself reported about small-study effects (all optional).

    ``test`` is the test as named in the paper ("Egger's test", "funnel plot inspection");
    ``statistic`` and ``p`` as printed; ``k`` the number of studies it used;
    ``conclusion`` one of :data:`CLAIM_CONCLUSIONS`.
    """

    test: str = ""
    statistic: float | None = None
    p: float | None = None
    k: int | None = None
    conclusion: str = ""

    def is_empty(self) -> bool:
        return (
            not self.test
            and self.statistic is None
            and self.p is None
            and (self.k is None and not self.conclusion)
        )


@dataclass(frozen=True, slots=True)
class ReviewDetails:
    """What the review is about and how its effects are expressed."""

    title: str = ""
    question: str = ""
    outcome: str = ""
    measure: str = "OR"
    #: confidence level of the intervals printed in the paper, percent
    ci_level: float = 95.0
    #: which direction favours the intervention: "lower" (e.g. OR < 1 is good) or "higher"
    favours: str = "lower"
    #: labels for the two arms, used in "favours ..." captions
    int_label: str = "intervention"
    ctl_label: str = "control"
    published: PublishedResult = field(default_factory=PublishedResult)
    appraiser: str = ""
    #: free text shown on screen and on the sheet; invented demo reviews say so here
    source_note: str = ""
    #: what the review said about small-study effects (compared with Lopside's reading)
    claim: ReviewClaim = field(default_factory=ReviewClaim)
    #: optional units of the outcome scale ("mmHg", "points on a 0-100 scale"), printed
    #: on the effect axes and the sheet for mean differences
    units: str = ""
    #: where ``favours`` came from (one of FAVOURS_SOURCES; "" = not recorded, older files)
    favours_source: str = ""


#: The alternative explanations of funnel asymmetry, in the order we present them.
CAUSES: tuple[str, ...] = (
    "selection",
    "methods",
    "heterogeneity",
    "artefact",
    "chance",
)
CAUSE_TITLES: dict[str, str] = {
    "selection": "Selective publication and reporting",
    "methods": "Weaker methods in smaller studies",
    "heterogeneity": "True differences between studies",
    "artefact": "Artefact of the effect measure or test",
    "chance": "Chance",
}
#: Judgements the appraiser can record per cause.
JUDGEMENTS: tuple[str, ...] = ("not judged", "unlikely", "possible", "likely")
#: Ratings for the publication-bias domain.
DOMAIN_RATINGS: tuple[str, ...] = ("undetected", "suspected (mixed evidence)", "strongly suspected")


@dataclass(frozen=True, slots=True)
class CauseNote:
    judgement: str = "not judged"
    notes: str = ""


@dataclass(frozen=True, slots=True)
class AppraisalNotes:
    """The appraiser's own judgements (saved in the project file)."""

    causes: tuple[tuple[str, CauseNote], ...] = tuple((c, CauseNote()) for c in CAUSES)
    #: the appraiser's rating of the publication-bias domain; "" = accept the suggestion
    rating_override: str = ""
    rating_reason: str = ""
    general: str = ""

    def cause(self, key: str) -> CauseNote:
        return dict(self.causes).get(key, CauseNote())

    def with_cause(self, key: str, note: CauseNote) -> AppraisalNotes:
        d = dict(self.causes)
        d[key] = note
        return replace(self, causes=tuple((c, d.get(c, CauseNote())) for c in CAUSES))


#: Where the direction of benefit came from, and how the account says it.
FAVOURS_SOURCES: dict[str, str] = {
    "": "as saved in the review",
    "assumed": "not given: assumed lower",
    "option": "set on the command line with --favours",
    "table": "given in the study table",
    "window": "set in the review details",
}


@dataclass(frozen=True, slots=True)
class NotRead:
    """One piece of the user's input that did not reach the review, and why.

    ``kind`` is ``"line"`` (a pasted line that looks like a study), ``"text"`` (a pasted
    line with no numbers after its label: listed, but not study-looking), ``"cells"``
    (cells of a table row), ``"column"`` (a column of a table), ``"row"`` (a table row)
    or ``"page"`` (a PDF page whose text could not be read);
    ``where`` names the place as the user sees it ("line 4", "row 7", "column 'or'").
    """

    kind: str
    where: str
    text: str
    reason: str


#: How a decimal-mark decision was reached.
DECIMAL_HOW: tuple[str, ...] = ("", "evidence", "option", "asked", "none needed")


@dataclass(frozen=True, slots=True)
class IntakeAccount:
    """What happened on the way in: what was not read, and what was decided.

    Saved with the project, shown in the window's problems list, printed under the
    entered data (text, JSON, sheet). An empty account means the review was typed in or
    came from a file without one.
    """

    #: the file (or "pasted text") the rows came from; "" when typed in
    source: str = ""
    not_read: tuple[NotRead, ...] = ()
    #: "point", "comma" or "" (no decimal number needed deciding)
    decimal_mark: str = ""
    #: how the mark was decided: one of DECIMAL_HOW
    decimal_how: str = ""
    #: a number that settled it ("0,82"), for the account
    decimal_evidence: str = ""
    #: how the measure was chosen ("named in the header", "--measure", ...)
    measure_how: str = ""
    #: (study label, place in the file) per row read: "spreadsheet row 5", "pasted line 7"
    rows_at: tuple[tuple[str, str], ...] = ()

    def places(self, studies: tuple[StudyRow, ...]) -> tuple[str, ...] | None:
        """Where each study came from in its file, matched by label ("" when unknown).

        Matching by label (only labels read once) keeps the places right after rows are
        added, moved or deleted; a renamed or typed-in study simply has none.
        """
        if not self.rows_at:
            return None
        seen: dict[str, str] = {}
        twice: set[str] = set()
        for label, place in self.rows_at:
            if label in seen:
                twice.add(label)
            seen[label] = place
        return tuple("" if s.study in twice else seen.get(s.study, "") for s in studies)

    def is_empty(self) -> bool:
        return self == IntakeAccount()

    def study_looking(self) -> tuple[NotRead, ...]:
        """What was not read and may hold study data (stops the CLI unless allowed)."""
        return tuple(n for n in self.not_read if n.kind != "text")

    def plus(self, later: IntakeAccount) -> IntakeAccount:
        """This account followed by a later import (a paste into the review)."""
        if self.is_empty():
            return later
        if later.is_empty():
            return self
        tag = later.source or "later input"
        added = tuple(replace(n, where=f"{tag}, {n.where}") for n in later.not_read)
        sources = (
            self.source
            if later.source in self.source.split("; ")
            else (f"{self.source}; {later.source}" if self.source else later.source)
        )
        decided = later if later.decimal_mark else self
        return IntakeAccount(
            source=sources,
            not_read=self.not_read + added,
            decimal_mark=decided.decimal_mark,
            decimal_how=decided.decimal_how,
            decimal_evidence=decided.decimal_evidence,
            measure_how=later.measure_how or self.measure_how,
            rows_at=self.rows_at + later.rows_at,
        )

    def decimal_text(self) -> str:
        """The decimal decision in words, or "" when none was needed."""
        if not self.decimal_mark:
            return ""
        name = "decimal comma" if self.decimal_mark == "comma" else "decimal point"
        how = {
            "evidence": f"from the numbers ('{self.decimal_evidence}')"
            if self.decimal_evidence
            else "from the numbers",
            "option": "as the command line asked",
            "asked": "as chosen by the user when asked",
        }.get(self.decimal_how, "")
        return f"{name}, {how}" if how else name


@dataclass(frozen=True, slots=True)
class Review:
    details: ReviewDetails = field(default_factory=ReviewDetails)
    studies: tuple[StudyRow, ...] = ()
    notes: AppraisalNotes = field(default_factory=AppraisalNotes)
    #: what happened on the way in (unread lines, decimal decision); see IntakeAccount
    intake: IntakeAccount = field(default_factory=IntakeAccount)

    @property
    def measure(self) -> str:
        return self.details.measure

    def with_studies(self, studies: tuple[StudyRow, ...] | list[StudyRow]) -> Review:
        return replace(self, studies=tuple(studies))

    def with_details(self, **changes: Any) -> Review:
        return replace(self, details=replace(self.details, **changes))

    def with_notes(self, notes: AppraisalNotes) -> Review:
        return replace(self, notes=notes)
