"""Leave-one-out, cumulative meta-analysis by precision and fail-safe N."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from lopside.stats.data import StudyData
from lopside.stats.pooling import fixed_effect, heterogeneity, random_effects
from lopside.stats.results import NotComputable
from lopside.stats.sensitivity import (
    FAIL_SAFE_CAUTION,
    cumulative,
    fail_safe_n,
    fail_safe_orwin,
    fail_safe_rosenthal,
    leave_one_out,
)


def _sim(seed, k=12):
    rng = np.random.default_rng(seed)
    se = rng.uniform(0.08, 0.5, k)
    y = 0.3 + rng.normal(0, np.sqrt(se**2 + 0.04))
    labels = tuple(f"S{i}" for i in range(k))
    return StudyData.from_arrays("OR", y, se, labels=labels)


@pytest.mark.parametrize("hksj", [False, True])
def test_leave_one_out_equals_pooling_the_subset(hksj):
    # Direct check: each row is the pooled result of the other k - 1 studies.
    d = _sim(1)
    r = leave_one_out(d, tau2_method="PM", hksj=hksj)
    assert len(r.rows) == d.k
    for row in r.rows:
        keep = np.arange(d.k) != row.index
        y, v = d.y[keep], d.se[keep] ** 2
        re = random_effects(y, v, method="PM", hksj=hksj)
        fe = fixed_effect(y, v)
        assert row.omitted == d.labels[row.index]
        assert row.random.estimate == pytest.approx(re.estimate)
        assert row.random.ci == pytest.approx(re.ci)
        assert row.fixed.estimate == pytest.approx(fe.estimate)
        assert row.fixed.ci == pytest.approx(fe.ci)
        assert row.tau2 == pytest.approx(re.tau2)
        # I² as in Higgins & Thompson 2002 (via pooling.heterogeneity)
        assert row.i2 == pytest.approx(heterogeneity(y, v).i2)


def test_cumulative_order_and_estimates():
    d = _sim(2)
    r = cumulative(d)
    order = np.argsort(d.se)
    assert [s.index for s in r.steps] == list(order)
    assert [s.se_added for s in r.steps] == sorted(d.se)  # most precise first
    for m, step in enumerate(r.steps, start=1):
        idx = order[:m]
        assert step.k == m
        re = random_effects(d.y[idx], d.se[idx] ** 2)
        assert step.random.estimate == pytest.approx(re.estimate)
        assert step.random.ci == pytest.approx(re.ci)
        assert step.fixed.estimate == pytest.approx(fixed_effect(d.y[idx], d.se[idx] ** 2).estimate)
    # the last step is the full analysis
    assert r.steps[-1].random.estimate == pytest.approx(random_effects(d.y, d.se**2).estimate)


def test_rosenthal_hand_computation():
    # Rosenthal 1979 (from memory; methods.md 5.5): N = (Σz)²/z_α² − k, z_α = 1.645 for
    # one-tailed 0.05. Here z = 2, 3, 1 (y = z·se) -> Σz = 6, N = 36/2.7055 − 3 = 10.306.
    se = np.array([0.1, 0.2, 0.4])
    d = StudyData.from_arrays("MD", np.array([2, 3, 1]) * se, se)
    r = fail_safe_rosenthal(d)
    za = stats.norm.ppf(0.95)
    assert za == pytest.approx(1.6449, abs=1e-4)
    assert r.n == pytest.approx(36 / za**2 - 3, rel=1e-12)
    assert r.n == pytest.approx(10.306, abs=1e-3)
    assert r.n_whole == 11
    assert r.tolerance == 5 * 3 + 10  # Rosenthal's 5k + 10
    assert r.caution == FAIL_SAFE_CAUTION and "10.4.4.3" in r.caution


def test_rosenthal_already_not_significant():
    # Σz/√k below z_α means the formula gives a negative number: reported as 0 with a note.
    se = np.array([0.2, 0.2, 0.2])
    d = StudyData.from_arrays("MD", np.array([0.5, -0.3, 0.4]) * se, se)
    r = fail_safe_rosenthal(d)
    assert r.n == 0.0 and r.n_whole == 0 and "not significant" in r.note


def test_orwin_hand_computation():
    # Orwin 1983 (from memory): N = k(ȳ − y_c)/y_c with ȳ the fixed-effect mean.
    # Equal SEs -> ȳ = mean(0.2, 0.4, 0.6) = 0.4; y_c = 0.1 -> N = 3·0.3/0.1 = 9.
    d = StudyData.from_arrays("MD", [0.2, 0.4, 0.6], [0.1, 0.1, 0.1])
    r = fail_safe_orwin(d, 0.1)
    assert r.n == pytest.approx(9.0)
    assert r.n_whole == 9
    assert "10.4.4.3" in r.caution
    # ratio measure on the log scale: both negative
    d2 = StudyData.from_arrays("OR", np.log([0.5, 0.7, 0.6]), [0.2, 0.2, 0.2])
    r2 = fail_safe_orwin(d2, math.log(0.95))
    ybar = np.log([0.5, 0.7, 0.6]).mean()
    assert r2.n == pytest.approx(3 * (ybar - math.log(0.95)) / math.log(0.95))


def test_fail_safe_n_dispatch():
    d = StudyData.from_arrays("MD", [0.2, 0.4, 0.6], [0.1, 0.1, 0.1])
    assert fail_safe_n(d).method == "Rosenthal"
    assert fail_safe_n(d, trivial=0.1) == fail_safe_orwin(d, 0.1)


def test_fail_safe_edge_cases():
    d = StudyData.from_arrays("MD", [0.2, 0.4, 0.6], [0.1, 0.1, 0.1])
    assert isinstance(fail_safe_orwin(d, 0.0), NotComputable)
    assert isinstance(fail_safe_orwin(d, -0.1), NotComputable)  # wrong side of the null
    r = fail_safe_orwin(d, 0.5)  # trivial effect above the pooled mean
    assert r.n == 0.0 and r.note


def test_edge_cases():
    two = StudyData.from_arrays("MD", [0.1, 0.3], [0.1, 0.2])
    assert isinstance(leave_one_out(two), NotComputable)
    one = StudyData.from_arrays("MD", [0.1], [0.1])
    assert isinstance(cumulative(one), NotComputable)
    # identical estimates: tau² = 0, I² = 0 and every leave-one-out estimate equals y
    same = StudyData.from_arrays("MD", [0.4] * 4, [0.1, 0.2, 0.3, 0.4])
    r = leave_one_out(same)
    assert all(row.random.estimate == pytest.approx(0.4) for row in r.rows)
    assert all(row.tau2 == 0.0 and row.i2 == 0.0 for row in r.rows)
    # equal SEs: cumulative keeps table order
    eq = StudyData.from_arrays("MD", [0.1, 0.5, 0.3], [0.2, 0.2, 0.2])
    assert [s.index for s in cumulative(eq).steps] == [0, 1, 2]


# --------------------------------------------------------------------------------------
# Many studies: leave-one-out from running sums, cumulative at chosen steps


def _heterogeneous(k, tau2, seed):
    rng = np.random.default_rng(seed)
    se = rng.uniform(0.05, 0.6, k)
    y = -0.2 + rng.normal(0, np.sqrt(se**2 + tau2))
    return StudyData.from_arrays("OR", y, se, labels=tuple(f"S{i}" for i in range(k)))


@pytest.mark.parametrize("method", ["DL", "PM", "REML"])
@pytest.mark.parametrize("tau2", [0.0, 0.05, 1.0])
def test_large_leave_one_out_equals_pooling_each_subset(monkeypatch, method, tau2):
    # Reference: the k x k batched pooling (itself checked against the scalar functions
    # on each subset in tests/test_pooling_batch.py), here forced below the threshold;
    # plus the scalar random_effects on a few subsets directly.
    import lopside.stats.sensitivity as sens

    d = _heterogeneous(240, tau2, seed=int(tau2 * 100) + len(method))
    usual = leave_one_out(d, tau2_method=method, hksj=True)
    monkeypatch.setattr(sens, "LARGE_K", 100)
    fast = leave_one_out(d, tau2_method=method, hksj=True)
    assert usual.note == "" and "running sums" in fast.note
    for a, b in zip(usual.rows, fast.rows):
        assert b.omitted == a.omitted
        for f in ("estimate", "se", "pvalue"):
            assert getattr(b.fixed, f) == pytest.approx(getattr(a.fixed, f), rel=1e-12, abs=1e-14)
            assert getattr(b.random, f) == pytest.approx(getattr(a.random, f), rel=1e-9, abs=1e-12)
        # both stop when a step is below 1e-10 (absolute for tau² < 1): compare at 1e-9
        assert b.tau2 == pytest.approx(a.tau2, rel=1e-8, abs=1e-9)
        assert b.i2 == pytest.approx(a.i2, rel=1e-10, abs=1e-10)
    for row in fast.rows[::60]:
        keep = np.arange(d.k) != row.index
        ref = random_effects(d.y[keep], d.se[keep] ** 2, method=method, hksj=True)
        assert row.random.estimate == pytest.approx(ref.estimate, rel=1e-9, abs=1e-12)
        assert row.tau2 == pytest.approx(ref.tau2, rel=1e-8, abs=1e-9)


def test_large_leave_one_out_with_one_dominant_study(monkeypatch):
    # one study with nearly all the weight: sums over the others are formed without
    # subtracting it (no cancellation); checked against pooling the subset directly
    import lopside.stats.sensitivity as sens

    d = _heterogeneous(150, 0.02, seed=3)
    se = d.se.copy()
    se[7] = 1e-5
    d = StudyData.from_arrays("OR", d.y, se, labels=d.labels)
    monkeypatch.setattr(sens, "LARGE_K", 100)
    fast = leave_one_out(d, tau2_method="REML")
    keep = np.arange(d.k) != 7
    ref = random_effects(d.y[keep], d.se[keep] ** 2, method="REML")
    assert fast.rows[7].random.estimate == pytest.approx(ref.estimate, rel=1e-9)
    assert fast.rows[7].tau2 == pytest.approx(ref.tau2, rel=1e-8)
    ref_fe = fixed_effect(d.y[keep], d.se[keep] ** 2)
    assert fast.rows[7].fixed.estimate == pytest.approx(ref_fe.estimate, rel=1e-12)


def test_large_cumulative_is_shown_at_chosen_steps_with_the_same_numbers(monkeypatch):
    # each shown step equals the same step of the full analysis; the result says it is thinned
    import lopside.stats.sensitivity as sens

    d = _heterogeneous(400, 0.05, seed=8)
    full = cumulative(d)
    monkeypatch.setattr(sens, "LARGE_K", 100)
    monkeypatch.setattr(sens, "CUMULATIVE_MORE_STEPS", 40)
    thin = cumulative(d)
    assert full.note == "" and len(full.steps) == d.k
    assert "not after every study" in thin.note
    ks = [s.k for s in thin.steps]
    assert ks[:50] == list(range(1, 51)) and ks[-1] == d.k and len(ks) < d.k
    assert ks == sorted(set(ks))
    for s in thin.steps:
        ref = full.steps[s.k - 1]
        assert s.added == ref.added and s.index == ref.index
        assert s.random.estimate == pytest.approx(ref.random.estimate, rel=1e-12)
        # blocks of other rows sum in another order: the last digit may differ
        assert s.fixed.estimate == pytest.approx(ref.fixed.estimate, rel=1e-14)
