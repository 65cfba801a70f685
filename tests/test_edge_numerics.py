"""Numerical edge cases through the whole analysis: never an exception, never NaN shown.

Every review below goes through :func:`lopside.analysis.analyse` (power simulation
included for some). The result must serialise with ``json.dumps(..., allow_nan=False)``,
no float in the dataclasses the user sees may be NaN or infinite (the study arrays in
``result.data`` are internal and use NaN for "not entered", as documented there), and
the plain-text summary must not print "nan" or "inf". Where a case has a known answer,
it is checked against a source outside the engine (cited beside the check). All studies
are INVENTED.

Regression tests for the numerical fixes made here close the file: each compares with
exact rational arithmetic (Python's fractions) on the same floating-point inputs.
"""

from __future__ import annotations

import dataclasses
import json
import math
import re
from fractions import Fraction

import numpy as np
import pytest
from scipy import stats
from scipy.special import gamma

from lopside.analysis import analyse
from lopside.model.review import PublishedResult, Review, ReviewDetails, StudyRow
from lopside.report import to_json
from lopside.settings import AnalysisSettings
from lopside.stats import asymmetry as asy
from lopside.stats.adjust import limit_meta_analysis
from lopside.stats.adjust_wls import wls
from lopside.stats.data import StudyData
from lopside.stats.results import NotComputable, PooledEstimate
from lopside.summary import text_summary

QUICK = AnalysisSettings(power_reps=200)


def _review(rows, measure="MD", **details) -> Review:
    return Review(
        details=ReviewDetails(title="Invented edge case", measure=measure, **details),
        studies=tuple(rows),
    )


def _se_rows(ys, ses, **kw):
    return [
        StudyRow(study=f"Invented {i + 1}", estimate=y, se=s, **kw)
        for i, (y, s) in enumerate(zip(ys, ses))
    ]


def _counts(cells, **kw):
    return [
        StudyRow(
            study=f"Invented {i + 1}", int_events=a, int_total=n1, ctl_events=c, ctl_total=n0, **kw
        )
        for i, (a, n1, c, n0) in enumerate(cells)
    ]


CASES: dict[str, Review] = {
    "empty review": _review([]),
    "k = 1": _review(_se_rows([0.4], [0.2])),
    "k = 2": _review(_se_rows([0.4, 0.1], [0.2, 0.1])),
    "k = 3": _review(_se_rows([0.4, 0.1, 0.3], [0.2, 0.1, 0.3])),
    "all SEs equal": _review(_se_rows([0.1, 0.5, 0.9, 0.2, 0.4, 0.8, 0.3], [0.2] * 7)),
    "identical estimates": _review(_se_rows([0.5] * 7, [0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7])),
    "identical studies": _review(_se_rows([0.5] * 6, [0.2] * 6)),
    "tau2 = 0": _review(
        _se_rows([0.50, 0.51, 0.49, 0.50, 0.52, 0.48], [0.2, 0.3, 0.25, 0.4, 0.5, 0.35])
    ),
    "tiny SEs (1e-8)": _review(
        _se_rows([0.1, 0.2, 0.3, 0.15, 0.25], [1e-8, 2e-8, 3e-8, 1e-8, 5e-8])
    ),
    "huge SEs (1e4)": _review(_se_rows([0.1, 0.2, 0.3, 0.15, 0.25], [1e4, 2e4, 3e3, 1e4, 5e3])),
    "SEs from 1e-8 to 1e4": _review(
        _se_rows([0.1, 0.2, 0.3, 0.15, 0.25, 0.4], [1e-8, 1e4, 1e-3, 1.0, 10.0, 1e2])
    ),
    "one SE 1e-8 among ratios": _review(
        [StudyRow(study="Invented 1", estimate=3.0, se=1e-8)]
        + _se_rows([1.0, 0.08, 1.3], [1e4, 1.5, 0.7]),
        measure="OR",
    ),
    "zero cells OR": _review(
        _counts([(0, 20, 3, 20), (2, 30, 5, 30), (1, 40, 4, 40), (5, 50, 0, 50)]), "OR"
    ),
    "zero cells RR": _review(
        _counts([(0, 20, 3, 20), (2, 30, 5, 30), (1, 40, 4, 40), (5, 50, 0, 50)]), "RR"
    ),
    "double zero OR": _review(
        _counts([(0, 15, 0, 15), (2, 30, 5, 30), (1, 40, 4, 40), (0, 10, 0, 12)]), "OR"
    ),
    "double zero RD": _review(
        _counts([(0, 15, 0, 15), (2, 30, 5, 30), (1, 40, 4, 40), (0, 10, 0, 12)]), "RD"
    ),
    "all double zero OR": _review(_counts([(0, 10, 0, 10)] * 4), "OR"),
    "all double zero RD": _review(_counts([(0, 10, 0, 10)] * 4), "RD"),
    "every participant had the event": _review(_counts([(10, 10, 10, 10)] * 4), "RR"),
    "SMD with n = 2 per arm": _review(
        [
            StudyRow(
                study=f"Invented {i}",
                int_mean=1 + 0.2 * i,
                int_sd=1.0,
                int_n=2,
                ctl_mean=0.5,
                ctl_sd=1.2,
                ctl_n=2,
            )
            for i in range(5)
        ],
        "SMD",
    ),
    "SMD with both SDs 0": _review(
        [
            StudyRow(
                study=f"Invented {i}", int_mean=1, int_sd=0, int_n=2, ctl_mean=1, ctl_sd=0, ctl_n=2
            )
            for i in range(4)
        ],
        "SMD",
    ),
    "CIs at 90 %": _review(
        [
            StudyRow(study=f"Invented {i}", estimate=0.8, lower=0.6, upper=1.1 + 0.1 * i)
            for i in range(6)
        ],
        "OR",
        ci_level=90.0,
    ),
    "CIs at 99 %": _review(
        [
            StudyRow(study=f"Invented {i}", estimate=0.8, lower=0.6, upper=1.1 + 0.1 * i)
            for i in range(6)
        ],
        "OR",
        ci_level=99.0,
    ),
    "rows at 90 % and 99 %": _review(
        [
            StudyRow(
                study=f"Invented {i}",
                estimate=0.8,
                lower=0.6,
                upper=1.1 + 0.1 * i,
                level=(90.0, 99.0)[i % 2],
            )
            for i in range(6)
        ],
        "OR",
    ),
    "all studies excluded": _review(_se_rows([0.5, 0.2, 0.3], [0.1, 0.2, 0.3], exclude=True)),
    "no usable rows": _review([StudyRow(study=f"Invented {i}") for i in range(4)]),
    "typing errors beyond range": _review(
        _se_rows([0.5, 1e300, 0.2, 0.3], [1e-300, 0.1, 0.2, 1e300]) + _se_rows([0.1], [0.2])
    ),
    "subgroups of one study each": _review(
        [
            StudyRow(
                study=f"Invented {i}",
                estimate=0.1 * i,
                se=0.1 + 0.05 * i,
                subgroup=f"g{i}",
                risk_of_bias=("low", "high")[i % 2],
            )
            for i in range(4)
        ]
    ),
    "published result with k = 1": _review(
        _se_rows([0.4], [0.2]), published=PublishedResult(0.4, 0.0, 0.8, "fixed")
    ),
}
WITH_POWER = {
    "k = 3",
    "all SEs equal",
    "SEs from 1e-8 to 1e4",
    "zero cells OR",
    "SMD with n = 2 per arm",
    "double zero RD",
    "all double zero OR",
}


def _non_finite(obj, path="result", seen=None) -> list[str]:
    """Paths of NaN/infinite floats in what the user sees (result.data is internal)."""
    seen = set() if seen is None else seen
    out: list[str] = []
    if isinstance(obj, (float, np.floating)):
        return [] if math.isfinite(float(obj)) else [path]
    if isinstance(obj, np.ndarray):
        if obj.dtype.kind in "fc":
            return [f"{path}[{i}]" for i in np.flatnonzero(~np.isfinite(obj))[:3]]
        if obj.dtype == object:
            for i, v in enumerate(obj.tolist()):
                out += _non_finite(v, f"{path}[{i}]", seen)
        return out
    if id(obj) in seen or callable(obj) and not dataclasses.is_dataclass(obj):
        return out
    seen.add(id(obj))
    if dataclasses.is_dataclass(obj) and not isinstance(obj, type):
        for f in dataclasses.fields(obj):
            if path == "result" and f.name in ("data", "review", "settings"):
                continue
            out += _non_finite(getattr(obj, f.name), f"{path}.{f.name}", seen)
    elif isinstance(obj, dict):
        for k, v in obj.items():
            out += _non_finite(v, f"{path}[{k!r}]", seen)
    elif isinstance(obj, (list, tuple)):
        for i, v in enumerate(obj):
            out += _non_finite(v, f"{path}[{i}]", seen)
    return out


_RESULTS: dict[str, object] = {}


def _result(name: str):
    if name not in _RESULTS:
        _RESULTS[name] = analyse(CASES[name], QUICK, with_power=name in WITH_POWER)
    return _RESULTS[name]


@pytest.mark.parametrize("name", sorted(CASES))
def test_nothing_the_user_sees_is_nan_and_nothing_raises(name):
    result = _result(name)
    text = json.dumps(to_json(result), allow_nan=False)
    assert "NaN" not in text and "Infinity" not in text
    bad = _non_finite(result)
    assert not bad, f"{name}: non-finite values at {bad[:10]}"
    summary = text_summary(result)
    assert not re.search(r"\b(nan|inf|-inf|NaN|Infinity)\b", summary), summary
    # every per-study value is either derived (finite, se > 0) or explained
    for d in result.derived:
        if d.y is None:
            assert d.problems, d
        else:
            assert math.isfinite(d.y) and math.isfinite(d.se) and d.se > 0
    # every statistic is a result or says why not, in words
    for key, test in result.tests.items():
        assert test is not None, key
        if isinstance(test, NotComputable):
            assert len(test.reason) > 20 and "nan" not in test.reason.lower(), (key, test)
            # the safety net in asymmetry.run_test is not the normal path
            assert "for accurate arithmetic:" not in test.reason, (key, test)


def test_empty_and_all_excluded_reviews_say_why_nothing_is_computed():
    for name in ("empty review", "all studies excluded", "no usable rows", "all double zero OR"):
        r = _result(name)
        assert r.k == 0, name
        assert isinstance(r.fixed, NotComputable) and isinstance(r.random, NotComputable)
        assert all(isinstance(t, NotComputable) for t in r.tests.values()), name
        assert to_json(r)["pooled"]["fixed"] is None
        assert "pooled.fixed" in to_json(r)["not_computable"]
    excluded = _result("all studies excluded").excluded
    assert [e.reason for e in excluded] == ["excluded by the appraiser"] * 3
    assert all(
        "no events in either arm" in e.reason for e in _result("all double zero OR").excluded
    )


def test_one_and_two_studies():
    # Inverse-variance fixed effect (Cochrane Handbook 10.3.1 / Borenstein et al. 2009
    # ch. 11): estimate = Σwy/Σw, SE = 1/√Σw, w = 1/SE².
    one = _result("k = 1").fixed
    assert isinstance(one, PooledEstimate)
    assert one.estimate == pytest.approx(0.4) and one.se == pytest.approx(0.2)
    two = _result("k = 2").fixed
    w = np.array([1 / 0.2**2, 1 / 0.1**2])
    assert two.estimate == pytest.approx((w * [0.4, 0.1]).sum() / w.sum(), rel=1e-12)
    assert two.se == pytest.approx(1 / math.sqrt(w.sum()), rel=1e-12)
    # regression tests need at least three studies (Egger et al. 1997: k - 2 df)
    for name in ("k = 1", "k = 2"):
        assert isinstance(_result(name).tests["egger"], NotComputable)
    assert not isinstance(_result("k = 3").tests["egger"], NotComputable)
    assert _result("k = 3").tests["egger"].df == 1


def test_equal_ses_and_identical_estimates():
    # Egger's regression of y/se on 1/se has no spread of 1/se when all SEs are equal
    eq = _result("all SEs equal").tests["egger"]
    assert isinstance(eq, NotComputable) and "same standard error" in eq.reason
    # identical estimates: Q = Σw(y - ȳ)² = 0, so τ² = 0 and I² = 0 (Higgins &
    # Thompson 2002 definitions); y/se = y·(1/se) is an exact line through the origin
    het = _result("identical estimates").heterogeneity
    assert het.q == pytest.approx(0.0, abs=1e-20)
    assert het.tau2 == 0.0 and het.i2 == 0.0
    assert isinstance(_result("identical estimates").tests["egger"], NotComputable)


def test_zero_tau2_makes_random_effects_equal_fixed_effect():
    # with τ² = 0 the random-effects weights are the fixed-effect ones (Handbook 10.10.4)
    r = _result("tau2 = 0")
    assert r.random.tau2 == 0.0
    assert r.random.estimate == pytest.approx(r.fixed.estimate, rel=1e-12)
    assert r.random.se == pytest.approx(r.fixed.se, rel=1e-12)


def test_extreme_ses_are_pooled_by_their_weights():
    # the study with SE 1e-8 has essentially all the weight (1e16 against at most 1e6)
    r = _result("SEs from 1e-8 to 1e4")
    assert r.k == 6
    assert r.fixed.estimate == pytest.approx(0.1, abs=1e-9)
    tiny = _result("tiny SEs (1e-8)").fixed
    w = 1 / np.array([1e-8, 2e-8, 3e-8, 1e-8, 5e-8]) ** 2
    assert tiny.estimate == pytest.approx((w * [0.1, 0.2, 0.3, 0.15, 0.25]).sum() / w.sum())
    huge = _result("huge SEs (1e4)").fixed
    assert huge.se == pytest.approx(
        1 / math.sqrt((1 / np.array([1e4, 2e4, 3e3, 1e4, 5e3]) ** 2).sum())
    )


def test_numbers_beyond_range_are_reported_per_row():
    r = _result("typing errors beyond range")
    reasons = {e.row: e.reason for e in r.excluded}
    assert "too small to analyse" in reasons[0]
    assert "too large to analyse" in reasons[1]
    assert "too large to analyse" in reasons[3]
    assert r.k == 2


def test_zero_cells_and_double_zero_studies():
    # 0.5 added to every cell of a table with a zero cell (Handbook 16.9.2, common
    # practice); log OR = ln(ad/bc)
    d0 = _result("zero cells OR").derived[0]
    a, b, c, d = 0.5, 20.5, 3.5, 17.5
    assert d0.y == pytest.approx(math.log(a * d / (b * c)), rel=1e-12)
    assert d0.se == pytest.approx(math.sqrt(1 / a + 1 / b + 1 / c + 1 / d), rel=1e-12)
    # double-zero studies say nothing about a ratio (left out, with the reason) but do
    # enter a risk-difference analysis with RD = 0
    or_ = _result("double zero OR")
    assert or_.k == 2 and len(or_.excluded) == 2
    assert all("no events in either arm" in e.reason for e in or_.excluded)
    rd = _result("double zero RD")
    assert rd.k == 4 and rd.derived[0].y == 0.0
    assert _result("all double zero RD").k == 4


def test_smd_with_two_per_arm():
    # Hedges' g: J = Γ(m/2) / (√(m/2) Γ((m-1)/2)) with m = n1 + n0 - 2 = 2 (Hedges 1981),
    # Var(g) = N/(n1 n0) + g²/(2N) (Hedges & Olkin 1985)
    r = _result("SMD with n = 2 per arm")
    assert r.k == 5
    j = gamma(1.0) / (math.sqrt(1.0) * gamma(0.5))
    sp = math.sqrt((1.0**2 + 1.2**2) / 2)
    g = j * (1.0 - 0.5) / sp
    assert r.derived[0].y == pytest.approx(g, rel=1e-12)
    assert r.derived[0].se == pytest.approx(math.sqrt(4 / 4 + g * g / 8), rel=1e-12)
    assert _result("SMD with both SDs 0").k == 0


@pytest.mark.parametrize(
    "name, levels",
    [
        ("CIs at 90 %", [90.0] * 6),
        ("CIs at 99 %", [99.0] * 6),
        ("rows at 90 % and 99 %", [90.0, 99.0] * 3),
    ],
)
def test_intervals_at_other_levels(name, levels):
    # SE = (ln U - ln L) / (2 z), z the normal quantile of the level (Handbook 7.7.7.3)
    r = _result(name)
    for i, (d, level) in enumerate(zip(r.derived, levels)):
        z = stats.norm.ppf(0.5 + level / 200)
        expected = (math.log(1.1 + 0.1 * i) - math.log(0.6)) / (2 * z)
        assert d.se == pytest.approx(expected, rel=1e-12), (name, i)
    # the pooled interval is reported at 95 % whatever the studies' level
    assert r.fixed.confidence_level == 0.95


# --------------------------------------------------------------------------------------
# regression tests for the fixes (exact rational arithmetic on the same float inputs)


def test_begg_with_one_study_carrying_almost_all_weight_matches_exact_arithmetic():
    # SE 1e-8 beside 1e4: v_i - 1/Σw cancelled to 0 or below and the p-value lookup
    # failed (IndexError, a crash of the whole analysis). Reference: t* in exact
    # rationals, Kendall's tau and exact p from scipy.stats.kendalltau.
    y = np.array([1.0986, 0.0, -2.5055, 0.3])
    se = np.array([1e-8, 1e4, 1.5067, 0.7])
    res = asy.begg(StudyData.from_arrays("OR", y, se))
    w = [1 / Fraction(float(s)) ** 2 for s in se]
    sw = sum(w)
    theta = sum(wi * Fraction(float(yi)) for wi, yi in zip(w, y)) / sw
    tstar = [
        float(Fraction(float(yi)) - theta) / math.sqrt(float(Fraction(float(s)) ** 2 - 1 / sw))
        for yi, s in zip(y, se)
    ]
    ref = stats.kendalltau(tstar, se**2, method="exact")
    assert res.statistic == pytest.approx(ref.statistic, abs=1e-12)
    assert res.pvalue == pytest.approx(ref.pvalue, rel=1e-9)


def _exact_inverse(m: list[list[Fraction]]) -> list[list[Fraction]]:
    n = len(m)
    a = [row[:] + [Fraction(int(i == j)) for j in range(n)] for i, row in enumerate(m)]
    for c in range(n):
        p = next(r for r in range(c, n) if a[r][c] != 0)
        a[c], a[p] = a[p], a[c]
        piv = a[c][c]
        a[c] = [x / piv for x in a[c]]
        for r in range(n):
            if r != c and a[r][c] != 0:
                f = a[r][c]
                a[r] = [x - f * y for x, y in zip(a[r], a[c])]
    return [row[n:] for row in a]


def test_wls_covariance_with_wide_ses_matches_exact_arithmetic():
    # SEs of 1e4 and 1e-4 in one meta-regression: inverting X'WX in floating point
    # gave negative variances (NaN SEs, then a division by zero). Reference: (X'WX)^-1
    # in exact rationals from the same float design and weights.
    y = np.array([-13.81551056, -0.69314718, 0.0, 0.69314718])
    se = np.array([1e4, 1e-4, 1.0, 1e-4])
    X = np.column_stack([np.ones(4), [0.0, 1.0, 1.0, 1.0], se])
    fit = wls(y, X, 1 / se**2, scaling="fixed")
    assert not isinstance(fit, NotComputable)
    xf = [[Fraction(float(v)) for v in row] for row in X]
    wf = [1 / Fraction(float(s)) ** 2 for s in se]
    xtwx = [
        [sum(wf[k] * xf[k][i] * xf[k][j] for k in range(4)) for j in range(3)] for i in range(3)
    ]
    inv = _exact_inverse(xtwx)
    for j in range(3):
        assert fit.coefficients[j].se == pytest.approx(math.sqrt(float(inv[j][j])), rel=1e-6)


def test_limit_meta_analysis_when_tau2_dwarfs_the_within_study_variances():
    # τ² = 0.44 against SEs of 1e-4 and 1e-8: 1/s is nearly constant, and the
    # uncentred Var(β) + τ²Var(α) + 2τCov(α, β) cancelled to 0 (SE 0, statistic -inf).
    # Reference: that same formula (Rücker et al. 2011) evaluated in exact rationals.
    y = np.array([-0.6931471805599453, 0.0, -0.6931471805599453, 0.6931471805599453])
    se = np.array([1e-4, 1e-4, 1e-8, 1e-4])
    r = limit_meta_analysis(StudyData.from_arrays("HR", y, se))
    assert not isinstance(r, NotComputable)
    tau2 = r.tau2
    s = np.sqrt(se**2 + tau2)
    x = [Fraction(float(v)) for v in 1 / s]
    z = [Fraction(float(v)) for v in y / s]
    k = len(x)
    xtx = [[Fraction(k), sum(x)], [sum(x), sum(v * v for v in x)]]
    inv = _exact_inverse(xtx)
    xtz = [sum(z), sum(a * b for a, b in zip(x, z))]
    alpha, beta = (sum(inv[i][j] * xtz[j] for j in range(2)) for i in range(2))
    tau = Fraction(math.sqrt(tau2))
    est = beta + tau * alpha
    var = inv[1][1] + tau * tau * inv[0][0] + 2 * tau * inv[0][1]
    assert r.estimate == pytest.approx(float(est), rel=1e-6)
    assert r.se == pytest.approx(math.sqrt(float(var)), rel=1e-6)
    assert math.isfinite(r.statistic) and 0 < r.pvalue <= 1


def test_power_simulation_refuses_groups_too_large_to_tabulate():
    from lopside.stats.power import MAX_SIMULATED_ARM, simulate_power

    n = MAX_SIMULATED_ARM * 2
    data = StudyData.from_arrays(
        "OR",
        [0.1, 0.2, -0.1, 0.3],
        [0.01, 0.02, 0.03, 0.04],
        a=[10, 20, 30, 40],
        b=[n, 100, 100, 100],
        c=[12, 22, 32, 42],
        d=[100, 100, 100, 100],
    )
    out = simulate_power(data, reps=50)
    assert isinstance(out, NotComputable) and "too large" in out.reason


def test_the_nan_walker_finds_what_it_looks_for():
    # the check above must be able to fail: a NaN hidden in a nested result is found
    from lopside.stats.results import ConfidenceInterval

    hidden = PooledEstimate("FE-IV", 0.1, 0.2, ConfidenceInterval(0.0, math.nan), 1.0, 0.3)
    assert _non_finite({"x": [hidden]}) == ["result['x'][0].ci[1]"]
    assert _non_finite(np.array([1.0, math.inf])) == ["result[1]"]


def test_pooling_returns_not_computable_for_overflowing_effects():
    y = np.array([1e300, -1e300, 1e300, 0.5])
    v = np.array([1.0, 2.0, 1.0, 1.0])
    from lopside.stats import pooling as pl

    for method in pl.TAU2_METHODS:
        r = pl.random_effects(y, v, method=method)
        assert isinstance(r, NotComputable) or not _non_finite(r), method
    h = pl.heterogeneity(y, v)
    assert isinstance(h, NotComputable) or not _non_finite(h)
