"""Monte-Carlo power simulation: published simulation findings, sampling checks, API.

All simulations use fixed seeds; tolerances are stated in Monte-Carlo standard errors
(MCSE = sqrt(p(1-p)/reps)). Study designs are built deterministically in this file; they
are inputs to the simulation, not expected values.
"""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest
from scipy import stats

from lopside.stats import asymmetry as asy
from lopside.stats import power
from lopside.stats.data import StudyData
from lopside.stats.results import NotComputable


def binary_design(k=20, odds_ratio=5.0, n_lo=40, n_hi=400, p_lo=0.2, p_hi=0.4) -> StudyData:
    """Trials of varied size (geometric from n_lo to n_hi in total), moderate control
    risks (p_lo..p_hi, interleaved with size) and the given true odds ratio in the counts."""
    n = np.rint(np.geomspace(n_lo, n_hi, k))
    n1 = np.floor(n / 2)
    n0 = n - n1
    p0 = np.linspace(p_lo, p_hi, k)[np.argsort(np.arange(k) * 7 % k)]
    odds1 = odds_ratio * p0 / (1 - p0)
    a = np.rint(n1 * odds1 / (1 + odds1))
    c = np.rint(n0 * p0)
    b, d = n1 - a, n0 - c
    y = np.log(a * d / (b * c))
    se = np.sqrt(1 / a + 1 / b + 1 / c + 1 / d)
    return StudyData.from_arrays("OR", y, se, a=a, b=b, c=c, d=d, n1=n1, n0=n0, n=n)


def md_design(k=15, lo=0.1, hi=1.0, effect=0.3) -> StudyData:
    se = np.geomspace(lo, hi, k)
    return StudyData.from_arrays("MD", np.full(k, effect), se)


def within(rate, target, reps, n_se=4.0):
    mcse = math.sqrt(target * (1 - target) / reps)
    return abs(rate - target) <= n_se * mcse


# --------------------------------------------------------------------------------------
# Published simulation findings


@pytest.mark.parametrize("alpha", [0.05, 0.10])
def test_egger_is_nominal_for_mean_differences_without_bias(alpha):
    # Egger et al. 1997 / Sterne, Gavaghan & Egger 2000 (from memory): for continuous
    # outcomes without bias or heterogeneity, Egger's test holds its level. With normal
    # estimates and known SEs the OLS t test is exact (common practice), so the simulated
    # rate must be within 4 MCSE of alpha.
    res = power.simulate_power(
        md_design(), test="egger", reps=10_000, tau2=0.0, true_effect=0.3, alpha=alpha
    )
    assert within(res.type1, alpha, 10_000)


def test_egger_near_nominal_for_mean_differences_with_some_heterogeneity():
    # Same setting with modest between-study variance: near nominal (not exact, because
    # the multiplicative-dispersion model is then misspecified; from memory, Sterne et al.
    # 2000). Loose band.
    res = power.simulate_power(
        md_design(), test="egger", reps=6000, tau2=0.02, true_effect=0.3, alpha=0.05
    )
    assert 0.025 <= res.type1 <= 0.075


def test_binary_large_odds_ratio_inflates_egger_but_not_peters_or_harbord():
    # Peters et al. 2006 (JAMA) and Harbord, Egger & Sterne 2006 (Stat Med): with a large
    # true OR and no bias, Egger's test on log ORs rejects well above the nominal 5 %
    # (the SE of a log OR is linked to the log OR), while Peters' and Harbord's tests stay
    # near 5 %. "Near" = Bradley's liberal band 2.5-7.5 % for a 5 % test (Bradley 1978,
    # from memory). Design: 20 trials of 20-200 patients, control risks 0.15-0.35, OR 5.
    # (In our runs Peters' test drifts upwards as k grows - about 7 % at k = 30 - while
    # Harbord's stays at 5 %; so k = 20 here, as in the middle of Peters' own range.)
    data = binary_design(k=20, odds_ratio=5.0, n_lo=20, n_hi=200, p_lo=0.15, p_hi=0.35)
    reps = 4000
    kw = dict(reps=reps, tau2=0.0, true_effect=math.log(5.0), alpha=0.05, selection=1.0)
    egger = power.simulate_power(data, test="egger", **kw)
    peters = power.simulate_power(data, test="peters", **kw)
    harbord = power.simulate_power(data, test="harbord", **kw)
    assert egger.type1 > 0.075 + 3 * math.sqrt(0.075 * 0.925 / reps)  # "well above 5 %"
    assert 0.025 <= peters.type1 <= 0.075
    assert 0.025 <= harbord.type1 <= 0.075
    assert egger.type1 > max(peters.type1, harbord.type1) + 0.03
    assert "2x2 counts" in egger.simulation


def test_modified_se_test_is_near_nominal_for_smds():
    # Pustejovsky & Rodgers 2019 (RSM): with the modified SE √(1/n1 + 1/n0) the Egger-type
    # test for SMDs keeps near-nominal type I error (no bias, large true SMD).
    k = 20
    n = np.rint(np.geomspace(10, 100, k))
    delta = 1.0
    se = np.sqrt(2 / n + delta**2 / (4 * n))
    data = StudyData.from_arrays("SMD", np.full(k, delta), se, n1=n, n0=n)
    res = power.simulate_power(
        data, test="smd_modified", reps=4000, tau2=0.0, true_effect=delta, alpha=0.05
    )
    assert within(res.type1, 0.05, 4000)
    assert "group sizes" in res.simulation


def test_power_rises_with_selection_strength():
    # Begg & Mazumdar 1994; Sterne et al. 2000 (from memory): the stronger the selection,
    # the more often a test detects it. Publication probability 1 (none), 0.5, 0.25, 0.1.
    data = md_design(k=20, lo=0.05, hi=0.6, effect=0.2)
    reps = 3000
    rates = [
        power.simulate_power(
            data, test="egger", reps=reps, seed=7, tau2=0.0, selection=s, alpha=0.10
        ).power
        for s in (1.0, 0.5, 0.25, 0.1)
    ]
    mcse = 0.5 / math.sqrt(reps)  # the largest MCSE of a rate
    assert all(b - a > 3 * mcse for a, b in itertools.pairwise(rates)), rates


def test_power_rises_with_number_of_studies():
    # Sterne, Gavaghan & Egger 2000 (from memory): power is low with few studies and rises
    # with k. The same studies repeated 1x, 2x, 4x (k = 8, 16, 32).
    base = md_design(k=8, lo=0.05, hi=0.6, effect=0.2)
    rates = []
    for times in (1, 2, 4):
        data = StudyData.from_arrays("MD", np.tile(base.y, times), np.tile(base.se, times))
        res = power.simulate_power(
            data, test="egger", reps=3000, seed=3, tau2=0.0, true_effect=0.2, selection=0.25
        )
        rates.append(res.power)
    mcse = 0.5 / math.sqrt(3000)
    assert all(b - a > 3 * mcse for a, b in itertools.pairwise(rates)), rates


def test_no_selection_gives_power_equal_to_type1():
    # With publication probability 1 both scenarios are the same model: their rates differ
    # only by Monte-Carlo error (difference of two independent rates, 4 SE).
    res = power.simulate_power(md_design(), test="egger", reps=6000, selection=1.0)
    se_diff = math.sqrt(2 * res.type1 * (1 - res.type1) / 6000)
    assert abs(res.power - res.type1) < 4 * se_diff


# --------------------------------------------------------------------------------------
# The sampling itself


@pytest.mark.parametrize("side", ["pooled", "both"])
def test_published_share_of_significant_results_follows_bayes_rule(side):
    # Rejection sampling must publish a significant result always and a non-significant one
    # with probability s. By Bayes' rule (common practice) the share of significant results
    # among published ones is π / (π + (1 - π) s), π = P(significant) under N(μ/se, 1).
    se = np.array([0.2, 0.3, 0.5])
    mu, s, reps = 0.25, 0.2, 20_000
    data = StudyData.from_arrays("MD", np.full(3, mu), se)
    sim = power.simulate_reviews(
        data, reps=reps, seed=11, tau2=0.0, true_effect=mu, selection=s, selection_side=side
    )
    z = sim["y"] / sim["se"]
    for i in range(3):
        m = mu / se[i]
        if side == "pooled":
            pi = stats.norm.sf(1.959963984540054 - m)
            sig = z[:, i] > 1.959963984540054
        else:
            pi = stats.norm.sf(1.959963984540054 - m) + stats.norm.cdf(-1.959963984540054 - m)
            sig = np.abs(z[:, i]) > 1.959963984540054
        expect = pi / (pi + (1 - pi) * s)
        assert within(sig.mean(), expect, reps), (i, sig.mean(), expect)
        np.testing.assert_array_equal(sim["se"][:, i], se[i])  # SEs are the review's own


def test_no_selection_draws_are_normal_around_the_true_effect():
    # Without selection each estimate is N(μ, se² + τ²): check mean and variance of the
    # standardised draws (Kolmogorov-Smirnov against N(0, 1), scipy.stats.kstest).
    se = np.array([0.1, 0.4, 0.9])
    data = StudyData.from_arrays("MD", np.zeros(3), se)
    sim = power.simulate_reviews(data, reps=20_000, seed=5, tau2=0.04, true_effect=0.5)
    zs = (sim["y"] - 0.5) / np.sqrt(se**2 + 0.04)
    for i in range(3):
        assert stats.kstest(zs[:, i], "norm").pvalue > 0.001


def test_binomial_table_matches_scipy_binomial():
    # Inversion sampling from CDF tables against scipy.stats.binom (chi-square goodness of
    # fit over cells with expected count >= 5, scipy.stats.chisquare).
    n = np.array([12, 57, 300])
    p = np.array([0.05, 0.5, 0.31])
    table = power.BinomialTable(n, p)
    rng = np.random.default_rng(2)
    idx = np.repeat(np.arange(3), 40_000)
    x = table.sample(rng, idx, 1)[:, 0]
    for i in range(3):
        xi = x[idx == i]
        assert xi.min() >= 0 and xi.max() <= n[i]
        observed = np.bincount(xi.astype(int), minlength=n[i] + 1)
        expected = stats.binom.pmf(np.arange(n[i] + 1), n[i], p[i]) * xi.size
        keep = expected >= 5
        obs = np.r_[observed[keep], observed[~keep].sum()]
        exp = np.r_[expected[keep], expected[~keep].sum()]
        assert stats.chisquare(obs, exp * obs.sum() / exp.sum()).pvalue > 0.001


def test_simulated_tests_equal_the_single_review_tests():
    # The vectorised p-values must be those of the public test functions on each simulated
    # review (which are themselves checked against statsmodels in test_asymmetry.py).
    data = binary_design(k=12)
    sim = power.simulate_reviews(
        data, reps=30, seed=4, tau2=0.05, true_effect=math.log(2), selection=0.3
    )
    for key, opts in (("egger", {}), ("harbord", {}), ("peters", {}), ("arcsine", {})):
        p, status = power._pvalues(key, sim, opts)
        for r in range(30):
            one = StudyData.from_arrays(
                "OR",
                np.where(sim["use"][r], sim["y"][r], np.nan),
                np.where(sim["use"][r], sim["se"][r], np.nan),
                a=sim["a"][r],
                b=sim["b"][r],
                c=sim["c"][r],
                d=sim["d"][r],
            )
            res = asy.run_test(key, one, **opts)
            if isinstance(res, NotComputable):
                assert status[r] != asy.OK
            else:
                assert p[r] == pytest.approx(res.pvalue, rel=1e-9), (key, r)


# --------------------------------------------------------------------------------------
# API: seeding, progress, cancel, choices


def test_same_seed_same_numbers_and_different_seed_different_numbers():
    data = binary_design(k=12)
    one = power.simulate_power(data, reps=3000, seed=42)
    two = power.simulate_power(data, reps=3000, seed=42)
    other = power.simulate_power(data, reps=3000, seed=43)
    assert one == two
    assert (one.type1, one.power) != (other.type1, other.power)
    assert one.seed == 42 and one.reps == 3000


def test_progress_is_called_per_chunk_and_cancel_works():
    calls = []

    def progress(done, total):
        calls.append((done, total))  # returns None: must not cancel

    res = power.simulate_power(md_design(), reps=5000, chunk=2000, progress=progress)
    assert isinstance(res, power.PowerResult)
    assert calls == [(2000, 5000), (4000, 5000), (5000, 5000)]

    seen = []

    def cancel(done, total):
        seen.append(done)
        return False

    out = power.simulate_power(md_design(), reps=5000, chunk=2000, progress=cancel)
    assert out == NotComputable("cancelled")
    assert seen == [2000]


def test_recommended_test_and_reading():
    data = binary_design(k=14, odds_ratio=2.0)
    res = power.simulate_power(data, reps=2000)
    assert res.test == "harbord"  # OR with counts, τ² small (Sterne et al. 2011)
    assert res.reading.startswith("With these 14 studies, Harbord's test would detect")
    assert f"about {100 * res.power:.0f} %" in res.reading
    assert res.type1_mcse == pytest.approx(math.sqrt(res.type1 * (1 - res.type1) / 2000))
    # large τ² on the log OR scale -> random-effects arcsine test
    res2 = power.simulate_power(data, reps=500, tau2=0.2)
    assert res2.test == "arcsine" and dict(res2.options) == {"random": True}
    assert res2.tau2 == 0.2


def test_not_computable_inputs():
    assert isinstance(power.simulate_power(md_design(k=2)), NotComputable)
    res = power.simulate_power(md_design(), test="harbord")
    assert isinstance(res, NotComputable) and "odds ratios" in res.reason
    no_counts = StudyData.from_arrays("OR", np.zeros(10), np.linspace(0.1, 1, 10))
    res = power.simulate_power(no_counts, test="peters")
    assert res == NotComputable(asy.MSG_NEEDS_COUNTS.format(name="Peters' test"))
    assert isinstance(power.simulate_power(md_design(), selection=1.5), NotComputable)
    assert isinstance(power.simulate_power(md_design(), reps=0), NotComputable)
    with pytest.raises(ValueError):
        power.simulate_power(md_design(), test="nonsense")


def test_unpublishable_studies_give_a_reason_not_a_hang():
    # Publication probability 0 and a trial of one patient per group, whose odds ratio can
    # never be significant (at best z = log 9 / sqrt(16/3) = 0.95 with the 0.5 correction).
    base = binary_design(k=5)
    a, b, c, d = (
        np.r_[x[:4], v] for x, v in zip((base.a, base.b, base.c, base.d), (1, 0, 0, 1), strict=True)
    )
    data = StudyData.from_arrays(
        "OR", np.r_[base.y[:4], 0.0], np.r_[base.se[:4], 2.0], a=a, b=b, c=c, d=d
    )
    res = power.simulate_power(data, reps=50, selection=0.0, tau2=0.0)
    assert isinstance(res, NotComputable) and "almost never be published" in res.reason


def test_begg_power_runs_through_the_vectorised_core():
    res = power.simulate_power(md_design(k=12), test="begg", reps=2000, tau2=0.0)
    # Begg & Mazumdar 1994: the rank test is conservative-to-nominal under the null.
    assert res.type1 <= 0.10 + 4 * math.sqrt(0.09 / 2000)
    assert res.power > res.type1
