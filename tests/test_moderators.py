"""Subgroup analysis and meta-regression, checked against statsmodels (test-only reference)
and against the DerSimonian & Laird (1986) closed form."""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm
from scipy import stats

from lopside.stats.data import StudyData
from lopside.stats.moderators import (
    NOT_RECORDED,
    meta_regression,
    subgroup_analysis,
    tau2_moments,
)
from lopside.stats.pooling import fixed_effect, random_effects, tau2_dl
from lopside.stats.results import NotComputable

ROB = ("low", "high", "some concerns", "low", "high", "low", "some concerns", "high",
       "low", "high", "low", "some concerns", "high", "low", "high", "some concerns",
       "low", "high")  # fmt: skip


def _sim(seed, k=18, tau=0.15, rob=ROB):
    rng = np.random.default_rng(seed)
    se = rng.uniform(0.05, 0.5, k)
    shift = np.array([0.25 if r == "high" else 0.0 for r in rob])
    y = 0.1 + shift + 0.8 * se + rng.normal(0, np.sqrt(se**2 + tau**2))
    labels = tuple(f"S{i}" for i in range(k))
    return StudyData.from_arrays("OR", y, se, labels=labels, risk_of_bias=rob)


# ---------------------------------------------------------------- subgroups


def test_subgroup_levels_match_pooling_on_each_subset():
    d = _sim(1)
    r = subgroup_analysis(d, "risk_of_bias", tau2_method="DL")
    assert [lv.level for lv in r.levels] == ["low", "some concerns", "high"]  # RoB order
    for lv in r.levels:
        idx = [i for i, x in enumerate(ROB) if x == lv.level]
        assert list(lv.indices) == idx and lv.k == len(idx)
        y, v = d.y[idx], d.se[idx] ** 2
        assert lv.fixed.estimate == pytest.approx(fixed_effect(y, v).estimate)
        re = random_effects(y, v, method="DL")
        assert lv.random.estimate == pytest.approx(re.estimate)
        assert lv.random.ci == pytest.approx(re.ci)


def test_egger_within_subgroup_matches_statsmodels():
    # Egger formulation B (methods.md 3.1): WLS y ~ 1 + SE, weights 1/SE², bias = slope.
    d = _sim(2)
    r = subgroup_analysis(d)
    for lv in r.levels:
        idx = list(lv.indices)
        y, se = d.y[idx], d.se[idx]
        ref = sm.WLS(y, sm.add_constant(se), weights=1 / se**2).fit()
        assert lv.egger.bias == pytest.approx(ref.params[1], rel=1e-9)
        assert lv.egger.se == pytest.approx(ref.bse[1], rel=1e-9)
        assert lv.egger.pvalue == pytest.approx(ref.pvalues[1], rel=1e-7)
        assert lv.egger.df == len(idx) - 2


def test_fixed_q_between_is_the_wald_test_of_group_dummies():
    # With known variances, Q_total − Σ Q_within equals the Wald χ² for the group dummies in
    # a WLS with weights 1/v and scale fixed at 1 (Borenstein et al. 2009 ch. 19, from
    # memory; statsmodels wald_test as reference).
    d = _sim(3)
    r = subgroup_analysis(d)
    dummies = np.column_stack(
        [[1.0 if x == lv else 0.0 for x in ROB] for lv in ("some concerns", "high")]
    )
    X = sm.add_constant(dummies)
    ref = sm.WLS(d.y, X, weights=1 / d.se**2).fit(cov_type="fixed scale")
    wt = ref.wald_test(np.array([[0, 1, 0], [0, 0, 1]]), use_f=False, scalar=True)
    assert r.fixed_test.statistic == pytest.approx(float(wt.statistic), rel=1e-9)
    assert r.fixed_test.df == 2
    assert r.fixed_test.pvalue == pytest.approx(float(wt.pvalue), rel=1e-7)


def test_random_q_between_uses_separate_tau2():
    # Q between subgroup RE estimates (each with its own τ²), weights 1/SE_g²: the weighted
    # residual sum of squares of an intercept-only WLS (statsmodels) on the G estimates.
    d = _sim(4)
    r = subgroup_analysis(d, tau2_method="REML")
    th = np.array([lv.random.estimate for lv in r.levels])
    sg = np.array([lv.random.se for lv in r.levels])
    taus = [lv.tau2 for lv in r.levels]
    for lv in r.levels:
        idx = list(lv.indices)
        assert lv.tau2 == pytest.approx(random_effects(d.y[idx], d.se[idx] ** 2).tau2)
    assert len(set(np.round(taus, 12))) > 1  # genuinely separate
    ref = sm.WLS(th, np.ones(th.size), weights=1 / sg**2).fit()
    assert r.random_test.statistic == pytest.approx(ref.ssr, rel=1e-9)
    assert r.random_test.pvalue == pytest.approx(stats.chi2.sf(ref.ssr, 2))
    assert "separate" not in r.fixed_test.description and "own" in r.random_test.description


def test_subgroup_edge_cases():
    rob = ("low",) * 5 + ("high",) + ("",) * 2
    d = _sim(5, k=8, rob=rob)
    r = subgroup_analysis(d)
    names = [lv.level for lv in r.levels]
    assert names == ["low", "high", NOT_RECORDED]
    single = r.levels[1]
    assert single.k == 1
    assert isinstance(single.i2, NotComputable) and isinstance(single.egger, NotComputable)
    assert isinstance(r.levels[2].egger, NotComputable)  # two studies
    assert not isinstance(r.fixed_test, NotComputable) and r.fixed_test.df == 2
    # one level only
    one = subgroup_analysis(_sim(6, k=4, rob=("low",) * 4))
    assert isinstance(one.fixed_test, NotComputable) and isinstance(one.random_test, NotComputable)
    # no entries at all
    none = subgroup_analysis(_sim(6, k=4, rob=("",) * 4))
    assert isinstance(none, NotComputable) and "risk_of_bias" in none.reason
    # equal SEs: Egger needs differing precision
    eq = StudyData.from_arrays("MD", [0.1, 0.4, 0.2, 0.3], [0.2] * 4, subgroup=("a",) * 4)
    lv = subgroup_analysis(eq, "subgroup").levels[0]
    assert isinstance(lv.egger, NotComputable) and "precision" in lv.egger.reason


# ---------------------------------------------------------------- meta-regression


def test_tau2_moments_reduces_to_dersimonian_laird():
    # With an intercept only, the method-of-moments residual τ² is DL (DerSimonian & Laird
    # 1986, methods.md 2.4).
    d = _sim(7)
    v = d.se**2
    assert tau2_moments(d.y, v, np.ones((d.k, 1))) == pytest.approx(tau2_dl(d.y, v).tau2)


def test_tau2_moments_hand_matrix_formula():
    # methods.md 3.7: τ² = (Q_res − (k − p))/tr(P), P = W − W X (X'WX)^-1 X'W, written out
    # with explicit matrices here.
    d = _sim(8)
    v = d.se**2
    X = np.column_stack([np.ones(d.k), d.se])
    W = np.diag(1 / v)
    P = W - W @ X @ np.linalg.inv(X.T @ W @ X) @ X.T @ W
    q = d.y @ P @ d.y
    expect = max(0.0, (q - (d.k - 2)) / np.trace(P))
    assert tau2_moments(d.y, v, X) == pytest.approx(expect, rel=1e-10)


@pytest.mark.parametrize("test", ["knapp-hartung", "z"])
def test_meta_regression_matches_statsmodels_wls(test):
    # Fixed τ² from the method of moments, then WLS with weights 1/(v + τ²):
    # z -> statsmodels cov_type="fixed scale"; Knapp-Hartung (modified) -> statsmodels'
    # estimated scale floored at 1, t on k − p df (Knapp & Hartung 2003, from memory).
    d = _sim(9, tau=0.3)
    dose = np.random.default_rng(99).uniform(0, 10, d.k)  # own seed: not collinear with SE
    r = meta_regression(d, dose, moderator_name="dose", test=test)
    X = np.column_stack([np.ones(d.k), dose, d.se])
    t2 = tau2_moments(d.y, d.se**2, X)
    assert r.tau2 == pytest.approx(t2) and t2 > 0
    w = 1 / (d.se**2 + t2)
    if test == "z":
        ref = sm.WLS(d.y, X, weights=w).fit(cov_type="fixed scale")
        bse, pv = ref.bse, ref.pvalues
        wt = ref.wald_test(np.array([[0, 1, 0]]), use_f=False, scalar=True)
        assert r.moderator_test.statistic == pytest.approx(float(wt.statistic), rel=1e-9)
    else:
        ref = sm.WLS(d.y, X, weights=w).fit()
        bse = ref.bse * np.sqrt(max(1.0, ref.scale) / ref.scale)
        pv = 2 * stats.t.sf(np.abs(ref.params / bse), d.k - 3)
        assert r.df == d.k - 3
    assert [c.name for c in r.coefficients] == ["intercept", "dose", "se"]
    assert [c.estimate for c in r.coefficients] == pytest.approx(ref.params, rel=1e-9)
    assert [c.se for c in r.coefficients] == pytest.approx(bse, rel=1e-9)
    assert [c.pvalue for c in r.coefficients] == pytest.approx(pv, rel=1e-7)


def test_se_slope_with_and_without_the_moderator():
    d = _sim(10, tau=0.1)
    r = meta_regression(d, "risk_of_bias")
    assert r.reference_level == "low"
    assert [c.name for c in r.coefficients] == [
        "intercept",
        "risk_of_bias: some concerns vs low",
        "risk_of_bias: high vs low",
        "se",
    ]
    assert r.se_with == r.coefficients[-1]
    # Without the moderator: RE meta-regression of y on SE alone (Thompson & Sharp 1999),
    # its own method-of-moments τ², statsmodels WLS as reference.
    X = np.column_stack([np.ones(d.k), d.se])
    t2 = tau2_moments(d.y, d.se**2, X)
    ref = sm.WLS(d.y, X, weights=1 / (d.se**2 + t2)).fit()
    assert r.se_without.estimate == pytest.approx(ref.params[1], rel=1e-9)
    assert r.se_answer.startswith(("Yes", "Not clearly", "The SE slope", "There is no"))
    assert f"{r.se_with.estimate:.3g}" in r.se_answer
    assert meta_regression(d, "risk_of_bias", with_se=False).se_with is None


def test_meta_regression_bad_data_name_the_row():
    rob = ("low", "high", "", "low", "high", "low")
    d = _sim(11, k=6, rob=rob)
    r = meta_regression(d, "risk_of_bias")
    assert isinstance(r, NotComputable)
    assert "S2" in r.reason and "row 3" in r.reason
    mod = np.array([1.0, 2.0, np.nan, 4.0, 5.0, 6.0])
    r = meta_regression(d, mod)
    assert isinstance(r, NotComputable) and "row 3" in r.reason
    # more coefficients than studies allow
    tiny = _sim(12, k=3, rob=("low", "high", "low"))
    assert isinstance(meta_regression(tiny, "risk_of_bias"), NotComputable)
    # moderator collinear with SE
    d2 = _sim(13, k=10, rob=("low",) * 10)
    r = meta_regression(d2, 2.0 * d2.se)
    assert isinstance(r, NotComputable) and "cannot be fitted" in r.reason
