"""What the rows-to-check modules share: the thresholds (each with its source), the wording
(the one place every user-facing sentence comes from) and the result types.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

# --------------------------------------------------------------------------------------
# Thresholds

#: |externally studentised residual| above the two-sided 5 % normal limit, Bonferroni-
#: corrected for k studies, flags an outlier (Viechtbauer & Cheung 2010; from memory).
#: The uncorrected 1.96 is reported as "worth a look" but does not flag a row: among
#: 12 clean studies about one in two reviews would have one by chance.
OUTLIER_ALPHA = 0.05


#: |DFFITS| above 3·sqrt(p/(k - p)), p = 1 (Viechtbauer & Cheung 2010; from memory).
DFFITS_FACTOR = 3.0


#: Cook's distance above the median of chi-square with p = 1 df (Viechtbauer & Cheung
#: 2010; from memory): 0.4549.
COOKS_QUANTILE = 0.5


#: hat value above 3·p/k (Viechtbauer & Cheung 2010; from memory). Reported, not flagged
#: on its own: a large trial carries much weight without being wrong.
HAT_FACTOR = 3.0


#: A row is flagged as influential only when its DFFITS is beyond the paper's limit AND its
#: Cook's distance exceeds 1 (the classic rule of thumb of regression diagnostics: common
#: practice). With the paper's own limits (DFFITS or Cook's above 0.45) one clean review
#: in three had a flagged study in our simulation (tools/simulate_row_flags.py: 400
#: invented 2x2 reviews of 8-24 trials, tau = 0.15; 131 reviews, 106 by Cook's, 88 by
#: DFFITS); with this rule, 6 in 400. The paper's limits stay in ``Influence.limits`` and
#: the full table is in the JSON.
COOKS_FLAG = 1.0


#: modified z-score limit for an arm's event risk (Iglewicz & Hoaglin 1993; from memory).
ARM_Z_LIMIT = 3.5


#: arms of one kind needed before one is compared with the rest (a median and MAD of
#: fewer say little; common practice for robust summaries).
ARM_MIN = 5


#: arm-size ratio (larger/smaller) above which a study is flagged, when it is also more
#: than ARM_RATIO_SPREAD times the median ratio of the other studies. Randomised trials
#: allocate 1:1, 2:1 and, rarely, 3:1 (common practice); a typed total with a digit
#: missing or added makes 10:1.
ARM_RATIO_LIMIT = 3.0


ARM_RATIO_SPREAD = 2.0


#: a study "drives the heterogeneity" when I² is at least I2_DRIVER_FROM with it, and
#: leaving it out at least halves τ² and takes I² down by I2_DRIVER_DROP percentage points
#: (our rule). In the simulation above (seed 1), 9 of 400 clean reviews had such a study
#: (94 with a 20-point drop and no floor on I²). A change of the recommended test is named
#: only when it comes with τ² at least halved (seed 2: 14 of 400 clean reviews cross the
#: test's τ² limit of 0.1 by a nudge when one study is left out; 1 of 400 with τ² halved).
TAU2_DRIVER_RATIO = 0.5


I2_DRIVER_DROP = 25.0


I2_DRIVER_FROM = 50.0


#: estimates within this relative rounding count as the same (half a unit in the second
#: decimal of a value printed to two decimals, scaled for values above 1: common practice).
ROUNDING = 0.005


#: the recommended test is recomputed without each study when k is at most this; above
#: it, only for the studies whose removal changes τ² most (and those flagged otherwise).
SWITCH_ALL_K = 50


SWITCH_CANDIDATES = 10


# --------------------------------------------------------------------------------------
# Wording (the one place)

#: what each kind of flag is called (headings, the start of each reason's sentence)
KIND_TITLES: dict[str, str] = {
    "arm_risk": "Event risk out of line",
    "arm_size": "Arm sizes out of line",
    "outlier": "Outlier",
    "influential": "Influential",
    "heterogeneity": "One row drives the heterogeneity",
    "test_switch": "One row changes the recommended test",
    "duplicate": "Possible duplicate publication",
}


MESSAGES: dict[str, str] = {
    "arm_risk": (
        "{arm} arm {events}/{total} = {risk} had the event; the other {arm} arms "
        "{lo} to {hi} (median {median}); robust z {z} (limit {limit})."
    ),
    "arm_risk_check": (
        "Check the {arm} events and total in the paper: a digit missing from the total, or "
        "events and non-events swapped?"
    ),
    "arm_size": (
        "arms of {n1} (intervention) and {n0} (control), {ratio}:1; the other studies at "
        "most {other_max}:1 (median {other_median}:1)."
    ),
    "arm_size_check": (
        "Check both totals in the paper: trials seldom allocate beyond 3:1, and a digit "
        "missing or added makes about 10:1."
    ),
    "outlier": (
        "far from what the other studies predict: studentised residual {t} (limit ±{limit} "
        "for {k} studies)."
    ),
    "outlier_check": (
        "Check the estimate, its CI and any counts in the paper, and whether the study "
        "differs in population, dose or outcome."
    ),
    "influential": ("without it the pooled estimate moves from {est} to {est_del} ({what})."),
    "influential_check": "Check the row in the paper before relying on the pooled result.",
    "heterogeneity": "τ² {tau2} with it, {tau2_del} without it (I² {i2} → {i2_del}).",
    "heterogeneity_check": "Check it against the paper.",
    "test_switch": (
        "without it the recommended test would be {other}, not {this} (τ² {tau2_del} "
        "without it, {tau2} with it)."
    ),
    "test_switch_check": "Check it against the paper before choosing the test.",
    "duplicate_counts": "same 2x2 counts as {other} (row {other_row}): {a}/{n1} and {c}/{n0}.",
    "duplicate_estimate": ("same estimate and CI as {other} (row {other_row}): {est}."),
    "duplicate_size": (
        "same number of participants as {other} (row {other_row}), {n}, and an estimate "
        "within rounding ({est} and {other_est})."
    ),
    "duplicate_check": (
        "Compare the authors, centres and recruitment dates of the two reports; both rows "
        "are kept (exclude one only if the paper shows they are the same trial)."
    ),
}


#: why a flagged row is among the rows to re-check when the paper is not reproduced
SUSPECT = "it stands out from the other studies ({kinds}): see the rows to check"


#: the line that heads the list wherever flagged rows are shown
HEADLINE = "Rows to check against the paper"


NONE_FOUND = "no row stands out from the others ({checked} checked)"


NONE_CHECKED = "too few studies to compare one row with the others"


#: what :func:`flag_rows` could compare, for :data:`NONE_FOUND`
CHECKED_WORDS = {
    "arms": "arms",
    "influence": "outliers and influence",
    "tau2": "τ²",
    "duplicates": "possible duplicates",
}


EXPLAIN = (
    "Rows that pass the entry checks but stand out from the other studies: an arm whose "
    "event risk or size is out of line, an outlier or influential study (Viechtbauer & "
    "Cheung 2010), a row that alone drives τ² or the choice of test, or a possible "
    "duplicate. A flag asks for a look at the paper; it does not say the row is wrong."
)


def _g(x: float, digits: int = 2) -> str:
    """A number in short form with a true minus sign (the sheet's font has it)."""
    if x is None or not math.isfinite(x):
        return "–"
    s = f"{x:.{digits}f}"
    return s.replace("-", "\u2212")


def _pct(x: float) -> str:
    p = 100.0 * x
    return f"{p:.0f}%" if p >= 10 or p == 0 else f"{p:.1f}%"


def _tau2(x: float) -> str:
    return "0" if x == 0 else _g(x, 3 if x < 0.1 else 2)


def _count(x: float) -> str:
    return str(int(round(x))) if math.isfinite(x) else "–"


def _effect(y: float, measure: str) -> str:
    from ..model.review import RATIO_MEASURES

    if measure in RATIO_MEASURES:
        return _g(math.exp(y), 2)
    return _g(y, 2)


# --------------------------------------------------------------------------------------
# Flags per row


@dataclass(frozen=True, slots=True)
class Reason:
    """Why one row stands out.

    Attributes
    ----------
    kind : str
        A key of :data:`KIND_TITLES`.
    detail : str
        The evidence in words, with its numbers.
    check : str
        What to look at in the paper.
    numbers : dict
        The numbers behind ``detail`` (plain floats/ints/strings, for the JSON).
    field : str
        The table column most likely wrong ("ctl_total"), or "" for the whole row.
    other_row : int or None
        The other row of a pair (duplicates), 0-based in the table.
    """

    kind: str
    detail: str
    check: str
    numbers: dict[str, Any] = field(default_factory=dict)
    field: str = ""
    other_row: int | None = None


@dataclass(frozen=True, slots=True)
class FlaggedStudy:
    """One table row and every reason it stands out. ``row`` is 0-based in the table."""

    row: int
    study: str
    reasons: tuple[Reason, ...]
