"""5. Chance: how strong the signal is against the test threshold and the test's power."""

from __future__ import annotations

from lopside.appraise.causes.common import LOW_POWER, STRONG_P, _alpha, _ev
from lopside.appraise.glossary import Glossary
from lopside.appraise.model import Evidence, SmallStudyReading
from lopside.words.numbers import fmt_num, fmt_p_eq, fmt_share, is_finite, is_ok, plural


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
