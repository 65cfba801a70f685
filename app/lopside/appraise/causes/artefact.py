"""4. Artefact of the measure or the test: odds ratios and SMDs tie the estimate to its SE;
the tests' agreement and false-alarm rate.
"""

from __future__ import annotations

import math

from lopside.appraise.causes.common import LARGE_OR, _alpha, _ev, _test_p
from lopside.appraise.glossary import Glossary
from lopside.appraise.model import Evidence, SmallStudyReading
from lopside.stats.results import PooledEstimate
from lopside.words.numbers import fmt_effect, fmt_p_eq, fmt_share, is_finite, is_ok


def artefact_evidence(result, ss: SmallStudyReading, g: Glossary) -> list[Evidence]:
    out: list[Evidence] = []
    alpha = _alpha(result)
    rec = result.recommendation
    rkey = rec.key if is_ok(rec) else ""
    p_egger = _test_p(result, "egger")
    out.extend(_measure_lines(result, alpha, rkey, p_egger))
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


def _measure_lines(result, alpha: float, rkey: str, p_egger: float | None) -> list[Evidence]:
    """Whether the measure itself can make the funnel lean (its estimate tied to its SE)."""
    out: list[Evidence] = []
    m = result.measure
    if m == "OR":
        out.extend(_odds_ratio_lines(result, alpha, rkey, p_egger))
    elif m == "SMD":
        out.extend(_smd_lines(result, alpha, p_egger))
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
    return out


def _odds_ratio_lines(result, alpha: float, rkey: str, p_egger: float | None) -> list[Evidence]:
    """Odds ratios: Egger's false alarms with large effects, against the tests built for them."""
    out: list[Evidence] = []
    m = result.measure
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
    return out


def _smd_lines(result, alpha: float, p_egger: float | None) -> list[Evidence]:
    """SMDs: the SE contains the SMD itself; the modified-SE test avoids the link."""
    out: list[Evidence] = []
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
    return out
