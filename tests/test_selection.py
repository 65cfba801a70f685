"""Step-function selection model (Vevea & Hedges 1995; likelihood in methods.md 5.4, from
memory). Checked against scipy (normal density, numerical integration, a direct
one-dimensional ML fit) and by simulation with a fixed seed.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import integrate, optimize, stats

from lopside.stats.adjust import selection_model
from lopside.stats.adjust_selection import _Model
from lopside.stats.data import StudyData
from lopside.stats.pooling import random_effects
from lopside.stats.results import NotComputable


def _data(y, se):
    return StudyData.from_arrays("MD", np.asarray(y, float), np.asarray(se, float))


def _simulate(rng, k, mu, tau, publish_nonsig):
    """Draw studies until k are 'published': one-sided p <= 0.025 always, others with the
    given probability (the selection process the model assumes)."""
    ys, ss = [], []
    while len(ys) < k:
        s = rng.uniform(0.1, 0.5)
        y = rng.normal(mu, np.sqrt(s * s + tau * tau))
        if stats.norm.sf(y / s) <= 0.025 or rng.random() < publish_nonsig:
            ys.append(y)
            ss.append(s)
    return np.array(ys), np.array(ss)


# ---------------------------------------------------------------- the likelihood itself


def test_likelihood_without_selection_is_the_normal_marginal():
    # With every ω = 1 the denominator Σ_j P_ij is 1 and the density is N(μ, s² + τ²)
    # (Vevea & Hedges 1995); compare with scipy.stats.norm.logpdf.
    rng = np.random.default_rng(1)
    se = rng.uniform(0.1, 0.5, 10)
    y = rng.normal(0.2, 0.3, 10)
    m = _Model(y, se, (0.025, 0.05, 0.5))
    theta = np.array([0.15, 0.2, 0.0, 0.0, 0.0])
    ref = stats.norm.logpdf(y, 0.15, np.sqrt(se**2 + 0.04)).sum()
    assert -m.negll(theta) == pytest.approx(ref, rel=1e-12)
    assert -m.negll(theta[:2], selection=False) == pytest.approx(ref, rel=1e-12)


@pytest.mark.parametrize("s", [0.1, 0.35])
def test_weighted_density_integrates_to_one(s):
    # The published-study density ω_j φ(.)/Σ_j ω_j P_ij must integrate to 1 over y; this
    # checks the interval probabilities P_ij (scipy.integrate.quad as reference).
    cuts = (0.025, 0.05, 0.5)
    mu, tau = 0.1, 0.2
    logw = np.log([0.4, 0.7, 0.2])
    st = np.sqrt(s * s + tau * tau)

    def density(yy):
        m = _Model(np.array([yy]), np.array([s]), cuts)
        return np.exp(-m.negll(np.concatenate([[mu, tau], logw])))

    # split the integral at the interval edges, where the density jumps
    edges = [s * stats.norm.isf(c) for c in cuts]
    pts = sorted([mu - 10 * st, *edges, mu + 10 * st])
    total = sum(integrate.quad(density, a, b)[0] for a, b in zip(pts[:-1], pts[1:]))
    assert total == pytest.approx(1.0, abs=1e-7)


def test_unadjusted_fit_is_maximum_likelihood_random_effects():
    # The comparison model of the LRT is ML random effects: τ² maximises the profile
    # likelihood and μ is the 1/(v + τ²)-weighted mean (standard ML, common practice).
    # Reference: scipy.optimize.minimize_scalar on the profile, with norm.logpdf.
    rng = np.random.default_rng(2)
    se = rng.uniform(0.1, 0.5, 25)
    y = rng.normal(0.3, np.sqrt(se**2 + 0.09))
    r = selection_model(_data(y, se))

    def neg_profile(tau):
        w = 1 / (se**2 + tau**2)
        mu = (w * y).sum() / w.sum()
        return -stats.norm.logpdf(y, mu, np.sqrt(se**2 + tau**2)).sum()

    ref = optimize.minimize_scalar(
        neg_profile, bounds=(0, 3), method="bounded", options={"xatol": 1e-10}
    )
    assert r.unadjusted_tau2 == pytest.approx(ref.x**2, rel=1e-3)
    assert r.loglik_unadjusted == pytest.approx(-ref.fun, abs=1e-6)
    pooled = random_effects(y, se**2, tau2=r.unadjusted_tau2)
    assert r.unadjusted_mu == pytest.approx(pooled.estimate, abs=1e-5)
    assert r.loglik >= r.loglik_unadjusted - 1e-9  # nested models


# ---------------------------------------------------------------- simulation


def test_no_selection_gives_weights_near_one_and_a_calm_lrt():
    # Under no selection the LRT (χ², 1 df) should reject about 5 % of the time
    # (likelihood theory, common practice): require p > 0.05 in >= 80 % of 40 replicates,
    # and the estimated ω near 1 on average (median within 0.5-2).
    rng = np.random.default_rng(20240501)
    pvals, omegas = [], []
    for _ in range(40):
        y, se = _simulate(rng, 30, 0.3, 0.1, publish_nonsig=1.0)
        r = selection_model(_data(y, se))
        if isinstance(r, NotComputable):
            continue
        pvals.append(r.lrt_pvalue)
        omegas.append(r.omega[1])
    assert len(pvals) >= 36
    assert np.mean(np.array(pvals) > 0.05) >= 0.80
    assert 0.5 < np.median(omegas) < 2.0


def test_strong_selection_adjusted_estimate_moves_toward_truth():
    # Non-significant results published with probability 0.1: the RE estimate is biased
    # upward and the selection model should remove much of that bias on average
    # (Vevea & Hedges 1995; Hedges & Vevea 1996 simulations, from memory).
    rng = np.random.default_rng(77)
    truth = 0.1
    adj, unadj, omegas = [], [], []
    for _ in range(30):
        y, se = _simulate(rng, 30, truth, 0.1, publish_nonsig=0.1)
        r = selection_model(_data(y, se))
        if isinstance(r, NotComputable):
            continue
        adj.append(r.mu)
        unadj.append(random_effects(y, se**2).estimate)
        omegas.append(r.omega[1])
    assert len(adj) >= 25
    adj, unadj = np.array(adj), np.array(unadj)
    assert abs(adj.mean() - truth) < abs(unadj.mean() - truth)
    assert np.mean(np.abs(adj - truth)) < np.mean(np.abs(unadj - truth))
    assert np.median(omegas) < 0.5  # selection detected (true ω = 0.1)


def test_direction_negative_is_the_mirror_image():
    rng = np.random.default_rng(5)
    y, se = _simulate(rng, 25, 0.2, 0.1, publish_nonsig=0.3)
    pos = selection_model(_data(y, se))
    neg = selection_model(_data(-y, se))
    assert pos.direction == "positive" and neg.direction == "negative"
    assert neg.mu == pytest.approx(-pos.mu, abs=1e-5)
    assert neg.loglik == pytest.approx(pos.loglik, abs=1e-7)
    assert neg.counts == pos.counts
    forced = selection_model(_data(y, se), direction="positive")
    assert forced.direction == "positive" and "user" in forced.direction_rule
    assert forced.mu == pytest.approx(pos.mu)


def test_result_fields_are_consistent():
    rng = np.random.default_rng(6)
    y, se = _simulate(rng, 40, 0.2, 0.1, publish_nonsig=0.5)
    r = selection_model(_data(y, se), cutpoints=(0.025, 0.5))
    assert r.intervals == ("p ≤ 0.025", "0.025 < p ≤ 0.5", "p > 0.5")
    p = stats.norm.sf(y / se)
    assert r.counts == (
        int((p <= 0.025).sum()),
        int(((p > 0.025) & (p <= 0.5)).sum()),
        int((p > 0.5).sum()),
    )
    assert r.lrt_df == 2
    assert r.lrt_pvalue == pytest.approx(stats.chi2.sf(r.lrt_statistic, 2))
    z = stats.norm.ppf(0.975)
    assert r.ci == pytest.approx((r.mu - z * r.se, r.mu + z * r.se))
    assert r.omega[0] == 1.0 and r.omega_se[0] is None
    assert "Hessian" in r.se_method


# ---------------------------------------------------------------- not estimable


def test_empty_interval_is_not_estimable():
    se = np.linspace(0.1, 0.3, 8)
    y = 3.0 * se  # every study significant: nothing in p > 0.025
    r = selection_model(_data(y, se))
    assert isinstance(r, NotComputable) and "no study falls" in r.reason


def test_too_few_studies_is_not_estimable():
    r = selection_model(_data([0.5, 0.1, 0.2], [0.1, 0.2, 0.3]))
    assert isinstance(r, NotComputable) and "needs at least 5" in r.reason
    r = selection_model(_data(np.zeros(5), np.ones(5)), cutpoints=(0.025, 0.05, 0.5))
    assert isinstance(r, NotComputable) and "needs at least 7" in r.reason


def test_weight_running_to_the_boundary_is_reported():
    # Eleven results just past z = 2 and one below: the likelihood keeps improving as the
    # weight of non-significant results goes to 0 (a degenerate, "p-hacked" pattern).
    rng = np.random.default_rng(0)
    se = np.linspace(0.1, 0.5, 12)
    y = 2.0 * se * (1 + 0.01 * rng.normal(size=12))
    y[0] = 0.5 * se[0]
    r = selection_model(_data(y, se))
    assert isinstance(r, NotComputable) and "runs to its limit" in r.reason


def test_bad_cutpoints_are_a_programming_error():
    with pytest.raises(ValueError):
        selection_model(_data(np.zeros(6), np.ones(6)), cutpoints=(0.5, 0.025))
