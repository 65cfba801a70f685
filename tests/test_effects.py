"""Per-study effect sizes and SE reconstruction (lopside.stats.effects).

Every expected value names its source beside the check: the Cochrane Handbook 5.1
(Higgins & Green 2011) sections, Altman & Bland 2011 (BMJ 343:d2090), statsmodels'
Table2x2 and two-proportion Wald interval, scipy.special.gamma, or "common practice" /
"from memory" where no source was to hand.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import example, given, settings
from hypothesis import strategies as st
from scipy import special, stats
from statsmodels.stats.contingency_tables import Table2x2
from statsmodels.stats.proportion import confint_proportions_2indep

from lopside.model.review import MEASURES, NUMERIC_FIELDS, StudyRow
from lopside.stats.effects import ROUTES, Derived, derive, derive_all, hedges_j

# ------------------------------------------------------------------------------------
# SE from a confidence interval


@pytest.mark.parametrize(("level", "divisor"), [(90, 3.29), (95, 3.92), (99, 5.15)])
def test_ci_divisors_match_handbook(level, divisor):
    # Cochrane Handbook 5.1 section 7.7.3.2: SE = (U - L) / 3.92 for a 95% CI,
    # 3.29 for 90% and 5.15 for 99% (large samples, normal distribution).
    row = StudyRow(estimate=2.0, lower=-1.0, upper=5.0, level=level)
    out = derive(row, "MD")
    assert out.route == "ci"
    assert out.y == pytest.approx(2.0)
    assert (5.0 - -1.0) / out.se == pytest.approx(divisor, abs=0.005)
    assert f"divisor {divisor:.2f}" in out.route_text
    assert "z-based" in out.route_text


def test_review_level_used_when_row_level_blank_and_row_level_overrides():
    # Handbook 5.1 section 7.7.3.2 divisors again (90% -> 3.29, 99% -> 5.15).
    row = StudyRow(estimate=0.0, lower=-1.0, upper=1.0)
    assert 2.0 / derive(row, "MD", ci_level=99.0).se == pytest.approx(5.15, abs=0.005)
    row90 = row.with_values(level=90.0)
    assert 2.0 / derive(row90, "MD", ci_level=99.0).se == pytest.approx(3.29, abs=0.005)


def test_t_based_ci_handbook_n25():
    # Cochrane Handbook 5.1 section 7.7.3.2: a 95% CI of a single group mean with
    # n = 25 uses t = 2.0639 (df = n - 1 = 24), divisor 2 x 2.0639 = 4.128.
    # Our t route takes df from the arm sizes (n1 + n0 - 2), so df = 24 is fed in as two
    # arms of 13, and separately as a total n of 26 (df = n - 2).
    for row in (
        StudyRow(estimate=10.0, lower=8.0, upper=12.0, int_n=13, ctl_n=13),
        StudyRow(estimate=10.0, lower=8.0, upper=12.0, n=26),
    ):
        out = derive(row, "MD", ci_method="t")
        assert out.df == 24
        assert 4.0 / out.se == pytest.approx(4.128, abs=0.001)
        assert 4.0 / out.se / 2 == pytest.approx(2.0639, abs=0.0001)
        assert "t-based, df = 24" in out.route_text
        assert not out.approximate


def test_t_without_sizes_falls_back_to_z_with_problem():
    # Handbook 5.1 section 7.7.3.2 95% divisor 3.92 when no df can be formed.
    out = derive(StudyRow(estimate=1.0, lower=0.0, upper=2.0), "MD", ci_method="t")
    assert out.route == "ci"
    assert 2.0 / out.se == pytest.approx(3.92, abs=0.005)
    assert out.approximate
    assert any("z-based SE was used instead" in p for p in out.problems)


def test_auto_rule_of_thumb_60_per_arm():
    # Handbook 5.1 section 7.7.3.2: with fewer than about 60 per group the interval was
    # probably t-based; larger groups -> normal. Quantiles from scipy.stats.t / norm.
    small = StudyRow(estimate=1.0, lower=0.0, upper=2.0, int_n=25, ctl_n=22)
    out = derive(small, "MD", ci_method="auto")
    assert out.df == 45
    assert out.se == pytest.approx(2.0 / (2 * stats.t.ppf(0.975, 45)), rel=1e-9)
    large = small.with_values(int_n=70, ctl_n=70)
    out = derive(large, "MD", ci_method="auto")
    assert out.df is None
    assert out.se == pytest.approx(2.0 / (2 * stats.norm.ppf(0.975)), rel=1e-9)
    # Design choice (module docstring): the rule is about means, so "auto" keeps ratio
    # intervals z-based even in small trials.
    ratio = StudyRow(estimate=1.0, lower=0.5, upper=2.0, int_total=25, ctl_total=22)
    out = derive(ratio, "OR", ci_method="auto")
    assert out.se == pytest.approx(math.log(4.0) / (2 * stats.norm.ppf(0.975)), rel=1e-9)


def test_ratio_ci_is_logged_first():
    # Cochrane Handbook 5.1 section 7.7.7.3: for ratio measures take natural logs of
    # the estimate and limits, then SE = (ln U - ln L) / 3.92.
    out = derive(StudyRow(estimate=0.5, lower=0.25, upper=1.0), "OR")
    assert out.y == pytest.approx(math.log(0.5))
    assert out.se == pytest.approx((math.log(1.0) - math.log(0.25)) / 3.919928, rel=1e-5)
    assert "on the log scale" in out.route_text
    for measure in ("RR", "HR"):
        assert derive(StudyRow(estimate=2.0, lower=1.0, upper=4.0), measure).se == pytest.approx(
            math.log(4.0) / 3.919928, rel=1e-5
        )


def test_ratio_with_non_positive_values_gives_none():
    # Handbook 5.1 section 7.7.7.3: logs of ratios need positive values.
    out = derive(StudyRow(estimate=0.8, lower=0.0, upper=1.2), "HR")
    assert out.y is None and out.se is None and out.route == ""
    assert any("must be above 0" in p for p in out.problems)
    out = derive(StudyRow(estimate=-0.2, se=0.1), "OR")
    assert out.y is None
    assert any("not as a log" in p for p in out.problems)


def test_ci_checks_reject_inverted_limits_and_estimate_outside():
    # methods.md section 1.1 consistency checks (common practice): L < U, L <= est <= U.
    out = derive(StudyRow(estimate=1.0, lower=2.0, upper=0.5), "MD")
    assert out.y is None and any("must be below" in p for p in out.problems)
    out = derive(StudyRow(estimate=3.0, lower=0.5, upper=2.0), "RR")
    assert out.y is None and any("outside its interval" in p for p in out.problems)


def test_asymmetric_interval_gets_a_note():
    # methods.md section 1.1 (derived check): a ratio CI far from symmetric on the log
    # scale suggests a non-Wald interval or a typo. OR 0.5 (0.1 to 0.9) is lopsided.
    out = derive(StudyRow(estimate=0.5, lower=0.1, upper=0.9), "OR")
    assert out.route == "ci"
    assert any("not symmetric" in n for n in out.notes)
    sym = derive(StudyRow(estimate=1.0, lower=0.5, upper=2.0), "OR")
    assert not any("not symmetric" in n for n in sym.notes)


# ------------------------------------------------------------------------------------
# SE from a P value


def test_p_value_handbook_z():
    # Cochrane Handbook 5.1 section 7.7.7.2: P = 0.008 -> z = 2.652, SE = |y| / z.
    out = derive(StudyRow(estimate=1.0, p=0.008), "MD")
    assert out.route == "p"
    assert 1.0 / out.se == pytest.approx(2.652, abs=0.0005)
    assert "z = 2.652" in out.route_text
    assert "P = 0.008" in out.route_text


def test_p_value_handbook_t45():
    # Cochrane Handbook 5.1 section 7.7.3.3: MD = 3.8, P = 0.008, n = 25 vs 22 ->
    # t(45) = 2.78, SE = 3.8 / 2.78 = 1.37.
    row = StudyRow(estimate=3.8, p=0.008, int_n=25, ctl_n=22)
    out = derive(row, "MD", ci_method="t")
    assert out.df == 45
    assert 3.8 / out.se == pytest.approx(2.78, abs=0.005)
    assert out.se == pytest.approx(1.37, abs=0.005)
    assert "t(45)" in out.route_text


def test_p_value_altman_bland_2011():
    # Altman & Bland 2011 BMJ 343:d2090: difference 17, P = 0.032. Their closed-form
    # approximation z = -0.862 + sqrt(0.743 - 2.404 ln P) gives 2.141 and SE 7.94; the
    # exact normal quantile is 2.144, so SE = 17 / 2.144 = 7.93.
    out = derive(StudyRow(estimate=17.0, p=0.032), "RD")
    z = 17.0 / out.se
    assert z == pytest.approx(2.144, abs=0.0005)
    assert out.se == pytest.approx(7.93, abs=0.005)
    approx_z = -0.862 + math.sqrt(0.743 - 2.404 * math.log(0.032))
    assert approx_z == pytest.approx(2.141, abs=0.001)
    assert abs(z - approx_z) < 0.01
    # Altman & Bland 2011 example RR = 0.30, P = 0.034 -> SE(ln RR) = 0.569 with their
    # approximate z = 2.117 (seen reproduced in a blog, methods.md section 8.1 row 6);
    # the exact quantile moves it by less than 0.002.
    rr = derive(StudyRow(estimate=0.30, p=0.034), "RR")
    assert rr.y == pytest.approx(math.log(0.30))
    assert rr.se == pytest.approx(0.569, abs=0.002)


def test_p_bound_uses_boundary_and_marks_approximate():
    # Handbook 5.1 section 7.7.7.2: "P < 0.05" -> use the boundary (conservative).
    out = derive(StudyRow(estimate=2.0, p=0.05, p_bound="<"), "MD")
    assert out.se == pytest.approx(2.0 / stats.norm.isf(0.025), rel=1e-9)
    assert out.approximate
    assert any("approximate" in p for p in out.problems)
    # "P > 0.05" (NS) gives no SE (Handbook 5.1 section 7.7.7.2).
    out = derive(StudyRow(estimate=2.0, p=0.05, p_bound=">"), "MD")
    assert out.y is None and any("CI" in p for p in out.problems)


def test_p_value_not_derivable_cases():
    # Handbook 5.1 section 7.7.7.2 / methods.md section 1.2: y = 0 or P near 1 give
    # z ~ 0 and no usable SE; ask for the CI.
    for row, measure in (
        (StudyRow(estimate=0.0, p=0.5), "MD"),
        (StudyRow(estimate=1.0, p=0.04), "OR"),  # log(1) = 0
        (StudyRow(estimate=2.0, p=0.9995), "MD"),
        (StudyRow(estimate=2.0, p=1.0), "MD"),
    ):
        out = derive(row, measure)
        assert out.y is None and out.se is None, row
        assert any("ask for the CI" in p for p in out.problems), out.problems
    out = derive(StudyRow(estimate=2.0, p=0.0), "MD")
    assert out.y is None and any("P printed as 0" in p for p in out.problems)


def test_rounded_small_p_is_approximate():
    # methods.md section 1.2: P rounded to 0.001 gives only a rough SE (common practice).
    out = derive(StudyRow(estimate=2.0, p=0.001), "MD")
    assert out.route == "p" and out.approximate


def test_p_route_on_log_scale():
    # Handbook 5.1 section 7.7.7.2 for ratios: SE = |ln RR| / z.
    out = derive(StudyRow(estimate=0.5, p=0.008), "HR")
    assert out.se == pytest.approx(abs(math.log(0.5)) / stats.norm.isf(0.004), rel=1e-9)


def test_se_route_as_entered():
    # An SE printed next to a ratio is that of the log ratio (common practice).
    out = derive(StudyRow(estimate=2.0, se=0.3), "HR")
    assert out.route == "se"
    assert out.y == pytest.approx(math.log(2.0)) and out.se == pytest.approx(0.3)
    assert derive(StudyRow(estimate=2.0, se=0.0), "MD").y is None


# ------------------------------------------------------------------------------------
# route priority


def test_route_priority_and_unused_routes_noted():
    # Design (module docstring): counts > means > CI > SE > P.
    row = StudyRow(
        estimate=0.5,
        lower=0.3,
        upper=0.9,
        se=0.2,
        p=0.01,
        int_events=10,
        int_total=50,
        ctl_events=20,
        ctl_total=50,
    )
    out = derive(row, "OR")
    assert out.route == "counts"
    # log OR from counts against statsmodels Table2x2
    assert out.y == pytest.approx(Table2x2(np.array([[10, 40], [20, 30]])).log_oddsratio)
    assert any("not used" in n and "estimate with CI" in n for n in out.notes)
    assert derive(row.with_values(int_events=None), "OR").route == "ci"
    assert derive(row.with_values(int_events=None, lower=None), "OR").route == "se"
    assert derive(row.with_values(int_events=None, lower=None, se=None), "OR").route == "p"
    # counts do not give an HR: the estimate routes are used
    assert derive(row, "HR").route == "ci"


def test_unusable_route_falls_back_with_problem():
    row = StudyRow(
        estimate=0.5, lower=0.3, upper=0.9, int_events=60, int_total=50, ctl_events=2, ctl_total=50
    )
    out = derive(row, "OR")
    assert out.route == "ci"
    assert any("more than the total" in p for p in out.problems)


def test_nothing_fits_names_what_to_enter():
    out = derive(StudyRow(int_events=3, int_total=10, ctl_events=4, ctl_total=10), "HR")
    assert out.y is None and out.route == ""
    assert any("CI limits" in p for p in out.problems)
    out = derive(StudyRow(), "MD")
    assert any("mean, SD and n" in p for p in out.problems)
    out = derive(StudyRow(estimate=1.0), "XX")
    assert out.y is None and any("unknown effect measure" in p for p in out.problems)


def test_means_before_ci_for_continuous():
    row = StudyRow(
        estimate=9.0, lower=0.0, upper=18.0, int_mean=10, int_sd=3, int_n=20, ctl_mean=8,
        ctl_sd=4, ctl_n=25,
    )  # fmt: skip
    out = derive(row, "MD")
    assert out.route == "means"
    # MD variance s1^2/n1 + s0^2/n0 (methods.md section 1.4; Handbook 5.1 section 7.7.3.3)
    assert out.y == pytest.approx(2.0)
    assert out.se == pytest.approx(math.sqrt(9 / 20 + 16 / 25))


# ------------------------------------------------------------------------------------
# 2x2 tables


def _random_tables(rng, k, low=1):
    n1 = rng.integers(5, 400, size=k)
    n0 = rng.integers(5, 400, size=k)
    a = np.array([rng.integers(low, n - low + 1) for n in n1])
    c = np.array([rng.integers(low, n - low + 1) for n in n0])
    return a, n1 - a, c, n0 - c


def test_counts_against_statsmodels_table2x2():
    # statsmodels.stats.contingency_tables.Table2x2: log_oddsratio(_se), log_riskratio(_se)
    # on random tables without zero cells (so no correction is involved).
    rng = np.random.default_rng(20240601)
    a, b, c, d = _random_tables(rng, 300)
    for i in range(a.size):
        row = StudyRow(
            int_events=float(a[i]),
            int_total=float(a[i] + b[i]),
            ctl_events=float(c[i]),
            ctl_total=float(c[i] + d[i]),
        )
        ref = Table2x2(np.array([[a[i], b[i]], [c[i], d[i]]]), shift_zeros=False)
        out_or = derive(row, "OR")
        assert out_or.y == pytest.approx(ref.log_oddsratio, rel=1e-12, abs=1e-12)
        assert out_or.se == pytest.approx(ref.log_oddsratio_se, rel=1e-12)
        out_rr = derive(row, "RR")
        assert out_rr.y == pytest.approx(ref.log_riskratio, rel=1e-12, abs=1e-12)
        assert out_rr.se == pytest.approx(ref.log_riskratio_se, rel=1e-12)
        assert not out_or.corrected and not out_rr.corrected
        assert (out_or.a, out_or.b, out_or.c, out_or.d) == (a[i], b[i], c[i], d[i])


def test_rd_against_statsmodels_wald_interval():
    # statsmodels.stats.proportion.confint_proportions_2indep(method="wald",
    # compare="diff"): diff +/- z sqrt(p1 q1 / n1 + p0 q0 / n0); SE recovered from its width.
    rng = np.random.default_rng(7)
    a, b, c, d = _random_tables(rng, 200)
    z = stats.norm.ppf(0.975)
    for i in range(a.size):
        n1, n0 = int(a[i] + b[i]), int(c[i] + d[i])
        row = StudyRow(int_events=a[i], int_total=n1, ctl_events=c[i], ctl_total=n0)
        out = derive(row, "RD")
        lo, hi = confint_proportions_2indep(
            int(a[i]), n1, int(c[i]), n0, method="wald", compare="diff"
        )
        assert out.y == pytest.approx(a[i] / n1 - c[i] / n0, abs=1e-12)
        assert out.se == pytest.approx((hi - lo) / (2 * z), rel=1e-9)


def test_zero_cell_adds_half_to_every_cell():
    # Common practice (methods.md section 1.3): 0.5 added to all four cells of a table
    # with a zero cell, only those tables, for log OR and log RR. Reference values from
    # statsmodels Table2x2 on the corrected table.
    for cells in ([0, 20, 5, 15], [3, 0, 6, 10], [4, 16, 7, 0], [6, 14, 0, 20]):
        a, b, c, d = cells
        row = StudyRow(int_events=a, int_total=a + b, ctl_events=c, ctl_total=c + d)
        ref = Table2x2(np.array([[a, b], [c, d]]) + 0.5, shift_zeros=False)
        out_or, out_rr = derive(row, "OR"), derive(row, "RR")
        assert out_or.corrected and out_rr.corrected
        assert out_or.y == pytest.approx(ref.log_oddsratio)
        assert out_or.se == pytest.approx(ref.log_oddsratio_se)
        assert out_rr.y == pytest.approx(ref.log_riskratio)
        assert out_rr.se == pytest.approx(ref.log_riskratio_se)
        assert "0.5 added to every cell (zero cell)" in out_or.route_text
        # the counts reported are those entered, before correction
        assert (out_or.a, out_or.b, out_or.c, out_or.d) == (a, b, c, d)
        # risk differences are not corrected when their variance is positive
        out_rd = derive(row, "RD")
        assert not out_rd.corrected
        assert out_rd.y == pytest.approx(a / (a + b) - c / (c + d))


def test_double_zero_left_out_of_ratios_but_rd_kept():
    # Common practice (methods.md section 1.3; Rücker et al. 2008 for the arcsine
    # difference): no events in either arm says nothing about a ratio.
    row = StudyRow(int_events=0, int_total=30, ctl_events=0, ctl_total=25)
    for measure in ("OR", "RR"):
        out = derive(row, measure)
        assert out.y is None and out.se is None and out.route == ""
        assert out.double_zero
        assert out.problems == ("no events in either arm: left out of ratio analyses",)
    rd = derive(row, "RD")
    assert rd.double_zero and rd.route == "counts"
    assert rd.y == 0.0
    # variance with 0.5 in every cell, for the variance only (methods.md section 1.3)
    expected = 0.5 * 30.5 / 31**3 + 0.5 * 25.5 / 26**3
    assert rd.se == pytest.approx(math.sqrt(expected))
    assert rd.corrected and "for the variance only" in rd.route_text
    assert rd.asd == 0.0 and rd.asd_var == pytest.approx(1 / 120 + 1 / 100)
    # every participant had the event in both arms: also uninformative for a ratio
    full = derive(StudyRow(int_events=30, int_total=30, ctl_events=25, ctl_total=25), "OR")
    assert full.y is None and not full.double_zero


def test_arcsine_difference():
    # Rücker, Schwarzer & Carpenter 2008: ASD = asin(sqrt(a/n1)) - asin(sqrt(c/n0)),
    # Var = 1/(4 n1) + 1/(4 n0).
    row = StudyRow(int_events=12, int_total=80, ctl_events=25, ctl_total=75)
    for measure in MEASURES:
        out = derive(row, measure)
        assert out.asd == pytest.approx(np.arcsin(np.sqrt(12 / 80)) - np.arcsin(np.sqrt(25 / 75)))
        assert out.asd_var == pytest.approx(1 / 320 + 1 / 300)
        assert out.n1 == 80 and out.n0 == 75 and out.n_total == 155


# ------------------------------------------------------------------------------------
# means and SDs


def _j_gamma(m):
    return special.gamma(m / 2) / (math.sqrt(m / 2) * special.gamma((m - 1) / 2))


def test_hedges_j_exact_against_gamma_and_approx_close():
    # Hedges 1981 (J. Educ. Stat.): J = Gamma(m/2) / (sqrt(m/2) Gamma((m-1)/2)), checked
    # with scipy.special.gamma; the approximation 1 - 3/(4m - 1) agrees to about 1e-3 for
    # m >= 10 (from memory).
    for m in range(2, 150):
        assert hedges_j(m) == pytest.approx(_j_gamma(m), rel=1e-12)
    for m in range(10, 400):
        assert abs(hedges_j(m) - hedges_j(m, exact=False)) < 1e-3
    # log-gamma keeps the exact form finite for very large m (J -> 1)
    assert hedges_j(1e7) == pytest.approx(1.0, abs=1e-6)


@pytest.mark.parametrize("correction", ["exact", "approx"])
def test_smd_from_means(correction):
    # Hedges' g = J d with the pooled SD; Var = N/(n1 n0) + g^2/(2N) (Hedges & Olkin 1985,
    # from memory); J from scipy.special.gamma or 1 - 3/(4m - 1).
    m1, s1, n1, m0, s0, n0 = 24.0, 6.0, 18, 20.0, 7.5, 21
    row = StudyRow(int_mean=m1, int_sd=s1, int_n=n1, ctl_mean=m0, ctl_sd=s0, ctl_n=n0)
    out = derive(row, "SMD", smd_correction=correction)
    m = n1 + n0 - 2
    sp = math.sqrt(((n1 - 1) * s1**2 + (n0 - 1) * s0**2) / m)
    j = _j_gamma(m) if correction == "exact" else 1 - 3 / (4 * m - 1)
    g = j * (m1 - m0) / sp
    big_n = n1 + n0
    assert out.route == "means"
    assert out.y == pytest.approx(g, rel=1e-12)
    assert out.se == pytest.approx(math.sqrt(big_n / (n1 * n0) + g * g / (2 * big_n)), rel=1e-12)
    # Pustejovsky & Rodgers 2019: modified SE sqrt(1/n1 + 1/n0), free of g
    assert out.se_modified == pytest.approx(math.sqrt(1 / n1 + 1 / n0))
    # Handbook 5.1 variant sqrt(N/(n1 n0) + g^2/(2(N - 3.94))) agrees to about 3 decimals
    # at typical sizes (methods.md section 1.4, computed there [C]).
    hb = math.sqrt(big_n / (n1 * n0) + g * g / (2 * (big_n - 3.94)))
    assert abs(out.se - hb) < 2e-3


def test_smd_invalid_sds():
    row = StudyRow(int_mean=1, int_sd=0, int_n=10, ctl_mean=2, ctl_sd=0, ctl_n=10)
    out = derive(row, "SMD")
    assert out.y is None and any("both SDs are 0" in p for p in out.problems)
    out = derive(row.with_values(int_sd=-1.0), "MD")
    assert out.y is None and any("cannot be negative" in p for p in out.problems)
    # se_modified is only for SMDs
    assert derive(row.with_values(int_sd=1.0), "MD").se_modified is None


# ------------------------------------------------------------------------------------
# never raises


_wild = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True),
    st.sampled_from([0.0, -1.0, 0.5, 1.0, 2.0, 95.0, 1e-300, 1e300, -0.0]),
    st.integers(min_value=-3, max_value=120),
)
_plausible = st.one_of(st.floats(min_value=0.001, max_value=200.0), st.integers(0, 120))


@st.composite
def _rows(draw):
    # Each field is blank, plausible or wild; blank and plausible are drawn more often so
    # that every route (not only the failure paths) is exercised.
    values = {}
    for f in NUMERIC_FIELDS:
        kind = draw(st.sampled_from(["blank", "blank", "plausible", "plausible", "wild"]))
        values[f] = None if kind == "blank" else draw(_plausible if kind == "plausible" else _wild)
    values["p_bound"] = draw(st.sampled_from([None, "<", ">", "", "=", "?"]))
    return StudyRow(**values)


@settings(max_examples=600, deadline=None)
# found by hypothesis: an arm total of 5e-324 made the SMD's modified SE infinite
@example(
    row=StudyRow(int_total=1.0, ctl_total=5e-324),
    measure="SMD",
    ci_method="z",
    smd="exact",
    ci_level=95.0,
)
@given(
    row=_rows(),
    measure=st.sampled_from([*MEASURES, "??"]),
    ci_method=st.sampled_from(["z", "t", "auto"]),
    smd=st.sampled_from(["exact", "approx"]),
    ci_level=st.sampled_from([95.0, 90.0, 0.0, 150.0, float("nan")]),
)
def test_derive_never_raises(row, measure, ci_method, smd, ci_level):
    out = derive(row, measure, ci_method=ci_method, smd_correction=smd, ci_level=ci_level)
    assert isinstance(out, Derived)
    assert out.route in ("", *ROUTES)
    # the invariant callers rely on: y and se come together, finite, se > 0
    if out.route:
        assert out.y is not None and math.isfinite(out.y)
        assert out.se is not None and math.isfinite(out.se) and out.se > 0
        assert out.route_text
    else:
        assert out.y is None and out.se is None
        assert out.problems, "a row without y must say why"
    for name in ("a", "b", "c", "d", "n1", "n0", "n_total", "asd", "asd_var", "se_modified"):
        v = getattr(out, name)
        assert v is None or math.isfinite(v)
    assert all(isinstance(p, str) and p for p in out.problems + out.notes)
    # the catch-all in derive() is a last line of defence, never the normal path
    assert not any("could not be used (" in p for p in out.problems)


def test_derive_all_keeps_order():
    rows = [StudyRow(estimate=1.0, se=0.5), StudyRow(), StudyRow(estimate=2.0, se=0.25)]
    out = derive_all(rows, "MD", ci_method="t")
    assert [d.se for d in out] == [0.5, None, 0.25]
    assert isinstance(out, tuple)


def test_bad_option_is_a_programming_error():
    with pytest.raises(ValueError, match="ci_method"):
        derive(StudyRow(), "MD", ci_method="normal")
