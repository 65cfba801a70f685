"""The code of the full stage's parts as it was before the speed-ups of issue 16 (commit
70df7e6), kept only as the reference for tests/test_full_stage_large.py: the faster code
must give the same bits on whatever machine the tests run. Not imported by Lopside.
"""

from __future__ import annotations

import math

import numpy as np

from lopside.stats.pooling_base import _norm_ppf
from lopside.stats.results import ConfidenceInterval, NotComputable, PooledEstimate


def _fixed_results(est, sw, n, weights, confidence_level):
    """PooledEstimate per row from the estimate and sum of weights of each subset."""
    from scipy.special import ndtr

    se = 1.0 / np.sqrt(sw)
    stat = est / se
    p = 2.0 * ndtr(-np.abs(stat))
    z = _norm_ppf(0.5 + confidence_level / 2.0)
    out: list[PooledEstimate | NotComputable] = []
    for b in range(n.size):
        if n[b] == 0:
            out.append(NotComputable("no study has a usable effect and standard error"))
            continue
        e, s = float(est[b]), float(se[b])
        out.append(
            PooledEstimate(
                model="FE-IV",
                estimate=e,
                se=s,
                ci=ConfidenceInterval(e - z * s, e + z * s),
                statistic=float(stat[b]),
                pvalue=float(p[b]),
                confidence_level=confidence_level,
                k=int(n[b]),
                weights=weights[b],
            )
        )
    return tuple(out)


def _random_results(
    method, est, sw, rq, n, tau2_arr, converged, notes, weights, hksj, confidence_level
):
    """PooledEstimate per row from each subset's estimate, sum of weights, HKSJ numerator
    and tau^2 (the same arithmetic as :func:`random_effects`)."""
    from scipy.special import ndtr, stdtr, stdtrit

    nsub = n.size
    alpha_half = 0.5 + confidence_level / 2.0
    use_t = hksj & (n >= 2)
    se = 1.0 / np.sqrt(sw)
    df = (n - 1).astype(float)
    q = rq / df
    se_h = np.sqrt(np.maximum(1.0, q) / sw)
    crit_t = stdtrit(df, alpha_half)
    stat_t = est / se_h
    p_t = 2.0 * stdtr(df, -np.abs(stat_t))
    stat_z = est / se
    p_z = 2.0 * ndtr(-np.abs(stat_z))
    tq = stdtrit(n - 2.0, alpha_half)
    half = tq * np.sqrt(tau2_arr + se**2)
    z = _norm_ppf(alpha_half)
    out: list[PooledEstimate | NotComputable] = []
    for b in range(nsub):
        k = int(n[b])
        if k == 0:
            out.append(NotComputable("no study has a usable effect and standard error"))
            continue
        e = float(est[b])
        note = notes[b]
        if use_t[b]:
            s_out, crit, stat, p = float(se_h[b]), float(crit_t[b]), float(stat_t[b]), p_t[b]
            dfb: float | None = float(df[b])
        else:
            if hksj:
                note = (note + "; " if note else "") + "HKSJ needs two or more studies: z interval"
            s_out, crit, stat, p, dfb = float(se[b]), z, float(stat_z[b]), p_z[b], None
        pi = None
        if k >= 3:
            pi = ConfidenceInterval(e - float(half[b]), e + float(half[b]))
        out.append(
            PooledEstimate(
                model=method,
                estimate=e,
                se=s_out,
                ci=ConfidenceInterval(e - crit * s_out, e + crit * s_out),
                statistic=stat,
                pvalue=float(p),
                confidence_level=confidence_level,
                tau2=float(tau2_arr[b]),
                df=dfb,
                hksj=bool(use_t[b]),
                k=k,
                pi=pi,
                weights=weights[b],
                converged=bool(converged[b]),
                note=note,
            )
        )
    return tuple(out)


def negll(self, theta: np.ndarray, *, selection: bool = True) -> float:
    """adjust_selection._Model.negll before (self: a _Model)."""
    mu, tau = float(theta[0]), float(theta[1])
    st2 = self.v + tau * tau
    st = np.sqrt(st2)
    r = self.y - mu
    ll = -0.5 * np.log(2.0 * np.pi * st2) - 0.5 * r * r / st2
    if selection:
        logw = np.concatenate([[0.0], theta[2:]])
        with np.errstate(invalid="ignore"):
            cdf = self._ndtr((self.bounds - mu) / st[:, None])
        cdf[:, 0] = 1.0
        cdf[:, -1] = 0.0
        P = cdf[:, :-1] - cdf[:, 1:]
        A = P @ np.exp(logw)
        if np.any(A <= 0):
            return 1e300
        ll = ll + logw[self.interval] - np.log(A)
    return float(-ll.sum())


def negll_grad(self, phi: np.ndarray, *, selection: bool = True):
    """adjust_selection._Model.negll_grad before (self: a _Model)."""
    mu, tau2 = float(phi[0]), float(phi[1])
    st2 = self.v + tau2
    r = self.y - mu
    z2 = r * r / st2
    ll = -0.5 * np.log(2.0 * np.pi * st2) - 0.5 * z2
    g_mu = r / st2
    g_t2 = 0.5 * (z2 - 1.0) / st2
    g_w = np.zeros(len(phi) - 2)  # without selection the likelihood ignores the weights
    if selection:
        st = np.sqrt(st2)
        logw = np.concatenate([[0.0], phi[2:]])
        omega = np.exp(logw)
        with np.errstate(invalid="ignore"):
            a = (self.bounds - mu) / st[:, None]
        a[:, 0] = np.inf
        a[:, -1] = -np.inf
        cdf = self._ndtr(a)
        P = cdf[:, :-1] - cdf[:, 1:]
        A = P @ omega
        if np.any(A <= 0):
            return 1e300, np.zeros(len(phi))
        pdf = np.zeros_like(a)
        apdf = np.zeros_like(a)
        inner = a[:, 1:-1]
        pdf[:, 1:-1] = np.exp(-0.5 * inner * inner) / math.sqrt(2.0 * math.pi)
        apdf[:, 1:-1] = inner * pdf[:, 1:-1]
        dP_mu = -(pdf[:, :-1] - pdf[:, 1:]) / st[:, None]
        dP_t2 = -(0.5 / st2)[:, None] * (apdf[:, :-1] - apdf[:, 1:])
        ll = ll + logw[self.interval] - np.log(A)
        g_mu = g_mu - (dP_mu @ omega) / A
        g_t2 = g_t2 - (dP_t2 @ omega) / A
        share = (P * omega[None, :]) / A[:, None]
        g_w = self.counts[1:] - share[:, 1:].sum(axis=0)
    grad = np.concatenate([[g_mu.sum(), g_t2.sum()], g_w])
    return float(-ll.sum()), -grad
