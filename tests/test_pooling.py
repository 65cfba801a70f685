"""Inverse-variance pooling, tau^2 estimators and heterogeneity against outside references.

References:
- statsmodels.stats.meta_analysis.combine_effects (general-purpose library): DL via its
  "chi2" method, Paule-Mandel via its "iterated" method.
- REML: a direct numerical maximisation of the restricted likelihood (Viechtbauer 2005,
  J Educ Behav Stat 30:261, eq. for l_R — from memory) with scipy.optimize.
- Higgins & Thompson 2002 (Stat Med 21:1539) formulas for I^2 and its interval, as
  transcribed in methods.md 2.3 (recalled there; re-derived independently below).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import optimize, stats
from statsmodels.stats.meta_analysis import combine_effects

from lopside.stats import pooling as pl
from lopside.stats.results import NotComputable


def _datasets(n=40, seed=7):
    rng = np.random.default_rng(seed)
    for _ in range(n):
        k = int(rng.integers(3, 40))
        v = rng.uniform(0.005, 0.6, k)
        tau2 = rng.choice([0.0, 0.02, 0.1, 0.5])
        y = rng.normal(rng.normal(0, 0.5), np.sqrt(v + tau2))
        yield y, v


@pytest.mark.parametrize("y,v", list(_datasets()))
def test_fixed_and_dl_match_statsmodels(y, v):
    ref = combine_effects(y, v, method_re="chi2")
    fe = pl.fixed_effect(y, v)
    assert fe.estimate == pytest.approx(ref.mean_effect_fe, rel=1e-10, abs=1e-12)
    assert fe.se == pytest.approx(ref.sd_eff_w_fe, rel=1e-10)
    dl = pl.random_effects(y, v, method="DL")
    # statsmodels reports the untruncated moment estimate; DerSimonian & Laird truncate at 0
    assert dl.tau2 == pytest.approx(max(0.0, ref.tau2), abs=1e-12)
    if ref.tau2 > 0:
        assert dl.estimate == pytest.approx(ref.mean_effect_re, rel=1e-9, abs=1e-12)
        assert dl.se == pytest.approx(ref.sd_eff_w_re, rel=1e-9)
    het = pl.heterogeneity(y, v, tau2_method="DL")
    assert het.q == pytest.approx(ref.q, rel=1e-10)
    assert het.pvalue == pytest.approx(stats.chi2.sf(ref.q, len(y) - 1), rel=1e-8)


@pytest.mark.parametrize("y,v", list(_datasets(seed=11)))
def test_paule_mandel_matches_statsmodels_iterated(y, v):
    ref = combine_effects(y, v, method_re="iterated")
    pm = pl.random_effects(y, v, method="PM")
    assert pm.tau2 == pytest.approx(max(ref.tau2, 0.0), abs=1e-7)
    assert pm.estimate == pytest.approx(ref.mean_effect_re, abs=1e-6)


@pytest.mark.parametrize("y,v", list(_datasets(seed=13)))
def test_reml_maximises_restricted_likelihood(y, v):
    def negll(t):
        w = 1 / (v + t)
        mu = (w * y).sum() / w.sum()
        return 0.5 * (np.log(v + t).sum() + np.log(w.sum()) + (w * (y - mu) ** 2).sum())

    opt = optimize.minimize_scalar(
        negll, bounds=(0, 20), method="bounded", options={"xatol": 1e-12}
    )
    best = opt.x if negll(opt.x) < negll(0.0) else 0.0
    reml = pl.tau2_reml(y, v)
    assert reml.converged
    assert reml.tau2 == pytest.approx(best, abs=1e-6)
    assert negll(reml.tau2) <= negll(best) + 1e-9


def test_equal_variances_make_all_estimators_coincide():
    # with all v_i equal, DL, PM and REML have the same closed form (methods.md 2.4, common practice)
    rng = np.random.default_rng(3)
    y = rng.normal(0.2, 0.5, 12)
    v = np.full(12, 0.04)
    vals = [pl.estimate_tau2(y, v, m).tau2 for m in ("DL", "PM", "REML")]
    expected = max(0.0, y.var(ddof=1) - 0.04)
    assert vals == pytest.approx([expected] * 3, abs=1e-8)


def test_hksj_modified_never_narrower_and_uses_t():
    # Knapp & Hartung 2003 modification max(1, q); t on k-1 df (Hartung & Knapp 2001)
    y = np.array([0.10, 0.12, 0.11, 0.09, 0.10])
    v = np.array([0.04, 0.05, 0.03, 0.06, 0.05])
    z = pl.random_effects(y, v, method="DL")
    h = pl.random_effects(y, v, method="DL", hksj=True)
    assert h.hksj and h.df == 4
    assert h.ci.high - h.ci.low >= z.ci.high - z.ci.low
    w = 1 / (v + z.tau2)
    q = (w * (y - z.estimate) ** 2).sum() / 4
    half = stats.t.ppf(0.975, 4) * math.sqrt(max(1, q) / w.sum())
    assert h.ci.high == pytest.approx(z.estimate + half, rel=1e-12)


def test_prediction_interval_formula():
    # Higgins, Thompson & Spiegelhalter 2009: theta +- t_{k-2} sqrt(tau2 + SE^2)
    y = np.array([0.5, 0.1, -0.2, 0.8, 0.3, 0.0])
    v = np.array([0.04, 0.09, 0.05, 0.1, 0.02, 0.07])
    r = pl.random_effects(y, v, method="REML")
    half = stats.t.ppf(0.975, 4) * math.sqrt(r.tau2 + r.se**2)
    assert r.pi.low == pytest.approx(r.estimate - half)
    assert r.pi.high == pytest.approx(r.estimate + half)
    assert pl.random_effects(y[:2], v[:2]).pi is None  # needs k >= 3


def test_i2_and_its_interval():
    # I^2 = (Q - df)/Q; interval through H (Higgins & Thompson 2002), recomputed here
    y = np.array([0.9, 0.1, -0.3, 0.8, 0.4, -0.1, 0.6, 0.2])
    v = np.full(8, 0.03)
    h = pl.heterogeneity(y, v)
    k = 8
    q = h.q
    assert h.i2 == pytest.approx(100 * (q - 7) / q)
    se = 0.5 * (math.log(q) - math.log(k - 1)) / (math.sqrt(2 * q) - math.sqrt(2 * k - 3))
    hl = max(1, math.exp(math.log(math.sqrt(q / 7)) - 1.959964 * se))
    hu = math.exp(math.log(math.sqrt(q / 7)) + 1.959964 * se)
    assert h.i2_ci.low == pytest.approx(100 * max(0, (hl**2 - 1) / hl**2), abs=1e-4)
    assert h.i2_ci.high == pytest.approx(100 * (hu**2 - 1) / hu**2, abs=1e-4)


def test_q_profile_interval_brackets_estimate_and_hits_chi2_quantiles():
    # Q-profile (Viechtbauer 2007; Veroniki et al. 2016): generalised Q(tau2) equals chi2 quantiles
    rng = np.random.default_rng(5)
    v = rng.uniform(0.01, 0.2, 15)
    y = rng.normal(0, np.sqrt(v + 0.1))
    h = pl.heterogeneity(y, v, tau2_method="PM")
    lo, hi = h.tau2_ci

    def gq(t):
        w = 1 / (v + t)
        mu = (w * y).sum() / w.sum()
        return (w * (y - mu) ** 2).sum()

    assert lo <= h.tau2 <= hi
    if lo > 0:
        assert gq(lo) == pytest.approx(stats.chi2.ppf(0.975, 14), rel=1e-6)
    assert gq(hi) == pytest.approx(stats.chi2.ppf(0.025, 14), rel=1e-6)


def test_edge_cases_are_defined_or_not_computable():
    assert isinstance(pl.fixed_effect([], []), NotComputable)
    one = pl.random_effects([0.3], [0.04])
    assert one.tau2 == 0 and one.estimate == pytest.approx(0.3) and one.pi is None
    assert isinstance(pl.heterogeneity([0.3], [0.04]), NotComputable)
    two = pl.heterogeneity([0.3, 0.5], [0.04, 0.05])
    assert isinstance(two.i2_ci, NotComputable)  # H&T interval needs k >= 3
    same = pl.heterogeneity([0.2] * 5, [0.01, 0.02, 0.03, 0.04, 0.05])
    assert same.q == 0 and same.i2 == 0 and same.tau2 == 0


def test_reml_converges_where_fisher_scoring_oscillates():
    # Data (invented, log odds ratios) where the observed curvature of the restricted
    # likelihood at its maximum is about 2.6 times the expected information, so plain
    # Fisher scoring overshoots and oscillates; the estimate must still be the maximiser
    # found by scipy.optimize.minimize_scalar (general-purpose reference).
    k = 30
    i = np.arange(k)
    se = 0.08 + 0.9 * i / (k - 1)
    y = -0.1 - 0.5 * i / (k - 1) + 0.15 * np.sin(i * 1.7)
    y, v = y[1:], se[1:] ** 2
    est = pl.tau2_reml(y, v)
    assert est.converged
    opt = optimize.minimize_scalar(
        lambda t: -pl.restricted_loglik(y, v, t),
        bounds=(0, 1),
        method="bounded",
        options={"xatol": 1e-14},
    )
    assert est.tau2 == pytest.approx(opt.x, abs=1e-9)
    assert est.iterations > 100  # scoring alone did not settle: the bracketing search did
