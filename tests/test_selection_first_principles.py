"""Checks of the selection analyses from first principles, where the papers' exact choices
could not be looked up (no network; methods.md 11.3 and 11.4 say what is recalled "from
memory").

What is checked here does not depend on memory:
* Vevea & Woods fixed weights: with every weight equal there is no selection, so the
  weighted likelihood must give the ordinary maximum-likelihood random-effects fit; that
  fit is checked against its own score equations (Hardy & Thompson 1996, common practice)
  and against scipy's maximisation of the plain normal likelihood. The weight patterns
  themselves remain "from memory".
* Mathur & VanderWeele: at η = 1 nothing is reweighted, so the corrected estimates must
  equal the uncorrected fixed-effect and random-effects estimates (statsmodels WLS and
  Lopside's own pooling at the same τ²).
* The robust variance: CR2 (Bell & McCaffrey 2002; Pustejovsky & Tipton 2018) computed
  here from its matrix formula, (X'WX)⁻¹ Σ_j X_j'W_j A_j e_j e_j' A_j W_j X_j (X'WX)⁻¹ with
  A_j = (I − H_jj)^(−1/2) and H = X(X'WX)⁻¹X'W, for clusters of one study each, by
  explicit matrices with scipy's matrix square root; and a three-study example worked by
  hand from the same formula. That M&V use CR2 with these weights is our reading of the
  paper "from memory"; that Lopside computes CR2 correctly is checked here.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import linalg, optimize

from lopside.stats.data import StudyData
from lopside.stats.pooling import fixed_effect, random_effects
from lopside.stats.selection_fixed import CUTPOINTS, fixed_weight_selection
from lopside.stats.selection_sensitivity import affirmative_mask, selection_sensitivity

# invented data (not a published example): log odds ratios and SEs, mixed significance
Y = np.array([-0.62, -0.48, -0.51, -0.40, -0.28, -0.22, 0.10, 0.04, 0.12, -0.45, 0.14, 0.07])
SE = np.array([0.26, 0.24, 0.12, 0.09, 0.18, 0.15, 0.10, 0.08, 0.21, 0.22, 0.09, 0.11])


def data(y=Y, se=SE):
    y = np.asarray(y, float)
    return StudyData(measure="OR", y=y, se=np.asarray(se, float), rows=tuple(range(len(y))))


# ---------------------------------------------------------------- fixed weights (VW 2005)


def test_equal_weights_give_the_ordinary_ml_fit():
    flat = {"no selection": (1.0,) * (len(CUTPOINTS) + 1)}
    res = fixed_weight_selection(data(), pooled_estimate=-0.2, patterns=flat)
    got = res.by_pattern()["no selection"]
    # the same as the all-weights-1 fit the result carries for comparison
    assert got.estimate == pytest.approx(res.unadjusted, abs=1e-10)
    assert got.tau2 == pytest.approx(res.unadjusted_tau2, abs=1e-10)
    mu, t2 = got.estimate, got.tau2
    # ML score equations of the random-effects model (Hardy & Thompson 1996; common
    # practice): mu is the weighted mean with w = 1/(v + tau²), and for tau² > 0
    # sum w²((y - mu)² - (v + tau²)) = 0
    v = SE**2
    w = 1.0 / (v + t2)
    assert t2 > 0
    assert mu == pytest.approx(np.sum(w * Y) / np.sum(w), abs=1e-9)
    assert np.sum(w**2 * ((Y - mu) ** 2 - (v + t2))) == pytest.approx(0.0, abs=1e-7)

    # scipy's own maximisation of the normal likelihood (an outside optimiser)
    def nll(p):
        s2 = v + p[1] ** 2
        return 0.5 * np.sum(np.log(s2) + (Y - p[0]) ** 2 / s2)

    ref = optimize.minimize(nll, [0.0, 0.1], method="BFGS", options={"gtol": 1e-10})
    assert mu == pytest.approx(ref.x[0], abs=1e-6)
    assert t2 == pytest.approx(ref.x[1] ** 2, abs=1e-6)


def test_lower_weights_for_less_significant_results_pull_towards_the_null():
    # weight 1 for the most significant interval and 0.5 for all others favours
    # significant results on the pooled side; undoing that must move the estimate towards
    # the null (the direction every selection model of this kind takes; common practice)
    half = {"half": (1.0,) + (0.5,) * len(CUTPOINTS)}
    res = fixed_weight_selection(data(), pooled_estimate=-0.2, patterns=half)
    est = res.by_pattern()["half"].estimate
    assert abs(est) < abs(res.unadjusted)


# -------------------------------------------------------- Mathur & VanderWeele at η = 1


def test_eta_one_is_the_uncorrected_estimate():
    import statsmodels.api as sm

    d = data()
    re = random_effects(Y, SE**2, method="REML")
    res = selection_sensitivity(d, pooled_estimate=re.estimate, tau2=re.tau2)
    fe = fixed_effect(Y, SE**2)
    one_fe, one_re = res.fixed.at(1.0), res.random.at(1.0)
    # fixed effect: inverse-variance estimate and its SE (Lopside's pooling; Cochrane
    # Handbook 10.3.1, common practice)
    assert one_fe.estimate == pytest.approx(fe.estimate, abs=1e-13)
    assert one_fe.se == pytest.approx(fe.se, rel=1e-12)
    # random effects at the same tau²: the uncorrected random-effects estimate, also as
    # statsmodels' WLS with weights 1/(v + tau²)
    assert one_re.estimate == pytest.approx(re.estimate, abs=1e-13)
    fit = sm.WLS(Y, np.ones((Y.size, 1)), weights=1.0 / (SE**2 + re.tau2)).fit()
    assert one_re.estimate == pytest.approx(fit.params[0], abs=1e-13)


# ------------------------------------------------------------------------ CR2 variance


def cr2_variance(y, X, w, clusters):
    """CR2 from its matrix formula (Bell & McCaffrey 2002), written out with explicit
    matrices: nothing shared with lopside.stats.selection_sensitivity."""
    W = np.diag(w)
    bread = np.linalg.inv(X.T @ W @ X)
    beta = bread @ X.T @ W @ y
    e = y - X @ beta
    H = X @ bread @ X.T @ W
    meat = np.zeros((X.shape[1], X.shape[1]))
    for idx in clusters:
        idx = np.asarray(idx)
        Hjj = H[np.ix_(idx, idx)]
        A = linalg.inv(linalg.sqrtm(np.eye(idx.size) - Hjj)).real
        u = X[idx].T @ W[np.ix_(idx, idx)] @ A @ e[idx]
        meat += np.outer(u, u)
    return beta, bread @ meat @ bread


@pytest.mark.parametrize("eta", [1.0, 2.0, 7.5, 50.0])
def test_robust_se_is_cr2_from_the_matrix_formula(eta):
    re = random_effects(Y, SE**2, method="REML")
    res = selection_sensitivity(data(), pooled_estimate=re.estimate, tau2=re.tau2, etas=(eta,))
    sign = -1 if re.estimate < 0 else 1
    aff = affirmative_mask(Y, SE, sign)
    w = np.where(aff, 1.0, eta) / (SE**2 + re.tau2)
    beta, V = cr2_variance(Y, np.ones((Y.size, 1)), w, [[i] for i in range(Y.size)])
    c = res.random.at(eta)
    assert c.estimate == pytest.approx(beta[0], abs=1e-13)
    assert c.se == pytest.approx(math.sqrt(V[0, 0]), rel=1e-10)


def test_cr2_three_studies_by_hand():
    # three studies, weights 1, 2, 1, estimates 0.1, 0.4, 0.7 (an example made up here):
    # beta = (0.1 + 0.8 + 0.7) / 4 = 0.4; residuals -0.3, 0, 0.3; h = w/Σw = 1/4, 1/2, 1/4;
    # CR2 with one study per cluster: V = Σ (w_i/Σw)² e_i² / (1 - h_i)
    #   = (1/16)(0.09)/(3/4) + 0 + (1/16)(0.09)/(3/4) = 0.015
    y = np.array([0.1, 0.4, 0.7])
    w = np.array([1.0, 2.0, 1.0])
    beta, V = cr2_variance(y, np.ones((3, 1)), w, [[0], [1], [2]])
    assert beta[0] == pytest.approx(0.4, abs=1e-15)
    assert V[0, 0] == pytest.approx(0.015, abs=1e-15)
    # Lopside at these weights: studies with v = 1/w and tau² = 0, at η = 1 (none of them
    # is significant, and at η = 1 the split would not matter anyway)
    se = 1.0 / np.sqrt(w)
    res = selection_sensitivity(data(y, se), pooled_estimate=0.4, tau2=0.0, etas=(1.0,))
    c = res.random.at(1.0)
    assert c.estimate == pytest.approx(0.4, abs=1e-15)
    assert c.se == pytest.approx(math.sqrt(0.015), rel=1e-12)
