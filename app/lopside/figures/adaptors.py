"""Thin adaptors from an :class:`~lopside.analysis.AnalysisResult` to the builders' inputs.

They only read attributes (with ``getattr``, so a part the analysis could not compute —
a :class:`~lopside.stats.results.NotComputable`, falsy with a ``.reason`` — simply leaves
that part out of the figure). The one calculation allowed here is the subgroup subtotal
when the analysis has none for a grouping, and that is done by the pooling engine
(:mod:`lopside.stats.pooling`), never by figure code.
"""

from __future__ import annotations

import math
from dataclasses import replace
from typing import Any

import numpy as np

from .companions import CumulativeInput, CumulativeStep, RadialInput
from .forest import ForestOptions, ForestPooled, ForestRow, ForestSummary
from .funnel import FunnelInput, FunnelOptions

TAU2_WORDS = {"DL": "DerSimonian-Laird", "PM": "Paule-Mandel", "REML": "REML"}


def _ok(x: Any) -> bool:
    """True for a computed result (NotComputable and None are falsy)."""
    return x is not None and bool(x)


def _num(x: Any) -> float | None:
    try:
        v = float(x)
    except (TypeError, ValueError):
        return None
    return v if math.isfinite(v) else None


def model_words(pooled: Any, model: str) -> str:
    """Plain words for a pooled model: "fixed effect" or "random effects (REML)"."""
    if model == "fixed":
        return "fixed effect"
    key = str(getattr(pooled, "model", "") or "")
    words = TAU2_WORDS.get(key, key)
    hk = ", Hartung-Knapp" if getattr(pooled, "hksj", False) else ""
    return f"random effects ({words}{hk})" if words else "random effects"


def _pooled_for(result: Any, model: str) -> Any:
    return getattr(result, "fixed" if model == "fixed" else "random", None)


def _model_of(result: Any, model: str | None) -> str:
    if model in ("fixed", "random"):
        return model
    settings = getattr(result, "settings", None)
    m = getattr(settings, "funnel_model", "fixed")
    return m if m in ("fixed", "random") else "fixed"


def _points(items: Any) -> tuple[tuple[float, float, str], ...]:
    """(y, se, label) from tuples or from objects with y/se (and a label or mirror name)."""
    out = []
    for it in items or ():
        if isinstance(it, (tuple, list)) and len(it) >= 2:
            y, se = _num(it[0]), _num(it[1])
            label = str(it[2]) if len(it) > 2 else ""
        else:
            y, se = _num(getattr(it, "y", None)), _num(getattr(it, "se", None))
            label = getattr(it, "label", None)
            if label is None:
                src = getattr(it, "mirrored_from", "")
                label = f"mirror of {src}" if src else "imputed"
        if y is not None and se is not None and se > 0:
            out.append((y, se, str(label)))
    return tuple(out)


def funnel_input_from_result(result: Any, options: FunnelOptions | None = None) -> FunnelInput:
    """Build a :class:`FunnelInput` from an analysis result.

    Parameters
    ----------
    result : AnalysisResult
    options : FunnelOptions, optional
        ``model`` picks the centre ("fixed"/"random"; otherwise the settings'
        ``funnel_model``); ``colour_by`` picks the groups.

    Returns
    -------
    FunnelInput
    """
    opts = options or FunnelOptions()
    data = result.data
    k = int(np.asarray(data.y).size)
    model = _model_of(result, opts.model)
    pooled = _pooled_for(result, model)
    est = _num(getattr(pooled, "estimate", None)) if _ok(pooled) else None
    weights: Any = ()
    if _ok(pooled) and len(getattr(pooled, "weights", ())) == k:
        weights = np.asarray(pooled.weights, dtype=float)
    groups: tuple[str, ...] = ()
    title, kind = "", "subgroup"
    if opts.colour_by == "subgroup":
        groups, title = tuple(getattr(data, "subgroup", ()) or ()), "Subgroup"
    elif opts.colour_by == "risk_of_bias":
        groups, title, kind = (
            tuple(getattr(data, "risk_of_bias", ()) or ()),
            "Risk of bias",
            "risk_of_bias",
        )
    tf = getattr(result, "trim_fill", None)
    filled = _points(getattr(tf, "filled", ())) if _ok(tf) else ()
    adjusted = None
    if _ok(tf) and _ok(getattr(tf, "adjusted", None)):
        adjusted = _num(getattr(tf.adjusted, "estimate", None))
    tests = getattr(result, "tests", {}) or {}
    eg = tests.get("egger") if hasattr(tests, "get") else None
    egger = None
    if _ok(eg):
        b0, b1 = _num(getattr(eg, "intercept", None)), _num(getattr(eg, "slope", None))
        if b0 is not None and b1 is not None:
            egger = (b0, b1)
    lim = getattr(result, "limit", None)
    limit = _num(getattr(lim, "estimate", None)) if _ok(lim) else None
    return FunnelInput(
        measure=str(getattr(result, "measure", data.measure)),
        y=np.asarray(data.y, dtype=float),
        se=np.asarray(data.se, dtype=float),
        labels=tuple(getattr(data, "labels", ()) or ()),
        weights=weights,
        groups=groups,
        group_title=title,
        group_kind=kind,
        n=np.asarray(getattr(data, "n", ()), dtype=float),
        excluded=_points(getattr(result, "excluded_points", ())),
        filled=filled,
        pooled=est,
        model_label=model_words(pooled, model) if _ok(pooled) else "",
        null=0.0,
        egger=egger,
        adjusted=adjusted,
        limit=limit,
        units=_units(result),
    )


def _units(result: Any) -> str:
    """The review's optional outcome units ("" when not given)."""
    details = getattr(getattr(result, "review", None), "details", None)
    return str(getattr(details, "units", "") or "")


def _summary(label: str, p: Any, weight: float = math.nan, k: int = 0) -> ForestSummary | None:
    if not _ok(p):
        return None
    ci = getattr(p, "ci", None)
    est = _num(getattr(p, "estimate", None))
    if est is None or ci is None:
        return None
    pi = getattr(p, "pi", None)
    return ForestSummary(
        label=label,
        estimate=est,
        ci_low=float(ci[0]),
        ci_high=float(ci[1]),
        weight=weight,
        k=int(getattr(p, "k", k) or k),
        pi_low=float(pi[0]) if pi is not None else None,
        pi_high=float(pi[1]) if pi is not None else None,
    )


def subgroup_summaries(
    result: Any, model: str = "random"
) -> tuple[tuple[str, ForestSummary | None], ...]:
    """Subtotals per subgroup, in order of first appearance.

    Read from ``result.subgroups["subgroup"]`` when the analysis has it; otherwise pooled
    by :func:`lopside.stats.pooling.fixed_effect` / ``random_effects`` on each subgroup's
    :meth:`StudyData.subset` (with the analysis settings' τ² method and HKSJ choice).
    Weights are the sum of the studies' overall weights.
    """
    data = result.data
    groups = tuple(getattr(data, "subgroup", ()) or ())
    order: list[str] = []
    for g in groups:
        if g not in order:
            order.append(g)
    overall = _pooled_for(result, model)
    w_all = np.asarray(getattr(overall, "weights", ()) if _ok(overall) else (), dtype=float)
    from_engine: dict[str, Any] = {}
    sub = (getattr(result, "subgroups", {}) or {}).get("subgroup")
    if _ok(sub):
        for lvl in getattr(sub, "levels", ()):
            from_engine[str(getattr(lvl, "level", ""))] = getattr(lvl, model, None)
    settings = getattr(result, "settings", None)
    out = []
    for g in order:
        idx = np.array([i for i, x in enumerate(groups) if x == g])
        p = from_engine.get(g)
        if not _ok(p):
            from ..stats import pooling

            part = data.subset(idx)
            if model == "fixed":
                p = pooling.fixed_effect(part.y, part.v)
            else:
                p = pooling.random_effects(
                    part.y,
                    part.v,
                    method=getattr(settings, "tau2_method", "REML"),
                    hksj=bool(getattr(settings, "hksj", False)),
                )
        weight = float(w_all[idx].sum()) if w_all.size == len(groups) else math.nan
        s = _summary(f"Subtotal (k = {idx.size})", p, weight, idx.size)
        if s is not None:
            # no prediction interval for subtotals: it would crowd the block
            s = replace(s, pi_low=None, pi_high=None)
        out.append((g, s))
    return tuple(out)


def _heterogeneity_line(het: Any) -> str:
    if not _ok(het):
        return ""
    i2, tau2 = _num(getattr(het, "i2", None)), _num(getattr(het, "tau2", None))
    q, df, p = (
        _num(getattr(het, "q", None)),
        getattr(het, "df", None),
        _num(getattr(het, "pvalue", None)),
    )
    parts = []
    if i2 is not None:
        parts.append(f"I\u00b2 = {i2:.0f}%")
    if tau2 is not None:
        parts.append(f"\u03c4\u00b2 = {tau2:.3g}")
    if q is not None and df is not None:
        ptxt = "" if p is None else (f", p = {p:.2f}" if p >= 0.01 else ", p < 0.01")
        parts.append(f"Q = {q:.1f} on {df} df{ptxt}")
    return ("Heterogeneity: " + ", ".join(parts)) if parts else ""


def forest_input_from_result(
    result: Any, options: ForestOptions | None = None
) -> tuple[tuple[ForestRow, ...], ForestPooled, ForestOptions]:
    """Rows, pooled part and options of the forest plot for an analysis result.

    Study intervals are y ± z·SE at the result's confidence level, from the same y and
    SE the analysis used. Weights are the random-effects weights when that model was
    computed, else the fixed-effect ones. The review's direction and arm names fill the
    "favours" words unless ``options`` is given.
    """
    from scipy.special import ndtri

    data = result.data
    k = int(np.asarray(data.y).size)
    conf = float(getattr(result, "confidence_level", 0.95) or 0.95)
    z = float(ndtri(0.5 + conf / 2.0))
    fixed, random = getattr(result, "fixed", None), getattr(result, "random", None)
    wmodel = "random" if _ok(random) else "fixed"
    wsrc = random if wmodel == "random" else fixed
    w = np.asarray(getattr(wsrc, "weights", ()) if _ok(wsrc) else (), dtype=float)
    if w.size != k:
        w = np.full(k, math.nan)
    labels = tuple(getattr(data, "labels", ()) or ()) or tuple(f"Study {i + 1}" for i in range(k))
    groups = tuple(getattr(data, "subgroup", ()) or ()) or ("",) * k
    y, se = np.asarray(data.y, dtype=float), np.asarray(data.se, dtype=float)
    rows = tuple(
        ForestRow(
            labels[i],
            float(y[i]),
            float(y[i] - z * se[i]),
            float(y[i] + z * se[i]),
            float(w[i]),
            groups[i],
        )
        for i in range(k)
    )
    has_groups = len({g for g in groups if g}) >= 1 and len(set(groups)) >= 2
    subtotals = subgroup_summaries(result, wmodel) if has_groups else ()
    if not has_groups:
        rows = tuple(replace(r, group="") for r in rows)
    notes = []
    for name, p in (("fixed-effect", fixed), ("random-effects", random)):
        if not _ok(p) and getattr(p, "reason", ""):
            notes.append(f"No {name} result: {p.reason}.")
    pooled = ForestPooled(
        fixed=_summary("Fixed effect", fixed, k=k),
        random=_summary("Random effects", random, k=k),
        subtotals=subtotals,
        subtotal_model=model_words(wsrc, wmodel) if subtotals else "",
        heterogeneity=_heterogeneity_line(getattr(result, "heterogeneity", None)),
        note=" ".join(notes),
    )
    if options is None:
        details = getattr(getattr(result, "review", None), "details", None)
        options = ForestOptions(
            measure=str(getattr(result, "measure", data.measure)),
            favours=str(getattr(details, "favours", "lower") or "lower"),
            int_label=str(getattr(details, "int_label", "") or "intervention"),
            ctl_label=str(getattr(details, "ctl_label", "") or "control"),
            confidence_level=conf,
            weight_model=model_words(wsrc, wmodel) if _ok(wsrc) else "",
            units=_units(result),
        )
    return rows, pooled, options


def cumulative_input_from_result(result: Any, model: str | None = None) -> CumulativeInput | None:
    """Cumulative steps (most precise first) for :func:`cumulative_figure`, or None.

    Reads ``result.cumulative.steps``; each step either has ``label/estimate/ci_low/
    ci_high/k`` or ``added/k`` with ``fixed``/``random`` pooled results.
    """
    cum = getattr(result, "cumulative", None)
    if not _ok(cum):
        return None
    m = _model_of(result, model)
    steps = []
    pooled_any = None
    for s in getattr(cum, "steps", cum) or ():
        if hasattr(s, "estimate"):
            est, lo, hi = (
                _num(s.estimate),
                _num(getattr(s, "ci_low", None)),
                _num(getattr(s, "ci_high", None)),
            )
            label = str(getattr(s, "label", ""))
        else:
            p = getattr(s, m, None)
            if not _ok(p):
                continue
            pooled_any = p
            est, lo, hi = _num(p.estimate), _num(p.ci[0]), _num(p.ci[1])
            label = str(getattr(s, "added", getattr(s, "label", "")))
        if est is None or lo is None or hi is None:
            continue
        steps.append(CumulativeStep(label, est, lo, hi, int(getattr(s, "k", len(steps) + 1))))
    if not steps:
        return None
    details = getattr(getattr(result, "review", None), "details", None)
    order = str(getattr(cum, "order", "") or "most precise study first")
    return CumulativeInput(
        steps=tuple(steps),
        measure=str(getattr(result, "measure", "OR")),
        model_label=model_words(pooled_any or _pooled_for(result, m), m),
        order_label=order,
        favours=str(getattr(details, "favours", "lower") or "lower"),
        int_label=str(getattr(details, "int_label", "") or "intervention"),
        ctl_label=str(getattr(details, "ctl_label", "") or "control"),
        units=_units(result),
    )


def radial_input_from_result(result: Any) -> RadialInput:
    """Studies, fixed-effect estimate and Egger line for :func:`radial_figure`."""
    data = result.data
    fixed = getattr(result, "fixed", None)
    tests = getattr(result, "tests", {}) or {}
    eg = tests.get("egger") if hasattr(tests, "get") else None
    egger = None
    if _ok(eg):
        b0, b1 = _num(getattr(eg, "intercept", None)), _num(getattr(eg, "slope", None))
        if b0 is not None and b1 is not None:
            egger = (b0, b1)
    return RadialInput(
        measure=str(getattr(result, "measure", data.measure)),
        y=np.asarray(data.y, dtype=float),
        se=np.asarray(data.se, dtype=float),
        labels=tuple(getattr(data, "labels", ()) or ()),
        fixed=_num(getattr(fixed, "estimate", None)) if _ok(fixed) else None,
        egger=egger,
    )
