"""Fixed-effect pooling of 2x2 tables without zero-cell corrections: Mantel-Haenszel and Peto.

Inputs are per-study counts as 1-D arrays (``a`` events and ``b`` non-events in the
intervention arm, ``c`` events and ``d`` non-events in the control arm). Results are on
the analysis scale (natural log for OR and RR) as
:class:`~lopside.stats.results.PooledEstimate`; data that cannot be pooled give
:class:`~lopside.stats.results.NotComputable` with a reason in plain words.

Formulas (methods.md section 2.2 and 1.3)
-----------------------------------------
* OR: Mantel & Haenszel (1959) estimator, variance of its log by Robins, Breslow &
  Greenland (1986).
* RR: Mantel-Haenszel estimator, variance of its log by Greenland & Robins (1985).
* RD: Mantel-Haenszel estimator with weights n1 n0 / N and the variance given by
  Greenland & Robins (1985).
* Peto one-step OR (Yusuf et al. 1985): sum of observed minus expected events in the
  intervention arm over the sum of hypergeometric variances.

Zero cells need no correction. A study that adds nothing to either Mantel-Haenszel sum
(for OR: a d = b c = 0; for RR: no events in either arm) or has a zero hypergeometric
variance (Peto: no events, or only events, in the whole table) is left out and counted
in ``note``. Weights are reported in percent of the denominator sum of each estimator
(0 for a study left out). Two-sided P values and intervals use the normal distribution;
``statistic`` is the z statistic.
"""

from __future__ import annotations

import math
from statistics import NormalDist

import numpy as np
from numpy.typing import ArrayLike

from lopside.stats.results import ConfidenceInterval, NotComputable, PooledEstimate

MH_MEASURES: tuple[str, ...] = ("OR", "RR", "RD")


def _tables(
    a: ArrayLike, b: ArrayLike, c: ArrayLike, d: ArrayLike
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray] | NotComputable:
    """The four count arrays as float64, or a reason why they cannot be used."""
    try:
        arrs = [np.atleast_1d(np.asarray(x, dtype=np.float64)) for x in (a, b, c, d)]
    except (TypeError, ValueError):
        return NotComputable("the 2x2 counts are not all numbers")
    if any(x.ndim != 1 for x in arrs) or len({x.shape for x in arrs}) != 1:
        return NotComputable("the four count lists must be flat and of the same length")
    if arrs[0].size == 0:
        return NotComputable("no studies with 2x2 counts")
    for i in range(arrs[0].size):
        cells = [float(x[i]) for x in arrs]
        if not all(math.isfinite(v) and v >= 0 for v in cells):
            return NotComputable(
                f"study {i + 1}: counts must be finite and not negative; check its row"
            )
        if cells[0] + cells[1] <= 0 or cells[2] + cells[3] <= 0:
            return NotComputable(f"study {i + 1}: an arm has no participants; check its row")
    return arrs[0], arrs[1], arrs[2], arrs[3]


def _z_crit(confidence_level: float) -> float:
    if not 0 < confidence_level < 1:
        raise ValueError(f"confidence_level must be between 0 and 1, not {confidence_level!r}")
    return NormalDist().inv_cdf(0.5 + confidence_level / 2)


def _result(
    model: str,
    estimate: float,
    var: float,
    confidence_level: float,
    k: int,
    weights: np.ndarray,
    note: str,
) -> PooledEstimate | NotComputable:
    if not (math.isfinite(estimate) and math.isfinite(var) and var > 0):
        return NotComputable(
            "the pooled estimate or its variance is not finite for these studies "
            "(too few events to estimate an effect)"
        )
    if not np.all(np.isfinite(weights)):
        return NotComputable(_EXTREME)
    se = math.sqrt(var)
    q = _z_crit(confidence_level)
    z = estimate / se
    # two-sided normal P; erfc keeps precision for large |z|
    p = math.erfc(abs(z) / math.sqrt(2.0))
    return PooledEstimate(
        model=model,
        estimate=estimate,
        se=se,
        ci=ConfidenceInterval(estimate - q * se, estimate + q * se),
        statistic=z,
        pvalue=p,
        confidence_level=confidence_level,
        k=k,
        weights=tuple(float(w) for w in weights),
        note=note,
    )


def _left_out_note(n_out: int, why: str) -> str:
    if n_out == 0:
        return ""
    studies = "study" if n_out == 1 else "studies"
    return f"{n_out} {studies} left out ({why})"


def mantel_haenszel(
    a: ArrayLike,
    b: ArrayLike,
    c: ArrayLike,
    d: ArrayLike,
    measure: str,
    *,
    confidence_level: float = 0.95,
) -> PooledEstimate | NotComputable:
    """Mantel-Haenszel fixed-effect pooled OR, RR or RD.

    Parameters
    ----------
    a, b, c, d : array_like
        Per-study events / non-events in the intervention arm (a, b) and the control
        arm (c, d).
    measure : {"OR", "RR", "RD"}
    confidence_level : float
        Between 0 and 1.

    Returns
    -------
    PooledEstimate or NotComputable
        ``model="MH"``; ``estimate`` is the log OR / log RR or the RD, ``se`` its standard
        error (Robins-Breslow-Greenland for OR, Greenland-Robins for RR and RD),
        ``statistic`` the z statistic, ``weights`` the MH weights in percent.

    Raises
    ------
    ValueError
        If ``confidence_level`` is not between 0 and 1.
    """
    _z_crit(confidence_level)
    if measure not in MH_MEASURES:
        return NotComputable(
            f"Mantel-Haenszel pooling is for odds ratios, risk ratios and risk differences, "
            f"not {measure!r}"
        )
    tables = _tables(a, b, c, d)
    if isinstance(tables, NotComputable):
        return tables
    try:
        return _mantel_haenszel(*tables, measure, confidence_level)
    except (ArithmeticError, ValueError):
        # counts so extreme (e.g. 1e300) that the sums overflow or underflow
        return NotComputable(_EXTREME)


_EXTREME = "the counts are too extreme to pool (sums overflow or vanish); check the rows for typos"


def _mantel_haenszel(
    a: np.ndarray,
    b: np.ndarray,
    c: np.ndarray,
    d: np.ndarray,
    measure: str,
    confidence_level: float,
) -> PooledEstimate | NotComputable:
    n1, n0 = a + b, c + d
    big_n = n1 + n0
    with np.errstate(all="ignore"):
        if measure == "OR":
            r = a * d / big_n
            s = b * c / big_n
            keep = (r > 0) | (s > 0)
            r_sum, s_sum = float(r.sum()), float(s.sum())
            if r_sum == 0 or s_sum == 0:
                return NotComputable(
                    "the Mantel-Haenszel odds ratio is 0 or infinite for these studies "
                    "(one of its two sums is 0); use the risk difference"
                )
            p_ = (a + d) / big_n
            q_ = (b + c) / big_n
            # each sum is divided step by step so tiny sums do not underflow when squared
            var = (
                float((p_ * r).sum()) / r_sum / r_sum / 2
                + float((p_ * s + q_ * r).sum()) / r_sum / s_sum / 2
                + float((q_ * s).sum()) / s_sum / s_sum / 2
            )
            estimate = math.log(r_sum / s_sum)
            weights = s / s_sum * 100
            why = "they add to neither Mantel-Haenszel sum"
        elif measure == "RR":
            r = a * n0 / big_n
            s = c * n1 / big_n
            keep = (r > 0) | (s > 0)
            r_sum, s_sum = float(r.sum()), float(s.sum())
            if r_sum == 0 or s_sum == 0:
                arm = "intervention" if r_sum == 0 else "control"
                return NotComputable(
                    "the Mantel-Haenszel risk ratio is 0 or infinite for these studies "
                    f"(no events in the {arm} arm of any study); use the risk difference"
                )
            m1 = a + c
            var = float(((n1 * n0 * m1 - a * c * big_n) / big_n**2).sum()) / r_sum / s_sum
            estimate = math.log(r_sum / s_sum)
            weights = s / s_sum * 100
            why = "no events in either arm"
        else:
            w = n1 * n0 / big_n
            w_sum = float(w.sum())
            keep = np.ones(a.shape, dtype=bool)
            estimate = float(((a * n0 - c * n1) / big_n).sum()) / w_sum
            var = float(((a * b * n0**3 + c * d * n1**3) / (n1 * n0 * big_n**2)).sum())
            var = var / w_sum / w_sum
            weights = w / w_sum * 100
            why = ""
            if var <= 0:
                return NotComputable(
                    "the Mantel-Haenszel risk difference has no variance: in every study each "
                    "arm had either no events or only events"
                )
    weights = np.where(keep, weights, 0.0)
    n_out = int((~keep).sum())
    return _result(
        "MH",
        estimate,
        var,
        confidence_level,
        int(keep.sum()),
        weights,
        _left_out_note(n_out, why),
    )


def _peto_parts(
    a: np.ndarray, b: np.ndarray, c: np.ndarray, d: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Observed minus expected events (intervention arm) and hypergeometric variances."""
    n1, n0 = a + b, c + d
    big_n = n1 + n0
    m1, m0 = a + c, b + d
    with np.errstate(all="ignore"):
        expected = n1 * m1 / big_n
        v = np.where(big_n > 1, n1 * n0 * m1 * m0 / (big_n**2 * (big_n - 1)), 0.0)
    return a - expected, v


def peto_study(
    a: ArrayLike, b: ArrayLike, c: ArrayLike, d: ArrayLike
) -> tuple[np.ndarray, np.ndarray]:
    """Per-study Peto log odds ratios and their standard errors.

    Parameters
    ----------
    a, b, c, d : array_like
        Per-study 2x2 counts (see :func:`mantel_haenszel`).

    Returns
    -------
    y, se : ndarray
        ``(a - E) / V`` and ``1 / sqrt(V)``. Entries are NaN where the study has no
        hypergeometric variance (no events, or only events, in the table) or where its
        counts are not finite and non-negative; callers filter with ``np.isfinite``.

    Raises
    ------
    ValueError
        If the four arrays do not have the same shape.
    """
    arrs = [np.atleast_1d(np.asarray(x, dtype=np.float64)) for x in (a, b, c, d)]
    if len({x.shape for x in arrs}) != 1:
        raise ValueError("a, b, c and d must have the same shape")
    a_, b_, c_, d_ = arrs
    bad = ~np.all([np.isfinite(x) & (x >= 0) for x in arrs], axis=0)
    o_e, v = _peto_parts(a_, b_, c_, d_)
    ok = (v > 0) & ~bad
    with np.errstate(all="ignore"):
        y = np.where(ok, o_e / np.where(ok, v, 1.0), np.nan)
        se = np.where(ok, 1.0 / np.sqrt(np.where(ok, v, 1.0)), np.nan)
    return y, se


def peto(
    a: ArrayLike,
    b: ArrayLike,
    c: ArrayLike,
    d: ArrayLike,
    *,
    confidence_level: float = 0.95,
) -> PooledEstimate | NotComputable:
    """Peto one-step pooled log odds ratio (Yusuf et al. 1985).

    Parameters
    ----------
    a, b, c, d : array_like
        Per-study 2x2 counts (see :func:`mantel_haenszel`).
    confidence_level : float
        Between 0 and 1.

    Returns
    -------
    PooledEstimate or NotComputable
        ``model="Peto"``; ``estimate`` = sum(O - E) / sum(V), ``se`` = 1 / sqrt(sum(V)),
        ``weights`` = V in percent of sum(V).

    Raises
    ------
    ValueError
        If ``confidence_level`` is not between 0 and 1.
    """
    _z_crit(confidence_level)
    tables = _tables(a, b, c, d)
    if isinstance(tables, NotComputable):
        return tables
    o_e, v = _peto_parts(*tables)
    keep = (v > 0) & np.isfinite(v) & np.isfinite(o_e)
    v_sum = float(v[keep].sum())
    if not v_sum > 0:
        return NotComputable(
            "the Peto odds ratio needs at least one study with both events and non-events"
        )
    estimate = float(o_e[keep].sum()) / v_sum
    if not math.isfinite(estimate) or v_sum == math.inf:
        return NotComputable(_EXTREME)
    return _result(
        "Peto",
        estimate,
        1.0 / v_sum,
        confidence_level,
        int(keep.sum()),
        np.where(keep, v / v_sum * 100, 0.0),
        _left_out_note(int((~keep).sum()), "no events, or only events, in the whole table"),
    )
