"""Rows worth checking against the paper: outliers, influence, implausible arms, duplicates.

The entry checks (:mod:`lopside.intake.checks`) look at one row at a time. A row can pass
them and still be mistyped: a control total typed with a digit missing gives a valid 2x2
table with an event risk of 85 % where every other control arm has 6-15 %. This module
compares each study with the others and says which rows to look at again, with the
numbers that make them stand out and what to check in the paper. It never changes the
data and never merges rows.

Design invariants
-----------------
* Pure numbers: no Qt, no I/O. The leave-one-out pooling is not redone here: the
  influence diagnostics read :func:`lopside.stats.sensitivity.leave_one_out`'s result
  (one batched pooling per analysis), and the rest are O(k) array operations.
* Every user-facing sentence comes from :data:`MESSAGES` (one place); :func:`flag_rows`
  fills them from the numbers it also returns, so the window, the CLI text, the JSON and
  the sheet show the same words and the same numbers.
* Thresholds are module constants, each with its source.

Sources
-------
* Viechtbauer W, Cheung MWL. Outlier and influence diagnostics for meta-analysis. Res
  Synth Methods 2010;1:112-125 (methods.md 11.1). Externally studentised residuals,
  DFFITS, Cook's distance, covariance ratio, hat values, τ² and Q with the study left out,
  for the random-effects model with intercept only. The cut-offs below are recalled
  (from memory), not re-checked against the paper.
* Iglewicz B, Hoaglin DC. How to detect and handle outliers. ASQC 1993: the modified
  z-score 0.6745 (x - median) / MAD with |z| > 3.5 as the outlier limit (from memory).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from .data import StudyData
from .results import NotComputable

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
# Influence diagnostics (Viechtbauer & Cheung 2010)


@dataclass(frozen=True, slots=True, eq=False)
class Influence:
    """Case-deletion diagnostics of each study under the random-effects model.

    All arrays have one entry per study of the analysis (``StudyData`` order).

    Attributes
    ----------
    rstudent : ndarray
        Externally studentised residual (y_i − μ̂_(−i)) / sqrt(v_i + τ̂²_(−i) + Var(μ̂_(−i))).
    dffits : ndarray
        (μ̂ − μ̂_(−i)) / sqrt(h_i (v_i + τ̂²_(−i))).
    cooks : ndarray
        (μ̂ − μ̂_(−i))² / Var(μ̂).
    covratio : ndarray
        Var(μ̂_(−i)) / Var(μ̂); below 1, leaving the study out makes the estimate more
        precise.
    dfbetas : ndarray
        (μ̂ − μ̂_(−i)) / sqrt(Var(μ̂_(−i))).
    hat : ndarray
        w_i / Σw with w_i = 1/(v_i + τ̂²).
    tau2_del, q_del, i2_del, estimate_del : ndarray
        τ², Cochran's Q, I² (percent) and the pooled estimate with the study left out.
    limits : dict
        The cut-offs used: "rstudent" (Bonferroni), "rstudent_look" (1.96), "dffits",
        "cooks", "hat".
    outlier, influential : ndarray of bool
        |rstudent| beyond the Bonferroni limit; DFFITS beyond its limit and Cook's
        distance above :data:`COOKS_FLAG`.
    """

    labels: tuple[str, ...]
    rows: tuple[int, ...]
    estimate: float
    tau2: float
    tau2_method: str
    rstudent: np.ndarray
    dffits: np.ndarray
    cooks: np.ndarray
    covratio: np.ndarray
    dfbetas: np.ndarray
    hat: np.ndarray
    tau2_del: np.ndarray
    q_del: np.ndarray
    i2_del: np.ndarray
    estimate_del: np.ndarray
    limits: dict[str, float]
    outlier: np.ndarray
    influential: np.ndarray


def influence_measures(y, v, tau2, mu, var_mu, mu_del, var_del, tau2_del) -> dict[str, Any]:
    """The case-deletion formulas of Viechtbauer & Cheung 2010 for the intercept-only model.

    Parameters
    ----------
    y, v : array_like
        Effects and within-study variances (k).
    tau2, mu, var_mu : float
        τ̂², μ̂ and Var(μ̂) of the full data.
    mu_del, var_del, tau2_del : array_like
        μ̂_(−i), Var(μ̂_(−i)) and τ̂²_(−i) with study i left out (k each).

    Returns
    -------
    dict of ndarray
        "rstudent", "dffits", "cooks", "covratio", "dfbetas", "hat".

    Notes
    -----
    With τ² = 0 held fixed these are the weighted-least-squares case-deletion statistics
    with the scale known to be 1 (tests/test_diagnostics.py checks them against
    statsmodels' OLSInfluence on a WLS fit).
    """
    y = np.asarray(y, dtype=float)
    v = np.asarray(v, dtype=float)
    mu_del = np.asarray(mu_del, dtype=float)
    var_del = np.asarray(var_del, dtype=float)
    tau2_del = np.asarray(tau2_del, dtype=float)
    w = 1.0 / (v + tau2)
    hat = w / w.sum()
    shift = mu - mu_del
    return {
        "rstudent": (y - mu_del) / np.sqrt(v + tau2_del + var_del),
        "dffits": shift / np.sqrt(hat * (v + tau2_del)),
        "cooks": shift * shift / var_mu,
        "covratio": var_del / var_mu,
        "dfbetas": shift / np.sqrt(var_del),
        "hat": hat,
    }


def influence(data: StudyData, loo) -> Influence | NotComputable:
    """Influence diagnostics from a leave-one-out result (no pooling of its own).

    Parameters
    ----------
    data : StudyData
    loo : LeaveOneOutResult or NotComputable
        :func:`lopside.stats.sensitivity.leave_one_out` of the same data, without HKSJ
        (the diagnostics need the model-based variance of each estimate).
    """
    from scipy.special import chdtri, ndtri

    if isinstance(loo, NotComputable) or loo is None:
        return NotComputable(
            getattr(loo, "reason", "") or "influence diagnostics need the leave-one-out results"
        )
    if loo.hksj:
        return NotComputable("influence diagnostics need leave-one-out results without HKSJ")
    k = data.k
    if len(loo.rows) != k:
        return NotComputable("the leave-one-out results do not match the studies")
    full = loo.full_random
    rows = loo.rows
    if not all(hasattr(r.random, "estimate") for r in rows) or not hasattr(full, "estimate"):
        return NotComputable("a study left out could not be pooled")
    mu_del = np.array([r.random.estimate for r in rows])
    var_del = np.array([r.random.se for r in rows]) ** 2
    tau2_del = np.array([r.tau2 for r in rows])
    q_del = np.array([r.q for r in rows])
    i2_del = np.array([r.i2 if isinstance(r.i2, (int, float)) else np.nan for r in rows])
    m = influence_measures(
        data.y, data.v, full.tau2, full.estimate, full.se**2, mu_del, var_del, tau2_del
    )
    limits = {
        "rstudent": float(ndtri(1.0 - OUTLIER_ALPHA / (2.0 * k))),
        "rstudent_look": float(ndtri(1.0 - OUTLIER_ALPHA / 2.0)),
        "dffits": DFFITS_FACTOR * math.sqrt(1.0 / (k - 1)),
        "cooks": float(chdtri(1.0, 1.0 - COOKS_QUANTILE)),
        "hat": HAT_FACTOR / k,
    }
    with np.errstate(invalid="ignore"):
        outlier = np.abs(m["rstudent"]) > limits["rstudent"]
        influential = (np.abs(m["dffits"]) > limits["dffits"]) & (m["cooks"] > COOKS_FLAG)
    return Influence(
        labels=tuple(data.labels)
        if len(data.labels) == k
        else tuple(f"Study {i + 1}" for i in range(k)),
        rows=tuple(data.rows) if len(data.rows) == k else tuple(range(k)),
        estimate=float(full.estimate),
        tau2=float(full.tau2),
        tau2_method=loo.tau2_method,
        rstudent=m["rstudent"],
        dffits=m["dffits"],
        cooks=m["cooks"],
        covratio=m["covratio"],
        dfbetas=m["dfbetas"],
        hat=m["hat"],
        tau2_del=tau2_del,
        q_del=q_del,
        i2_del=i2_del,
        estimate_del=mu_del,
        limits=limits,
        outlier=outlier,
        influential=influential,
    )


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


@dataclass(frozen=True, slots=True, eq=False)
class RowFlags:
    """The rows worth checking against the paper, in table order.

    ``influence`` holds the full diagnostics table (or why it could not be computed);
    ``drivers`` lists the labels of studies that alone drive τ² or the choice of test.
    """

    flagged: tuple[FlaggedStudy, ...]
    influence: Influence | NotComputable
    drivers: tuple[str, ...] = ()
    notes: tuple[str, ...] = ()
    #: keys of :data:`CHECKED_WORDS`: what there were enough studies to compare
    checked: tuple[str, ...] = ()

    def none_found(self) -> str:
        """The sentence for a review where no row is flagged (says what was compared)."""
        if not self.checked:
            return NONE_CHECKED
        words = [CHECKED_WORDS[c] for c in self.checked]
        listed = ", ".join(words[:-1]) + " and " + words[-1] if len(words) > 1 else words[0]
        return NONE_FOUND.format(checked=listed)

    def for_row(self, row: int) -> FlaggedStudy | None:
        for f in self.flagged:
            if f.row == row:
                return f
        return None


def _logit_risk(events: np.ndarray, total: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Logit of the event risk with 0.5 added to each cell, and its sampling variance."""
    e = events + 0.5
    ne = total - events + 0.5
    return np.log(e / ne), 1.0 / e + 1.0 / ne


def arm_reasons(data: StudyData) -> dict[int, list[Reason]]:
    """Arms whose event risk (2x2 data) or size is far out of line with the other arms.

    Event risk: each arm is compared with the arms of the same kind (control with control,
    intervention with intervention) on the logit scale, by a robust z that allows for the
    arm's own sampling error: z = (x_i − median) / sqrt((MAD/0.6745)² + var_i). Without
    the sampling term this is the modified z-score of Iglewicz & Hoaglin (from memory);
    with it, a small arm needs a larger departure before it is flagged. Flagged when
    |z| > :data:`ARM_Z_LIMIT` and the risk lies outside the range of the other arms.

    Size (any outcome with arm sizes: 2x2 totals, or per-arm n of means and SDs): the ratio
    of the larger to the smaller arm above :data:`ARM_RATIO_LIMIT` and more than
    :data:`ARM_RATIO_SPREAD` times the median ratio of the other studies.

    Returns
    -------
    dict
        Index into ``data`` → reasons.
    """
    out: dict[int, list[Reason]] = {}
    k = data.k
    if k == 0:
        return out
    _arm_size_reasons(data, out)
    if data.a.size != k:
        return out
    a, b, c, d = data.a, data.b, data.c, data.d
    have = np.isfinite(a) & np.isfinite(b) & np.isfinite(c) & np.isfinite(d)
    idx = np.flatnonzero(have)
    if idx.size < ARM_MIN:
        return out
    for arm, ev, nonev, fld in (
        ("control", c, d, "ctl"),
        ("intervention", a, b, "int"),
    ):
        events = ev[idx]
        total = events + nonev[idx]
        ok = total > 0
        if ok.sum() < ARM_MIN:
            continue
        sel = idx[ok]
        events, total = events[ok], total[ok]
        x, var = _logit_risk(events, total)
        med = float(np.median(x))
        mad = float(np.median(np.abs(x - med)))
        scale2 = (mad / 0.6745) ** 2
        z = (x - med) / np.sqrt(scale2 + var)
        risk = events / total
        for j in np.flatnonzero(np.abs(z) > ARM_Z_LIMIT):
            others = np.delete(risk, j)
            if others.min() <= risk[j] <= others.max():
                continue
            nums = {
                "arm": arm,
                "events": int(round(events[j])),
                "total": int(round(total[j])),
                "risk": float(risk[j]),
                "others_low": float(others.min()),
                "others_high": float(others.max()),
                "others_median": float(np.median(others)),
                "robust_z": float(z[j]),
                "limit": ARM_Z_LIMIT,
            }
            detail = MESSAGES["arm_risk"].format(
                arm=arm,
                events=nums["events"],
                total=nums["total"],
                risk=_pct(risk[j]),
                lo=_pct(others.min()),
                hi=_pct(others.max()),
                median=_pct(nums["others_median"]),
                z=_g(z[j], 1),
                limit=_g(ARM_Z_LIMIT, 1),
            )
            out.setdefault(int(sel[j]), []).append(
                Reason(
                    "arm_risk",
                    detail,
                    MESSAGES["arm_risk_check"].format(arm=arm),
                    nums,
                    field=f"{fld}_total",
                )
            )
    return out


def _arm_size_reasons(data: StudyData, out: dict[int, list[Reason]]) -> None:
    """Arm sizes far out of line (2x2 totals, or per-arm sizes for continuous outcomes)."""
    k = data.k
    if data.n1.size != k or data.n0.size != k:
        return
    with np.errstate(invalid="ignore"):
        have = np.isfinite(data.n1) & np.isfinite(data.n0) & (data.n1 > 0) & (data.n0 > 0)
    counts = np.isfinite(data.a) & np.isfinite(data.c) if data.a.size == k else np.zeros(k, bool)
    if have.sum() >= ARM_MIN:
        sel = np.flatnonzero(have)
        n1, n0 = data.n1[sel], data.n0[sel]
        ratio = np.maximum(n1, n0) / np.minimum(n1, n0)
        for j in np.flatnonzero(ratio > ARM_RATIO_LIMIT):
            others = np.delete(ratio, j)
            if ratio[j] <= ARM_RATIO_SPREAD * float(np.median(others)):
                continue
            nums = {
                "n1": int(round(n1[j])),
                "n0": int(round(n0[j])),
                "ratio": float(ratio[j]),
                "others_max": float(others.max()),
                "others_median": float(np.median(others)),
                "limit": ARM_RATIO_LIMIT,
            }
            detail = MESSAGES["arm_size"].format(
                n1=nums["n1"],
                n0=nums["n0"],
                ratio=_g(ratio[j], 1),
                other_max=_g(others.max(), 1),
                other_median=_g(nums["others_median"], 1),
            )
            arm = "ctl" if n0[j] < n1[j] else "int"
            smaller = f"{arm}_total" if counts[sel[j]] else f"{arm}_n"
            out.setdefault(int(sel[j]), []).append(
                Reason("arm_size", detail, MESSAGES["arm_size_check"], nums, field=smaller)
            )


def _natural(y: np.ndarray, measure: str) -> np.ndarray:
    from ..model.review import RATIO_MEASURES

    return np.exp(y) if measure in RATIO_MEASURES else y


def duplicate_reasons(data: StudyData) -> dict[int, list[Reason]]:
    """Pairs of rows that may report the same trial twice (never merged).

    Three signs, strongest first, one reason per pair: identical 2x2 counts; identical
    estimate and standard error (hence the same CI); the same number of participants with
    estimates equal within rounding (:data:`ROUNDING`, relative above 1, on the scale the
    paper prints), for pairs where at least one row has no counts (in a simulation of
    3,000 trials with counts, 162 chance pairs had the same size and an odds ratio within
    rounding, against 28 with identical counts). Grouping by a key keeps this near O(k) for large reviews: rows with the
    same counts or the same estimate are each paired with the first of them (a group of
    three gives two pairs), rows of the same size with their neighbour in estimate order.
    """
    out: dict[int, list[Reason]] = {}
    k = data.k
    if k < 2:
        return out
    labels = data.labels if len(data.labels) == k else tuple(f"Study {i + 1}" for i in range(k))
    rows = data.rows if len(data.rows) == k else tuple(range(k))
    paired: set[tuple[int, int]] = set()

    def add(i: int, j: int, key: str, fmt: dict, nums: dict) -> None:
        pair = (min(i, j), max(i, j))
        if pair in paired:
            return
        paired.add(pair)
        for me, other in ((i, j), (j, i)):
            detail = MESSAGES[key].format(other=labels[other], other_row=rows[other] + 1, **fmt)
            out.setdefault(me, []).append(
                Reason(
                    "duplicate",
                    detail,
                    MESSAGES["duplicate_check"],
                    {"sign": key.removeprefix("duplicate_"), "other": labels[other], **nums},
                    other_row=rows[other],
                )
            )

    def groups(keys) -> list[list[int]]:
        g: dict[Any, list[int]] = {}
        for i, key in enumerate(keys):
            if key is not None:
                g.setdefault(key, []).append(i)
        return [v for v in g.values() if len(v) > 1]

    # identical counts
    if data.a.size == k:
        cells = np.column_stack([data.a, data.b, data.c, data.d])
        keys = [tuple(r) if np.all(np.isfinite(r)) else None for r in cells.tolist()]
        for members in groups(keys):
            i = members[0]
            a, b, c, d = cells[i]
            fmt = {"a": _count(a), "n1": _count(a + b), "c": _count(c), "n0": _count(c + d)}
            for j in members[1:]:
                add(i, j, "duplicate_counts", fmt, {"counts": [int(round(x)) for x in cells[i]]})
    # identical estimate and SE (12 significant digits absorb float noise only)
    keys = [
        (float(f"{y:.12g}"), float(f"{s:.12g}")) if math.isfinite(y) and math.isfinite(s) else None
        for y, s in zip(data.y.tolist(), data.se.tolist())
    ]
    for members in groups(keys):
        i = members[0]
        for j in members[1:]:
            add(
                i,
                j,
                "duplicate_estimate",
                {"est": _effect(float(data.y[i]), data.measure)},
                {"y": float(data.y[i]), "se": float(data.se[i])},
            )
    # same participants, estimate within rounding (rows without counts: with counts,
    # identical tables are caught above and different tables are different trials)
    has_counts = (
        np.isfinite(data.a) & np.isfinite(data.c) if data.a.size == k else np.zeros(k, bool)
    )
    if data.n.size == k:
        nat = _natural(data.y, data.measure)
        keys = [int(round(n)) if math.isfinite(n) and n > 0 else None for n in data.n.tolist()]
        for members in groups(keys):
            # neighbours in estimate order only: many rows of one size stay O(m log m)
            members = sorted(members, key=lambda m: (float(nat[m]), m))
            for i, j in zip(members, members[1:]):
                if has_counts[i] and has_counts[j]:
                    continue  # two different 2x2 tables: the counts say more than rounding
                ei, ej = float(nat[i]), float(nat[j])
                if abs(ei - ej) > ROUNDING * max(1.0, abs(ei), abs(ej)):
                    continue
                add(
                    i,
                    j,
                    "duplicate_size",
                    {
                        "n": keys[i],
                        "est": _effect(float(data.y[i]), data.measure),
                        "other_est": _effect(float(data.y[j]), data.measure),
                    },
                    {"n": keys[i], "estimates": [ei, ej]},
                )
    return out


def _influence_reasons(inf: Influence, measure: str) -> dict[int, list[Reason]]:
    out: dict[int, list[Reason]] = {}
    k = inf.rstudent.size
    lim = inf.limits
    for i in range(k):
        if inf.outlier[i]:
            nums = {
                "rstudent": float(inf.rstudent[i]),
                "limit": lim["rstudent"],
                "k": k,
            }
            out.setdefault(i, []).append(
                Reason(
                    "outlier",
                    MESSAGES["outlier"].format(
                        t=_g(inf.rstudent[i]), limit=_g(lim["rstudent"]), k=k
                    ),
                    MESSAGES["outlier_check"],
                    nums,
                )
            )
        if inf.influential[i]:
            what = [
                f"DFFITS {_g(inf.dffits[i])}, limit ±{_g(lim['dffits'])}",
                f"Cook's distance {_g(inf.cooks[i])}, limit {_g(COOKS_FLAG, 0)}",
            ]
            nums = {
                "estimate": inf.estimate,
                "estimate_without": float(inf.estimate_del[i]),
                "dffits": float(inf.dffits[i]),
                "dffits_limit": lim["dffits"],
                "cooks": float(inf.cooks[i]),
                "cooks_limit": COOKS_FLAG,
                "hat": float(inf.hat[i]),
                "covratio": float(inf.covratio[i]),
            }
            out.setdefault(i, []).append(
                Reason(
                    "influential",
                    MESSAGES["influential"].format(
                        est=_effect(inf.estimate, measure),
                        est_del=_effect(float(inf.estimate_del[i]), measure),
                        what="; ".join(what),
                    ),
                    MESSAGES["influential_check"],
                    nums,
                )
            )
    return out


def _heterogeneity_reasons(
    data: StudyData, inf: Influence, tau2_method: str
) -> dict[int, list[Reason]]:
    """Studies that alone halve a substantial τ² and take I² down by 25 points or more."""
    from .pooling import cochran_q

    out: dict[int, list[Reason]] = {}
    k = data.k
    tau2 = inf.tau2
    if not (tau2 > 0) or k < 3:
        return out
    q = cochran_q(data.y, data.v)
    i2 = max(0.0, (q - (k - 1)) / q) * 100.0 if q > 0 else 0.0
    if i2 < I2_DRIVER_FROM:
        return out
    with np.errstate(invalid="ignore"):
        halved = inf.tau2_del <= TAU2_DRIVER_RATIO * tau2
        material = i2 - inf.i2_del >= I2_DRIVER_DROP
    for i in np.flatnonzero(halved & material):
        nums = {
            "tau2": tau2,
            "tau2_without": float(inf.tau2_del[i]),
            "i2": i2,
            "i2_without": float(inf.i2_del[i]),
            "q": float(q),
            "q_without": float(inf.q_del[i]),
            "tau2_method": tau2_method,
        }
        out.setdefault(int(i), []).append(
            Reason(
                "heterogeneity",
                MESSAGES["heterogeneity"].format(
                    tau2=_tau2(tau2),
                    tau2_del=_tau2(float(inf.tau2_del[i])),
                    i2=f"{i2:.0f}%",
                    i2_del=f"{inf.i2_del[i]:.0f}%",
                ),
                MESSAGES["heterogeneity_check"],
                nums,
            )
        )
    return out


def _test_name(name: str, options) -> str:
    # "Arcsine test" reads mid-sentence as "the arcsine test"; named tests keep their name
    if "'" not in name.split(" ")[0]:
        name = "the " + name[:1].lower() + name[1:]
    return name + (" with random effects" if options else "")


def _switch_reasons(
    data: StudyData, inf: Influence, candidates: set[int]
) -> dict[int, list[Reason]]:
    """Studies without which a different asymmetry test would be recommended."""
    from .applicability import recommend
    from .asymmetry import REGISTRY

    out: dict[int, list[Reason]] = {}
    k = data.k
    full = recommend(data, inf.tau2)
    if k <= SWITCH_ALL_K:
        todo = range(k)
    else:  # recommend() is O(k): only the studies most likely to change it
        drop = np.nan_to_num(inf.tau2 - inf.tau2_del, nan=-np.inf)
        top = np.argsort(-drop, kind="stable")[:SWITCH_CANDIDATES]
        todo = sorted(set(int(i) for i in top) | candidates)
    if not inf.tau2 > 0:
        return out
    for i in todo:
        if not inf.tau2_del[i] <= TAU2_DRIVER_RATIO * inf.tau2:
            continue
        keep = np.ones(k, dtype=bool)
        keep[i] = False
        rec = recommend(data.subset(keep), float(inf.tau2_del[i]))
        if (rec.key, rec.options) == (full.key, full.options):
            continue
        other = _test_name(REGISTRY[rec.key].name, rec.options)
        this = _test_name(REGISTRY[full.key].name, full.options)
        out.setdefault(int(i), []).append(
            Reason(
                "test_switch",
                MESSAGES["test_switch"].format(
                    other=other,
                    this=this,
                    tau2_del=_tau2(float(inf.tau2_del[i])),
                    tau2=_tau2(inf.tau2),
                ),
                MESSAGES["test_switch_check"],
                {
                    "test": full.key,
                    "test_without": rec.key,
                    "tau2": inf.tau2,
                    "tau2_without": float(inf.tau2_del[i]),
                },
            )
        )
    return out


#: order in which a row's reasons are listed (the most specific first)
_ORDER = (
    "arm_risk",
    "arm_size",
    "duplicate",
    "outlier",
    "heterogeneity",
    "test_switch",
    "influential",
)


def flag_rows(data: StudyData, loo) -> RowFlags:
    """Every row worth checking against the paper, with its evidence.

    Parameters
    ----------
    data : StudyData
        The studies of the analysis.
    loo : LeaveOneOutResult or NotComputable
        The analysis' leave-one-out result (read, not recomputed).

    Returns
    -------
    RowFlags
    """
    by_index: dict[int, list[Reason]] = {}

    def merge(part: dict[int, list[Reason]]) -> None:
        for i, reasons in part.items():
            by_index.setdefault(i, []).extend(reasons)

    merge(arm_reasons(data))
    merge(duplicate_reasons(data))
    inf = influence(data, loo)
    drivers: list[str] = []
    notes: list[str] = []
    if isinstance(inf, Influence):
        merge(_influence_reasons(inf, data.measure))
        het = _heterogeneity_reasons(data, inf, inf.tau2_method)
        merge(het)
        sw = _switch_reasons(data, inf, set(by_index))
        merge(sw)
        drivers = [inf.labels[i] for i in sorted(set(het) | set(sw))]
    else:
        notes.append(f"Outlier and influence diagnostics: {inf.reason}.")
    labels = (
        data.labels
        if len(data.labels) == data.k
        else tuple(f"Study {i + 1}" for i in range(data.k))
    )
    rows = data.rows if len(data.rows) == data.k else tuple(range(data.k))
    flagged = []
    for i in sorted(by_index, key=lambda j: rows[j]):
        reasons = sorted(by_index[i], key=lambda r: _ORDER.index(r.kind))
        flagged.append(FlaggedStudy(rows[i], labels[i], tuple(reasons)))
    checked = []
    if _enough_arms(data):
        checked.append("arms")
    if isinstance(inf, Influence):
        checked += ["influence", "tau2"]
    if data.k >= 2:
        checked.append("duplicates")
    return RowFlags(tuple(flagged), inf, tuple(drivers), tuple(notes), tuple(checked))


def _enough_arms(data: StudyData) -> bool:
    """Whether :func:`arm_reasons` had enough arms (counts or sizes) to compare."""
    k = data.k
    sizes = (
        int((np.isfinite(data.n1) & np.isfinite(data.n0)).sum())
        if data.n1.size == k and data.n0.size == k
        else 0
    )
    counts = int(np.isfinite(data.a).sum()) if data.a.size == k else 0
    return max(sizes, counts) >= ARM_MIN


def reason_text(reason: Reason, *, check: bool = True) -> str:
    """One reason as a sentence: what, the evidence and (unless ``check=False``) what to
    check in the paper. The tooltip, list, text, JSON and sheet all use this."""
    title = KIND_TITLES.get(reason.kind, reason.kind)
    return f"{title}: {reason.detail}" + (f" {reason.check}" if check else "")


#: reasons of one family share what to check; a row lists the first check of each family
_FAMILY = {"arm_risk": "arm", "arm_size": "arm", "duplicate": "duplicate"}


def flag_lines(flagged: FlaggedStudy) -> list[str]:
    """A flagged row as lines: each reason with its evidence, then what to check.

    Reasons are ordered most specific first, so the first check of each family (the arms,
    a duplicate, the statistical signs) is the one worth reading.
    """
    lines = [reason_text(r, check=False) for r in flagged.reasons]
    checks: dict[str, str] = {}
    for r in flagged.reasons:
        if r.check:
            checks.setdefault(_FAMILY.get(r.kind, "statistics"), r.check)
    if checks:
        lines.append(" ".join(checks.values()))
    return lines


def row_label(flagged: FlaggedStudy) -> str:
    """ "Hollister 2011 (row 8)": the study and its row counted from 1."""
    return f"{flagged.study or 'Unnamed study'} (row {flagged.row + 1})"


def glance_text(flags) -> str:
    """One sentence for the key-messages box: which rows to check first, and why.

    "" when no row is flagged (or the flags could not be computed).
    """
    flagged = getattr(flags, "flagged", ()) or ()
    if not flagged:
        return ""
    parts = []
    for f in flagged[:3]:
        kinds = ", ".join(dict.fromkeys(KIND_TITLES[r.kind].lower() for r in f.reasons))
        parts.append(f"{row_label(f)}: {kinds}")
    more = f"; and {len(flagged) - 3} more" if len(flagged) > 3 else ""
    return (
        "; ".join(parts)
        + more
        + ". Every result on this sheet includes these rows: check them against the paper "
        "first (evidence below)."
    )


def suspects(flags, problems=()) -> tuple[tuple[int, str, str], ...]:
    """(row, label, why) of the flagged rows not already named by an entry problem, for the
    check against the published result: when the rows do not reproduce the paper, these
    are the first rows to re-check."""
    taken = {getattr(p, "row", None) for p in problems}
    out = []
    for f in getattr(flags, "flagged", ()) or ():
        if f.row in taken:
            continue
        kinds = ", ".join(dict.fromkeys(KIND_TITLES[r.kind].lower() for r in f.reasons))
        out.append((f.row, f.study or f"Row {f.row + 1}", SUSPECT.format(kinds=kinds)))
    return tuple(out)
