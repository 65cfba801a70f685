"""2. Poorer methods in smaller studies: risk-of-bias levels compared, and the lean within
each level.
"""

from __future__ import annotations

from lopside.appraise.causes.common import (
    ROB_HIGHER,
    ROB_LOW,
    _alpha,
    _egger_p,
    _est_k,
    _ev,
    _further_from_null,
    _level_map,
    _pooled_sign,
    _rob_phrase,
    _se_slope_lines,
)
from lopside.appraise.glossary import Glossary
from lopside.appraise.model import Evidence, SmallStudyReading
from lopside.stats.results import PooledEstimate
from lopside.words.numbers import fmt_p_eq, is_ok, plural, why_not


def methods_evidence(result, ss: SmallStudyReading, g: Glossary) -> list[Evidence]:
    out: list[Evidence] = []
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
    out.extend(_rob_effect_lines(result, sg, low, higher, alpha))
    out.extend(_rob_lean_lines(low, higher, alpha))
    out.extend(
        _se_slope_lines(result.meta_regression.get("risk_of_bias"), "risk of bias", alpha, g)
    )
    return out


def _rob_effect_lines(result, sg, low, higher: list, alpha: float) -> list[Evidence]:
    """The pooled effect at higher risk of bias against the one at low risk."""
    out: list[Evidence] = []
    m = result.measure
    sign = _pooled_sign(result)
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
    return out


def _rob_lean_lines(low, higher: list, alpha: float) -> list[Evidence]:
    """Whether the lean persists among the studies at low risk of bias."""
    out: list[Evidence] = []
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
    return out
