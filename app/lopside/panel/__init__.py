"""The panel summary: every outcome of a review side by side, for a guideline panel.

Design invariants
-----------------
* One row per outcome, never dropped: an outcome that cannot be analysed is a row with
  ``status`` "not analysable" and the reason; a file that could not be read (``--skip-bad``)
  is a row with ``status`` "skipped".
* Every number comes from the one analysis result and its appraisal
  (:func:`lopside.outcome_row.outcome_row`); the exports (CSV, XLSX, DOCX, PDF) and the
  slide only lay them out. The words of the reading come from :func:`reading_lines`.
* Pure: no Qt. The window shows the same :class:`PanelSummary`.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

from ..outcome_row import OUTCOME_COLUMNS

#: The panel's machine-readable columns (first sheet of the XLSX, the CSV), in order: the
#: outcome columns batch writes too (one list, lopside.outcome_row), without the
#: trim-and-fill details, then the row's status and the data fingerprint.
#: the summary's title when the review has none (several files of different reviews)
DEFAULT_TITLE = "Panel summary"


def panel_title(titles) -> str:
    """The review's title when the outcomes share one (a project), else DEFAULT_TITLE."""
    found = {(t or "").strip() for t in titles}
    if len(found) == 1 and (title := found.pop()):
        return title
    return DEFAULT_TITLE


PANEL_COLUMNS: tuple[str, ...] = (
    *(c for c in OUTCOME_COLUMNS if not c.startswith("trim_fill_") and c != "fingerprint"),
    "status",
    "fingerprint",
)

#: Columns of the second sheet: every study of every outcome (natural scale).
STUDY_COLUMNS: tuple[str, ...] = (
    "outcome",
    "study",
    "year",
    "estimate",
    "ci_low",
    "ci_high",
    "y",
    "se",
    "included",
    "risk_of_bias",
    "subgroup",
)

#: Short names of the tests, as the panel shows them.
TEST_NAMES = {
    "egger": "Egger",
    "begg": "Begg",
    "harbord": "Harbord",
    "peters": "Peters",
    "smd_modified": "Egger (modified SE)",
    "arcsine": "arcsine",
}


@dataclass(frozen=True, slots=True)
class OutcomeInput:
    """One outcome to summarise: its name, review and settings (or why it was skipped)."""

    name: str
    review: Any = None
    settings: Any = None
    skipped: str = ""


@dataclass(slots=True)
class PanelOutcome:
    name: str
    row: dict[str, Any]
    result: Any = None
    appraisal: Any = None

    @property
    def analysable(self) -> bool:
        return self.row.get("status") == "ok"


@dataclass(slots=True)
class PanelSummary:
    title: str
    outcomes: list[PanelOutcome] = field(default_factory=list)

    @property
    def rows(self) -> list[dict[str, Any]]:
        return [o.row for o in self.outcomes]

    def study_rows(self) -> list[dict[str, Any]]:
        """Every study of every analysable outcome (second sheet of the XLSX)."""
        import math

        out = []
        for o in self.outcomes:
            res = o.result
            if res is None:
                continue
            included = set(res.data.rows)
            for i, (s, d) in enumerate(zip(res.review.studies, res.derived)):
                y, se = d.y, d.se
                est = lo = hi = None
                if y is not None and se is not None:
                    z = 1.959963984540054
                    vals = (y, y - z * se, y + z * se)
                    if res.is_ratio:
                        try:
                            vals = tuple(math.exp(v) for v in vals)
                        except OverflowError:
                            vals = (None, None, None)
                    est, lo, hi = vals
                out.append(
                    {
                        "outcome": o.name,
                        "study": s.study,
                        "year": s.year,
                        "estimate": est,
                        "ci_low": lo,
                        "ci_high": hi,
                        "y": y,
                        "se": se,
                        "included": i in included,
                        "risk_of_bias": s.risk_of_bias or None,
                        "subgroup": s.subgroup or None,
                    }
                )
        return out


def check_names(inputs: Sequence[OutcomeInput]) -> None:
    """Outcome names must differ (the panel is read by name); raises ValueError."""
    seen: dict[str, str] = {}
    for o in inputs:
        key = o.name.strip().casefold()
        if key in seen:
            raise ValueError(
                f"two outcomes are both called '{o.name}'; give each outcome its own name"
            )
        seen[key] = o.name


def build_panel(
    title: str, inputs: Sequence[OutcomeInput], *, with_power: bool = False, progress_for=None
):
    """Analyse each outcome once and lay the rows side by side (see the module notes).

    ``progress_for(input, number, total)``, if given, returns the progress reporter of
    that outcome's analysis (called with each stage, as ``analyse``'s ``progress``: False
    stops it with AnalysisCancelled; its ``.power``, if any, with the simulation's steps,
    its ``.done()``, if any, at the end; see :class:`lopside.cli_options.ConsoleProgress`)
    or None.
    """
    from ..assessment import assess
    from ..outcome_row import outcome_row

    check_names(inputs)
    summary = PanelSummary(title=title)
    for number, inp in enumerate(inputs, start=1):
        if inp.skipped:
            row = dict.fromkeys(PANEL_COLUMNS)
            row.update(outcome=inp.name, status="skipped", reason=f"skipped: {inp.skipped}")
            summary.outcomes.append(PanelOutcome(inp.name, row))
            continue
        progress = progress_for(inp, number, len(inputs)) if progress_for else None
        assessment = assess(
            inp.review,
            inp.settings,
            with_power=with_power,
            progress=progress,
            power_progress=getattr(progress, "power", None),
        )
        if hasattr(progress, "done"):
            progress.done()
        result, appraisal = assessment.analysis, assessment.appraisal
        row = outcome_row(result, appraisal, inp.name)
        if result.k == 0:
            reasons = [getattr(p, "message", str(p)) for p in result.problems][:2]
            row["status"] = "not analysable"
            row["reason"] = "not analysable: " + (
                "; ".join(reasons) if reasons else "no study has an effect and standard error"
            )
            row["rating_suggested"] = None
        else:
            row["status"] = "ok"
        summary.outcomes.append(
            PanelOutcome(inp.name, {c: row.get(c) for c in PANEL_COLUMNS}, result, appraisal)
        )
    return summary


def reading_lines(result, appraisal) -> tuple[str, str, str]:
    """Three short sentences: what the funnel shows; what the tests and adjustments say;
    what else could explain it. The one place the panel and the slide take words from."""
    from ..summary import SHORT_MEASURE, fmt_effect, fmt_p

    ss = appraisal.small_study
    c = ss.contour
    k0 = c.k0 or 0
    missing = f"{k0} stud{'y looks' if k0 == 1 else 'ies look'} missing"
    funnel = {
        "non-significant": f"{missing}, where results would not have been significant: "
        "the pattern publication bias leaves.",
        "significant": f"{missing}, where results would have been significant: "
        "causes other than publication bias are more likely.",
        "mixed": f"{missing}, some where results would not have been significant and some "
        "where they would: the contours do not decide.",
        "none filled": "No study looks missing: the funnel is roughly symmetric.",
    }.get(c.verdict, "The funnel cannot be read for these data.")
    m = result.measure
    t = ss.test
    if t.key and t.computed and t.pvalue is not None:
        word = "signals" if t.signal else "shows no clear"
        tests = f"{t.name}: p = {fmt_p(t.pvalue)}, {word} small-study effects."
    elif t.key:
        tests = f"{t.name} could not be run here."
    else:
        tests = "No small-study test suits these data."
    a = ss.adjustments
    if a.low is not None and a.high is not None and a.unadjusted is not None:
        short = SHORT_MEASURE.get(m, m)
        tests += (
            f" Adjusted estimates range from {short} {fmt_effect(a.low, m)} to "
            f"{fmt_effect(a.high, m)}, against {fmt_effect(a.unadjusted, m)} unadjusted."
        )
    others = []
    for cause in appraisal.causes:
        if cause.key == "selection":
            continue
        if any(getattr(e, "direction", "") == "for" for e in cause.evidence):
            others.append(cause.title.lower())
    if others:
        other = "Evidence here also points to " + "; ".join(others) + "."
    else:
        other = (
            "No other explanation has evidence for it in these data; "
            "check the paper for weaker methods in the small studies."
        )
    return funnel, tests, other


def fmt_cell(value: Any, column: str) -> str:
    """A row's value as the panel prints it (the machine-readable files keep numbers)."""
    from ..summary import fmt_num, fmt_p

    if value is None:
        return "–"
    if column in ("test_p",):
        return fmt_p(value)
    if column in ("power", "i2"):
        return f"{value * 100:.0f} %" if column == "power" else f"{value:.0f} %"
    if column == "recommended_test":
        return TEST_NAMES.get(value, value)
    if isinstance(value, float):
        return fmt_num(value, 2)
    return str(value)


__all__ = [
    "PANEL_COLUMNS",
    "STUDY_COLUMNS",
    "OutcomeInput",
    "PanelOutcome",
    "PanelSummary",
    "build_panel",
    "check_names",
    "fmt_cell",
    "reading_lines",
]
