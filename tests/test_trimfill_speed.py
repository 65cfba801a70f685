"""Trim and fill made faster (issue 16): the same numbers as before at or below the
large-review threshold; above it, close to them, with a note saying what was done
another way.

* At or below ``sensitivity.LARGE_K`` studies every field of the result is compared bit
  for bit with the former code (tests/trimfill_before.py, commit d6e8c31) on seeded
  invented reviews, every estimator, side, model and tau² estimator.
* Above it (forced by lowering the threshold, as tests/test_full_stage_large.py does),
  REML tau² is found by Newton steps from a neighbouring subset's value. With the former
  code's tau² taken to the root of the score (brentq), every number agrees to 1e-9
  (estimates relative to their SE); with the former code as it is, tau² agrees to 1e-9
  (its own stopping rule) and the estimates to 1e-7 of their SE. The note says so.
* The merged ranking used while trimming is checked against scipy.stats.rankdata
  (average ranks for exact ties) through k0_statistic, and bit for bit against the
  former k0_statistic.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest

import lopside.stats.sensitivity as sens
import trimfill_before as before
from lopside.stats import pooling
from lopside.stats.adjust_trimfill import _k0_around, k0_statistic, trim_and_fill
from lopside.stats.data import StudyData
from lopside.stats.results import NotComputable

COMBOS = [
    (est, tm, fm) for est in ("L0", "R0") for tm, fm in (("FE", "FE"), ("FE", "RE"), ("RE", "RE"))
]


def _review(seed: int, k: int, slope: float | None = None):
    """An invented review with small-study effects, ties and copied rows."""
    rng = np.random.default_rng(seed)
    se = rng.uniform(0.06, 0.6, k)
    tau2 = float(rng.choice([0.0, 0.03, 0.3]))
    if slope is None:
        slope = float(rng.choice([-1.5, -0.5, 0.0, 0.8]))
    y = rng.normal(-0.2 + slope * se, np.sqrt(se**2 + tau2))
    for _ in range(int(rng.integers(0, 4))):  # copies and near copies of rows
        i, j = (int(x) for x in rng.integers(0, k, 2))
        y[j] = y[i] * (1.0 + float(rng.choice([0.0, 1e-13, 1e-11])))
        se[j] = se[i]
    if rng.random() < 0.3:  # coarse rounding: many exact ties
        y = np.round(y, 1)
    return StudyData.from_arrays("MD", y, se)


def _flat(obj, path="r"):
    """Every leaf of a (nested) result, floats by their exact value (repr)."""
    if dataclasses.is_dataclass(obj):
        out = {}
        for f in dataclasses.fields(obj):
            out.update(_flat(getattr(obj, f.name), f"{path}.{f.name}"))
        return out
    if isinstance(obj, tuple | list):
        out = {f"{path}#len": len(obj)}
        for i, x in enumerate(obj):
            out.update(_flat(x, f"{path}[{i}]"))
        return out
    if isinstance(obj, float | np.floating):
        return {path: repr(float(obj))}
    return {path: repr(obj)}


CASES = [(seed, k) for seed, k in enumerate((3, 4, 5, 8, 13, 30, 30, 60, 120, 250, 500))]


@pytest.mark.parametrize(("seed", "k"), CASES)
def test_bit_for_bit_with_the_former_code_up_to_large_k(seed, k):
    data = _review(seed, k)
    for est, tm, fm in COMBOS:
        for side in ("auto", "left", "right"):
            for method in ("DL", "PM", "REML"):
                kw = dict(
                    estimator=est, side=side, trim_model=tm, fill_model=fm, tau2_method=method
                )
                old = before.trim_and_fill(data, **kw)
                new = trim_and_fill(data, **kw)
                assert type(new).__name__ == type(old).__name__, kw
                assert _flat(new) == _flat(old), kw


@pytest.mark.parametrize("seed", [3, 7])
def test_bit_for_bit_inside_one_analysis_memo(seed):
    # Inside reuse_tau2 (as analyse() runs it) tau² is asked of the entered estimates, so
    # the all-study value comes from the memo; the numbers must not move.
    data = _review(seed, 200)
    for est, tm, fm in COMBOS:
        old = before.trim_and_fill(data, estimator=est, side="right", trim_model=tm, fill_model=fm)
        with pooling.reuse_tau2():
            pooling.random_effects(data.y, data.v)
            new = trim_and_fill(data, estimator=est, side="right", trim_model=tm, fill_model=fm)
        assert _flat(new) == _flat(old)


def _near(x, y, tol, scale=0.0):
    return abs(x - y) <= tol * max(abs(y), scale)


def _close_tau2(new, old):
    # the former REML stops when its scoring steps fall below 1e-10·max(1, tau²), so it is
    # itself about that far from the root (more where scoring converges slowly); the warm
    # path solves the score equation to rounding (checked against brentq below)
    return abs(new - old) <= max(1e-9 * abs(old), 1e-9)


def _polished_tau2(exact):
    """estimate_tau2 whose REML value is the root of the score to rounding (brentq)."""
    from scipy.optimize import brentq

    from lopside.stats.tau2 import Tau2Estimate, _reml_score

    def estimate(y, v, method):
        est = exact(y, v, method)
        if method != "REML" or est.tau2 == 0.0:
            return est
        y, v = np.asarray(y, float), np.asarray(v, float)
        lo, hi = 0.9 * est.tau2, 1.1 * est.tau2
        assert _reml_score(y, v, lo) > 0 > _reml_score(y, v, hi)
        root = brentq(lambda t, y=y, v=v: _reml_score(y, v, t), lo, hi, xtol=1e-300, rtol=1e-15)
        return Tau2Estimate("REML", float(root), est.converged, est.iterations, est.note)

    return estimate


@pytest.mark.parametrize("polished", [True, False])
@pytest.mark.parametrize("seed", range(6))
def test_large_path_agrees_with_the_exact_path(monkeypatch, seed, polished):
    # Threshold lowered to 100: the warm-started REML path runs at 150-400 studies and is
    # compared with the former code (REML from the DerSimonian-Laird start, grid each time).
    # polished: the former code's REML tau² taken to the root of the score (brentq), as
    # the warm path's Newton steps take it: everything agrees to 1e-9 (estimates relative
    # to their SE). As it is: tau² to 1e-9 (its stopping rule), the rest within what a
    # change of tau² that small moves (estimates 1e-7 SE, p-values 1e-5 relative).
    import lopside.stats.adjust_trimfill as tf

    monkeypatch.setattr(sens, "LARGE_K", 100)
    if polished:
        est_tau2 = _polished_tau2(pooling.estimate_tau2)
        monkeypatch.setattr(pooling, "estimate_tau2", est_tau2)
        monkeypatch.setattr(tf, "estimate_tau2", est_tau2)
    tol, p_tol = (1e-9, 1e-9) if polished else (1e-7, 1e-5)
    k = (150, 220, 300, 400, 180, 260)[seed]
    data = _review(100 + seed, k, slope=(-1.5, 1.0)[seed % 2])  # a lean: studies to fill
    seen_note = False
    for est, tm, fm in COMBOS:
        kw = dict(estimator=est, trim_model=tm, fill_model=fm)
        old = before.trim_and_fill(data, **kw)
        new = trim_and_fill(data, **kw)
        if isinstance(old, NotComputable):
            assert isinstance(new, NotComputable) and new.reason == old.reason
            continue
        assert (new.k0, new.k0_history, new.side, new.iterations) == (
            old.k0,
            old.k0_history,
            old.side,
            old.iterations,
        ), kw
        se = old.adjusted.se
        assert _near(new.centre, old.centre, tol, se)
        for a, b in ((new.adjusted, old.adjusted), (new.original, old.original)):
            assert (a.tau2 is None) == (b.tau2 is None)
            if a.tau2 is not None:
                assert _close_tau2(a.tau2, b.tau2), (kw, a.tau2, b.tau2)
                if polished:
                    assert _near(a.tau2, b.tau2, 1e-9), (kw, a.tau2, b.tau2)
            for x, y in zip((a.estimate, *a.ci), (b.estimate, *b.ci)):
                assert _near(x, y, tol, se), (kw, x, y)
            assert _near(a.se, b.se, tol) and _near(a.statistic, b.statistic, tol)
            assert _near(a.pvalue, b.pvalue, p_tol), (kw, a.pvalue, b.pvalue)
            assert np.allclose(a.weights, b.weights, rtol=tol, atol=0)
            assert (a.converged, a.note, a.k, a.model) == (b.converged, b.note, b.k, b.model)
        for f_new, f_old in zip(new.filled, old.filled):
            assert f_new.se == f_old.se and f_new.mirrored_from == f_old.mirrored_from
            assert _near(f_new.y, f_old.y, tol, se)
        warm = (tm == "RE" and new.iterations > 1) or (fm == "RE" and new.k0 > 0)
        assert ("more than 100" in new.note) == warm, (kw, new.note)
        assert new.note.startswith(old.note)
        seen_note |= warm
    assert seen_note  # the lowered threshold did reach the warm path


def test_large_path_unchanged_for_fixed_effect_and_other_tau2(monkeypatch):
    # The warm starts are for REML only: FE/FE and DL/PM stay bit for bit above the threshold.
    monkeypatch.setattr(sens, "LARGE_K", 100)
    data = _review(42, 300)
    for est, tm, fm in COMBOS:
        for method in ("DL", "PM", "REML"):
            if method == "REML" and "RE" in (tm, fm):
                continue
            kw = dict(estimator=est, trim_model=tm, fill_model=fm, tau2_method=method)
            assert _flat(trim_and_fill(data, **kw)) == _flat(before.trim_and_fill(data, **kw))


def test_k0_statistic_against_scipy_rankdata_with_ties():
    # L0 = [4 T_n - n(n+1)]/(2n - 1), T_n the sum of the average ranks (scipy.stats.rankdata,
    # method "average") of |x| over positive x (Duval & Tweedie 2000, from memory).
    from scipy.stats import rankdata

    rng = np.random.default_rng(5)
    for _ in range(200):
        n = int(rng.integers(3, 60))
        x = np.round(rng.normal(0.2, 1.0, n), 1)  # many exact ties in |x|
        r = rankdata(np.abs(x), method="average")
        t_n = float(r[x > 0].sum())
        expected = (4 * t_n - n * (n + 1)) / (2 * n - 1)
        raw, k0 = k0_statistic(x, "L0")
        assert raw == pytest.approx(expected, abs=1e-12)
        assert k0 == max(0, math.floor(expected + 0.5))


def test_merged_ranking_bit_for_bit_with_the_former_k0_statistic():
    rng = np.random.default_rng(9)
    for _ in range(300):
        n = int(rng.integers(1, 80))
        y = rng.normal(0.0, 1.0, n)
        if rng.random() < 0.5:
            y = np.round(y, 1)
        c = float(rng.choice([y[int(rng.integers(0, n))], rng.normal(), 0.0]))
        ys = np.sort(y)
        for est in ("L0", "R0"):
            assert _k0_around(ys, c, est) == before.k0_statistic(y - c, est)
            assert k0_statistic(y - c, est) == before.k0_statistic(y - c, est)


def test_warm_reml_is_the_root_of_the_score_and_tau2_reml_within_its_tolerance():
    # reml_from solves the REML score equation; scipy.optimize.brentq on the same score
    # (tau2._reml_score, itself checked against statsmodels in tests/test_pooling.py)
    # gives the root to 1e-15; tau2_reml (DerSimonian-Laird start, scoring, grid) within
    # its stopping rule.
    from scipy.optimize import brentq

    from lopside.stats.tau2 import _reml_score, tau2_reml
    from lopside.stats.trimfill_tau2 import reml_from

    rng = np.random.default_rng(11)
    checked = 0
    for _ in range(60):
        k = int(rng.integers(5, 400))
        se = rng.uniform(0.05, 0.8, k)
        y = rng.normal(0.0, np.sqrt(se**2 + float(rng.choice([0.0, 0.002, 0.05, 0.5]))))
        v = se**2
        exact = tau2_reml(y, v).tau2
        for start in (0.0, 0.5 * exact, 1.5 * exact + 1e-3):
            for grid in (False, True):
                got = reml_from(y, v, start, grid=grid).tau2
                assert _close_tau2(got, exact), (k, start, got, exact)
        got = reml_from(y, v, exact, grid=True).tau2
        if got > 0:
            lo, hi = 0.5 * got, 2.0 * got
            if _reml_score(y, v, lo) > 0 > _reml_score(y, v, hi):
                root = brentq(
                    lambda t, y=y, v=v: _reml_score(y, v, t), lo, hi, xtol=1e-300, rtol=1e-15
                )
                assert got == pytest.approx(root, rel=1e-12)
                checked += 1
        else:
            assert _reml_score(y, v, 0.0) <= 0  # a maximum at the boundary
    assert checked > 20


def test_settings_that_differ_in_the_fill_model_trim_once_in_an_analysis(monkeypatch):
    """Trimming does not depend on the fill model (Duval & Tweedie 2000: the fill model
    only pools the filled data), so within one analysis trim FE / fill FE and trim FE /
    fill RE trim once; each result equals trim and fill run on its own, outside any
    analysis (no memo)."""
    import lopside.stats.adjust_trimfill as tf
    from lopside.stats.data import StudyData
    from lopside.stats.tau2 import reuse_tau2

    rng = np.random.default_rng(3)
    se = rng.uniform(0.1, 0.6, 40)
    y = rng.normal(-0.3 - 0.8 * se, np.sqrt(se**2 + 0.02))
    data = StudyData.from_arrays("OR", y, se)
    calls = []
    real = tf._trim
    monkeypatch.setattr(tf, "_trim", lambda *a, **k: calls.append(a[3:5]) or real(*a, **k))
    settings = [(e, t, f) for e in ("L0", "R0") for t, f in (("FE", "FE"), ("FE", "RE"))]
    with reuse_tau2():
        shared = [
            tf.trim_and_fill(data, estimator=e, trim_model=t, fill_model=f) for e, t, f in settings
        ]
    assert sorted(calls) == [("L0", "FE"), ("R0", "FE")]
    alone = [
        tf.trim_and_fill(data, estimator=e, trim_model=t, fill_model=f) for e, t, f in settings
    ]
    assert len(calls) == 2 + len(settings)  # outside an analysis nothing is kept
    assert shared == alone
    assert any(r.k0 > 0 for r in shared)  # the data did need filling
