"""The small-study-effects reading: contour regions of imputed studies, test, rules, power, range.

Nothing here computes a statistic. The only arithmetic is classification and comparison:
a study's two-sided p region from y/SE against the contour thresholds (the same regions the
contour-enhanced funnel shades; Peters et al. 2008), a p-value against the test threshold,
and the smallest and largest of the adjusted estimates the engine produced.
"""

from __future__ import annotations

from typing import Any

from ..model.review import RATIO_MEASURES
from ..stats.results import PooledEstimate, is_pending
from ..words.numbers import (
    fmt_ci,
    fmt_effect,
    fmt_num,
    fmt_p_eq,
    fmt_share,
    is_finite,
    is_ok,
    plural,
    why_not,
)
from ..words.rows import adjustment_rows
from ..words.sentences import rule_detail, test_caution
from .glossary import Glossary
from .model import AdjustmentRange, ContourReading, TestReading

#: Two-sided normal critical values for p = 0.10, 0.05, 0.01 (Φ⁻¹(0.95), Φ⁻¹(0.975),
#: Φ⁻¹(0.995); scipy.stats.norm.ppf gives 1.6448536, 1.9599640, 2.5758293).
Z_10 = 1.6448536269514722
Z_05 = 1.959963984540054
Z_01 = 2.5758293035489004

#: Region labels, most significant first, as the funnel's bands are named by p.
REGIONS: tuple[str, ...] = ("p < 0.01", "0.01 to 0.05", "0.05 to 0.10", "p > 0.10")
NON_SIGNIFICANT = "p > 0.10"

#: An adjusted estimate "hardly moves" when it shifts by less than this share of the
#: half-width of the unadjusted 95% CI (our threshold: a shift well inside the CI).
LITTLE_SHIFT = 0.5


def significance_region(y: float, se: float, null: float = 0.0) -> str | None:
    """The contour region of a study: its two-sided p-value band for y/SE against the null.

    Parameters
    ----------
    y, se : float
        Effect (analysis scale) and its standard error.
    null : float
        No-effect value on the analysis scale (0 for log ratios and differences).

    Returns
    -------
    str or None
        One of :data:`REGIONS`, or None when ``se`` is not positive or values are missing.
    """
    if not (is_finite(y) and is_finite(se)) or se <= 0:
        return None
    z = abs(y - null) / se
    if z >= Z_01:
        return REGIONS[0]
    if z >= Z_05:
        return REGIONS[1]
    if z >= Z_10:
        return REGIONS[2]
    return REGIONS[3]


def _count_regions(pairs) -> tuple[tuple[str, int], ...]:
    counts = dict.fromkeys(REGIONS, 0)
    for y, se in pairs:
        r = significance_region(y, se)
        if r is not None:
            counts[r] += 1
    return tuple(counts.items())


#: Region names for running text.
REGION_WORDS: dict[str, str] = {
    REGIONS[0]: "where p < 0.01",
    REGIONS[1]: "where p is between 0.01 and 0.05",
    REGIONS[2]: "where p is between 0.05 and 0.10",
    REGIONS[3]: "in the non-significant region (p > 0.10)",
}

CONCLUSIONS: dict[str, str] = {
    "non-significant": (
        "The apparently missing studies lie in the non-significant region (p > 0.10): "
        "consistent with publication bias (Peters et al. 2008)."
    ),
    "significant": (
        "The apparently missing studies would have been statistically significant "
        "(p < 0.10) in favour of the intervention, and such results are seldom left "
        "unpublished: causes other than publication bias are more likely (Peters et al. 2008)."
    ),
    "significant harm": (
        "The apparently missing studies would have shown statistically significant harm "
        "(p < 0.10). Results unfavourable to the intervention can be withheld even when "
        "significant, so the contours cannot tell publication bias from other causes here "
        "(Peters et al. 2008 read the contours assuming significance is what gets published)."
    ),
    "benefit side": (
        "The apparently missing studies lie on the side favouring the intervention: "
        "suppressed results would have been favourable ones, the reverse of the usual "
        "mechanism of publication bias (withholding unfavourable results)."
    ),
    "mixed": (
        "Some apparently missing studies lie in the non-significant region and some would "
        "have been significant: the contours do not separate publication bias from other "
        "causes here (Peters et al. 2008)."
    ),
    "none filled": "Trim and fill finds no gap to fill on either side of the funnel.",
}

#: How each contour verdict bears on publication bias (the evidence line's direction).
CONTOUR_DIRECTION: dict[str, str] = {
    "non-significant": "for",
    "significant": "against",
    "significant harm": "unclear",
    "benefit side": "against",
    "mixed": "unclear",
    "none filled": "against",
    "not available": "unclear",
}


def benefit_side(result) -> str:
    """The side of the funnel ("left" or "right") where results favour the intervention."""
    return "left" if result.review.details.favours == "lower" else "right"


def side_words(result, side: str) -> str:
    """ "the left (the side favouring the intervention)"."""
    if side not in ("left", "right"):
        return "one side"
    which = "favouring the intervention" if side == benefit_side(result) else "of harm"
    return f"the {side} (the side {which})"


def contour_reading(result, g: Glossary) -> ContourReading:
    """Which significance region the trim-and-fill studies fall in (Peters et al. 2008).

    Direction-aware: studies imputed on the side favouring the intervention point away
    from the usual mechanism (withholding unfavourable results), whatever their
    significance; significant studies imputed on the harm side cannot be read either way.
    """
    data = result.data
    observed = _count_regions(zip(data.y.tolist(), data.se.tolist()))
    tf = result.trim_fill
    cef = g("contour-enhanced funnel plot")
    if not is_ok(tf):
        return ContourReading(
            None,
            "",
            (),
            observed,
            "not available",
            f"Trim and fill could not be run ({why_not(tf)}), so the {cef} has no imputed "
            "studies to read; judge any gap by eye, with care.",
            "Trim and fill could not be run, so the contours cannot be read for missing studies.",
        )
    filled = tuple(getattr(tf, "filled", ()) or ())
    k0 = int(getattr(tf, "k0", len(filled)))
    regions = _count_regions((f.y, f.se) for f in filled)
    counts = dict(regions)
    tnf = g("trim and fill")
    if k0 == 0 or not filled:
        return ContourReading(
            0,
            getattr(tf, "side", ""),
            regions,
            observed,
            "none filled",
            f"On the {cef}, {tnf} imputes no missing studies: it finds no gap to fill.",
            CONCLUSIONS["none filled"],
        )
    non_sig = counts[NON_SIGNIFICANT]
    n = sum(counts.values())
    present = [(r, c) for r, c in regions if c]
    if len(present) == 1:
        where = ("all " if n > 1 else "") + REGION_WORDS[present[0][0]]
    else:
        where = "; ".join(f"{c} {REGION_WORDS[r]}" for r, c in present)
    lower_good = result.review.details.favours == "lower"
    sig_harm = sum(
        1
        for f in filled
        if significance_region(f.y, f.se) not in (None, NON_SIGNIFICANT) and (f.y < 0) != lower_good
    )
    if tf.side == benefit_side(result):
        verdict = "benefit side"
    elif non_sig == n:
        verdict = "non-significant"
    elif non_sig == 0 and sig_harm == n:
        verdict = "significant harm"
    elif non_sig == 0 and sig_harm == 0:
        verdict = "significant"
    else:
        verdict = "mixed"
    lead = (
        f"On the {cef}, {tnf} imputes {plural(k0, 'study', 'studies')} on "
        f"{side_words(result, tf.side)}"
    )
    # the conclusion names the non-significant region itself; other placements are spelt out
    lead += "." if verdict == "non-significant" else f", {where}."
    conclusion = CONCLUSIONS[verdict]
    return ContourReading(
        k0, tf.side, regions, observed, verdict, f"{lead} {conclusion}", conclusion
    )


def observed_text(c: ContourReading) -> str:
    counts = dict(c.observed_regions)
    n = sum(counts.values())
    if not n:
        return "No study has a usable effect and SE."
    sig = counts[REGIONS[0]] + counts[REGIONS[1]]
    mid = counts[REGIONS[2]]
    ns = counts[NON_SIGNIFICANT]
    return (
        f"Of the {n} studies, {sig} {'reaches' if sig == 1 else 'reach'} p < 0.05 on "
        f"{'its' if sig == 1 else 'their'} own, {mid} {'lies' if mid == 1 else 'lie'} between "
        f"p = 0.05 and 0.10, and {ns} {'is' if ns == 1 else 'are'} in the non-significant "
        "region (p > 0.10)."
    )


def _pooled_direction(result) -> float:
    """Sign of the pooled estimate (random effects if available, else fixed), 0 if none."""
    for p in (result.random, result.fixed):
        if isinstance(p, PooledEstimate) and is_finite(p.estimate):
            return 1.0 if p.estimate > 0 else (-1.0 if p.estimate < 0 else 0.0)
    return 0.0


def test_reading(result, g: Glossary) -> TestReading:
    """The recommended test, its result, and the other tests in one line."""
    alpha = result.settings.test_alpha
    rec = result.recommendation
    computed_tests = [(k, t) for k, t in result.tests.items() if is_ok(t)]
    n_signal = sum(1 for _k, t in computed_tests if t.pvalue < alpha)
    sse = g("small-study effects")
    if not is_ok(rec):
        return TestReading(
            "",
            "",
            False,
            None,
            None,
            False,
            None,
            f"No test could be recommended ({why_not(rec)}).",
            "",
            n_signal,
            len(computed_tests),
        )
    t = result.tests.get(rec.key)
    from ..stats.asymmetry import REGISTRY

    spec = REGISTRY.get(rec.key)
    name = getattr(t, "name", None) or (spec.name if spec else rec.key)
    others = [f"{tt.name} {fmt_p_eq(tt.pvalue)}" for k, tt in computed_tests if k != rec.key]
    others_text = "; ".join(others) if others else "no other test could be run"
    if any(is_pending(tt) for tt in result.tests.values()):
        others_text = "; ".join(others + ["the others are being updated"])
    expl = (
        " Its behaviour for this measure is not established: read it as exploratory."
        if (rec.exploratory)
        else ""
    )
    if not is_ok(t):
        return TestReading(
            rec.key,
            name,
            False,
            None,
            None,
            rec.exploratory,
            None,
            f"{name} (suggested for this review) could not be run: {why_not(t)}.",
            others_text,
            n_signal,
            len(computed_tests),
        )
    signal = bool(t.pvalue < alpha)
    direction = _pooled_direction(result)
    bias = getattr(t, "bias", 0.0) or 0.0
    larger = None
    if direction != 0 and bias != 0:
        larger = (bias > 0) == (direction > 0)
    if signal:
        if larger is False:
            what = (
                f"signals {sse} in the reverse direction: smaller studies show smaller "
                "effects than large ones, the opposite of the usual pattern of publication bias"
            )
        else:
            what = f"signals {sse}: smaller studies show larger effects"
        text = f"{name} {what} ({fmt_p_eq(t.pvalue)}, below {fmt_num(alpha, 2)})."
    else:
        text = f"{name} shows no clear sign of {sse} ({fmt_p_eq(t.pvalue)}, not below {fmt_num(alpha, 2)})."
    text += " " + test_caution(result.k) + expl
    return TestReading(
        rec.key,
        name,
        True,
        float(t.pvalue),
        signal,
        rec.exploratory,
        larger,
        text,
        others_text,
        n_signal,
        len(computed_tests),
    )


def rules_reading(result) -> tuple[tuple[str, ...], str]:
    """Which applicability rules fail, in words (the table lists every rule's numbers)."""
    failed = [r for r in result.applicability if r.met is False]
    unknown = [r for r in result.applicability if r.met is None]
    if not result.applicability:
        return (), "The conditions for a meaningful test could not be checked."
    if not failed and not unknown:
        return (), (
            f"All {len(result.applicability)} conditions for a meaningful test are met "
            "(Ioannidis & Trikalinos 2007)."
        )
    # each rule with its detail after a dash: the detail has parentheses of its own
    parts = []
    if failed:
        parts.append(
            "Not met: "
            + "; ".join(f"{r.title.lower()} \u2013 {rule_detail(r, result)}" for r in failed)
            + "."
        )
    if unknown:
        parts.append(
            "Cannot tell: "
            + "; ".join(f"{r.title.lower()} \u2013 {rule_detail(r, result)}" for r in unknown)
            + "."
        )
    parts.append("Read the tests and trim and fill with extra caution.")
    return tuple(r.rule for r in failed), " ".join(parts)


def power_reading(result, g: Glossary) -> str:
    """The simulated power of the recommended test, if it was run."""
    pw = result.power
    if pw is None:
        return (
            "Not simulated for this review. With fewer than about 20 studies these tests "
            "usually miss moderate bias (Sterne et al. 2000)."
        )
    pw_term = g("power")
    if not is_ok(pw):
        return f"The {pw_term} could not be simulated: {why_not(pw)}."
    reading = getattr(pw, "reading", "")
    if reading:
        return f"{pw_term[:1].upper() + pw_term[1:]}: {reading}"
    parts = []
    if is_finite(getattr(pw, "power", None)):
        parts.append(f"{pw_term}: {fmt_share(pw.power)} with the simulated bias")
    if is_finite(getattr(pw, "type1", None)):
        parts.append(f"false alarms without bias: {fmt_share(pw.type1, 1)}")
    text = "; ".join(parts)
    return text[:1].upper() + text[1:] + "." if text else ""


def _short_method(name: str) -> str:
    """ "Trim and fill (L0)" -> "trim and fill"; PET-PEESE keeps the estimator it reports."""
    if name.startswith("PET-PEESE"):
        return "PET-PEESE, reporting " + name[name.index("(") + 1 : -1]
    return name.split(" (")[0].lower()


def adjustment_range(result, g: Glossary) -> AdjustmentRange:
    """How far the adjustments move the estimate, as a range on the natural scale."""
    m = result.measure
    rows = adjustment_rows(result)
    rnd = result.random
    unadj = rnd.estimate if isinstance(rnd, PooledEstimate) else None
    half = (rnd.ci.high - rnd.ci.low) / 2.0 if isinstance(rnd, PooledEstimate) else None
    pp = result.pet_peese
    picked: list[tuple[str, float]] = []
    for name, est, _lo, _hi, _note in rows[1:] if unadj is not None else rows:
        if est is None or not is_finite(est):
            continue
        if name in ("PET", "PEESE"):
            # the range uses the estimate the conditional PET-PEESE rule reports
            if not is_ok(pp) or pp.chosen != name:
                continue
            name = f"PET-PEESE ({name})"
        picked.append((name, float(est)))
    pending = any(is_pending(getattr(result, f)) for f in ("pet_peese", "limit", "selection"))
    if not picked:
        return AdjustmentRange(
            (),
            None,
            None,
            unadj,
            0,
            0,
            "not available",
            "The adjustments are being updated."
            if pending
            else "No adjustment method could be run on these data.",
        )
    values = [e for _n, e in picked]
    low, high = min(values), max(values)
    towards = away = little = crosses = 0
    if unadj is not None:
        sign = 1.0 if unadj > 0 else (-1.0 if unadj < 0 else 0.0)
        for e in values:
            shift = e - unadj
            if half and abs(shift) < LITTLE_SHIFT * half:
                little += 1
            elif shift * sign < 0:
                towards += 1
                if (e > 0) != (unadj > 0) and e != 0:
                    crosses += 1
            else:
                away += 1
    n = len(values)
    if unadj is None:
        moves = "not available"
    elif 2 * little > n:
        # most methods hardly move it: one method's shift is not a pattern
        moves = "little"
    elif towards and not away and towards >= little:
        moves = "towards null"
    elif away and not towards and away >= little:
        moves = "away from null"
    else:
        moves = "mixed"
    names = "; ".join(_short_method(nm) for nm, _e in picked)
    if n > 1:
        text = (
            f"The {n} adjusted estimates ({names}) range from {fmt_effect(low, m)} to "
            f"{fmt_effect(high, m)}"
        )
    elif pending:
        # the core stage: the others are still to come, not impossible
        text = f"So far one adjustment ({names}): {fmt_effect(low, m)}"
    else:
        text = f"Only one adjustment could be run ({names}): {fmt_effect(low, m)}"
    if unadj is not None:
        text += f", against {fmt_effect(unadj, m)} unadjusted"
        if isinstance(rnd, PooledEstimate):
            text += f" (95% CI {fmt_ci(rnd.ci.low, rnd.ci.high, m)})"
    text += "."
    if unadj is not None:
        null_word = "1" if m in RATIO_MEASURES else "0"
        parts = []
        if towards:
            part = f"{towards} {'moves' if towards == 1 else 'move'} it towards no effect ({null_word})"
            if crosses:
                part += " and beyond it" if towards == 1 else f", {crosses} of them beyond it"
            parts.append(part)
        if away:
            parts.append(f"{away} {'moves' if away == 1 else 'move'} it away from no effect")
        if little:
            parts.append(f"{little} {'hardly moves' if little == 1 else 'hardly move'} it")
        if n > 1:
            text += f" Of the {n}: " + "; ".join(parts) + "."
        else:
            text += " It " + parts[0].split(" ", 1)[1] + "."
    if pending:
        text += " The other adjustments are being updated."
    text += " A range of 'what if' answers, not a corrected estimate."
    return AdjustmentRange(
        tuple(picked), low, high, unadj, towards, crosses, moves, text, away=away, little=little
    )


def funnel_lines(contour, test, rules_text, power_text, adj) -> tuple[tuple[str, str], ...]:
    lines = [("Contours", contour.text), ("Studies", observed_text(contour))]
    lines.append(("Main test", test.text))
    if test.others_text:
        lines.append(("Other tests", test.others_text))
    lines.append(("Conditions", rules_text))
    lines.append(("Power", power_text))
    lines.append(("Adjusted", adj.text))
    return tuple(lines)


def small_study_lines(result, g: Glossary) -> dict[str, Any]:
    """Build every part of the reading (in glossing order)."""
    test = test_reading(result, g)
    contour = contour_reading(result, g)
    failed, rules_text = rules_reading(result)
    power_text = power_reading(result, g)
    adj = adjustment_range(result, g)
    return {
        "contour": contour,
        "test": test,
        "failed": failed,
        "rules_text": rules_text,
        "power_text": power_text,
        "adjustments": adj,
        "lines": funnel_lines(contour, test, rules_text, power_text, adj),
    }
