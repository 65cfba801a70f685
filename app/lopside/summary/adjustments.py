"""What the estimate would be under small-study effects or selection: the adjustment methods,
trim and fill under each setting, and how strong selection would have to be (in full for
the text and window, brief for the sheet)."""

from __future__ import annotations

from ..stats.results import CORE_PENDING
from ..words.numbers import (
    MISSING,
    UPDATING,
    fmt_ci,
    fmt_effect,
    fmt_effect_ci,
    is_ok,
    plural,
    why_not,
)
from ..words.rows import adjustment_rows
from ..words.selection import fmt_eta, missing_trials_sentence, selection_sentence, short_reason
from ..words.sentences import trim_fill_range
from .section import Section


def adjustments_section(result) -> Section:
    """Trim and fill, PET, PEESE, limit meta-analysis, selection model: a range, not an answer."""
    m = result.measure
    rows = []
    for name, est, lo, hi, note in adjustment_rows(result):
        if est is None and note == CORE_PENDING:
            # the full stage is still running: said once in the estimate column, as the
            # pooled and tests tables do, not "not computed" with the reason beside it
            rows.append((name, UPDATING, "", ""))
        elif est is None:
            rows.append((name, "not computed", "", note))
        else:
            rows.append((name, fmt_effect(est, m), fmt_ci(lo, hi, m), note))
    notes = (
        "Trim and fill adds mirror-image studies where the funnel has a gap; PET and PEESE "
        "regress the effects on SE or SE² and read off a study with no sampling error; limit "
        "meta-analysis extrapolates the random-effects model the same way; the selection "
        "model re-weights studies by how likely results like theirs were to be published. "
        "Each answers 'what if?' under its own assumptions: read them as a range, not as a "
        "corrected result.",
    )
    # how a large review's trim and fill and selection model were fitted (also in the
    # result's notes)
    from ..stats.adjust_selection import selection_fit_note
    from ..stats.adjust_trimfill import trim_fill_fit_notes

    notes += trim_fill_fit_notes((result.trim_fill, *result.trim_fill_variants.values()))
    fit = selection_fit_note(result.selection)
    notes += (fit,) if fit else ()
    return Section(
        "adjustments",
        "Sensitivity of the estimate to small-study effects",
        tuple(rows),
        header=("Method", "Estimate", "95% CI", "Note"),
        notes=notes,
        emphasis=(0,) if rows else (),
        widths=(2.6, 0.9, 1.5, 2.4),
    )


def trim_fill_section(result) -> Section | None:
    """Trim and fill under each of its usual settings, the default marked (Peters et al. 2007)."""
    rng = trim_fill_range(result)
    if rng is None:
        return None
    m = result.measure
    rows = tuple(
        (
            name + (" (default)" if default else ""),
            str(k0),
            fmt_effect(est, m),
            fmt_ci(lo, hi, m),
        )
        for name, k0, est, lo, hi, default in rng.rows
    )
    emphasis = tuple(i for i, r in enumerate(rng.rows) if r[5])
    return Section(
        "trim_fill_settings",
        "Trim and fill under each setting",
        rows,
        header=("Setting", "Filled", "Estimate", "95% CI"),
        notes=(rng.text,),
        emphasis=emphasis,
        widths=(2.6, 0.7, 0.9, 1.5),
    )


def selection_strength_section(result) -> Section:
    """Corrected estimates by η, S-values, worst case; fixed-weight patterns; missing trials."""
    m = result.measure
    rows: list[tuple[str, ...]] = []
    notes: list[str] = []
    ss = getattr(result, "selection_sensitivity", None)
    if is_ok(ss):
        fe, re_ = ss.fixed, ss.random
        for c_re in re_.by_eta if is_ok(re_) else ():
            c_fe = fe.at(c_re.eta) if is_ok(fe) else None
            rows.append(
                (
                    f"η = {fmt_eta(c_re.eta)}" + (" (no selection)" if c_re.eta == 1 else ""),
                    fmt_effect_ci(c_re.estimate, c_re.ci_low, c_re.ci_high, m),
                    fmt_effect_ci(c_fe.estimate, c_fe.ci_low, c_fe.ci_high, m) if c_fe else "",
                )
            )

        def s_text(model, attr):
            if not is_ok(model):
                return why_not(model)
            v = getattr(model, attr)
            if v is not None:
                return fmt_eta(v)
            # the short form in the table ("not attainable"); the sentence explains it
            return short_reason(getattr(model, attr + "_reason"))

        def worst(model):
            if not is_ok(model):
                return why_not(model)
            wc = model.worst_case
            if not is_ok(wc):
                return why_not(wc)
            return fmt_effect_ci(wc.estimate, wc.ci_low, wc.ci_high, m)

        rows.append(
            ("η that reaches no effect (S-value)", s_text(re_, "s_value"), s_text(fe, "s_value"))
        )
        rows.append(
            (
                "η at which the interval reaches it",
                s_text(re_, "s_value_ci"),
                s_text(fe, "s_value_ci"),
            )
        )
        rows.append(("Worst case (studies not significant in its favour)", worst(re_), worst(fe)))
        notes.append(
            f"{plural(ss.affirmative, 'study is', 'studies are')} significant (two-sided p < "
            f"0.05) on the side of the pooled effect, {ss.nonaffirmative} not. η is how many "
            "times more likely such a result is to be published than the others; the "
            "corrected estimate gives the others η times their weight (Mathur & "
            "VanderWeele 2020). Random effects: τ² of the uncorrected model, robust "
            "(sandwich) interval."
        )
        if ss.reason:
            notes.append(ss.reason[0].upper() + ss.reason[1:] + ".")
        else:
            notes.append(selection_sentence(result))
    elif ss is not None:
        rows.append(("How strong selection would have to be", why_not(ss), ""))
    fw = getattr(result, "selection_fixed_weights", None)
    if is_ok(fw):
        for name, e in fw.by_pattern().items():
            label = f"Fixed weights: {name} selection"
            if is_ok(e):
                rows.append((label, fmt_effect(e.estimate, m), ""))
            else:
                rows.append((label, why_not(e), ""))
        notes.append(
            "Fixed-weight selection models (Vevea & Woods 2005) assume a set pattern of "
            "publication chances by p-value and refit; the weights used are the paper's as "
            "recalled from memory, not re-checked against it. Unadjusted maximum likelihood: "
            f"{fmt_effect(fw.unadjusted, m)}."
        )
    elif fw is not None:
        rows.append(("Fixed-weight selection models", why_not(fw), ""))
    u = getattr(result, "unreported_trials", None)
    if is_ok(u):
        for what, pooled in _missing_trial_scenarios(u, m):
            rows.append((f"Missing trials had found {what}", pooled, ""))
        notes.append(
            f"{missing_trials_sentence(result)} The SE of each missing trial comes from its "
            f"size: {u.se_rule}."
        )
        if u.rows_without_size:
            notes.append(
                f"{plural(len(u.rows_without_size), 'trial')} marked as never reported "
                "had no size and could not be used."
            )
    elif u is not None:
        rows.append(("Trials known to be missing", why_not(u), ""))
    return Section(
        "selection_strength",
        "How strong would selection have to be?",
        tuple(rows),
        header=("", "Random effects", "Fixed effect"),
        notes=tuple(notes),
        widths=(2.4, 1.6, 1.6),
    )


def selection_strength_brief(result) -> Section:
    """The same content as :func:`selection_strength_section`, compact (the printed sheet):
    random effects only, one row per kind of result."""
    m = result.measure
    rows: list[tuple[str, str]] = []
    notes: list[str] = []
    ss = getattr(result, "selection_sensitivity", None)
    model = ss.random if is_ok(ss) else None
    if is_ok(model):
        etas = " / ".join(fmt_eta(c.eta) for c in model.by_eta)
        ests = " / ".join(fmt_effect(c.estimate, m) for c in model.by_eta)
        rows.append((f"Corrected, η = {etas}", ests))

        def s_text(attr):
            v = getattr(model, attr)
            return fmt_eta(v) if v is not None else short_reason(getattr(model, attr + "_reason"))

        rows.append(
            ("No effect reached at η (estimate / CI)",
             f"{s_text('s_value')} / {s_text('s_value_ci')}")
        )  # fmt: skip
        wc = model.worst_case
        rows.append(
            (
                "Worst case",
                fmt_effect_ci(wc.estimate, wc.ci_low, wc.ci_high, m) if is_ok(wc) else why_not(wc),
            )
        )
        notes.append(
            f"{ss.affirmative} of {ss.affirmative + ss.nonaffirmative} studies significant in "
            "favour of the effect; worst case: the others alone. Random effects, robust "
            "interval (Mathur & VanderWeele 2020)."
        )
    elif ss is not None:
        rows.append(("How strong selection would have to be", why_not(model if ss else ss)))
    fw = getattr(result, "selection_fixed_weights", None)
    if is_ok(fw):
        by = fw.by_pattern()
        for tail in ("one-tailed", "two-tailed"):
            vals = [by.get(f"{lvl} {tail}") for lvl in ("moderate", "severe")]
            rows.append(
                (
                    f"Fixed weights, {tail} (moderate / severe)",
                    " / ".join(fmt_effect(v.estimate, m) if is_ok(v) else MISSING for v in vals),
                )
            )
        notes.append("Fixed weights: Vevea & Woods (2005) patterns, recalled from memory.")
    u = getattr(result, "unreported_trials", None)
    if is_ok(u):
        for what, pooled in _missing_trial_scenarios(u, m):
            rows.append((f"Missing trials found {what}", pooled))
        notes.append(f"SE of a missing trial from its size: {u.se_rule}.")
    elif u is not None:
        rows.append(("Trials known to be missing", why_not(u)))
    return Section(
        "selection_strength", "How strong would selection have to be?", tuple(rows),
        notes=tuple(notes),
    )  # fmt: skip


def _missing_trial_scenarios(u, m: str) -> list[tuple[str, str]]:
    """(what the missing trials are assumed to have found, the pooled effect and CI)."""
    out = []
    for sc in u.scenarios:
        p = sc.pooled
        what = "no effect" if sc.assumed == "no effect" else "the opposite effect"
        out.append((what, fmt_effect_ci(p.estimate, p.ci.low, p.ci.high, m)))
    return out
