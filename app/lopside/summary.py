"""Renderer-neutral summary of one analysis: the rows the CLI text, the window and the sheet read.

Design invariants
-----------------
* Every number shown to the user is formatted here, by the ``fmt_*`` functions, so the
  terminal, the window and the PDF print the same figures the same way (STYLE.md item 7).
  Effects arrive on the analysis scale (natural log for ratio measures) and are printed on
  the natural scale.
* Nothing here computes a statistic: every value is read from the
  :class:`~lopside.analysis.AnalysisResult`. Counting rows, taking the smallest and largest
  of a column and comparing a p-value with a threshold are the only arithmetic done.
* A result the engine could not compute is shown with its reason, never as a number.
* Each section is a frozen :class:`Section` of plain strings; renderers choose fonts and
  column widths, not content.

This module imports no Qt and nothing heavy at import time.
"""

from __future__ import annotations

import textwrap
from dataclasses import dataclass
from typing import Any

from .model.review import MEASURE_NAMES, RATIO_MEASURES
from .stats.results import NotComputable, PooledEstimate

# Number formatting and the small predicates live in the floor module lopside.words; they
# are re-exported here so that code importing them from summary keeps working.
from .words.numbers import (  # noqa: F401 - re-exported
    DASH,
    MINUS,
    MISSING,
    MODEL_NAMES,
    SHORT_MEASURE,
    _lower_first,
    _minus,
    fmt_ci,
    fmt_df,
    fmt_effect,
    fmt_effect_ci,
    fmt_int,
    fmt_num,
    fmt_p,
    fmt_p_eq,
    fmt_pct,
    fmt_se,
    fmt_share,
    fmt_stat,
    fmt_tau2,
    is_finite,
    is_ok,
    measure_word,
    model_name,
    plural,
    pooled_text,
    why_not,
)
from .words.rows import _test_result_text, adjustment_rows, recommended_key  # noqa: F401
from .words.sentences import (
    heterogeneity_reconciled,
    rule_detail,
    spread_text,
    trim_fill_range,
)

#: How many list items (problem rows, excluded studies) a section shows before "and N more".
LIST_LIMIT = 6

# --------------------------------------------------------------------------------------
# Sections


@dataclass(frozen=True, slots=True)
class Section:
    """One block of the summary.

    Attributes
    ----------
    key : str
        Stable identifier ("data", "pooled", ...).
    title : str
        Heading as printed.
    rows : tuple of tuple of str
        Table body. A section without ``header`` is a list of (label, value) pairs.
    header : tuple of str
        Column headings ("" for none).
    notes : tuple of str
        Sentences printed under the table (definitions, cautions, where a value is missing).
    emphasis : tuple of int
        Row indices a renderer should emphasise (e.g. the recommended test).
    widths : tuple of float
        Relative column widths (a hint; renderers may ignore it).
    """

    key: str
    title: str
    rows: tuple[tuple[str, ...], ...]
    header: tuple[str, ...] = ()
    notes: tuple[str, ...] = ()
    emphasis: tuple[int, ...] = ()
    widths: tuple[float, ...] = ()


def _limit(items: list[str], limit: int = LIST_LIMIT) -> list[str]:
    if len(items) <= limit:
        return items
    return items[:limit] + [f"… and {len(items) - limit} more"]


def header_section(result, *, date: str = "") -> Section:
    """Review details: title, question, outcome, measure, appraiser, date, source note."""
    d = result.review.details
    m = result.measure
    measure = f"{MEASURE_NAMES.get(m, m)} ({m})"
    if m in RATIO_MEASURES:
        measure += ", analysed on the log scale"
    rows = [
        ("Review", d.title or "(untitled review)"),
        ("Question", d.question or "(not stated)"),
        ("Outcome", d.outcome or "(not stated)"),
        ("Effect measure", measure + (f"; units: {d.units}" if d.units else "")),
        ("Favours intervention", favours_text(d)),
        ("Appraiser", d.appraiser or "(not stated)"),
    ]
    if date:
        rows.append(("Date", date))
    notes = (d.source_note,) if d.source_note else ()
    return Section("header", "Review", tuple(rows), notes=notes)


def favours_text(details) -> str:
    """The direction of benefit and where it came from, in words (header of every output)."""
    from .model.review import FAVOURS_SOURCES

    text = f"{'higher' if details.favours == 'higher' else 'lower'} values favour the intervention"
    source = getattr(details, "favours_source", "")
    return f"{text} ({FAVOURS_SOURCES[source]})" if source in FAVOURS_SOURCES and source else text


#: Most unread entries listed in a section (the JSON lists them all).
NOT_READ_LIMIT = 20


def not_read_label(account) -> str:
    """A label such as "2 lines not read" or "1 column, 3 places not read"."""
    words = {
        "line": ("line", "lines"),
        "text": ("text line", "text lines"),
        "cells": ("place", "places"),
        "column": ("column", "columns"),
        "row": ("row", "rows"),
        "page": ("PDF page", "PDF pages"),
    }
    counts: dict[str, int] = {}
    for n in account.not_read:
        counts[n.kind] = counts.get(n.kind, 0) + 1
    parts = [plural(c, *words.get(k, ("item", "items"))) for k, c in counts.items()]
    return ", ".join(parts) + " not read"


def intake_rows(review) -> list[tuple[str, str]]:
    """The account of the input under the entered data (text, window, sheet alike)."""
    a = getattr(review, "intake", None)
    if a is None or a.is_empty():
        return []
    rows: list[tuple[str, str]] = []
    if a.source:
        rows.append(("Read from", a.source))
    if a.measure_how:
        rows.append(("Measure", a.measure_how))
    if a.decimal_text():
        rows.append(("Decimal mark", a.decimal_text()))
    if a.not_read:
        items = [f"{n.where}: {n.text} ({n.reason})" for n in a.not_read]
        rows.append((not_read_label(a), "\n".join(_limit(items, NOT_READ_LIMIT))))
    elif a.source:
        rows.append(("Not read", "nothing: every line, cell and column was read"))
    return rows


def _route_counts(result) -> list[tuple[str, int]]:
    try:
        from .stats.effects import ROUTE_NAMES
    except ImportError:  # pragma: no cover - effects is part of the engine
        ROUTE_NAMES = {}
    included = set(result.data.rows)
    counts: dict[str, int] = {}
    for i, d in enumerate(result.derived):
        if i not in included:
            continue
        route = getattr(d, "route", "") or ""
        counts[route] = counts.get(route, 0) + 1
    out = []
    for route, n in counts.items():
        out.append((ROUTE_NAMES.get(route, route or "other"), n))
    return out


def _problem_text(p) -> str:
    row = getattr(p, "row", None)
    study = getattr(p, "study", "") or ""
    fld = getattr(p, "field", "") or ""
    msg = getattr(p, "message", str(p))
    sev = getattr(p, "severity", "")
    where = []
    if isinstance(row, int):
        where.append(f"row {row + 1}")
    if study:
        where.append(study)
    head = ", ".join(where)
    if fld:
        head = f"{head} [{fld}]" if head else f"[{fld}]"
    sev = f"{sev}: " if sev else ""
    # messages from the row checks may already start with "Row N (label), field: "
    if msg.lower().startswith("row "):
        return f"{sev}{msg}"
    return f"{sev}{head}: {msg}" if head else f"{sev}{msg}"


def data_section(result) -> Section:
    """k, participants, spread of the SEs, how SEs were obtained, rows with problems."""
    data = result.data
    k = data.k
    n_rows = len(result.review.studies)
    rows: list[tuple[str, str]] = [
        ("Studies analysed", f"{k} of {plural(n_rows, 'row')} in the table"),
        *intake_rows(result.review),
    ]
    ns = [float(x) for x in data.n if is_finite(x)] if data.n.size == k else []
    if ns:
        known = "" if len(ns) == k else f" (known for {len(ns)} of {k} studies)"
        rows.append(("Participants", f"{fmt_int(sum(ns))}{known}"))
    else:
        rows.append(("Participants", "not entered"))
    ses = [float(x) for x in data.se if is_finite(x)]
    if ses:
        lo, hi = min(ses), max(ses)
        spread = spread_text(lo, hi)
        ratio = f"; {spread}" if spread else ""
        scale = " (log scale)" if result.measure in RATIO_MEASURES else ""
        rows.append(("Standard errors" + scale, f"{fmt_se(lo)} to {fmt_se(hi)}{ratio}"))
    routes = _route_counts(result)
    if routes:
        rows.append(("SE obtained from", "; ".join(f"{name}: {n}" for name, n in routes)))
    approx = sum(
        1
        for i, d in enumerate(result.derived)
        if i in set(data.rows) and getattr(d, "approximate", False)
    )
    if approx:
        rows.append(("Approximate SEs", f"{approx} (from a bound such as 'P < 0.05')"))
    if result.excluded:
        items = [f"{e.label}: {e.reason}" for e in result.excluded]
        rows.append(("Left out", "\n".join(_limit(items))))
    probs = list(result.problems)
    if probs:
        items = [_problem_text(p) for p in probs]
        rows.append((f"Entry checks ({len(probs)})", "\n".join(_limit(items))))
    else:
        rows.append(("Entry checks", "no problems found in the rows"))
    return Section("data", "Data entered", tuple(rows))


def row_flags_section(result) -> Section:
    """Rows that pass the entry checks but stand out from the others (stats.diagnostics)."""
    from .stats import diagnostics as dg

    flags = getattr(result, "row_flags", None)
    if flags is None:
        return Section("row_flags", dg.HEADLINE, (("Result", "not assessed"),))
    if isinstance(flags, NotComputable):
        return Section("row_flags", dg.HEADLINE, (("Result", why_not(flags)),))
    if not flags.flagged:
        return Section(
            "row_flags", dg.HEADLINE, (("Result", flags.none_found()),), notes=flags.notes
        )
    shown = flags.flagged[:LIST_LIMIT]
    rows = [(dg.row_label(f), "\n".join(dg.flag_lines(f))) for f in shown]
    rest = flags.flagged[LIST_LIMIT:]
    if rest:  # the evidence of the first few; the others named (all of them in the JSON)
        names = [dg.row_label(f) for f in rest]
        rows.append((f"{len(rest)} more", "; ".join(_limit(names, 5 * LIST_LIMIT))))
    return Section("row_flags", dg.HEADLINE, tuple(rows), notes=(dg.EXPLAIN,) + flags.notes)


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


def tests_section(result) -> Section:
    """All registered tests; the recommended one marked."""
    try:
        from .stats.asymmetry import REGISTRY
    except ImportError:  # pragma: no cover
        REGISTRY = {}
    rec = result.recommendation
    rkey = recommended_key(result)
    alts = set(rec.alternatives) if is_ok(rec) else set()
    header = ("Test", "Result", "p", "Studies", "Note")
    rows: list[tuple[str, ...]] = []
    emphasis = []
    other_measure = []
    for key, t in result.tests.items():
        spec = REGISTRY.get(key)
        name = getattr(t, "name", None) or (spec.name if spec else key)
        if spec is not None and result.measure not in spec.suits and key != rkey:
            other_measure.append(name)
            continue
        role = ""
        if key == rkey:
            role = "recommended" + (" (exploratory)" if rec.exploratory else "")
            emphasis.append(len(rows))
        elif key in alts:
            role = "also suited"
        if is_ok(t):
            dropped = getattr(t, "dropped", ()) or ()
            if dropped:
                aside = f"{plural(len(dropped), 'study', 'studies')} set aside ({dropped[0][1]})"
                role = f"{role}; {aside}" if role else aside
            rows.append((name, _test_result_text(t), fmt_p(t.pvalue), str(t.k_used), role))
        else:
            note = f"{role}: {why_not(t)}" if role else why_not(t)
            rows.append((name, "not computed", "", "", note))
    notes = []
    if is_ok(rec):
        notes.append(f"Why this test: {rec.reason}.")
        if rec.options:
            opt = dict(rec.options)
            t = result.tests.get(rec.key)
            if opt.get("random") and not (is_ok(t) and "random" in (t.name or "").lower()):
                notes.append(
                    "The random-effects version of the recommended test was asked for, but the "
                    "table shows the version the engine ran."
                )
    else:
        notes.append(f"No test recommended: {why_not(rec)}.")
    if other_measure:
        notes.append(
            "Not shown, as they are meant for other measures: " + ", ".join(other_measure) + "."
        )
    alpha = result.settings.test_alpha
    notes.append(
        f"A p-value below {fmt_num(alpha, 2)} is the usual signal of asymmetry (these tests have "
        "little power; Egger et al. 1997). A larger p-value does not rule asymmetry out."
    )
    return Section(
        "tests",
        "Tests for small-study effects",
        tuple(rows),
        header=header,
        notes=tuple(notes),
        emphasis=tuple(emphasis),
        widths=(1.9, 1.4, 0.6, 0.6, 2.6),
    )


# not a pytest test, despite the name (test modules import it)
tests_section.__test__ = False  # type: ignore[attr-defined]


def applicability_section(result) -> Section:
    """When a test is worth reading (Ioannidis & Trikalinos 2007; Sterne et al. 2011)."""
    word = {True: "yes", False: "NO", None: "cannot tell"}
    rows = tuple(
        (r.title, word.get(r.met, str(r.met)), rule_detail(r, result)) for r in result.applicability
    )
    failed = [i for i, r in enumerate(result.applicability) if r.met is False]
    notes = (
        "Conditions for a meaningful test (Ioannidis & Trikalinos 2007; Sterne et al. 2011). "
        "Where one is not met, read the tests with extra caution.",
    )
    return Section(
        "applicability",
        "Can the tests be trusted here?",
        rows,
        header=("Condition", "Met", "Detail"),
        notes=notes,
        emphasis=tuple(failed),
        widths=(2.2, 0.7, 4.0),
    )


def adjustments_section(result) -> Section:
    """Trim and fill, PET, PEESE, limit meta-analysis, selection model: a range, not an answer."""
    m = result.measure
    rows = []
    for name, est, lo, hi, note in adjustment_rows(result):
        if est is None:
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
    return Section(
        "adjustments",
        "Sensitivity of the estimate to small-study effects",
        tuple(rows),
        header=("Method", "Estimate", "95% CI", "Note"),
        notes=notes,
        emphasis=(0,) if rows else (),
        widths=(2.6, 0.9, 1.5, 2.4),
    )


from .words.selection import (  # noqa: E402 - the sentences live in words/
    fmt_eta,
    missing_trials_sentence,
    selection_sentence,
    short_reason,
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
        for sc in u.scenarios:
            p = sc.pooled
            what = "no effect" if sc.assumed == "no effect" else "the opposite effect"
            rows.append(
                (
                    f"Missing trials had found {what}",
                    fmt_effect_ci(p.estimate, p.ci.low, p.ci.high, m),
                    "",
                )
            )
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
        for sc in u.scenarios:
            p = sc.pooled
            what = "no effect" if sc.assumed == "no effect" else "the opposite effect"
            rows.append(
                (
                    f"Missing trials found {what}",
                    fmt_effect_ci(p.estimate, p.ci.low, p.ci.high, m),
                )
            )
        notes.append(f"SE of a missing trial from its size: {u.se_rule}.")
    elif u is not None:
        rows.append(("Trials known to be missing", why_not(u)))
    return Section(
        "selection_strength", "How strong would selection have to be?", tuple(rows),
        notes=tuple(notes),
    )  # fmt: skip


def review_claim_section(result) -> Section | None:
    """What the review said about small-study effects beside Lopside's reading (or None)."""
    from .appraise.claim import compare_claim

    c = compare_claim(result)
    if c is None:
        return None
    rows = (
        ("The review said", c.said),
        ("Its test for these data", c.applicable),
        ("Power here", c.power),
        ("Lopside's reading", c.agreement),
        ("Verdict", c.verdict),
    )
    return Section(
        "review_claim", "What the review itself said about small-study effects", rows,
        emphasis=(4,),
    )  # fmt: skip


def sensitivity_section(result) -> Section:
    """Leave-one-out range, cumulative drift by precision, fail-safe N (with its caution)."""
    m = result.measure
    rows: list[tuple[str, str]] = []
    loo = result.leave_one_out
    if is_ok(loo) and loo.rows:
        pairs = [
            (r.random.estimate, r.omitted) for r in loo.rows if isinstance(r.random, PooledEstimate)
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


def power_section(result) -> Section:
    """Monte-Carlo power of the recommended test for these SEs, if it was run."""
    pw = result.power
    if pw is None:
        return Section(
            "power",
            "Power of the test for this review",
            (("Power", "not simulated (run with the power option)"),),
        )
    if not is_ok(pw):
        return Section("power", "Power of the test for this review", (("Power", why_not(pw)),))
    rows = []
    t1 = getattr(pw, "type1", None)
    pv = getattr(pw, "power", None)
    if is_finite(t1):
        rows.append(("False alarms with no bias", fmt_share(t1, 1)))
    if is_finite(pv):
        rows.append(("Power with the simulated bias", fmt_share(pv, 0)))
    reading = getattr(pw, "reading", "")
    if reading:
        rows.append(("Reading", reading))
    return Section("power", "Power of the test for this review", tuple(rows))


def settings_section(result, *, version: str = "") -> Section:
    """Key settings and the data fingerprint, for reproducibility."""
    s = result.settings
    if not version:
        from . import __version__ as version
    rows = (
        ("Software", f"Lopside {version}"),
        (
            "Random effects",
            f"τ² by {s.tau2_method}" + (", Hartung-Knapp interval" if s.hksj else ""),
        ),
        (
            "Study CIs assumed",
            {"z": "normal (z)", "t": "t-based", "auto": "t when arms < 60"}.get(
                s.ci_method, s.ci_method
            ),
        ),
        ("Funnel centre", f"{s.funnel_model} effect"),
        ("Test threshold", f"p < {fmt_num(s.test_alpha, 2)}"),
        (
            "Trim and fill",
            f"estimator {s.trimfill_estimator}, side {s.trimfill_side}, trimming by "
            f"{s.trimfill_trim_model}, filled estimate by {s.trimfill_fill_model}",
        ),
        ("PET-PEESE rule", f"PET test {s.petpeese_sided}-sided at {fmt_num(s.petpeese_alpha, 2)}"),
        (
            "Selection model cut-points",
            ", ".join(
                fmt_num(c, 3)
                for c in getattr(s, "selection_cutpoints", getattr(s, "selection_cuts", ()))
            ),
        ),
        ("Data fingerprint (SHA-256)", result.fingerprint or MISSING),
    )
    return Section("settings", "Settings and reproducibility", rows)


def analysis_sections(result) -> tuple[Section, ...]:
    """The numeric sections in reading order (no appraisal readings)."""
    out: list[Section | None] = [
        data_section(result),
        row_flags_section(result),
        reconciliation_section(result),
        pooled_section(result),
        heterogeneity_section(result),
        tests_section(result),
        applicability_section(result),
        review_claim_section(result),
        adjustments_section(result),
    ]
    tf = trim_fill_section(result)
    if tf is not None:
        out.append(tf)
    out.append(selection_strength_section(result))
    out.append(sensitivity_section(result))
    sg = subgroups_section(result)
    if sg is not None:
        out.append(sg)
    out.append(power_section(result))
    return tuple(s for s in out if s is not None)


# --------------------------------------------------------------------------------------
# Appraisal sections (content from lopside.appraise)


#: How an evidence line's direction is written (text, window and sheet alike).
EVIDENCE_WORDS: dict[str, str] = {"for": "For", "against": "Against", "unclear": "Can't tell"}


def small_study_section(appraisal) -> Section:
    """What the funnel, the test, the rules, power and the adjustments say."""
    r = appraisal.small_study
    rows = tuple((label, text) for label, text in r.lines)
    return Section("small_study", "What the funnel shows", rows)


def causes_section(appraisal) -> Section:
    """The alternative explanations side by side with publication bias."""
    rows = []
    for c in appraisal.causes:
        ev = "\n".join(
            f"{EVIDENCE_WORDS.get(e.direction, EVIDENCE_WORDS['unclear'])}: {e.text}"
            for e in c.evidence
        )
        check = f"Look for: {c.what_to_check}" if c.what_to_check else ""
        evidence = ev + ("\n" + check if check else "")
        rows.append((c.title, evidence, c.judgement, c.notes))
    notes = (
        "For / Against: evidence from this review for or against the explanation; Can't tell: "
        "the data cannot say. The judgement and notes are the appraiser's own.",
    )
    return Section(
        "causes",
        "Why might the funnel lean? Explanations side by side",
        tuple(rows),
        header=("Explanation", "Evidence from this review", "Appraiser's judgement", "Notes"),
        notes=notes,
        widths=(1.5, 5.0, 1.1, 1.6),
    )


def rating_section(appraisal) -> Section:
    """The suggested publication-bias rating, its reasons, and the appraiser's override."""
    r = appraisal.rating
    # reasons indented by two spaces are the lines under "Signals for publication bias:"
    why = "\n".join(f"   – {x.strip()}" if x.startswith("  ") else f"• {x}" for x in r.reasons)
    rows = [
        ("Suggested", r.suggested),
        ("Can the data support a rating?", "yes" if r.assessable else "no"),
    ]
    rows.append(("Why", why))
    if r.override:
        rows.append(("Appraiser's rating", r.override))
        rows.append(("Appraiser's reason", r.override_reason or "(no reason given)"))
    else:
        rows.append(("Appraiser's rating", "not recorded: confirm or override the suggestion"))
    # the rating that stands is the one a renderer should make stand out
    final = 3 if r.override else 0
    return Section(
        "rating",
        "Publication bias: suggested rating",
        tuple(rows),
        notes=(r.note,),
        emphasis=(final,),
    )


def appraisal_sections(appraisal) -> tuple[Section, ...]:
    return (small_study_section(appraisal), causes_section(appraisal), rating_section(appraisal))


# --------------------------------------------------------------------------------------
# Page one: the key messages (sheet page 1, the text's first block, JSON appraisal.page_one)
#
# Each line is one function (assessment) -> (label, text) or None (line left out). To add a
# page-1 line, write such a function and append it to PAGE_ONE_LINES: the sheet, the text
# and the JSON all pick it up, in that order.


def _flagged_rows_line(assessment):
    """Rows that stand out (stats.diagnostics): first, as a mistyped row changes every
    reading after it."""
    from .stats.diagnostics import HEADLINE, glance_text

    text = glance_text(getattr(assessment.analysis, "row_flags", None))
    return (HEADLINE, text) if text else None


def _rating_line(assessment):
    r = assessment.appraisal.rating
    text = r.suggested
    if not r.assessable:
        text += " (" + r.reasons[0].removeprefix("The data cannot support a rating: ").rstrip(".")
        text += "; signals point towards bias)" if r.leaning else ")"
    if r.override:
        text += f"; appraiser's rating: {r.override}"
    else:
        text += "; for the appraiser to confirm or override"
    return ("Publication bias, suggested rating", text)


def _funnel_line(assessment):
    c = assessment.appraisal.small_study.contour
    return ("Funnel", c.conclusion or c.text)


def _test_line(assessment):
    return ("Test", assessment.appraisal.small_study.test.text)


def _power_line(assessment):
    return ("Power of the test", assessment.appraisal.small_study.power_text)


def _alternative_line(assessment):
    best = assessment.appraisal.strongest_alternative
    if best is None:
        return (
            "Strongest other explanation",
            "None of the other explanations has support in this review's data; what the data "
            "cannot show is listed with the explanations.",
        )
    cause, ev = best
    return ("Strongest other explanation", f"{cause.title}: {ev.text}")


def _adjusted_line(assessment):
    return ("Adjusted estimates", assessment.appraisal.small_study.adjustments.text)


def _trim_fill_line(assessment):
    rng = trim_fill_range(assessment.analysis)
    if rng is None or rng.n < 2 or rng.agree:
        return None
    return ("Trim and fill settings", rng.text)


def _claim_line(assessment):
    """The review's own claim about small-study effects, set beside this reading."""
    sec = review_claim_section(assessment.analysis)
    return None if sec is None else ("The review's own claim", sec.rows[-1][1])


def _selection_needed_line(assessment):
    """How strong selection would have to be (Mathur & VanderWeele 2020)."""
    # the short form on page 1 (the worst case is in the window, the text and the JSON)
    text = selection_sentence(assessment.analysis, brief=True)
    return None if not text else ("Selection needed", text)


def _missing_trials_line(assessment):
    text = missing_trials_sentence(assessment.analysis)
    return None if not text else ("Trials never reported", text)


PAGE_ONE_LINES = [
    _flagged_rows_line,
    _rating_line,
    _funnel_line,
    _test_line,
    _power_line,
    _alternative_line,
    _adjusted_line,
    _trim_fill_line,
    _claim_line,
    _selection_needed_line,
    _missing_trials_line,
]


def glance_section(assessment) -> Section:
    """The key messages: rating, funnel, test, power, strongest other explanation, range."""
    from .assessment import assessment_of

    assessment = assessment_of(assessment)
    rows = []
    for fn in PAGE_ONE_LINES:
        line = fn(assessment)
        if line is not None:
            rows.append(line)
    return Section("glance", "At a glance", tuple(rows))


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


def all_sections(result, appraisal=None) -> tuple[Section, ...]:
    """Every section in the order of the text summary.

    ``result`` may be an :class:`~lopside.assessment.Assessment` (preferred) or an
    analysis, read through :func:`~lopside.assessment.assessment_of`; ``appraisal`` is
    accepted for older callers and must be that analysis' appraisal.
    """
    from .assessment import assessment_of

    assessment = assessment_of(result)
    analysis = assessment.analysis
    appraisal = appraisal or assessment.appraisal
    a = appraisal_sections(appraisal)
    out = [header_section(analysis), glance_section(assessment)]
    out += list(analysis_sections(analysis))
    return tuple(out) + a


# --------------------------------------------------------------------------------------
# Plain text (the `lopside check` output)

WIDTH = 100


def _wrap(text: str, width: int) -> list[str]:
    out: list[str] = []
    for para in str(text).split("\n"):
        if not para:
            out.append("")
            continue
        out.extend(
            textwrap.wrap(para, width=max(width, 8), break_long_words=True, break_on_hyphens=False)
            or [""]
        )
    return out


def _col_widths(section: Section, width: int) -> list[int]:
    ncol = max(len(r) for r in (section.rows + ((section.header,) if section.header else ())))
    gap = 2
    natural = [0] * ncol
    for r in section.rows + ((section.header,) if section.header else ()):
        for j, cell in enumerate(r):
            longest = max((len(line) for line in str(cell).split("\n")), default=0)
            natural[j] = max(natural[j], longest)
    avail = width - gap * (ncol - 1)
    if sum(natural) <= avail:
        return natural
    # shrink the widest columns first, but keep every column at least 8 wide
    widths = natural[:]
    while sum(widths) > avail:
        j = max(range(ncol), key=lambda i: widths[i])
        if widths[j] <= 8:
            break
        widths[j] -= 1
    return widths


def _render_causes(section: Section, width: int) -> list[str]:
    """The explanations as blocks (a four-column table is unreadable at 100 columns)."""
    lines: list[str] = []
    for title, evidence, judgement, notes in section.rows:
        lines.append(f"{title}  [appraiser: {judgement}]")
        for item in evidence.split("\n"):
            wrapped = _wrap(item, width - 4)
            lines.append("  " + wrapped[0])
            lines.extend("    " + w for w in wrapped[1:])
        if notes:
            wrapped = _wrap("Notes: " + notes, width - 4)
            lines.extend("  " + w for w in wrapped)
        lines.append("")
    return lines


def render_text(section: Section, width: int = WIDTH) -> str:
    """One section as plain text, wrapped to ``width`` columns."""
    lines = [section.title, "-" * len(section.title)]
    if not section.rows:
        lines.append("(nothing to show)")
    elif section.key == "causes":
        lines.extend(_render_causes(section, width))
    elif not section.header and all(len(r) == 2 for r in section.rows):
        label_w = min(max(len(r[0]) for r in section.rows), 30)
        for label, value in section.rows:
            lab_lines = _wrap(label, label_w)
            val_lines = _wrap(value, width - label_w - 2)
            for i in range(max(len(lab_lines), len(val_lines))):
                a = lab_lines[i] if i < len(lab_lines) else ""
                b = val_lines[i] if i < len(val_lines) else ""
                lines.append(f"{a:<{label_w}}  {b}".rstrip())
    else:
        widths = _col_widths(section, width)
        table = ([section.header] if section.header else []) + list(section.rows)
        for n, row in enumerate(table):
            cells = [_wrap(c, widths[j]) for j, c in enumerate(row)]
            for i in range(max(len(c) for c in cells)):
                parts = [
                    f"{(c[i] if i < len(c) else ''):<{widths[j]}}" for j, c in enumerate(cells)
                ]
                lines.append("  ".join(parts).rstrip())
            if section.header and n == 0:
                lines.append("  ".join("-" * w for w in widths))
    for note in section.notes:
        if note:
            lines.extend(_wrap(note, width))
    return "\n".join(lines)


def text_summary(result, width: int = WIDTH) -> str:
    """The ``lopside check`` output: every section and the appraisal, then the caution.

    Parameters
    ----------
    result : Assessment or AnalysisResult
    width : int
        Terminal columns to wrap to.

    Returns
    -------
    str
        Text ending in a newline.
    """
    from . import CAUTION, __version__
    from .assessment import assessment_of

    assessment = assessment_of(result)
    result = assessment.analysis
    title = f"Lopside {__version__}: small-study effects appraisal"
    out = [title, "=" * len(title), ""]
    for sec in all_sections(assessment):
        out.append(render_text(sec, width))
        out.append("")
    out.append("Caution")
    out.append("-------")
    out.extend(_wrap(CAUTION, width))
    out.append("")
    out.append(f"Data fingerprint (SHA-256): {result.fingerprint}")
    return "\n".join(out) + "\n"
