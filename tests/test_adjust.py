"""PET-PEESE (Stanley & Doucouliagos 2014) and limit meta-analysis (Rücker et al. 2011).

Regressions are checked against statsmodels (WLS/OLS, test-only reference). Definitions
from methods.md 5.1-5.2 (from memory of the papers).
"""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm
from scipy import stats

from lopside.stats.adjust import limit_meta_analysis, pet_peese
from lopside.stats.adjust_wls import wls
from lopside.stats.data import StudyData
from lopside.stats.pooling import fixed_effect, random_effects
from lopside.stats.results import NotComputable


def _data(y, se):
    return StudyData.from_arrays("OR", np.asarray(y, float), np.asarray(se, float))


def _sim(seed, k=20, mu=0.3, tau=0.0, bias=0.0):
    rng = np.random.default_rng(seed)
    se = rng.uniform(0.05, 0.6, k)
    y = mu + bias * se + rng.normal(0, np.sqrt(se**2 + tau**2))
    return y, se


# ---------------------------------------------------------------- PET / PEESE


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_pet_and_peese_match_statsmodels_wls(seed):
    # PET: WLS y ~ 1 + SE, PEESE: WLS y ~ 1 + SE², weights 1/SE², estimated scale, t(k-2)
    # (Stanley & Doucouliagos 2014, from memory). statsmodels WLS uses the same scale.
    y, se = _sim(seed, bias=1.0)
    r = pet_peese(_data(y, se))
    for cov, b0, b1 in ((se, r.pet, r.pet_slope), (se**2, r.peese, r.peese_slope)):
        ref = sm.WLS(y, sm.add_constant(cov), weights=1 / se**2).fit()
        assert [b0.estimate, b1.estimate] == pytest.approx(ref.params, rel=1e-9)
        assert [b0.se, b1.se] == pytest.approx(ref.bse, rel=1e-9)
        assert [b0.pvalue, b1.pvalue] == pytest.approx(ref.pvalues, rel=1e-7)
        lo, hi = ref.conf_int(0.05)[0]
        assert b0.ci == pytest.approx((lo, hi), rel=1e-9)
        assert b0.df == ref.df_resid == y.size - 2


def test_conditional_rule_two_sided():
    # Strong true effect: PET rejects at 0.10 -> PEESE reported (conditional rule, S&D 2014).
    y, se = _sim(4, k=30, mu=0.5, bias=0.5)
    r = pet_peese(_data(y, se))
    assert r.pet.pvalue < 0.10
    assert r.chosen == "PEESE" and r.estimate == r.peese
    assert "two-sided at 0.1" in r.rule
    # No true effect: PET does not reject -> PET reported.
    y, se = _sim(5, k=30, mu=0.0, bias=0.0)
    r = pet_peese(_data(y, se))
    assert r.pet.pvalue >= 0.10
    assert r.chosen == "PET" and r.estimate == r.pet


def test_conditional_rule_one_sided_pvalue():
    # One-sided p in the direction of the pooled effect = t survival function (scipy.stats).
    y, se = _sim(6, k=15, mu=-0.2, bias=-0.5)
    r = pet_peese(_data(y, se), alpha=0.05, sided="one")
    assert r.direction == "negative"
    expected = stats.t.cdf(r.pet.statistic, r.pet.df)  # H1: b0 < 0
    assert r.pet_test_pvalue == pytest.approx(expected, rel=1e-9)
    assert ("one-sided at 0.05" in r.rule) and ("negative" in r.rule)
    assert r.chosen == ("PEESE" if expected < 0.05 else "PET")


def test_pet_peese_edge_cases():
    assert isinstance(pet_peese(_data([0.1, 0.2], [0.1, 0.2])), NotComputable)
    equal = pet_peese(_data([0.1, 0.2, 0.4, 0.3], [0.2] * 4))
    assert isinstance(equal, NotComputable) and "PET" in equal.reason
    # Identical estimates: PET fits exactly, no residual spread to test.
    same = pet_peese(_data([0.3] * 5, [0.1, 0.2, 0.3, 0.4, 0.5]))
    assert isinstance(same, NotComputable) and "exactly" in same.reason


def test_wls_scalings_against_statsmodels():
    # "fixed": scale 1 and z (statsmodels cov_type="fixed scale"); "floored": max(1, s²)
    # with t — the modified Knapp-Hartung rule (Knapp & Hartung 2003, from memory).
    y, se = _sim(7, k=12, bias=0.8)
    X = sm.add_constant(se)
    w = 1 / se**2
    ref_fixed = sm.WLS(y, X, weights=w).fit(cov_type="fixed scale")
    fit = wls(y, X, w, scaling="fixed")
    assert [c.se for c in fit.coefficients] == pytest.approx(ref_fixed.bse, rel=1e-9)
    assert [c.pvalue for c in fit.coefficients] == pytest.approx(ref_fixed.pvalues, rel=1e-7)
    ref = sm.WLS(y, X, weights=w).fit()
    floored = wls(y, X, w, scaling="floored")
    factor = np.sqrt(max(1.0, ref.scale) / ref.scale)
    assert [c.se for c in floored.coefficients] == pytest.approx(ref.bse * factor, rel=1e-9)


# ---------------------------------------------------------------- limit meta-analysis


def test_limit_regression_matches_statsmodels_ols():
    # Rücker et al. 2011 (from memory): OLS of y/sqrt(v+tau²) on 1/sqrt(v+tau²), slope beta,
    # intercept alpha; beta_lim = beta + tau*alpha. With unit residual variance (fixed
    # scale), Var(beta_lim) is the variance of the contrast [tau, 1] — statsmodels t_test.
    y, se = _sim(8, k=25, tau=0.25, bias=1.0)
    r = limit_meta_analysis(_data(y, se))
    tau2 = random_effects(y, se**2).tau2
    assert r.tau2 == pytest.approx(tau2) and tau2 > 0
    s = np.sqrt(se**2 + tau2)
    ref = sm.OLS(y / s, sm.add_constant(1 / s)).fit(cov_type="fixed scale")
    assert [r.alpha.estimate, r.beta.estimate] == pytest.approx(ref.params, rel=1e-9)
    con = ref.t_test(np.array([[np.sqrt(tau2), 1.0]]))
    assert r.estimate == pytest.approx(float(con.effect[0]), rel=1e-9)
    assert r.se == pytest.approx(float(con.sd[0, 0]), rel=1e-9)
    # shrunken estimates (methods.md 5.2)
    expect = r.estimate + np.sqrt(tau2 / (se**2 + tau2)) * (y - r.estimate)
    assert r.shrunken == pytest.approx(expect)


def test_limit_with_zero_tau2_is_pet_and_fe_without_small_study_effect():
    # Algebra (Rücker et al. 2011, from memory; Egger 1997 formulation A/B identity,
    # methods.md 3.1): with tau = 0 the regression is the radial regression y/s on 1/s, whose
    # slope equals the WLS intercept of y on s (PET b0). If y has no weighted association
    # with s, that intercept is the fixed-effect mean. Build such data exactly by removing
    # the weighted linear trend in s, with spread small enough that tau² = 0.
    rng = np.random.default_rng(9)
    se = rng.uniform(0.1, 0.5, 15)
    y = 0.4 + 0.3 * se * rng.normal(size=15)
    w = 1 / se**2
    sb = (w * se).sum() / w.sum()
    b1 = (w * (se - sb) * y).sum() / (w * (se - sb) ** 2).sum()
    y = y - b1 * (se - sb)
    d = _data(y, se)
    r = limit_meta_analysis(d)
    assert r.tau2 == 0.0
    pet = pet_peese(d).pet
    assert r.estimate == pytest.approx(pet.estimate, rel=1e-10)
    assert r.estimate == pytest.approx(fixed_effect(y, se**2).estimate, rel=1e-10)
    assert r.shrunken == pytest.approx([r.estimate] * 15)


def test_limit_moves_toward_large_studies_with_small_study_effect():
    # Large studies centred on 0, small ones inflated (strong small-study effect): the limit
    # estimate (SE -> 0) should sit nearer the large studies than random effects does
    # (Rücker et al. 2011 abstract, methods.md 5.2).
    rng = np.random.default_rng(10)
    se = np.concatenate([rng.uniform(0.03, 0.08, 6), rng.uniform(0.3, 0.6, 14)])
    y = 0.0 + 1.5 * se + rng.normal(0, se) + rng.normal(0, 0.05, se.size)
    r = limit_meta_analysis(_data(y, se))
    large = fixed_effect(y[:6], se[:6] ** 2).estimate
    assert abs(r.estimate - large) < abs(r.random.estimate - large)
    assert r.random.estimate > r.estimate


def test_limit_edge_cases():
    assert isinstance(limit_meta_analysis(_data([0.1, 0.2], [0.1, 0.2])), NotComputable)
    eq = limit_meta_analysis(_data([0.1, 0.5, 0.2, 0.3], [0.2] * 4))
    assert isinstance(eq, NotComputable) and "precision" in eq.reason
    # Identical estimates: tau² = 0 and the radial regression passes through every point,
    # slope = the common value, alpha = 0.
    r = limit_meta_analysis(_data([0.3] * 5, [0.1, 0.2, 0.3, 0.4, 0.5]))
    assert r.tau2 == 0.0
    assert r.estimate == pytest.approx(0.3)
    assert r.alpha.estimate == pytest.approx(0.0, abs=1e-10)
