"""Sensitivity to selection (Mathur & VanderWeele 2020) and fixed-weight selection models
(Vevea & Woods 2005), checked against direct implementations written here and against
scipy / statsmodels as outside references.

Sources beside each check. The formulas of Mathur & VanderWeele (2020, JRSS C 69:1091)
used here are as recalled in methods.md 11.3 ("from memory"); the Vevea & Woods weight
patterns are Table 1 of that paper as recalled in methods.md 11.4 ("from memory").
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import optimize, stats

from lopside.stats.data import StudyData
from lopside.stats.results import NotComputable
from lopside.stats.selection_fixed import CUTPOINTS, PATTERNS, fixed_weight_selection
from lopside.stats.selection_sensitivity import (
    MSG_ALL_AFFIRMATIVE,
    MSG_AT_NULL,
    MSG_NO_AFFIRMATIVE,
    _robust,
    satterthwaite_df_direct,
    selection_sensitivity,
)

# invented data (not a published example): log odds ratios and SEs, mixed significance
Y = np.array([-0.6, -0.55, -0.5, -0.42, -0.3, -0.2, 0.12, 0.05, 0.1, -0.5, 0.15, 0.08, -0.35, -0.4])
SE = np.array([0.25, 0.25, 0.12, 0.08, 0.18, 0.15, 0.10, 0.08, 0.22, 0.23, 0.09, 0.11, 0.15, 0.12])


def data(y=Y, se=SE):
    y = np.asarray(y, float)
    return StudyData(measure="OR", y=y, se=np.asarray(se, float), rows=tuple(range(len(y))))


def dl_tau2(y, v):
    """DerSimonian-Laird tau² written out (Cochrane Handbook 10.10.4.1, common practice)."""
    w = 1 / v
    mu = np.sum(w * y) / np.sum(w)
    q = np.sum(w * (y - mu) ** 2)
    c = np.sum(w) - np.sum(w**2) / np.sum(w)
    return max(0.0, (q - (len(y) - 1)) / c)


def affirmative(y, se, sign):
    # two-sided p from scipy.stats.norm, p < 0.05 on the pooled side (M&V 2020, from memory)
    p = 2 * stats.norm.sf(np.abs(y / se))
    return (p < 0.05) & (sign * y > 0)


def pooled_re(y, se):
    v = se**2
    t2 = dl_tau2(y, v)
    w = 1 / (v + t2)
    return float(np.sum(w * y) / np.sum(w)), t2


def test_affirmative_split_matches_scipy_normal():
    mu, t2 = pooled_re(Y, SE)
    res = selection_sensitivity(data(), pooled_estimate=mu, tau2=t2)
    aff = affirmative(Y, SE, -1)
    assert res.direction == -1
    assert res.affirmative == int(aff.sum()) and res.nonaffirmative == int((~aff).sum())
    assert res.affirmative_rows == tuple(np.flatnonzero(aff))
    assert 0 < res.affirmative < len(Y)


@pytest.mark.parametrize("eta", [1.0, 2.0, 5.0, 10.0, 20.0, 50.0])
def test_fixed_effect_matches_direct_sums(eta):
    # Direct implementation of the fixed-effect corrected estimate and its variance
    # (methods.md 11.3, Mathur & VanderWeele 2020 section 3, from memory).
    mu, t2 = pooled_re(Y, SE)
    res = selection_sensitivity(data(), pooled_estimate=mu, tau2=t2)
    aff = affirmative(Y, SE, -1)
    num = den = var_num = 0.0
    for yi, si, af in zip(Y, SE, aff):
        a = 1.0 if af else eta
        w = 1 / si**2
        num += a * w * yi
        den += a * w
        var_num += a * a * w
    est, se = num / den, math.sqrt(var_num) / den
    c = res.fixed.at(eta)
    assert c.estimate == pytest.approx(est, abs=1e-13)
    assert c.se == pytest.approx(se, rel=1e-12)
    z = stats.norm.ppf(0.975)
    assert c.ci_low == pytest.approx(est - z * se, abs=1e-12)
    assert c.ci_high == pytest.approx(est + z * se, abs=1e-12)


def test_fixed_effect_s_value_closed_form_and_root():
    # S-value = -Σ_aff w y / Σ_non w y after recoding (Mathur & VanderWeele 2020, from memory)
    mu, t2 = pooled_re(Y, SE)
    res = selection_sensitivity(data(), pooled_estimate=mu, tau2=t2)
    aff = affirmative(Y, SE, -1)
    yy, w = -Y, 1 / SE**2
    A, N = np.sum(w[aff] * yy[aff]), np.sum(w[~aff] * yy[~aff])
    if N >= 0:  # the invented data are built so that the null can be reached
        pytest.fail("test data should make the S-value attainable")
    assert res.fixed.s_value == pytest.approx(-A / N, rel=1e-12)
    # at η = S the directly computed corrected estimate is exactly 0
    a = np.where(aff, 1.0, res.fixed.s_value)
    assert np.sum(a * w * Y) / np.sum(a * w) == pytest.approx(0.0, abs=1e-12)
    # the interval reaches the null earlier (smaller η) than the estimate
    s_ci = res.fixed.s_value_ci
    assert 1.0 < s_ci < res.fixed.s_value
    a = np.where(aff, 1.0, s_ci)
    est = np.sum(a * w * Y) / np.sum(a * w)
    se = math.sqrt(np.sum(a * a * w)) / np.sum(a * w)
    assert est + stats.norm.ppf(0.975) * se == pytest.approx(0.0, abs=1e-9)


def test_worst_case_is_nonaffirmative_alone():
    mu, t2 = pooled_re(Y, SE)
    res = selection_sensitivity(data(), pooled_estimate=mu, tau2=t2)
    aff = affirmative(Y, SE, -1)
    yn, sn = Y[~aff], SE[~aff]
    w = 1 / sn**2
    assert res.fixed.worst_case.estimate == pytest.approx(np.sum(w * yn) / np.sum(w), abs=1e-13)
    assert res.fixed.worst_case.se == pytest.approx(1 / math.sqrt(np.sum(w)), rel=1e-12)
    # random-effects worst case: statsmodels WLS, intercept only, HC2 robust covariance
    import statsmodels.api as sm

    wr = 1 / (sn**2 + t2)
    fit = sm.WLS(yn, np.ones((yn.size, 1)), weights=wr).fit(cov_type="HC2")
    assert res.random.worst_case.estimate == pytest.approx(fit.params[0], abs=1e-13)
    assert res.random.worst_case.se == pytest.approx(fit.bse[0], rel=1e-10)


@pytest.mark.parametrize("eta", [1.0, 3.5, 20.0])
def test_random_effects_robust_variance_matches_statsmodels_hc2(eta):
    # statsmodels WLS with HC2 covariance (MacKinnon & White 1985); for one estimate per
    # study the CR2 small-sample correction of robust variance estimation (Tipton 2015)
    # reduces to HC2 (common practice). Weights a_i/(v_i + tau²) (M&V 2020, from memory).
    import statsmodels.api as sm

    mu, t2 = pooled_re(Y, SE)
    res = selection_sensitivity(data(), pooled_estimate=mu, tau2=t2, etas=(eta,))
    aff = affirmative(Y, SE, -1)
    W = np.where(aff, 1.0, eta) / (SE**2 + t2)
    fit = sm.WLS(Y, np.ones((Y.size, 1)), weights=W).fit(cov_type="HC2")
    c = res.random.at(eta)
    assert c.estimate == pytest.approx(fit.params[0], abs=1e-13)
    assert c.se == pytest.approx(fit.bse[0], rel=1e-10)
    # t interval on the Satterthwaite df
    q = stats.t.ppf(0.975, c.df)
    assert c.ci_low == pytest.approx(c.estimate - q * c.se, abs=1e-12)


def test_satterthwaite_df_closed_form_equals_matrix_form_and_k_minus_1_when_balanced():
    rng = np.random.default_rng(3)
    for _ in range(20):
        k = int(rng.integers(2, 15))
        y = rng.normal(size=k)
        phi = rng.uniform(0.01, 1, size=k)
        a = np.where(rng.random(k) < 0.5, 1.0, rng.uniform(1, 30))
        _, _, df = _robust(y, 1 / phi, a[None, :], phi)
        assert df[0] == pytest.approx(satterthwaite_df_direct(y, 1 / phi, a, phi), rel=1e-9)
    # Balanced case: equal weights and variances give the classical one-sample t on k - 1
    # df (Bell & McCaffrey 2002: CR2 is exact under the working model; common practice).
    k = 7
    _, se, df = _robust(rng.normal(size=k), np.ones(k), np.ones((1, k)), np.ones(k))
    assert df[0] == pytest.approx(k - 1, rel=1e-12)


def test_random_s_value_is_where_corrected_estimate_reaches_null():
    mu, t2 = pooled_re(Y, SE)
    res = selection_sensitivity(data(), pooled_estimate=mu, tau2=t2)
    s = res.random.s_value
    assert s is not None and s > 1
    aff = affirmative(Y, SE, -1)
    W = np.where(aff, 1.0, s) / (SE**2 + t2)
    assert np.sum(W * Y) / np.sum(W) == pytest.approx(0.0, abs=1e-12)
    # the interval S-value: the upper limit (nearer the null here) is 0 there
    s_ci = res.random.s_value_ci
    res2 = selection_sensitivity(data(), pooled_estimate=mu, tau2=t2, etas=(s_ci,))
    assert res2.random.at(s_ci).ci_high == pytest.approx(0.0, abs=1e-8)


def test_mirror_image_gives_mirrored_results():
    mu, t2 = pooled_re(Y, SE)
    a = selection_sensitivity(data(), pooled_estimate=mu, tau2=t2)
    b = selection_sensitivity(data(-Y), pooled_estimate=-mu, tau2=t2)
    assert b.direction == -a.direction and b.affirmative == a.affirmative
    for m in ("fixed", "random"):
        ma, mb = getattr(a, m), getattr(b, m)
        assert mb.s_value == pytest.approx(ma.s_value, rel=1e-12)
        for ca, cb in zip(ma.by_eta, mb.by_eta):
            assert cb.estimate == pytest.approx(-ca.estimate, abs=1e-13)
            assert cb.ci_low == pytest.approx(-ca.ci_high, abs=1e-12)


def test_not_attainable_when_nonaffirmative_studies_still_show_the_effect():
    # every non-affirmative study lies on the affirmative side: the worst case keeps an effect
    y = np.array([0.9, 0.8, 0.1, 0.15, 0.2])
    se = np.array([0.2, 0.3, 0.2, 0.25, 0.3])
    mu, t2 = pooled_re(y, se)
    res = selection_sensitivity(data(y, se), pooled_estimate=mu, tau2=t2)
    assert res.fixed.s_value is None and "not attainable" in res.fixed.s_value_reason
    assert res.fixed.worst_case.estimate > 0


def test_no_affirmative_study_says_nothing_to_correct():
    y = np.array([0.1, 0.2, -0.05, 0.15])
    se = np.array([0.2, 0.3, 0.25, 0.2])
    mu, t2 = pooled_re(y, se)
    res = selection_sensitivity(data(y, se), pooled_estimate=mu, tau2=t2)
    assert res.affirmative == 0 and res.reason == MSG_NO_AFFIRMATIVE
    assert res.fixed.s_value is None and res.fixed.s_value_reason == MSG_NO_AFFIRMATIVE
    ests = {round(c.estimate, 12) for c in res.fixed.by_eta}
    assert len(ests) == 1  # η changes nothing


def test_all_affirmative_worst_case_not_computable():
    y = np.array([0.8, 0.9, 1.1])
    se = np.array([0.2, 0.3, 0.25])
    mu, t2 = pooled_re(y, se)
    res = selection_sensitivity(data(y, se), pooled_estimate=mu, tau2=t2)
    assert res.nonaffirmative == 0 and res.reason == MSG_ALL_AFFIRMATIVE
    assert isinstance(res.fixed.worst_case, NotComputable)
    assert isinstance(res.random.worst_case, NotComputable)
    assert res.fixed.s_value is None


def test_two_studies_and_one_nonaffirmative():
    y = np.array([0.9, -0.1])
    se = np.array([0.2, 0.3])
    mu, t2 = pooled_re(y, se)
    res = selection_sensitivity(data(y, se), pooled_estimate=mu, tau2=t2)
    assert res.affirmative == 1 and res.nonaffirmative == 1
    # FE S-value closed form with one study each
    w = 1 / se**2
    assert res.fixed.s_value == pytest.approx(-(w[0] * y[0]) / (w[1] * y[1]), rel=1e-12)
    # the robust worst case has one study: estimate without interval, and says why
    wc = res.random.worst_case
    assert wc.estimate == pytest.approx(-0.1) and wc.ci_low is None and wc.reason


def test_pooled_exactly_at_null_is_not_computable_with_reason():
    res = selection_sensitivity(data(), pooled_estimate=0.0, tau2=0.01)
    assert isinstance(res, NotComputable) and res.reason == MSG_AT_NULL


# --------------------------------------------------------- Vevea & Woods fixed weights


def weighted_negll(params, y, se, weights):
    """Step-function selection likelihood with known weights, written out from
    Vevea & Hedges (1995) / Vevea & Woods (2005) with scipy.stats.norm (methods.md 5.4)."""
    mu, tau2 = params[0], params[1]
    if tau2 < 0:
        return 1e300
    weights = np.asarray(weights, float)
    edges = np.array([0.0, *CUTPOINTS, 1.0])
    sd = np.sqrt(se**2 + tau2)
    p = stats.norm.sf(y / se)  # one-sided p of each study
    j = np.array([int(np.sum(pi > np.array(CUTPOINTS))) for pi in p])  # interval index
    # y-values whose one-sided p lies in (edges[m], edges[m+1]): between these two bounds
    upper = se[:, None] * stats.norm.isf(edges[None, :-1])  # isf(0) = +inf
    lower = se[:, None] * stats.norm.isf(edges[None, 1:])  # isf(1) = -inf
    mass = stats.norm.cdf((upper - mu) / sd[:, None]) - stats.norm.cdf((lower - mu) / sd[:, None])
    denom = mass @ weights
    return -float(np.sum(np.log(weights[j]) + stats.norm.logpdf(y, mu, sd) - np.log(denom)))


def direct_fit(y, se, weights, x0):
    res = optimize.minimize(
        weighted_negll,
        x0,
        args=(y, se, weights),
        method="Nelder-Mead",
        options={"xatol": 1e-10, "fatol": 1e-13, "maxiter": 20000},
    )
    return res.x


@pytest.mark.parametrize("name", list(PATTERNS))
def test_fixed_weight_estimates_match_direct_scipy_maximisation(name):
    # independent likelihood above, maximised by scipy's Nelder-Mead (Vevea & Woods 2005)
    y = -Y  # pooled side positive, so one-sided p are in the same direction as the model's
    res = fixed_weight_selection(data(y, SE), pooled_estimate=float(np.mean(y)))
    est = res.by_pattern()[name]
    x = direct_fit(y, SE, PATTERNS[name], [float(np.mean(y)), 0.01])
    assert est.estimate == pytest.approx(x[0], abs=2e-5)
    assert est.tau2 == pytest.approx(max(x[1], 0.0), abs=2e-5)


def test_fixed_weight_unadjusted_is_ml_random_effects_and_direction_mirrors():
    # all weights 1: plain ML random effects (normal likelihood maximised by scipy)
    def nll(p):
        sd2 = SE**2 + max(p[1], 0)
        return 0.5 * np.sum(np.log(sd2) + (Y - p[0]) ** 2 / sd2)

    x = optimize.minimize(nll, [0.0, 0.01], method="Nelder-Mead", options={"xatol": 1e-10}).x
    res = fixed_weight_selection(data(), pooled_estimate=-0.2)
    assert res.unadjusted == pytest.approx(x[0], abs=1e-5)
    assert res.direction == "negative"
    mirrored = fixed_weight_selection(data(-Y), pooled_estimate=0.2)
    for a, b in zip(res.estimates, mirrored.estimates):
        assert b.estimate == pytest.approx(-a.estimate, abs=1e-8)
    # severe one-tailed selection pulls the estimate towards the null more than moderate
    by = res.by_pattern()
    assert abs(by["severe one-tailed"].estimate) < abs(by["moderate one-tailed"].estimate)
    assert abs(by["moderate one-tailed"].estimate) < abs(res.unadjusted)


def test_fixed_weight_two_studies():
    res = fixed_weight_selection(data([0.5, 0.1], [0.2, 0.3]), pooled_estimate=0.3)
    assert len(res.estimates) == 4
    assert all(not isinstance(e, NotComputable) for e in res.estimates)


# --------------------------------------------------------- words and picture


def _md_review():
    from lopside.model.review import Review, ReviewDetails, StudyRow

    rows = tuple(
        StudyRow(study=f"Invented {i}", estimate=float(y), se=float(s))
        for i, (y, s) in enumerate(zip(Y, SE), start=1)
    )
    return Review(details=ReviewDetails(measure="MD"), studies=rows)


def test_figure_marks_the_s_values_on_the_null_line_and_follows_the_curve():
    from matplotlib.figure import Figure

    from lopside.analysis import analyse
    from lopside.figures.selection import draw_selection_curve, selection_curve_input_from_result

    res = analyse(_md_review())
    model = res.selection_sensitivity.random
    inp = selection_curve_input_from_result(res)
    ax = Figure().add_subplot()
    art = draw_selection_curve(ax, inp)
    assert ax.get_xscale() == "log"
    x, y = art["line"].get_data()
    assert np.allclose(x, [c[0] for c in model.curve]) and np.allclose(
        y, [c[1] for c in model.curve]
    )
    sx, sy = art["s_value"].get_data()
    assert sx[0] == pytest.approx(model.s_value) and sy[0] == 0.0
    cx, _ = art["s_value_ci"].get_data()
    assert cx[0] == pytest.approx(model.s_value_ci)
    assert art["null"].get_ydata()[0] == 0.0
    assert art["worst"].get_ydata()[0] == pytest.approx(model.worst_case.estimate)
    # the curve reaches the worst case from the uncorrected side (monotone towards it)
    assert abs(y[-1] - model.worst_case.estimate) < abs(y[0] - model.worst_case.estimate)


def test_sentence_quotes_the_numbers_of_the_result():
    from lopside import summary as S
    from lopside.analysis import analyse

    res = analyse(_md_review())
    m = res.selection_sensitivity.random
    text = S.selection_sentence(res)
    assert f"at least {S.fmt_eta(m.s_value)} times" in text
    assert S.fmt_eta(m.s_value_ci) in text
    wc = m.worst_case
    assert S.fmt_effect_ci(wc.estimate, wc.ci_low, wc.ci_high, "MD") in text
    sec = S.selection_strength_section(res)
    labels = [r[0] for r in sec.rows]
    assert "η = 1 (no selection)" in labels and "η = 50" in labels
    assert any(r.startswith("Fixed weights: severe one-tailed") for r in labels)
    assert any("from memory" in n for n in sec.notes)


# --------------------------------------------------------- the JSON of check --json


def test_json_selection_sensitivity_has_the_issue_keys_and_the_result_values():
    import json

    from lopside.analysis import analyse
    from lopside.report import to_json

    res = analyse(_md_review())
    out = json.loads(json.dumps(to_json(res), allow_nan=False))
    ss = out["selection_sensitivity"]
    assert ss["affirmative"] == res.selection_sensitivity.affirmative
    assert ss["nonaffirmative"] == res.selection_sensitivity.nonaffirmative
    for name in ("fixed", "random"):
        block, model = ss[name], getattr(res.selection_sensitivity, name)
        assert {"s_value", "s_value_ci", "worst_case", "by_eta"} <= block.keys()
        assert block["s_value"] == pytest.approx(model.s_value)
        assert block["s_value_ci"] == pytest.approx(model.s_value_ci)
        assert set(block["worst_case"]) >= {"estimate", "ci_low", "ci_high"}
        assert [e["eta"] for e in block["by_eta"]] == [1, 2, 5, 10, 20, 50]
        for e, c in zip(block["by_eta"], model.by_eta):
            assert {"eta", "estimate", "ci_low", "ci_high"} <= e.keys()
            assert e["estimate"] == c.estimate and e["ci_low"] == c.ci_low
    fw = out["selection_fixed_weights"]
    assert [p["pattern"] for p in fw["patterns"]] == list(PATTERNS)
    assert "from memory" in fw["provenance"]
    assert "unreported_trials" not in out


def test_json_null_with_reason_when_not_computable():
    from lopside.analysis import analyse
    from lopside.model.review import Review, ReviewDetails, StudyRow
    from lopside.report import to_json

    one = Review(
        details=ReviewDetails(measure="MD"), studies=(StudyRow(study="A", estimate=0.3, se=0.1),)
    )
    ss = to_json(analyse(one))["selection_sensitivity"]
    assert ss["affirmative"] is None and ss["reason"]
    assert ss["fixed"]["s_value"] is None and ss["fixed"]["worst_case"]["estimate"] is None

    # all affirmative: the worst case is null with its reason; no S-value, with its reason
    rows = tuple(StudyRow(study=f"I{i}", estimate=y, se=0.1) for i, y in enumerate((0.5, 0.6, 0.7)))
    ss = to_json(analyse(Review(details=ReviewDetails(measure="MD"), studies=rows)))[
        "selection_sensitivity"
    ]
    assert ss["nonaffirmative"] == 0
    for name in ("fixed", "random"):
        assert ss[name]["worst_case"]["estimate"] is None and ss[name]["worst_case"]["reason"]
        assert ss[name]["s_value"] is None and ss[name]["s_value_reason"]


# --------------------------------------------------------- properties over generated data

from hypothesis import HealthCheck, given  # noqa: E402
from hypothesis import settings as hyp_settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402


@st.composite
def study_sets(draw):
    k = draw(st.integers(2, 25))
    y = draw(st.lists(st.floats(-3, 3, allow_nan=False), min_size=k, max_size=k))
    se = draw(st.lists(st.floats(0.02, 2.0), min_size=k, max_size=k))
    return np.array(y), np.array(se)


@hyp_settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(study_sets(), st.floats(0.0, 0.5))
def test_s_values_and_worst_case_are_consistent(data_, tau2):
    # properties that follow from the definitions (methods.md 11.3): the corrected estimate
    # is 0 at the S-value; the interval reaches the null no later than the estimate; with
    # N >= 0 the null is not attainable and the worst case stays on the effect's side
    y, se = data_
    w = 1 / (se**2 + tau2)
    mu = float(np.sum(w * y) / np.sum(w))
    if mu == 0.0:
        return
    res = selection_sensitivity(data(y, se), pooled_estimate=mu, tau2=tau2)
    sign = res.direction
    for name, ww in (("fixed", 1 / se**2), ("random", w)):
        m = getattr(res, name)
        aff = affirmative(y, se, sign)
        if m.s_value is not None:
            a = np.where(aff, 1.0, m.s_value)
            assert abs(np.sum(a * ww * y) / np.sum(a * ww)) < 1e-9 * max(1.0, np.max(np.abs(y)))
            if m.s_value_ci is not None:
                assert m.s_value_ci <= m.s_value * (1 + 1e-9)
        wc = m.worst_case
        if not isinstance(wc, NotComputable) and m.s_value is None and res.affirmative:
            if "not attainable" in m.s_value_reason:
                assert sign * wc.estimate >= -1e-12
        for c in m.by_eta:
            assert np.isfinite(c.estimate) and c.se >= 0


@hyp_settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(study_sets())
def test_fixed_weight_fits_never_raise_and_stay_finite(data_):
    y, se = data_
    res = fixed_weight_selection(data(y, se), pooled_estimate=float(np.mean(y)) or 0.1)
    if isinstance(res, NotComputable):
        assert res.reason
        return
    for e in res.estimates:
        assert isinstance(e, NotComputable) or (np.isfinite(e.estimate) and e.tau2 >= 0)


def test_fixed_weight_exact_hessian_matches_differences_of_the_gradient():
    # central differences of the exact gradient (common practice) at a few points
    from lopside.stats.selection_fixed import _Batch

    model = _Batch(-Y, SE, CUTPOINTS)
    logw = np.log(np.array([PATTERNS["severe one-tailed"], PATTERNS["moderate two-tailed"]]))
    for mu, t2 in ((0.1, 0.0), (0.3, 0.05), (-0.2, 0.4)):
        m = np.full(2, mu)
        t = np.full(2, t2 + 1e-3)
        _, _, H = model(m, t, logw, hessian=True)
        h = 1e-6
        for j, (dm, dt) in enumerate(((h, 0.0), (0.0, h))):
            _, gp = model(m + dm, t + dt, logw)
            _, gm = model(m - dm, t - dt, logw)
            assert np.allclose(H[:, :, j], (gp - gm) / (2 * h), rtol=1e-5, atol=1e-5)
