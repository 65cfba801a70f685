"""What the five explanations share: the thresholds (each with its source), what to look
for in the paper, and the small helpers that build an evidence line or read a subgroup.
"""

from __future__ import annotations

from lopside.appraise.glossary import Glossary
from lopside.appraise.model import Evidence
from lopside.stats.results import PooledEstimate
from lopside.words.numbers import (
    fmt_ci,
    fmt_effect,
    fmt_num,
    fmt_p_eq,
    is_finite,
    is_ok,
    plural,
    why_not,
)

#: I² at or above which heterogeneity is called substantial (Ioannidis & Trikalinos 2007
#: use 50 % as the limit for testing; Higgins et al. 2003 call 50 % moderate-to-high).
I2_HIGH = 50.0


#: I² below which heterogeneity is called low (Higgins et al. 2003 bands; from memory).
I2_LOW = 25.0


#: An odds ratio is called large beyond this factor either way (our threshold: Harbord et
#: al. 2006 and Peters et al. 2006 found Egger's test inflated "with large effects").
LARGE_OR = 2.0


#: p below this is hard to put down to chance alone (our threshold).
STRONG_P = 0.01


#: Power below this makes a negative test uninformative (common practice: 80 % is the
#: usual target, and below half the test misses most biased reviews).
LOW_POWER = 0.5


#: The SE slope counts as explained by a moderator only if, with the moderator in the
#: model, it keeps less than this share of its size (our threshold: a slope that keeps its
#: size but loses significance has lost precision, not been explained).
KEEPS_SLOPE = 0.5


ROB_LOW = "low"


ROB_HIGHER = ("high", "some concerns")


#: What to look for in the paper (printed after "Look for:").
WHAT_TO_CHECK: dict[str, str] = {
    "selection": (
        "registered trials or planned outcomes never reported (registries, protocols); a "
        "search beyond English and journals; duplicate reports of one trial; funding (many "
        "small commercial trials raise suspicion; Guyatt et al. 2011)."
    ),
    "methods": (
        "in the risk-of-bias table, whether the smaller trials are more often at high risk "
        "(allocation concealment, blinding, attrition); single-centre or pilot trials. Enter "
        "the ratings to compare them here."
    ),
    "heterogeneity": (
        "whether the smaller studies differ in population (baseline risk, severity), dose, "
        "setting, era or follow-up; enter that feature as a subgroup to test it."
    ),
    "artefact": (
        "tests built for the measure: odds ratios and SMDs tie the estimate to its SE; "
        "ratios and risk differences can lean differently (Sterne & Egger 2001)."
    ),
    "chance": (
        "whether the test was planned in advance, and how many outcomes the review tested "
        "for asymmetry (many funnels invite chance findings)."
    ),
}


def _ev(direction: str, text: str, source: str = "", **numbers) -> Evidence:
    """One evidence line; ``numbers`` are the unformatted values the sentence quotes."""
    nums = tuple(
        (k, (v if isinstance(v, int) else float(v)) if is_finite(v) else None)
        for k, v in numbers.items()
    )
    return Evidence(direction, text, source, "", nums)


def _alpha(result) -> float:
    return result.settings.test_alpha


def _pooled_sign(result) -> float:
    for p in (result.random, result.fixed):
        if isinstance(p, PooledEstimate) and is_finite(p.estimate) and p.estimate != 0:
            return 1.0 if p.estimate > 0 else -1.0
    return 0.0


def _est_k(p, k: int, m: str) -> str:
    """ "OR 0.65 (0.48 to 0.89; 6 studies)"."""
    if not isinstance(p, PooledEstimate):
        return why_not(p)
    return (
        f"{m} {fmt_effect(p.estimate, m)} ({fmt_ci(p.ci.low, p.ci.high, m)}; "
        f"{plural(k, 'study', 'studies')})"
    )


def _rob_phrase(level: str) -> str:
    """ "at high risk of bias", "with some concerns about bias"."""
    if level == "some concerns":
        return "with some concerns about bias"
    return f"at {level} risk of bias"


def _level_map(sg) -> dict[str, object]:
    return {lv.level: lv for lv in sg.levels}


def _egger_p(lv) -> float | None:
    eg = getattr(lv, "egger", None)
    return float(eg.pvalue) if is_ok(eg) and is_finite(eg.pvalue) else None


def _further_from_null(a: float, b: float, sign: float) -> bool:
    """a shows a larger effect than b in the direction of the pooled result."""
    return (a - b) * sign > 0 if sign != 0 else abs(a) > abs(b)


def _se_slope_lines(mr, label: str, alpha: float, g: Glossary) -> list[Evidence]:
    """Does the slope on SE persist with the moderator in the model?"""
    if mr is None:
        return []
    mreg = g("meta-regression")
    if not is_ok(mr):
        return [
            _ev(
                "unclear",
                f"A {mreg} with {label} could not be fitted: {why_not(mr)}.",
                "meta-regression",
            )
        ]
    before, after = mr.se_without, mr.se_with
    if not (is_ok(before) and is_ok(after)):
        return [
            _ev(
                "unclear",
                f"{label.capitalize()} in a {mreg} with the SE: {mr.se_answer}",
                "meta-regression",
            )
        ]
    b, a = before.pvalue < alpha, after.pvalue < alpha
    kept = (
        after.estimate / before.estimate
        if is_finite(before.estimate) and before.estimate != 0
        else None
    )
    nums = (
        f"the slope on SE goes from {fmt_num(before.estimate, 2)} ({fmt_p_eq(before.pvalue)}) "
        f"to {fmt_num(after.estimate, 2)} ({fmt_p_eq(after.pvalue)})"
    )
    if b and not a and kept is not None and kept < KEEPS_SLOPE:
        d, what = "for", f"{label} may explain the lean"
    elif b and not a:
        d, what = "unclear", "it keeps much of its size, so the lean is not clearly explained"
    elif b and a:
        d, what = "against", f"the lean persists, so {label} does not explain it"
    else:
        d, what = "unclear", "there is no clear slope to explain"
    few = " Few studies per covariate: unreliable." if mr.note else ""
    return [_ev(d, f"With {label} in a {mreg}, {nums}: {what}.{few}", "meta-regression")]


def _test_p(result, key: str) -> float | None:
    t = result.tests.get(key)
    return float(t.pvalue) if is_ok(t) and is_finite(t.pvalue) else None
