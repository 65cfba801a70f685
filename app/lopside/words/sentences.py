"""Sentences that quote a number, each built in exactly one place.

Whenever two faces (text, window, sheet, JSON) or two sections say the same thing with a
number in it (the spread of study sizes, a count of adjustment methods, a caution about a
weak test), the sentence is built here and the callers reuse it, so the figures can never
disagree between pages.
"""

from __future__ import annotations

from dataclasses import dataclass

from ..model.review import RATIO_MEASURES
from ..stats.results import PooledEstimate
from .numbers import fmt_effect, fmt_num, fmt_pct, is_finite, is_ok, plural

#: Below this many studies the tests have little power (Sterne et al. 2000, simulation;
#: from memory: power under 50 % for moderate bias with fewer than about 20 studies).
FEW_FOR_POWER = 20


def test_caution(k: int) -> str:
    """The caution about a weak test, the same whether the result is positive or null.

    Symmetric on purpose: with few studies a positive result is as fragile as a null one
    (Sterne et al. 2011, recommendation 1; Sterne et al. 2000).
    """
    if k < FEW_FOR_POWER:
        return (
            f"With {plural(k, 'study', 'studies')} such a test has little power: a negative "
            "result does not rule bias out, and a positive one can arise by chance or from "
            "other causes."
        )
    return "A test result alone neither proves nor rules out publication bias."


def spread_text(se_low: float, se_high: float) -> str:
    """The spread of study sizes as the variance ratio the applicability rule reads.

    One sentence for the data table and the conditions table (Ioannidis & Trikalinos 2007
    state the rule as a ratio of variances, so the SE ratio is not quoted separately).
    """
    if not (is_finite(se_low) and is_finite(se_high)) or se_low <= 0:
        return ""
    return (
        f"largest within-study variance is {fmt_num((se_high / se_low) ** 2, 1)} times the smallest"
    )


def rule_detail(rule, result) -> str:
    """The detail of one applicability rule as printed (tables and readings alike).

    The spread of study sizes is worded by :func:`spread_text`, the same sentence as the
    data table; other rules print the engine's own detail.
    """
    if rule.rule == "variance_ratio" and rule.met is not None:
        from ..stats.applicability import MIN_VARIANCE_RATIO

        se = [float(x) for x in result.data.se if is_finite(x) and x > 0]
        if len(se) >= 2:
            return f"{spread_text(min(se), max(se))} (more than {MIN_VARIANCE_RATIO:g} advised)"
    return rule.detail


def heterogeneity_reconciled(published_i2: float, ours_i2: float) -> str:
    """ "The paper says I² 37%, your rows give 63%: check the rows." (or agreement)."""
    if not (is_finite(published_i2) and is_finite(ours_i2)):
        return ""
    diff = abs(float(published_i2) - float(ours_i2))
    if diff <= HET_AGREE_POINTS:
        return (
            f"The paper says I² {fmt_pct(published_i2)}, your rows give {fmt_pct(ours_i2)}: "
            "they agree."
        )
    return (
        f"The paper says I² {fmt_pct(published_i2)}, your rows give {fmt_pct(ours_i2)}: "
        "check the rows (a mistyped row or a different set of studies changes I²)."
    )


#: Published and computed I² agree within this many percentage points (our threshold:
#: papers print I² rounded to whole percent, and the tau² estimator shifts nothing in I²,
#: so a gap beyond rounding plus a little slack means the rows differ from the paper's).
HET_AGREE_POINTS = 2.0


@dataclass(frozen=True, slots=True)
class TrimFillRange:
    """Trim and fill under all its usual settings, summarised (Peters et al. 2007).

    Attributes
    ----------
    rows : tuple of (setting, k0, estimate, low, high, default)
        One per setting that ran (analysis scale), the default marked.
    n : int
        Settings that ran.
    k0_low, k0_high : int
    est_low, est_high : float
    crosses : int
        Settings whose CI includes no effect.
    agree : bool
        Every setting agrees on whether there is a gap at all and on whether the CI
        includes no effect.
    text : str
        The one sentence that quotes the range (sheet, Adjust view, evidence line).
    """

    rows: tuple[tuple[str, int, float, float, float, bool], ...]
    n: int
    k0_low: int
    k0_high: int
    est_low: float
    est_high: float
    crosses: int
    agree: bool
    text: str


def trim_fill_range(result) -> TrimFillRange | None:
    """The range across the trim-and-fill settings the analysis ran, or None if none ran."""
    m = result.measure
    s = result.settings
    default = f"{s.trimfill_estimator}, trim {s.trimfill_trim_model}, fill {s.trimfill_fill_model}"
    rows = []
    for name, v in result.trim_fill_variants.items():
        if not is_ok(v):
            continue
        adj = getattr(v, "adjusted", None)
        if not isinstance(adj, PooledEstimate) or not is_finite(adj.estimate):
            continue
        rows.append(
            (
                name,
                int(v.k0),
                float(adj.estimate),
                float(adj.ci.low),
                float(adj.ci.high),
                name == default,
            )
        )
    if not rows:
        return None
    k0s = [r[1] for r in rows]
    ests = [r[2] for r in rows]
    crosses = sum(1 for r in rows if r[3] <= 0.0 <= r[4])
    n = len(rows)
    # the settings disagree when some find no gap and others do, or when some intervals
    # include no effect and others do not (Peters et al. 2007)
    agree = (min(k0s) == 0) == (max(k0s) == 0) and crosses in (0, n)
    lo_row = min(rows, key=lambda r: r[2])
    hi_row = max(rows, key=lambda r: r[2])
    null = "1" if m in RATIO_MEASURES else "0"
    if n == 1:
        text = (
            f"Trim and fill ran under one setting only ({rows[0][0]}): "
            f"{plural(rows[0][1], 'study', 'studies')} filled, estimate {fmt_effect(rows[0][2], m)}."
        )
    else:
        fills = (
            f"fill {plural(k0s[0], 'study', 'studies')}"
            if min(k0s) == max(k0s)
            else f"fill {min(k0s)} to {max(k0s)} studies"
        )
        text = (
            f"Across the {n} trim-and-fill settings the methods {fills}; the estimate runs from "
            f"{fmt_effect(lo_row[2], m)} ({lo_row[0]}) to {fmt_effect(hi_row[2], m)} "
            f"({hi_row[0]}), and {crosses} of the {n} intervals include no effect ({null})."
        )
        if not agree:
            text += " The answer depends on the setting: read the default with that in mind."
    return TrimFillRange(
        tuple(rows), n, min(k0s), max(k0s), min(ests), max(ests), crosses, agree, text
    )


# not a pytest test, despite the name (test modules import it)
test_caution.__test__ = False  # type: ignore[attr-defined]
