"""3. True heterogeneity: I² and tau² against the usual bands, the published I², and the
lean within subgroups.
"""

from __future__ import annotations

from lopside.appraise.causes.common import I2_HIGH, I2_LOW, _alpha, _egger_p, _ev, _se_slope_lines
from lopside.appraise.glossary import Glossary
from lopside.appraise.model import Evidence, SmallStudyReading
from lopside.stats.results import PooledEstimate
from lopside.words.numbers import (
    fmt_ci,
    fmt_p_eq,
    fmt_pct,
    fmt_tau2,
    is_finite,
    is_ok,
    pooled_text,
    why_not,
)
from lopside.words.sentences import HET_AGREE_POINTS, heterogeneity_reconciled


def heterogeneity_evidence(result, ss: SmallStudyReading, g: Glossary) -> list[Evidence]:
    out: list[Evidence] = []
    out.extend(_spread_lines(result, g))
    out.extend(_subgroup_lines(result, ss, g))
    return out


def _spread_lines(result, g: Glossary) -> list[Evidence]:
    """I² and tau² against the usual bands, and the published I² beside ours."""
    out: list[Evidence] = []
    m = result.measure
    het = result.heterogeneity
    i2t, t2t, pit = g("I²"), g("τ²"), g("prediction interval")
    if is_ok(het) and is_finite(het.i2):
        rnd = result.random
        pi = ""
        if isinstance(rnd, PooledEstimate) and rnd.pi is not None:
            pi = f"; {pit} {fmt_ci(rnd.pi.low, rnd.pi.high, m)}"
        nums = f"{i2t} = {fmt_pct(het.i2)}, {t2t} = {fmt_tau2(het.tau2)}{pi.replace('; ', ', ')}"
        if het.i2 >= I2_HIGH:
            out.append(
                _ev(
                    "for",
                    f"Substantial heterogeneity: {nums}. Real differences between studies can "
                    "make a funnel lopsided, and they make the tests and trim and fill "
                    "unreliable (Terrin et al. 2003).",
                    "heterogeneity",
                    i2=het.i2,
                )
            )
        elif het.i2 < I2_LOW:
            out.append(_ev("against", f"Little heterogeneity: {nums}.", "heterogeneity", i2=het.i2))
        else:
            out.append(
                _ev("unclear", f"Moderate heterogeneity: {nums}.", "heterogeneity", i2=het.i2)
            )
    else:
        out.append(
            _ev(
                "unclear", f"Heterogeneity could not be estimated: {why_not(het)}.", "heterogeneity"
            )
        )
    pub_i2 = result.review.details.published.i2
    if pub_i2 is not None and is_ok(het) and is_finite(het.i2):
        agree = abs(pub_i2 - het.i2) <= HET_AGREE_POINTS
        out.append(
            _ev(
                "unclear",
                heterogeneity_reconciled(pub_i2, het.i2),
                "published",
                published_i2=pub_i2,
                i2=het.i2,
                agree=1 if agree else 0,
            )
        )
    return out


def _subgroup_lines(result, ss: SmallStudyReading, g: Glossary) -> list[Evidence]:
    """Whether the entered subgroup feature explains the lean (effects and leans by level)."""
    out: list[Evidence] = []
    m = result.measure
    alpha = _alpha(result)
    labels = [x for x in result.data.subgroup if x]
    sg = result.subgroups.get("subgroup")
    if not labels:
        out.append(
            _ev(
                "unclear",
                "No subgroup feature (population, dose, setting) was entered, so the data "
                "cannot show whether small studies differ in kind.",
                "subgroup",
            )
        )
        return out
    if sg is None:
        out.append(
            _ev(
                "unclear",
                "All studies share one subgroup label, so it cannot explain the lean.",
                "subgroup",
            )
        )
        return out
    if not is_ok(sg):
        out.append(_ev("unclear", f"Subgroups could not be analysed: {why_not(sg)}.", "subgroup"))
        return out
    rt = sg.random_test
    if is_ok(rt):
        parts = ", ".join(f"{lv.level} {pooled_text(lv.random, m)}" for lv in sg.levels)
        if rt.pvalue < alpha:
            out.append(
                _ev(
                    "for",
                    f"Effects differ between subgroups ({fmt_p_eq(rt.pvalue)}): {parts}.",
                    "subgroup",
                    p=rt.pvalue,
                )
            )
        else:
            out.append(
                _ev(
                    "unclear",
                    f"Effects do not clearly differ between subgroups ({fmt_p_eq(rt.pvalue)}): "
                    f"{parts}.",
                    "subgroup",
                )
            )
    overall_signal = bool(ss.test.signal)
    ps = [(lv.level, lv.k, _egger_p(lv)) for lv in sg.levels]
    known = [(lev, k, p) for lev, k, p in ps if p is not None]
    lean_in = [lev for lev, _k, p in known if p < alpha]
    ptxt = "; ".join(f"{lev} {fmt_p_eq(p)}" for lev, _k, p in known)
    if not known:
        out.append(
            _ev(
                "unclear",
                "The subgroups are too small to test the lean within each of them.",
                "subgroup",
            )
        )
    elif overall_signal and not lean_in and len(known) == len(ps):
        out.append(
            _ev(
                "for",
                "Within each subgroup the asymmetry disappears (Egger's slope: "
                f"{ptxt}): the subgroup feature may explain the lean rather than bias.",
                "subgroup",
            )
        )
    elif overall_signal and not lean_in:
        out.append(
            _ev(
                "unclear",
                f"No clear lean within the subgroups that could be tested ({ptxt}); others "
                "were too small.",
                "subgroup",
            )
        )
    elif lean_in:
        out.append(
            _ev(
                "against",
                f"The lean persists within {', '.join(lean_in)} (Egger's slope: {ptxt}): the "
                "subgroup feature does not explain it.",
                "subgroup",
            )
        )
    else:
        out.append(
            _ev("unclear", f"No clear lean overall or within subgroups ({ptxt}).", "subgroup")
        )
    out.extend(_se_slope_lines(result.meta_regression.get("subgroup"), "the subgroup", alpha, g))
    return out
