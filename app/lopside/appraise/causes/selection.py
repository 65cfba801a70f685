"""1. Selection and reporting biases: the contour reading, the selection model and whether
trim and fill's answer depends on its settings.
"""

from __future__ import annotations

from lopside.appraise.causes.common import _alpha, _ev
from lopside.appraise.glossary import Glossary
from lopside.appraise.model import Evidence, SmallStudyReading
from lopside.appraise.reading import CONTOUR_DIRECTION
from lopside.words.numbers import fmt_effect, fmt_num, fmt_p_eq, is_finite, is_ok
from lopside.words.sentences import test_caution, trim_fill_range


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
    from lopside.appraise.selection_items import selection_items

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
