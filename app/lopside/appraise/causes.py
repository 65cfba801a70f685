"""The alternative explanations of funnel asymmetry, side by side with publication bias.

Explanations and their order follow Egger et al. 1997 as adapted in the Cochrane Handbook
5.1, Table 10.4.a (methods.md section 7.2): selection and reporting biases, poorer methods
in smaller studies, true heterogeneity, artefact, chance. Each gets evidence lines from
this review (for / against / unclear, with the numbers) and what to look for in the paper
where the data entered cannot speak.

Nothing here computes a statistic: the lines compare numbers the engine produced with the
usual thresholds (p against the test threshold, I² against 25 % and 50 %).
"""

from __future__ import annotations

import math
from dataclasses import replace

from ..model.review import CAUSE_TITLES, CAUSES
from ..stats.results import PooledEstimate
from ..words.numbers import (
    fmt_ci,
    fmt_effect,
    fmt_num,
    fmt_p_eq,
    fmt_pct,
    fmt_share,
    fmt_tau2,
    is_finite,
    is_ok,
    plural,
    pooled_text,
    why_not,
)
from ..words.sentences import (
    HET_AGREE_POINTS,
    heterogeneity_reconciled,
    test_caution,
    trim_fill_range,
)
from .glossary import Glossary
from .model import CauseReading, Evidence, SmallStudyReading
from .reading import CONTOUR_DIRECTION

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


# --------------------------------------------------------------------------------------
# 1. Selection and reporting biases


def selection_evidence(result, ss: SmallStudyReading, g: Glossary) -> list[Evidence]:
    out: list[Evidence] = []
    c = ss.contour
    out.append(
        _ev(CONTOUR_DIRECTION.get(c.verdict, "unclear"), c.conclusion or c.text, "contour", k0=c.k0)
    )
    t = ss.test
    caution = test_caution(result.k)
    if t.computed:
        if t.signal and t.larger_in_small is not False:
            out.append(
                _ev(
                    "for",
                    f"{t.name} finds the funnel lopsided ({fmt_p_eq(t.pvalue)}), as publication "
                    f"bias would, though other causes can too. {caution}",
                    "test",
                    p=t.pvalue,
                )
            )
        elif t.signal:
            out.append(
                _ev(
                    "against",
                    f"{t.name} finds small studies with smaller effects ({fmt_p_eq(t.pvalue)}): "
                    "the reverse of what selective publication of favourable results produces.",
                    "test",
                    p=t.pvalue,
                )
            )
        else:
            out.append(
                _ev(
                    "against",
                    f"{t.name} finds no clear lean ({fmt_p_eq(t.pvalue)}). {caution}",
                    "test",
                    p=t.pvalue,
                )
            )
    else:
        out.append(_ev("unclear", t.text, "test"))
    a = ss.adjustments
    m = result.measure
    if a.moves == "towards null":
        rng = (
            f"{fmt_effect(a.low, m)} to {fmt_effect(a.high, m)}"
            if a.low != a.high
            else fmt_effect(a.low, m)
        )
        out.append(
            _ev(
                "for",
                f"{a.towards_null} of the {len(a.estimates)} adjusted estimates move towards no "
                f"effect ({rng}, against {fmt_effect(a.unadjusted, m)} unadjusted).",
                "adjustment",
                towards=a.towards_null,
                n=len(a.estimates),
            )
        )
    elif a.moves == "little":
        out.append(
            _ev(
                "against",
                f"{a.little} of the {len(a.estimates)} adjusted estimates hardly differ from the "
                "unadjusted one.",
                "adjustment",
                little=a.little,
                n=len(a.estimates),
            )
        )
    elif a.moves in ("mixed", "away from null"):
        out.append(
            _ev(
                "unclear",
                "The adjustment methods disagree about the direction of any bias.",
                "adjustment",
                n=len(a.estimates),
            )
        )
    sel_line = selection_model_evidence(result, g)
    if sel_line is not None:
        out.append(sel_line)
    tf_line = trim_fill_variants_evidence(result)
    if tf_line is not None:
        out.append(tf_line)
    # issue 20: trials known to be missing, strength of selection needed, review's claim
    from .selection_items import selection_items

    out.extend(selection_items(result))
    out.append(
        _ev(
            "unclear",
            "The numbers cannot show delayed publication, language or location bias, "
            "duplicate publication or selective outcome reporting.",
            "not in the data",
        )
    )
    return out


def selection_model_evidence(result, g: Glossary) -> Evidence | None:
    """The selection model, read by the direction of its weights (Vevea & Hedges 1995).

    The weight of the non-significant interval relative to the significant one says which
    way any selection runs: below 1, non-significant results were less likely to be
    published (the usual publication bias: "for"); above 1, more likely (selection against
    significant results: "against" publication bias as usually meant).
    """
    sel = result.selection
    if not (is_ok(sel) and is_finite(sel.lrt_pvalue)):
        return None
    alpha = _alpha(result)
    w = sel.omega[1] if len(sel.omega) > 1 else None
    sm = g("selection model")
    p = sel.lrt_pvalue
    caution = test_caution(result.k)
    cut = fmt_num(sel.cutpoints[0], 3) if sel.cutpoints else ""
    if p >= alpha or not is_finite(w):
        return _ev(
            "unclear",
            f"The {sm} finds no clear selection by significance ({fmt_p_eq(p)}). {caution}",
            "selection model",
            p=p,
            weight=w,
        )
    if w < 1:
        rel = (
            f"results with one-sided p above {cut} appear {fmt_num(w, 2)} times as likely to be "
            "published as those below it"
        )
        return _ev(
            "for",
            f"The {sm} finds selection favouring significant results ({fmt_p_eq(p)}; {rel}). "
            f"{caution}",
            "selection model",
            p=p,
            weight=w,
        )
    rel = (
        f"results with one-sided p above {cut} appear {fmt_num(w, 1)} times as likely to be "
        "published as those below it"
    )
    return _ev(
        "against",
        f"The {sm} finds selection running the other way ({fmt_p_eq(p)}; {rel}): "
        f"non-significant results were favoured, the reverse of publication bias. {caution}",
        "selection model",
        p=p,
        weight=w,
    )


def trim_fill_variants_evidence(result) -> Evidence | None:
    """Whether trim and fill's answer depends on its settings (Peters et al. 2007)."""
    rng = trim_fill_range(result)
    if rng is None or rng.n < 2:
        return None
    if rng.agree:
        return None
    return _ev("unclear", rng.text, "trim and fill", k0_low=rng.k0_low, k0_high=rng.k0_high)


# --------------------------------------------------------------------------------------
# 2. Poorer methods in smaller studies


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


def methods_evidence(result, ss: SmallStudyReading, g: Glossary) -> list[Evidence]:
    out: list[Evidence] = []
    m = result.measure
    alpha = _alpha(result)
    labels = [x for x in result.data.risk_of_bias if x]
    if not labels:
        out.append(
            _ev(
                "unclear",
                "No risk-of-bias ratings were entered, so the data here cannot show whether "
                "smaller studies were less rigorous.",
                "risk of bias",
            )
        )
        return out
    if len(labels) < result.data.k:
        out.append(
            _ev(
                "unclear",
                f"Risk of bias is recorded for {len(labels)} of {result.data.k} studies only.",
                "risk of bias",
            )
        )
    levels = sorted(set(labels))
    sg = result.subgroups.get("risk_of_bias")
    if len(levels) < 2 or sg is None:
        only = levels[0]
        d = "against" if only == ROB_LOW else "unclear"
        out.append(
            _ev(
                d,
                f"Every rated study has the same risk of bias ({only}), so differences in "
                "rigour cannot explain why small and large studies differ"
                + ("." if d == "against" else " within this review; all share the same concerns."),
                "risk of bias",
            )
        )
        return out
    if not is_ok(sg):
        out.append(
            _ev(
                "unclear",
                f"Risk-of-bias subgroups could not be analysed: {why_not(sg)}.",
                "risk of bias",
            )
        )
        return out
    lv = _level_map(sg)
    low = lv.get(ROB_LOW)
    higher = [lv[k] for k in ROB_HIGHER if k in lv]
    sign = _pooled_sign(result)
    # pooled effect by level
    if low is not None and higher:
        hi = higher[0]
        lr, hr = low.random, hi.random
        if isinstance(lr, PooledEstimate) and isinstance(hr, PooledEstimate):
            diff = sg.random_test
            dtxt = f"; difference between levels {fmt_p_eq(diff.pvalue)}" if is_ok(diff) else ""
            bigger = _further_from_null(hr.estimate, lr.estimate, sign)
            sig_diff = is_ok(diff) and diff.pvalue < alpha
            if bigger and sig_diff:
                d = "for"
            elif bigger:
                d = "unclear"
            else:
                d = "against"
            more = "a larger" if bigger else "no larger"
            out.append(
                _ev(
                    d,
                    f"Studies {_rob_phrase(hi.level)} show {more} effect than those at low "
                    f"risk: {_est_k(hr, hi.k, m)} against {_est_k(lr, low.k, m)}{dtxt}.",
                    "risk of bias",
                    p=diff.pvalue if is_ok(diff) else None,
                )
            )
    # the lean within levels
    if low is not None:
        p_low = _egger_p(low)
        p_hi = [(h.level, _egger_p(h)) for h in higher]
        hi_sig = [lev for lev, p in p_hi if p is not None and p < alpha]
        if p_low is None:
            out.append(
                _ev(
                    "unclear",
                    f"Too few low-risk studies ({low.k}) to test the lean among them alone.",
                    "risk of bias",
                )
            )
        elif p_low >= alpha and hi_sig:
            out.append(
                _ev(
                    "for",
                    "The lean is confined to studies at higher risk of bias: Egger's slope "
                    + ", ".join(f"{lev} {fmt_p_eq(p)}" for lev, p in p_hi if p is not None)
                    + f"; low risk {fmt_p_eq(p_low)}.",
                    "risk of bias",
                )
            )
        elif p_low < alpha:
            out.append(
                _ev(
                    "against",
                    f"The lean persists among studies at low risk of bias (Egger's slope "
                    f"{fmt_p_eq(p_low)}, {plural(low.k, 'study', 'studies')}).",
                    "risk of bias",
                )
            )
        else:
            out.append(
                _ev(
                    "unclear",
                    f"No clear lean within any risk-of-bias level (low risk: Egger's slope "
                    f"{fmt_p_eq(p_low)}); subgroups are small, so this says little.",
                    "risk of bias",
                )
            )
    else:
        out.append(
            _ev("unclear", "No study is rated at low risk of bias to compare with.", "risk of bias")
        )
    out.extend(
        _se_slope_lines(result.meta_regression.get("risk_of_bias"), "risk of bias", alpha, g)
    )
    return out


# --------------------------------------------------------------------------------------
# 3. True heterogeneity


def heterogeneity_evidence(result, ss: SmallStudyReading, g: Glossary) -> list[Evidence]:
    out: list[Evidence] = []
    m = result.measure
    alpha = _alpha(result)
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


# --------------------------------------------------------------------------------------
# 4. Artefact of the measure or the test


def _test_p(result, key: str) -> float | None:
    t = result.tests.get(key)
    return float(t.pvalue) if is_ok(t) and is_finite(t.pvalue) else None


def artefact_evidence(result, ss: SmallStudyReading, g: Glossary) -> list[Evidence]:
    out: list[Evidence] = []
    m = result.measure
    alpha = _alpha(result)
    rec = result.recommendation
    rkey = rec.key if is_ok(rec) else ""
    p_egger = _test_p(result, "egger")
    if m == "OR":
        rnd = result.random if isinstance(result.random, PooledEstimate) else result.fixed
        large = isinstance(rnd, PooledEstimate) and abs(rnd.estimate) >= math.log(LARGE_OR)
        size = (
            f"the pooled odds ratio is {fmt_effect(rnd.estimate, m)}"
            if isinstance(rnd, PooledEstimate)
            else "the pooled odds ratio is unknown"
        )
        specific = [(k, _test_p(result, k)) for k in ("harbord", "peters")]
        specific = [(k, p) for k, p in specific if p is not None]
        if rkey == "egger" and large:
            out.append(
                _ev(
                    "for",
                    f"A large effect ({size}) tested with Egger's test: on log odds ratios it "
                    "gives false alarms when effects are large or events few, because the "
                    "estimate and its SE are linked (Harbord et al. 2006; Peters et al. 2006). "
                    "Enter 2x2 counts to run the tests built for odds ratios.",
                    "measure",
                )
            )
        elif rkey == "egger":
            out.append(
                _ev(
                    "unclear",
                    f"Only Egger's test could be run ({size}); without 2x2 counts the tests "
                    "built for odds ratios cannot check it.",
                    "measure",
                )
            )
        if p_egger is not None and specific:
            names = {"harbord": "Harbord's", "peters": "Peters'"}
            sp = ", ".join(f"{names[k]} {fmt_p_eq(p)}" for k, p in specific)
            spec_sig = [p for _k, p in specific if p < alpha]
            if p_egger < alpha and not spec_sig:
                out.append(
                    _ev(
                        "for",
                        f"Egger's test signals ({fmt_p_eq(p_egger)}) but the tests that avoid "
                        f"the odds ratio's link to its SE do not ({sp}): the signal may be an "
                        "artefact" + (f" ({size})." if large else "."),
                        "measure",
                    )
                )
            elif p_egger < alpha and spec_sig:
                out.append(
                    _ev(
                        "against",
                        f"The tests built for odds ratios agree with Egger's ({sp}; Egger's "
                        f"{fmt_p_eq(p_egger)}).",
                        "measure",
                    )
                )
            elif large:
                out.append(
                    _ev(
                        "unclear",
                        f"A large effect ({size}); the tests built for odds ratios were used "
                        f"({sp}), which avoid Egger's false alarms.",
                        "measure",
                    )
                )
    elif m == "SMD":
        p_mod = _test_p(result, "smd_modified")
        if p_mod is None:
            out.append(
                _ev(
                    "for" if p_egger is not None and p_egger < alpha else "unclear",
                    "The SE of an SMD contains the SMD itself, which can make the funnel lean "
                    "on its own; without group sizes the modified test (Pustejovsky & Rodgers "
                    "2019) cannot check it.",
                    "measure",
                )
            )
        elif p_egger is not None and p_egger < alpha and p_mod >= alpha:
            out.append(
                _ev(
                    "for",
                    f"Egger's test signals ({fmt_p_eq(p_egger)}) but the version with a "
                    f"precision from group sizes does not ({fmt_p_eq(p_mod)}): the SMD's link "
                    "to its own SE may explain the signal (Pustejovsky & Rodgers 2019).",
                    "measure",
                )
            )
        else:
            out.append(
                _ev(
                    "against",
                    f"The test with a precision from group sizes, which avoids the SMD's link "
                    f"to its SE, gives {fmt_p_eq(p_mod)}"
                    + (f" (Egger's {fmt_p_eq(p_egger)})." if p_egger is not None else "."),
                    "measure",
                )
            )
    elif m == "MD":
        out.append(
            _ev(
                "against",
                "The SE of a mean difference does not depend on the difference itself, so the "
                "funnel cannot lean from that link.",
                "measure",
            )
        )
    else:
        what = {"RR": "risk ratios", "RD": "risk differences", "HR": "hazard ratios"}[m]
        out.append(
            _ev(
                "unclear",
                f"How well asymmetry tests work for {what} has not been established (Sterne et "
                "al. 2011): read the result as exploratory.",
                "measure",
            )
        )
        if m == "RD":
            out.append(
                _ev(
                    "unclear",
                    "Risk differences vary with the baseline risk, so a funnel of risk "
                    "differences can lean where one of ratios would not (Sterne & Egger 2001).",
                    "measure",
                )
            )
    t = ss.test
    if t.n_computed >= 2:
        if 0 < t.n_signal < t.n_computed:
            out.append(
                _ev(
                    "unclear",
                    f"The tests disagree: {t.n_signal} of {t.n_computed} signal a lean "
                    f"(tests often disagree; Lin et al. 2018). {t.others_text}.",
                    "tests",
                )
            )
        elif t.n_signal == t.n_computed:
            out.append(
                _ev("against", f"All {t.n_computed} tests that could be run agree.", "tests")
            )
    pw = result.power
    if is_ok(pw) and is_finite(getattr(pw, "type1", None)):
        if pw.type1 > 1.5 * alpha:
            out.append(
                _ev(
                    "for",
                    f"With these studies the test would give false alarms in "
                    f"{fmt_share(pw.type1, 1)} of unbiased reviews, more than the nominal "
                    f"{fmt_share(alpha)}.",
                    "power",
                )
            )
        else:
            out.append(
                _ev(
                    "against",
                    f"With these studies the test's false-alarm rate is near nominal "
                    f"({fmt_share(pw.type1, 1)}).",
                    "power",
                )
            )
    return out


# --------------------------------------------------------------------------------------
# 5. Chance


def chance_evidence(result, ss: SmallStudyReading, g: Glossary) -> list[Evidence]:
    out: list[Evidence] = []
    k = result.k
    alpha = _alpha(result)
    if k < 10:
        out.append(
            _ev(
                "for",
                f"Only {plural(k, 'study', 'studies')}: with fewer than 10 the tests are "
                "unreliable and a lopsided funnel easily arises by chance (Sterne et al. 2011).",
                "study count",
                k=k,
            )
        )
    else:
        out.append(
            _ev(
                "against",
                f"{plural(k, 'study', 'studies')}: enough for the tests to be read (at least 10 "
                "advised; Sterne et al. 2011), though power stays low below about 20.",
                "study count",
                k=k,
            )
        )
    t = ss.test
    if t.computed and t.pvalue is not None:
        if t.pvalue < STRONG_P:
            out.append(
                _ev(
                    "against",
                    f"{t.name}: {fmt_p_eq(t.pvalue)} is hard to put down to chance alone.",
                    "test",
                    test_p=t.pvalue,
                )
            )
        elif t.pvalue < 0.05:
            out.append(
                _ev(
                    "unclear",
                    f"{t.name}: {fmt_p_eq(t.pvalue)} could still arise by chance, the more so "
                    "as several tests were run.",
                    "test",
                    test_p=t.pvalue,
                )
            )
        elif t.pvalue < alpha:
            out.append(
                _ev(
                    "for",
                    f"{t.name}: {fmt_p_eq(t.pvalue)} is close to the threshold "
                    f"({fmt_num(alpha, 2)}); a chance finding is plausible, the more so as "
                    "several tests were run.",
                    "test",
                    test_p=t.pvalue,
                )
            )
        else:
            out.append(
                _ev(
                    "unclear",
                    f"{t.name} shows no clear lean ({fmt_p_eq(t.pvalue)}): there may be "
                    "nothing to explain, or the test missed it.",
                    "test",
                    test_p=t.pvalue,
                )
            )
    pw = result.power
    if is_ok(pw) and is_finite(getattr(pw, "power", None)):
        pterm = g("power")
        if pw.power < LOW_POWER:
            d = "for" if t.signal else "unclear"
            out.append(
                _ev(
                    d,
                    f"The test's {pterm} for this review is only {fmt_share(pw.power)}: a "
                    "negative result says little, and a positive one deserves caution.",
                    "power",
                )
            )
        else:
            out.append(
                _ev(
                    "against" if t.signal else "unclear",
                    f"The test's {pterm} for this review is {fmt_share(pw.power)}.",
                    "power",
                )
            )
    elif pw is None:
        out.append(
            _ev(
                "unclear",
                "Power was not simulated for this review (the power option shows how often "
                "the test would detect bias here).",
                "power",
            )
        )
    return out


_BUILDERS = {
    "selection": selection_evidence,
    "methods": methods_evidence,
    "heterogeneity": heterogeneity_evidence,
    "artefact": artefact_evidence,
    "chance": chance_evidence,
}


def cause_readings(result, ss: SmallStudyReading, g: Glossary) -> tuple[CauseReading, ...]:
    """All five explanations with evidence, what to check, and the appraiser's notes."""
    notes = result.review.notes
    out = []
    for key in CAUSES:
        ev = tuple(replace(e, cause=key) for e in _BUILDERS[key](result, ss, g))
        cn = notes.cause(key)
        out.append(
            CauseReading(
                key=key,
                title=CAUSE_TITLES[key],
                evidence=ev,
                what_to_check=WHAT_TO_CHECK[key],
                judgement=cn.judgement,
                notes=cn.notes,
            )
        )
    return tuple(out)
