"""Sentences on how strong selection would have to be and on trials never reported
(issue 20): one place, read by the summary (text, window, sheet) and the appraisal."""

from __future__ import annotations

from typing import Any

from ..model.review import RATIO_MEASURES
from ..stats.results import NotComputable, is_pending
from .numbers import fmt_effect, fmt_effect_ci, fmt_int, fmt_num, is_finite, is_ok, plural, why_not

MISSING = "\u2013"


def fmt_eta(x: Any) -> str:
    """A selection ratio η: "7", "2.4", "1,250" (whole numbers from 10 up)."""
    if not is_finite(x):
        return MISSING
    x = float(x)
    return fmt_int(x) if x >= 10 or x == int(x) else fmt_num(x, 1)


def _short_measure(measure: str) -> str:
    return measure if measure in RATIO_MEASURES or measure in ("RD", "MD", "SMD") else measure


def short_reason(reason: str) -> str:
    """A table-cell form of why an S-value is missing ("not attainable", "nothing to
    correct", "already at η = 1"); the section's sentence gives the full reason."""
    from ..stats import selection_sensitivity as ssm

    short = {
        ssm.MSG_NO_AFFIRMATIVE: "nothing to correct",
        ssm.MSG_ALL_AFFIRMATIVE: "no worst case",
        ssm.MSG_CI_ALREADY: "already at η = 1",
        ssm.MSG_ESTIMATE_ALREADY: "already at η = 1",
    }
    return short.get(reason, reason.split(":")[0])


def selection_sentence(result, *, brief: bool = False) -> str | None:
    """One sentence: how strong selection would have to be (Mathur & VanderWeele 2020).

    Reads the random-effects version (the analysis' main model). None when not computed.
    """
    ss = getattr(result, "selection_sensitivity", None)
    if ss is None:
        return None
    if is_pending(ss):
        return "How strong selection would have to be is being updated."
    if isinstance(ss, NotComputable):
        return f"How strong selection would have to be was not computed: {ss.reason}."
    m = result.measure
    short = _short_measure(m)
    model = ss.random if is_ok(ss.random) else ss.fixed
    if not is_ok(model):
        return f"How strong selection would have to be was not computed: {why_not(model)}."
    if ss.affirmative == 0:
        return (
            "No study is significant on the side of the pooled effect, so selective "
            "publication of significant results cannot be what produced it."
        )
    wc = model.worst_case
    if is_ok(wc):
        if wc.ci_low is not None:
            worst = f"{short} {fmt_effect_ci(wc.estimate, wc.ci_low, wc.ci_high, m)}"
        else:
            worst = f"{short} {fmt_effect(wc.estimate, m)} (no interval: {wc.reason})"
        tail = (
            "; under the strongest possible selection of this kind the effect would be that "
            f"of the {plural(wc.k, 'study', 'studies')} not significant in its favour, "
            f"alone: {worst}."
        )
    else:
        tail = "; every study is significant, so there is no worst case to compute."
    if model.s_value is not None:
        head = (
            "To reduce the effect to no effect, significant results favouring it would "
            f"have to be at least {fmt_eta(model.s_value)} times as likely to be published "
            "as others"
        )
        if model.s_value_ci is not None:
            head += f" (for its interval to include no effect, {fmt_eta(model.s_value_ci)} times)"
    else:
        head = (
            "No strength of selection favouring significant results could reduce the "
            "effect to no effect"
        )
        if model.s_value_ci is not None:
            head += f" (its interval would include no effect at {fmt_eta(model.s_value_ci)} times)"
    return head + "." if brief else head + tail


def missing_trials_sentence(result) -> str | None:
    """ "3 registered trials (1,240 participants) never reported; had they found no
    effect, OR 0.74 (0.63 to 0.87) instead of 0.66." None when none were entered."""
    u = getattr(result, "unreported_trials", None)
    if u is None:
        return None
    if isinstance(u, NotComputable):
        return f"Trials known to be missing were entered, but no scenario was computed: {u.reason}."
    m = result.measure
    short = _short_measure(m)
    null = next((s for s in u.scenarios if s.assumed == "no effect"), None)
    text = (
        f"{plural(u.count, 'trial', 'trials')} known to exist "
        f"({fmt_int(u.participants)} participants) never reported results"
    )
    if null is not None:
        p = null.pooled
        text += (
            f"; had {'it' if u.count == 1 else 'they'} found no effect, {short} "
            f"{fmt_effect_ci(p.estimate, p.ci.low, p.ci.high, m)} instead of "
            f"{fmt_effect(u.reported_estimate, m)}"
        )
    return text + "."
