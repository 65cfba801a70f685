"""The regression family: Egger (and its WLS form), Harbord, Peters, Egger with the SMD's
modified SE, and the arcsine test. Each is a batched ``*_core`` on arrays whose last axis
is the studies (also run by the power simulation) and a single-review function around it.
Formulas: methods.md section 3.
"""

from __future__ import annotations

import math

import numpy as np

from lopside.stats.asymmetry.base import (
    _EGGER_AGREE_RTOL,
    _EXACT_TOL,
    _SINGULAR_TOL,
    DEFAULT_ALPHA,
    EXACT_FIT,
    MSG_EGGER_DISAGREE,
    OK,
    SINGULAR,
    TOO_FEW,
    AsymmetryResult,
    LineFit,
    TestArrays,
    _finite_use,
    _norm_sf2,
    _t_sf2,
)
from lopside.stats.asymmetry.single import (
    _dropped_nonfinite,
    _fe_direction,
    _label,
    _name,
    _not_computable,
    _t_note,
    _wrap,
    precheck,
)
from lopside.stats.data import StudyData
from lopside.stats.results import NotComputable


def fit_line(x, z, w, *, scale: float | None = None) -> LineFit:
    """Weighted least squares of ``z`` on ``(1, x)``, batched over the leading axes.

    Parameters
    ----------
    x, z, w : array_like
        Regressor, response and weights; the last axis is the studies. Entries with
        ``w <= 0`` (or a non-finite ``w``, ``x`` or ``z``) are left out.
    scale : float, optional
        Fix the residual variance at this value (random-effects meta-regression); by
        default it is estimated as the weighted residual sum of squares over k - 2.

    Returns
    -------
    LineFit
        Coefficients, standard errors, residual df, studies used, weighted residual sum of
        squares and a status code (``OK``, ``TOO_FEW``, ``SINGULAR``, ``EXACT_FIT``).

    Notes
    -----
    Centred closed-form formulas (numerically stable for a two-parameter line):
    slope = Sxz / Sxx, Var(slope) = s² / Sxx, Var(intercept) = s² (1/Σw + x̄² / Sxx).
    """
    x, z, w = np.broadcast_arrays(
        np.asarray(x, dtype=float), np.asarray(z, dtype=float), np.asarray(w, dtype=float)
    )
    use = np.isfinite(w) & (w > 0) & np.isfinite(x) & np.isfinite(z)
    w = np.where(use, w, 0.0)
    x = np.where(use, x, 0.0)
    z = np.where(use, z, 0.0)
    k_used = use.sum(axis=-1)
    with np.errstate(divide="ignore", invalid="ignore"):
        sw = w.sum(axis=-1)
        xbar = (w * x).sum(axis=-1) / sw
        zbar = (w * z).sum(axis=-1) / sw
        dx = np.where(use, x - xbar[..., None], 0.0)
        dz = np.where(use, z - zbar[..., None], 0.0)
        sxx = (w * dx * dx).sum(axis=-1)
        slope = (w * dx * dz).sum(axis=-1) / sxx
        intercept = zbar - slope * xbar
        resid = dz - slope[..., None] * dx
        rss = (w * resid * resid).sum(axis=-1)
        df = k_used - 2
        s2 = rss / df if scale is None else np.full(rss.shape, float(scale))
        slope_se = np.sqrt(s2 / sxx)
        intercept_se = np.sqrt(s2 * (1.0 / sw + xbar**2 / sxx))
        singular = ~(sxx > _SINGULAR_TOL * (w * x * x).sum(axis=-1))
        exact = ~(rss > _EXACT_TOL * (w * z * z).sum(axis=-1))
    status = np.full(k_used.shape, OK)
    if scale is None:
        status = np.where(exact, EXACT_FIT, status)
    status = np.where(singular, SINGULAR, status)
    status = np.where(k_used < 3, TOO_FEW, status)
    return LineFit(intercept, intercept_se, slope, slope_se, df, k_used, rss, status)


def _t_test(fit: LineFit, which: str) -> TestArrays:
    coef = fit.intercept if which == "intercept" else fit.slope
    se = fit.intercept_se if which == "intercept" else fit.slope_se
    ok = fit.status == OK
    with np.errstate(divide="ignore", invalid="ignore"):
        t = np.where(ok, coef / se, np.nan)
        p = np.where(ok, _t_sf2(t, np.where(ok, fit.df, 1)), np.nan)
    return TestArrays(
        statistic=t,
        pvalue=p,
        df=fit.df.astype(float),
        status=fit.status,
        k_used=fit.k_used,
        bias=coef,
        intercept=fit.intercept,
        intercept_se=fit.intercept_se,
        slope=fit.slope,
        slope_se=fit.slope_se,
    )


def egger_core(y, se, use=None) -> TestArrays:
    """Egger et al. 1997, formulation A: OLS of y/se on 1/se, intercept tested (t, k-2)."""
    y, se = np.asarray(y, dtype=float), np.asarray(se, dtype=float)
    ok = _finite_use(y, se, use=use) & (se > 0)
    with np.errstate(divide="ignore", invalid="ignore"):
        fit = fit_line(1.0 / se, y / se, ok.astype(float))
    return _t_test(fit, "intercept")


def egger_wls_core(y, se, use=None) -> TestArrays:
    """Egger's test, formulation B: WLS of y on se with weights 1/se², slope tested."""
    y, se = np.asarray(y, dtype=float), np.asarray(se, dtype=float)
    ok = _finite_use(y, se, use=use) & (se > 0)
    with np.errstate(divide="ignore", invalid="ignore"):
        fit = fit_line(se, y, np.where(ok, 1.0 / se**2, 0.0))
    return _t_test(fit, "slope")


def harbord_cells(a, b, c, d) -> tuple[np.ndarray, np.ndarray]:
    """Efficient score Z = a - n1 m1 / N and its variance V = n1 n0 m1 m0 / (N² (N - 1)).

    Harbord, Egger & Sterne 2006 (methods.md 3.3; the hypergeometric N²(N-1) denominator is
    from memory).
    """
    a, b, c, d = (np.asarray(x, dtype=float) for x in (a, b, c, d))
    n1, n0 = a + b, c + d
    n = n1 + n0
    m1, m0 = a + c, b + d
    with np.errstate(divide="ignore", invalid="ignore"):
        z = a - n1 * m1 / n
        v = n1 * n0 * m1 * m0 / (n**2 * (n - 1.0))
    return z, v


def harbord_core(a, b, c, d, use=None) -> TestArrays:
    """Harbord's modified test: OLS of Z/√V on √V, intercept tested (t, k-2); V = 0 left out."""
    z, v = harbord_cells(a, b, c, d)
    ok = _finite_use(z, v, use=use) & (v > 0)
    with np.errstate(divide="ignore", invalid="ignore"):
        sv = np.sqrt(v)
        fit = fit_line(sv, z / sv, ok.astype(float))
    return _t_test(fit, "intercept")


def peters_core(y, a, b, c, d, use=None) -> TestArrays:
    """Peters et al. 2006: WLS of y (log OR) on 1/N, weights m1 m0 / N, slope tested."""
    y = np.asarray(y, dtype=float)
    a, b, c, d = (np.asarray(x, dtype=float) for x in (a, b, c, d))
    n = a + b + c + d
    m1, m0 = a + c, b + d
    with np.errstate(divide="ignore", invalid="ignore"):
        # 1 / (1/m1 + 1/m0) = m1 m0 / N: zero when a study has no events or no non-events.
        w = m1 * m0 / n
        ok = _finite_use(y, w, use=use) & (w > 0)
        fit = fit_line(1.0 / n, y, np.where(ok, w, 0.0))
    return _t_test(fit, "slope")


def smd_modified_core(y, se_mod, use=None) -> TestArrays:
    """Pustejovsky & Rodgers 2019: WLS of g on sqrt(1/n1 + 1/n0), weights 1/that², slope."""
    y, sm = np.asarray(y, dtype=float), np.asarray(se_mod, dtype=float)
    ok = _finite_use(y, sm, use=use) & (sm > 0)
    with np.errstate(divide="ignore", invalid="ignore"):
        fit = fit_line(sm, y, np.where(ok, 1.0 / sm**2, 0.0))
    return _t_test(fit, "slope")


def arcsine_core(asd, asd_var, use=None, *, random: bool = False) -> TestArrays:
    """Rücker, Schwarzer & Carpenter 2008 arcsine test.

    ``random=False``: Egger-type WLS of the arcsine difference on its SE with weights
    1/var, slope tested with t on k-2 df (multiplicative dispersion).
    ``random=True``: Thompson & Sharp 1999 random-effects meta-regression of the arcsine
    difference on its SE: residual τ² by the method of moments,
    τ² = max(0, (Q_res - (k - 2)) / tr P) with P = W - W X (X'WX)⁻¹ X'W, then WLS with
    weights 1/(var + τ²) and dispersion fixed at 1; slope tested with a z test.
    """
    y, v = np.asarray(asd, dtype=float), np.asarray(asd_var, dtype=float)
    ok = _finite_use(y, v, use=use) & (v > 0)
    with np.errstate(divide="ignore", invalid="ignore"):
        s = np.sqrt(v)
        w = np.where(ok, 1.0 / v, 0.0)
        fe = fit_line(s, y, w)
        if not random:
            return _t_test(fe, "slope")
        # tr P for a two-column design, from the centred regressor (tr is invariant to
        # reparametrising the columns): tr P = Σw - Σw²/Σw - Σw²(x - x̄)² / Sxx.
        sw = w.sum(axis=-1)
        xs = np.where(ok, s, 0.0)
        xbar = (w * xs).sum(axis=-1) / sw
        dx = np.where(ok, xs - xbar[..., None], 0.0)
        sxx = (w * dx * dx).sum(axis=-1)
        trp = sw - (w * w).sum(axis=-1) / sw - (w * w * dx * dx).sum(axis=-1) / sxx
        tau2 = np.maximum(0.0, (fe.rss - (fe.k_used - 2)) / trp)
        wr = np.where(ok, 1.0 / (v + tau2[..., None]), 0.0)
        re = fit_line(s, y, wr, scale=1.0)
        status = np.where(fe.status == EXACT_FIT, OK, fe.status)  # exact fit: tau² = 0, fine
        status = np.where(re.status != OK, re.status, status)
        good = status == OK
        zstat = np.where(good, re.slope / re.slope_se, np.nan)
        p = np.where(good, _norm_sf2(zstat), np.nan)
    return TestArrays(
        statistic=zstat,
        pvalue=p,
        df=None,
        status=status,
        k_used=re.k_used,
        bias=re.slope,
        intercept=re.intercept,
        intercept_se=re.intercept_se,
        slope=re.slope,
        slope_se=re.slope_se,
        tau2=tau2,
    )


# --------------------------------------------------------------------------------------
# The tests


def _close(p: float, q: float) -> bool:
    """numpy.isclose(p, q, rtol=_EGGER_AGREE_RTOL, atol=1e-12) for two floats, without
    numpy's array machinery (the agreement check of the two formulations)."""
    if math.isinf(p) or math.isinf(q):
        return p == q
    return abs(p - q) <= 1e-12 + _EGGER_AGREE_RTOL * abs(q)


def egger(data: StudyData, *, alpha: float = DEFAULT_ALPHA) -> AsymmetryResult | NotComputable:
    """Egger's regression test (Egger et al. 1997), formulation A.

    Ordinary least squares of the standard normal deviate y/se on precision 1/se; the
    intercept is tested with a t on k - 2 df. Formulation B (:func:`egger_wls`) is computed
    too and must agree (methods.md 3.1).

    Parameters
    ----------
    data : StudyData
    alpha : float
        Threshold for the reading (0.10 by convention).

    Returns
    -------
    AsymmetryResult or NotComputable
    """
    pre = precheck("egger", data)
    if pre is not None:
        return pre
    use, dropped = _dropped_nonfinite(data, data.y, data.se)
    a = egger_core(data.y, data.se, use)
    if int(a.status) != OK:
        return _not_computable("egger", int(a.status), int(a.k_used), n_dropped=len(dropped))
    b = egger_wls_core(data.y, data.se, use)
    pairs = ((a.intercept, b.slope), (a.intercept_se, b.slope_se), (a.slope, b.intercept))
    if int(b.status) != OK or not all(_close(float(p), float(q)) for p, q in pairs):
        return NotComputable(MSG_EGGER_DISAGREE.format(name=_name("egger")))
    return _wrap(
        "egger",
        a,
        tested="intercept",
        dropped=tuple(dropped),
        method_note=_t_note(a.df),
        what="intercept of the standard normal deviate (effect / SE) regressed on precision "
        "(1 / SE)",
        pooled=_fe_direction(data.y, data.v),
        alpha=alpha,
    )


def egger_wls(data: StudyData, *, alpha: float = DEFAULT_ALPHA) -> AsymmetryResult | NotComputable:
    """Egger's test, formulation B: weighted regression of the effect on its SE.

    Weighted least squares of y on se with weights 1/se²; the slope is tested (t, k - 2 df).
    Its slope equals the intercept of formulation A and its intercept A's slope.

    Parameters
    ----------
    data : StudyData
    alpha : float

    Returns
    -------
    AsymmetryResult or NotComputable
    """
    pre = precheck("egger", data)
    if pre is not None:
        return pre
    use, dropped = _dropped_nonfinite(data, data.y, data.se)
    b = egger_wls_core(data.y, data.se, use)
    if int(b.status) != OK:
        return _not_computable("egger", int(b.status), int(b.k_used), n_dropped=len(dropped))
    return _wrap(
        "egger",
        b,
        tested="slope",
        dropped=tuple(dropped),
        method_note=_t_note(b.df) + "; weighted regression of the effect on its SE",
        what="slope of the effect regressed on its SE, weighted by 1 / SE²",
        pooled=_fe_direction(data.y, data.v),
        alpha=alpha,
    )


def _count_drop_reasons(data: StudyData, keep: np.ndarray) -> list[tuple[str, str]]:
    m1 = data.a + data.c
    m0 = data.b + data.d
    out = []
    for i in np.flatnonzero(~keep):
        if m1[i] == 0:
            why = "no events in either group"
        elif m0[i] == 0:
            why = "every participant had the event in both groups"
        else:
            why = "counts do not allow the calculation"
        out.append((_label(data, i), why))
    return out


def harbord(data: StudyData, *, alpha: float = DEFAULT_ALPHA) -> AsymmetryResult | NotComputable:
    """Harbord, Egger & Sterne 2006 modified test for odds ratios.

    Z = a - n1 m1 / N (efficient score), V = n1 n0 m1 m0 / (N² (N - 1)); ordinary least
    squares of Z/√V on √V, intercept tested with a t on k - 2 df. Single zero cells need no
    correction; studies with V = 0 (no events, or only events, in both groups) are set
    aside with the reason.

    Parameters
    ----------
    data : StudyData
    alpha : float

    Returns
    -------
    AsymmetryResult or NotComputable
    """
    pre = precheck("harbord", data)
    if pre is not None:
        return pre
    z, v = harbord_cells(data.a, data.b, data.c, data.d)
    keep = np.isfinite(z) & np.isfinite(v) & (v > 0)
    r = harbord_core(data.a, data.b, data.c, data.d)
    dropped = _count_drop_reasons(data, keep)
    if int(r.status) != OK:
        return _not_computable(
            "harbord", int(r.status), int(r.k_used), "score variance", len(dropped)
        )
    return _wrap(
        "harbord",
        r,
        tested="intercept",
        dropped=tuple(dropped),
        method_note=_t_note(r.df),
        what="intercept of the efficient score over its standard deviation (Z / √V) "
        "regressed on √V",
        pooled=_fe_direction(data.y, data.v),
        alpha=alpha,
    )


def peters(data: StudyData, *, alpha: float = DEFAULT_ALPHA) -> AsymmetryResult | NotComputable:
    """Peters et al. 2006 regression test.

    Weighted least squares of the log odds ratio (``data.y``) on 1/N with weights
    1/(1/m1 + 1/m0), where m1 = a + c (all events) and m0 = b + d (all non-events); the
    slope is tested with a t on k - 2 df. Studies without events (or without non-events)
    are set aside. Designed for odds ratios; run on risk ratios it is exploratory.

    Parameters
    ----------
    data : StudyData
    alpha : float

    Returns
    -------
    AsymmetryResult or NotComputable
    """
    pre = precheck("peters", data)
    if pre is not None:
        return pre
    m1 = data.a + data.c
    m0 = data.b + data.d
    keep = (m1 > 0) & (m0 > 0)
    dropped = _count_drop_reasons(data, keep)
    bad_y = keep & ~np.isfinite(data.y)
    dropped += [(_label(data, i), "no usable effect") for i in np.flatnonzero(bad_y)]
    keep &= np.isfinite(data.y)
    r = peters_core(data.y, data.a, data.b, data.c, data.d, keep)
    if int(r.status) != OK:
        return _not_computable(
            "peters", int(r.status), int(r.k_used), "total sample size", len(dropped)
        )
    note = _t_note(r.df)
    if data.measure != "OR":
        note += "; exploratory: the test was designed for odds ratios (Peters et al. 2006)"
    scale = "log odds ratio" if data.measure == "OR" else "log risk ratio"
    return _wrap(
        "peters",
        r,
        tested="slope",
        dropped=tuple(dropped),
        method_note=note,
        what=f"slope of the {scale} regressed on 1 / total sample size, weighted by events "
        "and non-events",
        pooled=_fe_direction(data.y, data.v),
        alpha=alpha,
    )


def _se_modified(data: StudyData) -> np.ndarray:
    k = data.k
    if data.se_modified.size == k and bool(np.all(np.isfinite(data.se_modified))):
        return data.se_modified
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.sqrt(1.0 / data.n1 + 1.0 / data.n0)


def smd_modified(
    data: StudyData, *, alpha: float = DEFAULT_ALPHA
) -> AsymmetryResult | NotComputable:
    """Egger-type test for SMDs with the modified SE (Pustejovsky & Rodgers 2019).

    Weighted least squares of g on W = √(1/n1 + 1/n0) with weights 1/W²; the slope on W is
    tested with a t on k - 2 df (the equivalent of Egger's intercept). W does not contain
    g, which removes the artefactual link between an SMD and its usual SE.

    Parameters
    ----------
    data : StudyData
    alpha : float

    Returns
    -------
    AsymmetryResult or NotComputable
    """
    pre = precheck("smd_modified", data)
    if pre is not None:
        return pre
    sm = _se_modified(data)
    use, dropped = _dropped_nonfinite(data, data.y, sm)
    r = smd_modified_core(data.y, sm, use)
    if int(r.status) != OK:
        return _not_computable(
            "smd_modified", int(r.status), int(r.k_used), "group sizes", len(dropped)
        )
    return _wrap(
        "smd_modified",
        r,
        tested="slope",
        dropped=tuple(dropped),
        method_note=_t_note(r.df),
        what="slope of the SMD regressed on √(1/n₁ + 1/n₀), weighted by its inverse square",
        pooled=_fe_direction(data.y, data.v),
        alpha=alpha,
    )


def arcsine_arrays(data: StudyData) -> tuple[np.ndarray, np.ndarray]:
    """Arcsine difference and its variance: from ``data`` where present, else from counts.

    ASD = arcsin√(a/n1) - arcsin√(c/n0), Var = 1/(4 n1) + 1/(4 n0) (Rücker et al. 2008).
    """
    k = data.k
    if (
        data.asd.size == k
        and data.asd_var.size == k
        and bool(np.all(np.isfinite(data.asd)) and np.all(np.isfinite(data.asd_var)))
    ):
        return data.asd, data.asd_var
    n1 = data.a + data.b
    n0 = data.c + data.d
    with np.errstate(divide="ignore", invalid="ignore"):
        asd = np.arcsin(np.sqrt(data.a / n1)) - np.arcsin(np.sqrt(data.c / n0))
        var = 1.0 / (4.0 * n1) + 1.0 / (4.0 * n0)
    return asd, var


def arcsine(
    data: StudyData, *, alpha: float = DEFAULT_ALPHA, random: bool = False
) -> AsymmetryResult | NotComputable:
    """Arcsine test (Rücker, Schwarzer & Carpenter 2008).

    ``random=False``: Egger-type weighted regression of the arcsine difference on its SE
    (weights 1/var), slope tested with t on k - 2 df. ``random=True``: the Thompson & Sharp
    1999 version with additive between-study variance (random-effects meta-regression,
    method-of-moments τ²), slope tested with a z test. The variance depends on the group
    sizes only, and double-zero trials are usable.

    Parameters
    ----------
    data : StudyData
    alpha : float
    random : bool
        Use the random-effects (Thompson-Sharp) version.

    Returns
    -------
    AsymmetryResult or NotComputable
    """
    pre = precheck("arcsine", data)
    if pre is not None:
        return pre
    asd, var = arcsine_arrays(data)
    use, dropped = _dropped_nonfinite(data, asd, var)
    r = arcsine_core(asd, var, use, random=random)
    if int(r.status) != OK:
        return _not_computable("arcsine", int(r.status), int(r.k_used), "group sizes", len(dropped))
    if random:
        note = (
            "z test in a random-effects meta-regression (Thompson & Sharp 1999), "
            f"between-study variance by the method of moments: τ² = {float(r.tau2):.4g}"
        )
        what = (
            "slope of the arcsine difference regressed on its SE, allowing for "
            "between-study variance"
        )
        name = "Arcsine test (random effects)"
    else:
        note = _t_note(r.df)
        what = "slope of the arcsine difference regressed on its SE, weighted by 1 / SE²"
        name = None
    return _wrap(
        "arcsine",
        r,
        tested="slope",
        dropped=tuple(dropped),
        method_note=note,
        what=what,
        pooled=_fe_direction(asd, var),
        alpha=alpha,
        name=name,
    )
