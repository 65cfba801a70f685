"""Mantel-Haenszel and Peto pooling of 2x2 tables (lopside.stats.binary).

References: statsmodels.stats.contingency_tables.StratifiedTable (MH OR and the
Robins-Breslow-Greenland SE, MH RR point estimate), Table2x2 (single-table limits),
scipy.stats.hypergeom (Peto's O - E and V), scipy.stats.norm (intervals and P), and the
Greenland & Robins 1985 variance formulas written out independently below (from memory).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats
from statsmodels.stats.contingency_tables import StratifiedTable, Table2x2

from lopside.stats.binary import mantel_haenszel, peto, peto_study
from lopside.stats.results import NotComputable, PooledEstimate


def _random_set(rng, k, *, zeros=True):
    """k random 2x2 tables (a, b, c, d); with ``zeros`` some cells may be 0."""
    n1 = rng.integers(2, 300, size=k)
    n0 = rng.integers(2, 300, size=k)
    risk1 = rng.uniform(0.0 if zeros else 0.05, 0.6, size=k)
    risk0 = rng.uniform(0.0 if zeros else 0.05, 0.6, size=k)
    a = rng.binomial(n1, risk1)
    c = rng.binomial(n0, risk0)
    if not zeros:
        a = np.clip(a, 1, n1 - 1)
        c = np.clip(c, 1, n0 - 1)
    return (x.astype(float) for x in (a, n1 - a, c, n0 - c))


def _stratified(a, b, c, d):
    return StratifiedTable([np.array([[a[i], b[i]], [c[i], d[i]]]) for i in range(len(a))])


def _gr_rr(a, b, c, d):
    """Greenland & Robins 1985 MH log RR and its variance, written as plain loops."""
    num = den = var_num = 0.0
    for ai, bi, ci, di in zip(a, b, c, d, strict=True):
        n1, n0 = ai + bi, ci + di
        n = n1 + n0
        num += ai * n0 / n
        den += ci * n1 / n
        var_num += (n1 * n0 * (ai + ci) - ai * ci * n) / n**2
    return math.log(num / den), var_num / (num * den)


def _gr_rd(a, b, c, d):
    """Greenland & Robins 1985 MH risk difference and its variance, as plain loops."""
    num = wsum = var_num = 0.0
    for ai, bi, ci, di in zip(a, b, c, d, strict=True):
        n1, n0 = ai + bi, ci + di
        n = n1 + n0
        num += (ai * n0 - ci * n1) / n
        wsum += n1 * n0 / n
        var_num += (ai * bi * n0**3 + ci * di * n1**3) / (n1 * n0 * n**2)
    return num / wsum, var_num / wsum**2


# ------------------------------------------------------------------------------------
# Mantel-Haenszel odds ratio


def test_mh_or_against_statsmodels_stratified_table():
    # statsmodels StratifiedTable.oddsratio_pooled and .logodds_pooled_se (Robins,
    # Breslow & Greenland 1986) on many random sets, zero cells allowed.
    rng = np.random.default_rng(11)
    checked = 0
    for _ in range(300):
        a, b, c, d = _random_set(rng, int(rng.integers(1, 16)))
        ref = _stratified(a, b, c, d)
        if not (np.sum(a * d / (a + b + c + d)) > 0 and np.sum(b * c / (a + b + c + d)) > 0):
            continue
        out = mantel_haenszel(a, b, c, d, "OR")
        assert isinstance(out, PooledEstimate), out
        assert out.model == "MH"
        assert math.exp(out.estimate) == pytest.approx(ref.oddsratio_pooled, rel=1e-10)
        assert out.se == pytest.approx(ref.logodds_pooled_se, rel=1e-10)
        checked += 1
    assert checked > 250


def test_mh_or_single_table_is_woolf():
    # One table: the MH OR is the table's OR and the RBG variance reduces to
    # 1/a + 1/b + 1/c + 1/d (Robins, Breslow & Greenland 1986, from memory; values from
    # statsmodels Table2x2).
    ref = Table2x2(np.array([[12.0, 38.0], [20.0, 30.0]]), shift_zeros=False)
    out = mantel_haenszel([12], [38], [20], [30], "OR")
    assert out.estimate == pytest.approx(ref.log_oddsratio)
    assert out.se == pytest.approx(ref.log_oddsratio_se)


# ------------------------------------------------------------------------------------
# Mantel-Haenszel risk ratio and risk difference


def test_mh_rr_point_against_statsmodels_and_variance_against_greenland_robins():
    # statsmodels StratifiedTable.riskratio_pooled (present in the installed version; it
    # has no SE) for the estimate; Greenland & Robins 1985 variance written independently
    # in _gr_rr (from memory).
    has_rr = hasattr(StratifiedTable, "riskratio_pooled")  # present in statsmodels 0.15
    rng = np.random.default_rng(12)
    checked = 0
    for _ in range(300):
        a, b, c, d = _random_set(rng, int(rng.integers(1, 16)))
        if a.sum() == 0 or c.sum() == 0:
            continue
        out = mantel_haenszel(a, b, c, d, "RR")
        assert isinstance(out, PooledEstimate), out
        if has_rr:
            ref = _stratified(a, b, c, d)
            assert math.exp(out.estimate) == pytest.approx(ref.riskratio_pooled, rel=1e-10)
        y, var = _gr_rr(a, b, c, d)
        assert out.estimate == pytest.approx(y, rel=1e-12, abs=1e-14)
        assert out.se == pytest.approx(math.sqrt(var), rel=1e-10)
        checked += 1
    assert checked > 250


def test_mh_rr_single_table_reduces_to_log_rr_variance():
    # One table: the Greenland-Robins variance reduces to 1/a - 1/n1 + 1/c - 1/n0,
    # the usual log RR variance (statsmodels Table2x2.log_riskratio_se).
    ref = Table2x2(np.array([[9.0, 41.0], [17.0, 35.0]]), shift_zeros=False)
    out = mantel_haenszel([9], [41], [17], [35], "RR")
    assert out.estimate == pytest.approx(ref.log_riskratio)
    assert out.se == pytest.approx(ref.log_riskratio_se)


def test_mh_rd_against_greenland_robins():
    # Greenland & Robins 1985 MH risk difference and variance (from memory), written
    # independently in _gr_rd; double-zero studies stay in (weights n1 n0 / N).
    rng = np.random.default_rng(13)
    for _ in range(200):
        a, b, c, d = _random_set(rng, int(rng.integers(1, 16)))
        out = mantel_haenszel(a, b, c, d, "RD")
        y, var = _gr_rd(a, b, c, d)
        if var == 0:
            assert isinstance(out, NotComputable)
            continue
        assert out.estimate == pytest.approx(y, rel=1e-12, abs=1e-14)
        assert out.se == pytest.approx(math.sqrt(var), rel=1e-10)
        assert out.k == len(a)
        w = (a + b) * (c + d) / (a + b + c + d)
        assert np.allclose(out.weights, 100 * w / w.sum())


def test_mh_rd_single_table_is_wald():
    # One table: the MH RD variance reduces to p1 q1 / n1 + p0 q0 / n0 (Wald; common
    # practice).
    out = mantel_haenszel([10], [30], [20], [25], "RD")
    p1, p0 = 10 / 40, 20 / 45
    assert out.estimate == pytest.approx(p1 - p0)
    assert out.se == pytest.approx(math.sqrt(p1 * (1 - p1) / 40 + p0 * (1 - p0) / 45))


# ------------------------------------------------------------------------------------
# common behaviour


@pytest.mark.parametrize("measure", ["OR", "RR", "RD"])
def test_interval_and_p_from_normal(measure):
    # scipy.stats.norm: CI = est +/- z_{1-alpha/2} SE, P = 2 (1 - Phi(|z|)).
    a, b, c, d = [5, 12, 3, 20], [45, 88, 47, 180], [11, 20, 9, 31], [39, 80, 41, 169]
    for level in (0.90, 0.95, 0.99):
        out = mantel_haenszel(a, b, c, d, measure, confidence_level=level)
        q = stats.norm.ppf(0.5 + level / 2)
        assert out.ci.low == pytest.approx(out.estimate - q * out.se, rel=1e-12)
        assert out.ci.high == pytest.approx(out.estimate + q * out.se, rel=1e-12)
        assert out.statistic == pytest.approx(out.estimate / out.se)
        assert out.pvalue == pytest.approx(2 * stats.norm.sf(abs(out.statistic)), rel=1e-10)
        assert out.confidence_level == level
        assert sum(out.weights) == pytest.approx(100.0)


def test_zero_cells_need_no_correction_and_double_zero_is_dropped():
    # methods.md section 2.2: MH needs no zero-cell correction; a study adding 0 to both
    # sums is left out. Reference: statsmodels StratifiedTable without shift_zeros.
    a = np.array([0.0, 4, 7, 0])
    b = np.array([25.0, 21, 43, 30])
    c = np.array([3.0, 9, 12, 0])
    d = np.array([22.0, 16, 38, 30])
    out = mantel_haenszel(a, b, c, d, "OR")
    ref = _stratified(a, b, c, d)
    assert math.exp(out.estimate) == pytest.approx(ref.oddsratio_pooled, rel=1e-12)
    assert out.se == pytest.approx(ref.logodds_pooled_se, rel=1e-12)
    assert out.k == 3 and out.weights[3] == 0.0 and "1 study left out" in out.note
    without = mantel_haenszel(a[:3], b[:3], c[:3], d[:3], "OR")
    assert out.estimate == pytest.approx(without.estimate)
    assert out.se == pytest.approx(without.se)
    rr = mantel_haenszel(a, b, c, d, "RR")
    assert rr.k == 3 and "no events in either arm" in rr.note


def test_not_computable_cases():
    # all tables double-zero: no ratio can be estimated (common practice)
    out = mantel_haenszel([0, 0], [10, 20], [0, 0], [12, 22], "OR")
    assert isinstance(out, NotComputable) and "risk difference" in out.reason
    out = mantel_haenszel([0, 0], [10, 20], [3, 1], [12, 22], "RR")
    assert isinstance(out, NotComputable) and "intervention arm" in out.reason
    assert isinstance(mantel_haenszel([1], [2], [3], [4], "HR"), NotComputable)
    bad = mantel_haenszel([1, -1], [2, 3], [3, 3], [4, 4], "OR")
    assert isinstance(bad, NotComputable) and "study 2" in bad.reason
    assert isinstance(mantel_haenszel([1, 2], [2], [3], [4], "OR"), NotComputable)
    assert isinstance(mantel_haenszel([], [], [], [], "OR"), NotComputable)
    assert isinstance(mantel_haenszel([0], [0], [1], [2], "OR"), NotComputable)
    assert isinstance(peto([0, 0], [5, 5], [0, 0], [5, 5]), NotComputable)
    with pytest.raises(ValueError, match="confidence_level"):
        mantel_haenszel([1], [2], [3], [4], "OR", confidence_level=95)


# ------------------------------------------------------------------------------------
# Peto


def _hypergeom_parts(a, b, c, d):
    """O - E and V of the intervention-arm event count, from scipy.stats.hypergeom."""
    o_e, v = [], []
    for ai, bi, ci, di in zip(a, b, c, d, strict=True):
        n1 = int(ai + bi)
        total = int(ai + bi + ci + di)
        events = int(ai + ci)
        dist = stats.hypergeom(total, events, n1)  # population, successes, draws
        o_e.append(ai - dist.mean())
        v.append(dist.var())
    return np.array(o_e), np.array(v)


def test_peto_against_hypergeometric_moments():
    # Yusuf et al. 1985: ln OR = sum(O - E) / sum(V), SE = 1/sqrt(sum V), with E and V
    # the hypergeometric mean and variance (scipy.stats.hypergeom).
    rng = np.random.default_rng(14)
    for _ in range(100):
        a, b, c, d = _random_set(rng, int(rng.integers(1, 12)))
        o_e, v = _hypergeom_parts(a, b, c, d)
        out = peto(a, b, c, d)
        if v.sum() == 0:
            assert isinstance(out, NotComputable)
            continue
        assert out.model == "Peto"
        assert out.estimate == pytest.approx(o_e.sum() / v.sum(), rel=1e-10, abs=1e-13)
        assert out.se == pytest.approx(1 / math.sqrt(v.sum()), rel=1e-10)
        assert out.k == int((v > 0).sum())
        assert np.allclose(out.weights, 100 * v / v.sum())
        y, se = peto_study(a, b, c, d)
        ok = v > 0
        assert np.allclose(y[ok], o_e[ok] / v[ok], rtol=1e-10, atol=1e-13)
        assert np.allclose(se[ok], 1 / np.sqrt(v[ok]), rtol=1e-10)
        assert np.all(np.isnan(y[~ok])) and np.all(np.isnan(se[~ok]))


def test_peto_close_to_mh_for_balanced_small_effects():
    # Bradburn et al. 2007 (from memory): Peto's OR is close to the MH OR when arms are
    # balanced and the effect is modest. Balanced arms, true OR about 0.8.
    a, b = np.array([20.0, 30, 25]), np.array([180.0, 270, 225])
    c, d = np.array([24.0, 37, 30]), np.array([176.0, 263, 220])
    mh = mantel_haenszel(a, b, c, d, "OR")
    pt = peto(a, b, c, d)
    assert abs(pt.estimate - mh.estimate) < 0.01


# ------------------------------------------------------------------------------------
# never raises on odd arrays


_count = st.one_of(
    st.integers(min_value=-2, max_value=50),
    st.floats(allow_nan=True, allow_infinity=True),
)


def test_extreme_counts_do_not_raise():
    # found by hypothesis: a sum of 1e-162 squared underflows to 0 in plain floats
    for cells in (
        ([1], [1], [6.4e161], [1]),
        ([1], [1], [1], [6.4e161]),
        ([1e300], [1e300], [1e300], [1e300]),
    ):
        for measure in ("OR", "RR", "RD"):
            out = mantel_haenszel(*cells, measure)
            assert isinstance(out, (PooledEstimate, NotComputable))
        assert isinstance(peto(*cells), (PooledEstimate, NotComputable))


@settings(max_examples=500, deadline=None)
@given(
    cells=st.lists(st.tuples(_count, _count, _count, _count), min_size=0, max_size=8),
    measure=st.sampled_from(["OR", "RR", "RD", "HR"]),
)
def test_pooling_never_raises(cells, measure):
    cols = [np.array([t[j] for t in cells], dtype=float) for j in range(4)]
    for out in (mantel_haenszel(*cols, measure), peto(*cols)):
        assert isinstance(out, (PooledEstimate, NotComputable))
        if isinstance(out, PooledEstimate):
            assert math.isfinite(out.estimate) and math.isfinite(out.se) and out.se > 0
            assert 0 <= out.pvalue <= 1
            assert all(math.isfinite(w) for w in out.weights)
        else:
            assert out.reason
