"""The pooled estimate and its stability: the check against the published result, the
fixed- and random-effects models, heterogeneity, leave-one-out and cumulative analysis, and
the results within subgroups."""

from __future__ import annotations

from typing import Any

from ..model.review import RATIO_MEASURES
from ..stats.results import NotComputable, PooledEstimate, is_pending
from ..words.numbers import (
    MISSING,
    fmt_ci,
    fmt_df,
    fmt_effect,
    fmt_effect_ci,
    fmt_int,
    fmt_num,
    fmt_p,
    fmt_p_eq,
    fmt_pct,
    fmt_share,
    fmt_stat,
    fmt_tau2,
    is_finite,
    is_ok,
    missing_word,
    model_name,
    plural,
    pooled_text,
    why_not,
)
from ..words.sentences import heterogeneity_reconciled
from .section import Section


def reconciliation_section(result) -> Section:
    """Your rows pooled against the review's published pooled result."""
    m = result.measure
    rec = result.reconciliation
    pub = result.review.details.published
    het_row = _published_heterogeneity_row(result)
    if not is_ok(rec):
        return Section(
            "reconciliation",
            "Check against the published result",
            (("Published result", why_not(rec)),) + het_row,
            notes=(
                "Enter the review's pooled estimate and CI to check that your rows reproduce it.",
            ),
        )
    rows = [
        (
            "Published",
            f"{fmt_effect_ci(rec.published_estimate, rec.published_low, rec.published_high, m)}"
            + (f", {pub.model}" if pub.model else ""),
        ),
    ]
    comps = {c.model: c for c in rec.comparisons}
    best = comps.get(rec.closest)
    if best is not None:
        rows.append(
            (
                "Closest model",
                f"{model_name(best.model)}: "
                f"{fmt_effect_ci(best.estimate, best.ci_low, best.ci_high, m)}, "
                f"largest difference (estimate or a CI limit) {fmt_share(best.worst, 1)}",
            )
        )
    verdict = {
        "agrees": "reproduced",
        "near": "close, not exact",
        "no model close": "not reproduced",
    }
    rows.append(("Verdict", verdict.get(rec.verdict, rec.verdict)))
    if rec.verdict != "agrees":
        # when the rows reproduce the paper, the verdict and closest model say it all
        rows.append(("Reading", rec.reading))
    for _row, label, why in rec.suspicious_rows:
        rows.append(("Re-check", f"{label}: {why}"))
    rows.extend(het_row)
    return Section("reconciliation", "Check against the published result", tuple(rows))


def _published_heterogeneity_row(result) -> tuple[tuple[str, str], ...]:
    """The paper's I² (from a pasted heterogeneity line) against the rows' I²."""
    pub_i2 = result.review.details.published.i2
    het = result.heterogeneity
    if pub_i2 is None or not is_ok(het):
        return ()
    return (("Heterogeneity", heterogeneity_reconciled(pub_i2, het.i2)),)


def pooled_section(result) -> Section:
    """Fixed and random effects (chosen τ² estimator and the others), HKSJ, prediction interval."""
    m = result.measure
    s = result.settings
    header = ("Model", "Estimate", "95% CI", "p", "τ²")
    rows: list[tuple[str, ...]] = []
    emphasis: list[int] = []

    def add(name: str, p: Any, *, tau: bool, chosen: bool = False) -> None:
        if chosen:
            emphasis.append(len(rows))
            name += " (chosen)"
        if isinstance(p, PooledEstimate):
            rows.append(
                (
                    name,
                    fmt_effect(p.estimate, m),
                    fmt_ci(p.ci.low, p.ci.high, m),
                    fmt_p(p.pvalue),
                    fmt_tau2(p.tau2) if tau else "",
                )
            )
        elif is_pending(p):
            rows.append((name, missing_word(p), "", "", ""))
        elif isinstance(p, NotComputable):
            rows.append((name, "not computed", p.reason, "", ""))

    add(model_name("FE-IV"), result.fixed, tau=False)
    if is_ok(result.mantel_haenszel):
        add(model_name("MH"), result.mantel_haenszel, tau=False)
    if is_ok(result.peto):
        add(model_name("Peto"), result.peto, tau=False)
    chosen_key = s.tau2_method
    for key, p in result.random_by_method.items():
        add(model_name(key), p, tau=True, chosen=(key == chosen_key and not s.hksj))
    hk = result.random_hksj_by_method.get(chosen_key)
    if hk is not None:
        add(model_name(chosen_key, hksj=True), hk, tau=True, chosen=s.hksj)
    notes = []
    rnd = result.random
    if isinstance(rnd, PooledEstimate) and rnd.pi is not None:
        rows.append(
            (
                "Prediction interval (chosen random-effects model)",
                "",
                fmt_ci(rnd.pi.low, rnd.pi.high, m),
                "",
                "",
            )
        )
        if result.k < 10:
            notes.append(
                "With fewer than 10 studies the prediction interval tends to be too narrow "
                "(Nagashima et al. 2019)."
            )
    elif isinstance(rnd, PooledEstimate):
        notes.append("Prediction interval: needs at least 3 studies.")
    notes.insert(
        0,
        "Estimates on the natural scale; p tests no effect. DerSimonian-Laird, Paule-Mandel "
        "and REML are ways of estimating τ²; the Hartung-Knapp interval allows for the "
        "uncertainty in τ². The prediction interval is where the effect in a new, similar "
        "study would probably lie.",
    )
    return Section(
        "pooled",
        "Pooled results",
        tuple(rows),
        header=header,
        notes=tuple(notes),
        emphasis=tuple(emphasis),
        widths=(3.2, 1.0, 1.6, 0.8, 0.7),
    )


def heterogeneity_section(result) -> Section:
    """Cochran's Q, I² and τ² with their intervals."""
    het = result.heterogeneity
    if not is_ok(het):
        return Section("heterogeneity", "Heterogeneity", (("Heterogeneity", why_not(het)),))
    i2ci = het.i2_ci
    tci = het.tau2_ci
    i2_text = fmt_pct(het.i2)
    if is_ok(i2ci):
        i2_text += f" (95% CI {fmt_pct(i2ci.low)} to {fmt_pct(i2ci.high)})"
    t_text = fmt_tau2(het.tau2) + f" ({het.tau2_method})"
    if is_ok(tci):
        t_text += f"; 95% CI {fmt_tau2(tci.low)} to {fmt_tau2(tci.high)}"
    rows = (
        ("Cochran's Q", f"{fmt_stat(het.q)} on {fmt_df(het.df)} df, {fmt_p_eq(het.pvalue)}"),
        ("I²", i2_text),
        ("τ²", t_text),
    )
    notes = (
        "Cochran's Q tests whether the studies differ more than chance allows; I² is the "
        "share of the variation between study results that is beyond chance; τ² is the "
        "between-study variance on the analysis scale"
        + (" (log scale)" if result.measure in RATIO_MEASURES else "")
        + ".",
    )
    return Section("heterogeneity", "Heterogeneity", rows, notes=notes)


def sensitivity_section(result) -> Section:
    """Leave-one-out range, cumulative drift by precision, fail-safe N (with its caution)."""
    m = result.measure
    rows: list[tuple[str, str]] = []
    loo = result.leave_one_out
    if is_ok(loo) and loo.rows:
        columns = getattr(loo.rows, "columns", None)  # a large review's rows, not yet made
        if columns is not None:
            pairs = list(zip(columns.estimate.tolist(), columns.omitted))
        else:
            pairs = [
                (r.random.estimate, r.omitted)
                for r in loo.rows
                if isinstance(r.random, PooledEstimate)
            ]
        if pairs:
            lo = min(pairs)
            hi = max(pairs)
            rows.append(
                (
                    "Leave one out (random effects)",
                    f"{fmt_effect(lo[0], m)} (without {lo[1]}) to "
                    f"{fmt_effect(hi[0], m)} (without {hi[1]})",
                )
            )
    else:
        rows.append(("Leave one out", why_not(loo)))
    cum = result.cumulative
    if is_ok(cum) and cum.steps:
        steps = cum.steps
        picks = [steps[0]]
        if len(steps) >= 4:
            picks.append(steps[len(steps) // 2 - 1])
        picks.append(steps[-1])
        parts = []
        for st in picks:
            r = st.random if isinstance(st.random, PooledEstimate) else st.fixed
            if isinstance(r, PooledEstimate):
                parts.append(f"{plural(st.k, 'study', 'studies')}: {fmt_effect(r.estimate, m)}")
        rows.append(("Adding studies from most to least precise", "; ".join(parts)))
    else:
        rows.append(("Cumulative by precision", why_not(cum)))
    fs = result.failsafe
    if is_ok(fs):
        rows.append(
            (
                f"Fail-safe N ({fs.method})",
                f"{fmt_int(fs.n_whole)} (shown for completeness; not recommended, as it rests "
                "on assumptions about the unpublished studies: Cochrane Handbook 5.1, "
                "10.4.4.3)",
            )
        )
    notes = (
        "If the estimate drifts as less precise studies are added, small studies pull it "
        "(a sign of small-study effects).",
    )
    # how a large review's leave-one-out and cumulative analysis were computed
    notes += tuple(n for n in (getattr(loo, "note", ""), getattr(cum, "note", "")) if n)
    return Section("sensitivity", "Leave one out and cumulative analysis", tuple(rows), notes=notes)


#: below this many studies a test for funnel asymmetry has too little power to be read
#: (Sterne et al. 2011, BMJ: at least 10 studies; the main test's conditions use the same)
SMALL_SAMPLE_K = 10
SMALL_SAMPLE_MARK = " \u2020"
SMALL_SAMPLE_NOTE = (
    "\u2020 Fewer than 10 studies in this group: Egger's test has little power and its "
    "p value can mislead either way; read it as a hint at most (Sterne et al. 2011)."
)


def subgroups_section(result) -> Section | None:
    """Pooled results and Egger's slope within each level, with the meta-regression answer."""
    if not result.subgroups and not result.meta_regression:
        return None
    m = result.measure
    rows: list[tuple[str, ...]] = []
    notes: list[str] = []
    names = {"risk_of_bias": "Risk of bias", "subgroup": "Subgroup"}
    few_in_group = False
    for by, sg in result.subgroups.items():
        title = names.get(by, by)
        if not is_ok(sg):
            rows.append((title, "", "not computed", "", "", why_not(sg)))
            continue
        for lv in sg.levels:
            eg = lv.egger
            eg_text = f"{fmt_p(eg.pvalue)}" if is_ok(eg) else "–"
            if is_ok(eg) and lv.k < SMALL_SAMPLE_K:
                eg_text += SMALL_SAMPLE_MARK
                few_in_group = True
            rows.append(
                (
                    f"{title}: {lv.level}",
                    str(lv.k),
                    pooled_text(lv.random, m),
                    fmt_pct(lv.i2) if is_finite(lv.i2) else MISSING,
                    eg_text,
                    "",
                )
            )
        rt = sg.random_test
        if is_ok(rt):
            rows.append(
                (f"{title}: difference between levels", "", "", "", "", fmt_p_eq(rt.pvalue))
            )
        if sg.note:
            notes.append(sg.note)
    for by, mr in result.meta_regression.items():
        title = names.get(by, by)
        if is_ok(mr) and is_ok(mr.se_without) and is_ok(mr.se_with):
            b, a = mr.se_without, mr.se_with
            few = " Few studies per covariate: unreliable." if mr.note else ""
            notes.append(
                f"Meta-regression with the SE: slope on SE {fmt_num(b.estimate, 2)} "
                f"({fmt_p_eq(b.pvalue)}) without {title.lower()}, {fmt_num(a.estimate, 2)} "
                f"({fmt_p_eq(a.pvalue)}) with it.{few}"
            )
        elif is_ok(mr):
            notes.append(f"{title} in a meta-regression with the SE: {mr.se_answer}")
        else:
            notes.append(f"{title} meta-regression: {why_not(mr)}")
    notes.insert(
        0, "Egger p: Egger's test within the group; Difference: do the groups' effects differ?"
    )
    if few_in_group:
        notes.insert(1, SMALL_SAMPLE_NOTE)
    return Section(
        "subgroups",
        "Within subgroups",
        tuple(rows),
        header=("Group", "Studies", "Random effects (95% CI)", "I²", "Egger p", "Difference"),
        notes=tuple(notes),
        widths=(2.4, 0.7, 1.9, 0.6, 0.7, 1.0),
    )
