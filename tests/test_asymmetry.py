"""Small-study-effect tests checked against statsmodels, scipy and the published formulas.

Reference implementations: statsmodels.api.OLS / WLS (params, bse, tvalues, pvalues) for
the regression tests, scipy.stats.kendalltau for Begg's test. Formulas: methods.md
section 3 (Egger et al. 1997; Begg & Mazumdar 1994; Harbord, Egger & Sterne 2006; Peters
et al. 2006; Pustejovsky & Rodgers 2019; Rücker, Schwarzer & Carpenter 2008; Thompson &
Sharp 1999). Random test data are drawn with fixed seeds; they are inputs, not expected
values.
"""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest
import statsmodels.api as sm
from scipy import stats

from lopside.stats import asymmetry as asy
from lopside.stats.asymmetry import rank as asy_rank
from lopside.stats.data import StudyData
from lopside.stats.results import NotComputable

RTOL = 1e-9


# --------------------------------------------------------------------------------------
# Test data


def binary_data(seed: int, k: int = 15, measure: str = "OR", zeros: bool = False) -> StudyData:
    """Random 2x2 tables; effect and SE with 0.5 added to all cells when a cell is zero."""
    rng = np.random.default_rng(seed)
    n1 = rng.integers(15, 400, k).astype(float)
    n0 = rng.integers(15, 400, k).astype(float)
    p0 = rng.uniform(0.05, 0.4, k)
    p1 = np.clip(p0 * rng.uniform(0.8, 2.5, k), 0, 0.95)
    a = rng.binomial(n1.astype(int), p1).astype(float)
    c = rng.binomial(n0.astype(int), p0).astype(float)
    if zeros:
        a[0] = 0.0  # a single zero cell
        a[1] = 0.0  # a double-zero study
        c[1] = 0.0
    b, d = n1 - a, n0 - c
    h = np.where((a == 0) | (b == 0) | (c == 0) | (d == 0), 0.5, 0.0)
    if measure == "OR":
        y = np.log((a + h) * (d + h) / ((b + h) * (c + h)))
        se = np.sqrt(1 / (a + h) + 1 / (b + h) + 1 / (c + h) + 1 / (d + h))
    else:  # RR
        y = np.log((a + h) / (n1 + 2 * h)) - np.log((c + h) / (n0 + 2 * h))
        se = np.sqrt(1 / (a + h) - 1 / (n1 + 2 * h) + 1 / (c + h) - 1 / (n0 + 2 * h))
    return StudyData.from_arrays(measure, y, se, a=a, b=b, c=c, d=d, n1=n1, n0=n0, n=n1 + n0)


def continuous_data(seed: int, k: int = 12, measure: str = "MD") -> StudyData:
    rng = np.random.default_rng(seed)
    se = rng.uniform(0.05, 1.0, k)
    y = 0.3 + 0.8 * se + rng.normal(0, se)
    return StudyData.from_arrays(measure, y, se)


def smd_data(seed: int, k: int = 14) -> StudyData:
    rng = np.random.default_rng(seed)
    n1 = rng.integers(8, 120, k).astype(float)
    n0 = rng.integers(8, 120, k).astype(float)
    base = 1 / n1 + 1 / n0
    g = rng.normal(0.5, np.sqrt(base))
    se = np.sqrt(base + g**2 / (2 * (n1 + n0)))
    return StudyData.from_arrays("SMD", g, se, n1=n1, n0=n0, n=n1 + n0, se_modified=np.sqrt(base))


SEEDS = [1, 2, 3, 11, 12]


def assert_fit(res, fit, *, coef: int, rtol: float = RTOL) -> None:
    """Compare an AsymmetryResult with a statsmodels fit; ``coef`` is the tested column."""
    assert res.intercept == pytest.approx(fit.params[0], rel=rtol)
    assert res.slope == pytest.approx(fit.params[1], rel=rtol)
    assert res.intercept_se == pytest.approx(fit.bse[0], rel=rtol)
    assert res.slope_se == pytest.approx(fit.bse[1], rel=rtol)
    assert res.statistic == pytest.approx(fit.tvalues[coef], rel=rtol)
    assert res.pvalue == pytest.approx(fit.pvalues[coef], rel=1e-7)
    assert res.df == fit.df_resid


# --------------------------------------------------------------------------------------
# Egger


@pytest.mark.parametrize("seed", SEEDS)
def test_egger_formulation_a_matches_statsmodels_ols(seed):
    # Egger et al. 1997 (BMJ): OLS of y/se on 1/se, intercept tested with t(k-2).
    # Reference: statsmodels.api.OLS.
    data = continuous_data(seed)
    res = asy.egger(data)
    fit = sm.OLS(data.y / data.se, sm.add_constant(1 / data.se)).fit()
    assert_fit(res, fit, coef=0)
    assert res.tested == "intercept"
    assert res.k_used == data.k


@pytest.mark.parametrize("seed", SEEDS)
def test_egger_formulation_b_matches_statsmodels_wls(seed):
    # Formulation B (Cochrane Handbook 5.1 section 10.4.3.1): WLS of y on se, weights 1/se².
    # Reference: statsmodels.api.WLS.
    data = binary_data(seed)
    res = asy.egger_wls(data)
    fit = sm.WLS(data.y, sm.add_constant(data.se), weights=1 / data.se**2).fit()
    assert_fit(res, fit, coef=1)


@pytest.mark.parametrize("seed", SEEDS)
def test_egger_formulations_agree(seed):
    # methods.md 3.1: intercept of A = slope of B, with the same SE and t (identity).
    data = binary_data(seed)
    a, b = asy.egger(data), asy.egger_wls(data)
    assert a.intercept == pytest.approx(b.slope, rel=1e-10)
    assert a.intercept_se == pytest.approx(b.slope_se, rel=1e-10)
    assert a.slope == pytest.approx(b.intercept, rel=1e-10)
    assert a.pvalue == pytest.approx(b.pvalue, rel=1e-9)


def test_egger_batched_core_matches_statsmodels_row_by_row():
    # The power simulation runs egger_core on (replicates, k); each row must equal
    # statsmodels.api.OLS on that row, including rows with a study left out.
    rng = np.random.default_rng(5)
    se = rng.uniform(0.1, 1.0, (6, 10))
    y = rng.normal(0, se)
    use = np.ones((6, 10), dtype=bool)
    use[2, 3] = use[4, [0, 7]] = False
    out = asy.egger_core(y, se, use)
    for i in range(6):
        u = use[i]
        fit = sm.OLS(y[i, u] / se[i, u], sm.add_constant(1 / se[i, u])).fit()
        assert out.statistic[i] == pytest.approx(fit.tvalues[0], rel=RTOL)
        assert out.pvalue[i] == pytest.approx(fit.pvalues[0], rel=1e-7)
        assert out.k_used[i] == u.sum()


# --------------------------------------------------------------------------------------
# Peters, Harbord, modified SE for SMDs, arcsine


@pytest.mark.parametrize("seed", SEEDS)
def test_peters_matches_statsmodels_wls(seed):
    # Peters et al. 2006 (JAMA): WLS of log OR on 1/N with weights 1/(1/m1 + 1/m0),
    # slope tested (formula from memory, methods.md 3.4). Reference: statsmodels WLS.
    data = binary_data(seed)
    res = asy.peters(data)
    m1, m0 = data.a + data.c, data.b + data.d
    n = data.a + data.b + data.c + data.d
    fit = sm.WLS(data.y, sm.add_constant(1 / n), weights=1 / (1 / m1 + 1 / m0)).fit()
    assert_fit(res, fit, coef=1)
    assert res.tested == "slope"


@pytest.mark.parametrize("seed", SEEDS)
def test_harbord_matches_statsmodels_ols(seed):
    # Harbord, Egger & Sterne 2006 (Stat Med): Z = a - n1 m1/N, V = n1 n0 m1 m0/(N²(N-1))
    # (V denominator from memory, methods.md 3.3); OLS of Z/√V on √V, intercept tested.
    data = binary_data(seed)
    a, b, c, d = data.a, data.b, data.c, data.d
    n1, n0, n = a + b, c + d, a + b + c + d
    m1, m0 = a + c, b + d
    z = a - n1 * m1 / n
    v = n1 * n0 * m1 * m0 / (n**2 * (n - 1))
    fit = sm.OLS(z / np.sqrt(v), sm.add_constant(np.sqrt(v))).fit()
    assert_fit(asy.harbord(data), fit, coef=0)


@pytest.mark.parametrize("seed", SEEDS)
def test_smd_modified_matches_statsmodels_wls(seed):
    # Pustejovsky & Rodgers 2019 (RSM): WLS of g on W = √(1/n1 + 1/n0), weights 1/W²,
    # slope tested. Reference: statsmodels WLS.
    data = smd_data(seed)
    w = np.sqrt(1 / data.n1 + 1 / data.n0)
    fit = sm.WLS(data.y, sm.add_constant(w), weights=1 / w**2).fit()
    assert_fit(asy.smd_modified(data), fit, coef=1)


def test_smd_modified_computes_w_from_arm_sizes_when_absent():
    # Same formula when se_modified is not supplied: W from n1 and n0 (Pustejovsky &
    # Rodgers 2019). Reference: statsmodels WLS.
    full = smd_data(4)
    data = StudyData.from_arrays("SMD", full.y, full.se, n1=full.n1, n0=full.n0)
    w = np.sqrt(1 / data.n1 + 1 / data.n0)
    fit = sm.WLS(data.y, sm.add_constant(w), weights=1 / w**2).fit()
    assert_fit(asy.smd_modified(data), fit, coef=1)


@pytest.mark.parametrize("seed", SEEDS)
def test_arcsine_matches_statsmodels_wls(seed):
    # Rücker et al. 2008 (Stat Med): ASD = asin√(a/n1) - asin√(c/n0), Var = 1/(4n1)+1/(4n0);
    # Egger-type WLS of ASD on its SE, weights 1/Var, slope tested. Reference: statsmodels.
    data = binary_data(seed, measure="RR")
    n1, n0 = data.a + data.b, data.c + data.d
    asd = np.arcsin(np.sqrt(data.a / n1)) - np.arcsin(np.sqrt(data.c / n0))
    var = 1 / (4 * n1) + 1 / (4 * n0)
    fit = sm.WLS(asd, sm.add_constant(np.sqrt(var)), weights=1 / var).fit()
    assert_fit(asy.arcsine(data), fit, coef=1)


def _tau2_mom_matrix(y, v):
    """Method-of-moments τ² with the explicit P matrix (Thompson & Sharp 1999 as given in
    methods.md 3.7): τ² = max(0, (Q_res - (k - 2)) / tr P), P = W - W X (X'WX)^-1 X'W."""
    x = np.column_stack([np.ones_like(v), np.sqrt(v)])
    w = np.diag(1 / v)
    p = w - w @ x @ np.linalg.inv(x.T @ w @ x) @ x.T @ w
    q = float(y @ p @ y)  # residual weighted sum of squares of the FE meta-regression
    return max(0.0, (q - (len(y) - 2)) / float(np.trace(p)))


@pytest.mark.parametrize("seed", [1, 2, 3, 21, 22, 23])
def test_arcsine_random_effects_matches_statsmodels_fixed_scale(seed):
    # Thompson & Sharp 1999: random-effects meta-regression, weights 1/(Var + τ²),
    # dispersion fixed at 1, z test. Reference: statsmodels WLS with cov_type="fixed scale"
    # (scale 1, normal p-values); τ² from the explicit matrix formula above.
    rng = np.random.default_rng(seed)
    k = 16
    n1 = rng.integers(20, 300, k).astype(float)
    n0 = rng.integers(20, 300, k).astype(float)
    # heterogeneous risks, so that τ² > 0 for some seeds and 0 for others
    p0 = rng.uniform(0.05, 0.6, k)
    p1 = np.clip(p0 + rng.normal(0.1, 0.15 if seed > 20 else 0.0, k), 0.01, 0.99)
    a = rng.binomial(n1.astype(int), p1).astype(float)
    c = rng.binomial(n0.astype(int), p0).astype(float)
    data = StudyData.from_arrays(
        "RD", a / n1 - c / n0, np.full(k, 0.05), a=a, b=n1 - a, c=c, d=n0 - c, n1=n1, n0=n0
    )
    asd, var = asy.arcsine_arrays(data)
    tau2 = _tau2_mom_matrix(asd, var)
    res = asy.arcsine(data, random=True)
    assert res.tau2 == pytest.approx(tau2, rel=1e-9, abs=1e-14)
    fit = sm.WLS(asd, sm.add_constant(np.sqrt(var)), weights=1 / (var + tau2)).fit(
        cov_type="fixed scale"
    )
    assert res.slope == pytest.approx(fit.params[1], rel=RTOL)
    assert res.slope_se == pytest.approx(fit.bse[1], rel=RTOL)
    assert res.statistic == pytest.approx(fit.tvalues[1], rel=RTOL)
    assert res.pvalue == pytest.approx(fit.pvalues[1], rel=1e-7)
    assert res.df is None
    assert "z test" in res.method_note
    if seed > 20:
        assert res.tau2 > 0  # the heterogeneous seeds really exercise the additive term


# --------------------------------------------------------------------------------------
# Begg


def _begg_inputs(data):
    # Begg & Mazumdar 1994: t* = (y - θ_FE) / √(v - 1/Σw), correlated with v.
    v = data.se**2
    w = 1 / v
    theta = (w * data.y).sum() / w.sum()
    return (data.y - theta) / np.sqrt(v - 1 / w.sum()), v


@pytest.mark.parametrize("k", [5, 8, 25, 50])
def test_begg_exact_matches_scipy_kendalltau_exact(k):
    # Reference: scipy.stats.kendalltau(method="exact") — no ties, k <= 50.
    data = continuous_data(k, k=k)
    res = asy.begg(data)
    ts, v = _begg_inputs(data)
    ref = stats.kendalltau(ts, v, method="exact")
    assert res.statistic == pytest.approx(ref.statistic, abs=1e-12)
    assert res.pvalue == pytest.approx(ref.pvalue, rel=1e-9)
    assert res.method_note == "exact p (no ties)"


@pytest.mark.parametrize("k", [51, 80])
def test_begg_large_k_matches_scipy_asymptotic(k):
    # Reference: scipy.stats.kendalltau(method="asymptotic"); our z must give that p.
    data = continuous_data(k, k=k)
    res = asy.begg(data)
    ts, v = _begg_inputs(data)
    ref = stats.kendalltau(ts, v, method="asymptotic")
    assert res.statistic == pytest.approx(ref.statistic, abs=1e-12)
    assert res.pvalue == pytest.approx(ref.pvalue, rel=1e-9)
    assert 2 * stats.norm.sf(abs(res.z)) == pytest.approx(ref.pvalue, rel=1e-9)
    assert "normal approximation" in res.method_note


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_begg_ties_match_scipy_tie_corrected_normal_approximation(seed):
    # SEs rounded to one decimal, so variances tie in groups; scipy's asymptotic p uses
    # the tie-corrected variance of S (Kendall 1970), as must ours. tau is tau-b.
    rng = np.random.default_rng(seed)
    se = np.round(rng.uniform(0.1, 0.6, 20), 1)
    y = rng.normal(0, se)
    y[3] = y[4]  # identical study results give a tie in t* too
    se[3] = se[4]
    data = StudyData.from_arrays("MD", y, se)
    res = asy.begg(data)
    ts, v = _begg_inputs(data)
    ref = stats.kendalltau(ts, v, method="asymptotic")
    assert res.statistic == pytest.approx(ref.statistic, abs=1e-12)
    assert res.pvalue == pytest.approx(ref.pvalue, rel=1e-9)
    assert res.method_note == "normal approximation with tie correction"


@pytest.mark.parametrize("rounding", [None, 1])
@pytest.mark.parametrize("k", [65, 400, 3000])
def test_begg_by_sorting_matches_scipy_and_the_pairwise_count(k, rounding):
    # Above _BEGG_SORT_MIN studies S is counted by sorting (Knight 1966), not from all
    # k(k-1)/2 pairs. Reference: scipy.stats.kendalltau(method="asymptotic") (tau-b and the
    # tie-corrected p); and the pairwise path itself, which must give the same bits.
    rng = np.random.default_rng(k)
    se = rng.uniform(0.1, 0.6, k)
    if rounding is not None:
        se = np.round(se, rounding)  # ties in the variances
    y = rng.normal(0, se)
    y[3], se[3] = y[4], se[4]  # identical study results: a tie in t* too
    data = StudyData.from_arrays("MD", y, se)
    res = asy.begg(data)
    ts, v = _begg_inputs(data)
    ref = stats.kendalltau(ts, v, method="asymptotic")
    assert res.statistic == pytest.approx(ref.statistic, abs=1e-12)
    assert res.pvalue == pytest.approx(ref.pvalue, rel=1e-9)
    fast = asy.begg_core(data.y, data.v)
    saved = asy_rank._BEGG_SORT_MIN
    try:
        asy_rank._BEGG_SORT_MIN = 10**9  # force the pairwise count
        pairwise = asy.begg_core(data.y, data.v)
    finally:
        asy_rank._BEGG_SORT_MIN = saved
    for name in ("statistic", "pvalue", "z", "status", "ties"):
        assert np.array_equal(getattr(fast, name), getattr(pairwise, name), equal_nan=True)


def test_begg_keeps_no_pair_cache_for_large_reviews():
    # the pair layout is cached only for small k: no process-lifetime cache grows with k
    asy_rank._pairs_cached.cache_clear()
    asy.begg_core(np.arange(2000.0), np.linspace(0.1, 1.0, 2000))
    asy_rank._pairs(asy_rank._PAIRS_CACHE_MAX + 1)
    assert asy_rank._pairs_cached.cache_info().currsize == 0


def test_count_inversions_by_definition():
    # definition: pairs i < j with r[i] > r[j], counted directly
    rng = np.random.default_rng(4)
    for n in (0, 1, 2, 7, 33, 200):
        r = rng.integers(0, 9, n)
        brute = sum(1 for i in range(n) for j in range(i + 1, n) if r[i] > r[j])
        assert asy_rank._count_inversions(r) == brute


def test_kendall_exact_distribution_by_enumeration():
    # Definition (common practice): under H0 all n! orderings are equally likely; D is the
    # number of inversions. Enumerate every permutation of 7 and compare the CDF.
    n = 7
    counts = np.zeros(n * (n - 1) // 2 + 1)
    for perm in itertools.permutations(range(n)):
        inv = sum(1 for i in range(n) for j in range(i + 1, n) if perm[i] > perm[j])
        counts[inv] += 1
    expected = np.cumsum(counts) / math.factorial(n)
    np.testing.assert_allclose(asy.kendall_exact_cdf(n), expected, rtol=1e-14)


def test_begg_batched_core_matches_scipy_row_by_row():
    # begg_core on a (replicates, k) array with some studies left out, row by row against
    # scipy.stats.kendalltau on the kept studies.
    rng = np.random.default_rng(9)
    se = rng.uniform(0.1, 1.0, (5, 12))
    y = rng.normal(0, se)
    use = np.ones((5, 12), dtype=bool)
    use[1, [2, 5]] = False
    out = asy.begg_core(y, se**2, use)
    for i in range(5):
        u = use[i]
        ts, v = _begg_inputs(StudyData.from_arrays("MD", y[i, u], se[i, u]))
        ref = stats.kendalltau(ts, v, method="exact")
        assert out.statistic[i] == pytest.approx(ref.statistic, abs=1e-12)
        assert out.pvalue[i] == pytest.approx(ref.pvalue, rel=1e-9)


# --------------------------------------------------------------------------------------
# Registry and run_all


def test_registry_entries_are_complete():
    assert set(asy.REGISTRY) == {"egger", "begg", "harbord", "peters", "smd_modified", "arcsine"}
    for key, spec in asy.REGISTRY.items():
        assert spec.key == key
        assert callable(spec.function)
        assert spec.needs in ("se", "counts", "sizes")
        assert spec.suits <= asy.ALL_MEASURES and spec.suits
        assert spec.source and spec.summary and spec.name


def test_run_all_gives_reasons_for_tests_the_data_cannot_support():
    data = continuous_data(1)  # MD, no counts, no sizes
    out = asy.run_all(data)
    assert list(out) == list(asy.REGISTRY)
    assert isinstance(out["egger"], asy.AsymmetryResult)
    assert isinstance(out["begg"], asy.AsymmetryResult)
    for key in ("harbord", "peters", "smd_modified", "arcsine"):
        assert isinstance(out[key], NotComputable)
    assert out["harbord"].reason == (
        "Harbord's test is meant for odds ratios; this analysis uses the mean difference"
    )


def test_run_all_odds_ratio_without_counts_names_the_missing_counts():
    full = binary_data(3)
    data = StudyData.from_arrays("OR", full.y, full.se)
    out = asy.run_all(data)
    assert out["harbord"].reason == asy.MSG_NEEDS_COUNTS.format(name="Harbord's test")
    assert out["peters"].reason == asy.MSG_NEEDS_COUNTS.format(name="Peters' test")
    assert isinstance(out["egger"], asy.AsymmetryResult)


def test_run_all_passes_options_and_run_test_rejects_unknown_keys():
    data = binary_data(2)
    out = asy.run_all(data, options={"arcsine": {"random": True}})
    assert out["arcsine"].df is None and out["arcsine"].tau2 is not None
    with pytest.raises(ValueError, match="unknown asymmetry test"):
        asy.run_test("no_such_test", data)


def test_peters_on_risk_ratios_is_marked_exploratory():
    # Peters et al. 2006 designed the test for odds ratios; on RR the brief allows it as
    # exploratory. The arithmetic is the same WLS (statsmodels reference).
    data = binary_data(6, measure="RR")
    res = asy.peters(data)
    assert "exploratory" in res.method_note
    n = data.a + data.b + data.c + data.d
    m1, m0 = data.a + data.c, data.b + data.d
    fit = sm.WLS(data.y, sm.add_constant(1 / n), weights=1 / (1 / m1 + 1 / m0)).fit()
    assert res.pvalue == pytest.approx(fit.pvalues[1], rel=1e-7)


# --------------------------------------------------------------------------------------
# Edge cases


@pytest.mark.parametrize("key", list(asy.REGISTRY))
def test_fewer_than_three_studies_is_not_computable(key):
    # Two points always fit a line exactly: no test (methods.md 3.1 "k < 3 impossible").
    sub = {
        "smd_modified": smd_data(1),
        "harbord": binary_data(1),
        "peters": binary_data(1),
        "arcsine": binary_data(1),
    }.get(key, continuous_data(1))
    res = asy.run_test(key, sub.subset([0, 1]))
    assert isinstance(res, NotComputable)
    assert "needs at least 3 studies" in res.reason and "2 are available" in res.reason


@pytest.mark.parametrize("key", ["egger", "begg"])
def test_all_standard_errors_equal_is_not_computable(key):
    # All SE equal: singular design for Egger, no variance ranks for Begg (methods.md 3.1-3.2).
    rng = np.random.default_rng(1)
    data = StudyData.from_arrays("MD", rng.normal(size=8), np.full(8, 0.3))
    res = asy.run_test(key, data)
    assert isinstance(res, NotComputable)
    assert "same standard error" in res.reason


def test_equal_group_sizes_make_modified_smd_test_not_computable():
    rng = np.random.default_rng(2)
    n = np.full(9, 40.0)
    data = StudyData.from_arrays("SMD", rng.normal(size=9), np.full(9, 0.23), n1=n, n0=n)
    res = asy.smd_modified(data)
    assert isinstance(res, NotComputable) and "same group sizes" in res.reason


def test_exact_line_is_not_computable():
    # y exactly linear in se: zero residual variance, nothing to test against.
    se = np.linspace(0.1, 1.0, 7)
    data = StudyData.from_arrays("MD", 0.2 + 1.5 * se, se)
    res = asy.egger(data)
    assert isinstance(res, NotComputable) and "exactly on a straight line" in res.reason


def test_single_zero_cell_enters_harbord_uncorrected():
    # Harbord et al. 2006: the score test needs no continuity correction for a single
    # zero cell. Study 1 has a = 0 and still enters with its raw counts (statsmodels OLS).
    data = binary_data(7, zeros=True).subset(np.arange(15) != 1)  # drop the double-zero
    assert data.a[0] == 0
    res = asy.harbord(data)
    a, b, c, d = data.a, data.b, data.c, data.d
    n1, n0, n = a + b, c + d, a + b + c + d
    z = a - n1 * (a + c) / n
    v = n1 * n0 * (a + c) * (b + d) / (n**2 * (n - 1))
    fit = sm.OLS(z / np.sqrt(v), sm.add_constant(np.sqrt(v))).fit()
    assert res.k_used == data.k and res.dropped == ()
    assert res.pvalue == pytest.approx(fit.pvalues[0], rel=1e-7)


def test_double_zero_study_handling_per_test():
    # A trial without events in either group: V = 0 for Harbord (dropped, methods.md 3.3);
    # no events for Peters' weights (dropped); usable for the arcsine test with ASD = 0
    # (Rücker et al. 2008).
    data = binary_data(8, zeros=True)
    label = data.labels[1]
    h = asy.harbord(data)
    p = asy.peters(data)
    s = asy.arcsine(data)
    assert h.k_used == data.k - 1 and h.dropped == ((label, "no events in either group"),)
    assert p.k_used == data.k - 1 and p.dropped == ((label, "no events in either group"),)
    assert s.k_used == data.k and s.dropped == ()
    asd, _ = asy.arcsine_arrays(data)
    assert asd[1] == 0.0
    keep = np.arange(data.k) != 1
    sub = data.subset(keep)
    a, b, c, d = sub.a, sub.b, sub.c, sub.d
    n = a + b + c + d
    fit = sm.WLS(sub.y, sm.add_constant(1 / n), weights=1 / (1 / (a + c) + 1 / (b + d))).fit()
    assert p.pvalue == pytest.approx(fit.pvalues[1], rel=1e-7)


def test_too_few_after_dropping_double_zero_studies():
    a = np.array([0.0, 0.0, 0.0, 3.0, 5.0])
    c = np.array([0.0, 0.0, 0.0, 1.0, 2.0])
    n = np.full(5, 50.0)
    data = StudyData.from_arrays(
        "OR", np.zeros(5), np.ones(5), a=a, b=n - a, c=c, d=n - c, n1=n, n0=n
    )
    res = asy.harbord(data)
    assert isinstance(res, NotComputable)
    assert res.reason == (
        "Harbord's test needs at least 3 studies with usable data; 2 are available (3 set aside)"
    )


# --------------------------------------------------------------------------------------
# Readings


def test_reading_says_small_studies_show_larger_effects():
    # Strong asymmetry built in: effects grow with the SE around a positive pooled effect.
    rng = np.random.default_rng(3)
    se = np.linspace(0.05, 0.8, 20)
    y = 0.2 + 2.0 * se + rng.normal(0, 0.2 * se)
    res = asy.egger(StudyData.from_arrays("MD", y, se))
    assert res.suggests_asymmetry
    assert res.reading.startswith("small studies show larger effects than large ones (p ")


def test_reading_for_beneficial_ratio_and_reverse_pattern():
    se = np.linspace(0.05, 0.8, 20)
    rng = np.random.default_rng(4)
    # pooled log OR below 0 (benefit) and small studies even further below: "larger"
    y = -0.3 - 1.5 * se + rng.normal(0, 0.2 * se)
    res = asy.egger(StudyData.from_arrays("MD", y, se))
    assert "larger effects" in res.reading
    # pooled effect below 0 but small studies nearer to or beyond 0: reverse pattern
    y2 = -0.3 + 1.5 * se + rng.normal(0, 0.2 * se)
    res2 = asy.egger(StudyData.from_arrays("MD", y2, se))
    assert res2.suggests_asymmetry and "reverse of the usual pattern" in res2.reading


def test_reading_no_clear_sign_and_alpha_parameter():
    data = continuous_data(2)
    res = asy.egger(data)
    strict = asy.egger(data, alpha=res.pvalue / 2)
    assert strict.reading.startswith("no clear sign of small-study effects (p = ")
    assert strict.alpha == pytest.approx(res.pvalue / 2)
    assert not strict.suggests_asymmetry


def test_format_p_never_rounds_across_alpha():
    assert asy.format_p(0.0004) == "p < 0.001"
    assert asy.format_p(0.0043) == "p = 0.004"
    assert asy.format_p(0.031) == "p = 0.03"
    assert asy.format_p(0.0996) == "p = 0.100"  # significant at 0.10, so not "0.10"
    assert asy.format_p(0.41) == "p = 0.41"


def test_kendall_s_from_scipys_tau_b_is_the_inversion_count():
    # Reference: S = (pairs) - (tied in x) - (tied in y) + (tied in both) - 2 (discordant),
    # with the discordant pairs counted by _count_inversions (checked by definition above)
    # and the pairs tied counted directly here; scipy's tau-b (the fast path) must give
    # the same integer, with and without ties.
    rng = np.random.default_rng(11)
    for trial in range(60):
        n = int(rng.integers(65, 900))
        x = rng.normal(size=n)
        y = rng.uniform(size=n)
        if trial % 3:
            x = np.round(x, 1)  # ties in x
        if trial % 2:
            y = np.round(y, 2)  # ties in y
        s_fast, xt, yt = asy_rank._kendall_sorted(x, y)
        order = np.lexsort((y, x))
        ranks = np.unique(y[order], return_inverse=True)[1].reshape(-1)
        dis = asy_rank._count_inversions(ranks)
        _, cx = np.unique(x, return_counts=True)
        _, cy = np.unique(y, return_counts=True)
        _, cb = np.unique(np.stack([x, y], axis=1), axis=0, return_counts=True)
        pairs = lambda c: int((c * (c - 1) // 2).sum())  # noqa: E731
        s_ref = n * (n - 1) // 2 - pairs(cx) - pairs(cy) + pairs(cb) - 2 * dis
        assert s_fast == float(s_ref)
        assert xt[0] == 2 * pairs(cx) and yt[0] == 2 * pairs(cy)
