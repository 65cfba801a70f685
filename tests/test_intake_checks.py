"""Tests of the row checks (lopside.intake.checks).

Each rule is shown to fire on a constructed row and not to fire on a clean one. Rows are
invented. The symmetry rule rests on the Cochrane Handbook 5.1, section 7.7.7.3: a
confidence interval for a ratio measure (OR, RR, HR) is symmetric on the log scale, so
ln(estimate) lies midway between ln(lower) and ln(upper); for difference measures the
interval is symmetric on the plain scale (section 7.7.3.2).
"""

from __future__ import annotations

import math
from dataclasses import replace

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from lopside.intake import Problem, check_row, check_rows
from lopside.intake import messages as M
from lopside.intake.checks import symmetry
from lopside.intake.numbers import count_decimals
from lopside.model.review import MEASURES, StudyRow

CLEAN: list[tuple[StudyRow, str]] = [
    (StudyRow("Alpha 2001", estimate=0.82, lower=0.61, upper=1.10), "OR"),
    (StudyRow("Alpha 2001", estimate=0.82, lower=0.61, upper=1.10, level=90.0), "HR"),
    (StudyRow("Beta 2002", estimate=-0.35, lower=-0.60, upper=-0.10), "MD"),
    (StudyRow("Gamma 2003", estimate=-0.35, se=0.13), "SMD"),
    (StudyRow("Delta 2004", estimate=0.82, p=0.21), "RR"),
    (StudyRow("Delta 2004", estimate=0.82, p=0.001, p_bound=None), "OR"),
    (StudyRow("Eps 2005", int_events=12, int_total=140, ctl_events=20, ctl_total=138), "OR"),
    (StudyRow("Eps 2005", int_events=12, int_total=140, ctl_events=20, ctl_total=138), "RD"),
    (
        StudyRow(
            "Zeta 2006",
            int_mean=5.2,
            int_sd=1.1,
            int_n=40,
            ctl_mean=4.8,
            ctl_sd=1.3,
            ctl_n=42,
            risk_of_bias="low",
        ),
        "SMD",
    ),
    (StudyRow("Eta 2007", estimate=0.50, lower=0.25, upper=1.00), "OR"),
]


@pytest.mark.parametrize(("row", "measure"), CLEAN)
def test_clean_rows_have_no_problems(row: StudyRow, measure: str) -> None:
    assert check_row(row, measure) == ()


def _codes(problems: tuple[Problem, ...]) -> list[tuple[str, str, str]]:
    return [(p.code, p.field, p.severity) for p in problems]


# (row, measure, code, field, severity)
FIRING: list[tuple[StudyRow, str, str, str, str]] = [
    (StudyRow("A", estimate=1.0, lower=1.2, upper=0.9), "OR", "limits_reversed", "lower", "error"),
    (StudyRow("A", estimate=1.0, lower=1.0, upper=1.0), "OR", "limits_equal", "lower", "error"),
    (
        StudyRow("A", estimate=1.5, lower=0.61, upper=1.10),
        "OR",
        "estimate_outside",
        "estimate",
        "error",
    ),
    (StudyRow("A", estimate=-0.2, se=0.1), "OR", "ratio_not_positive", "estimate", "error"),
    (
        StudyRow("A", estimate=0.5, lower=0.0, upper=1.2),
        "RR",
        "ratio_not_positive",
        "lower",
        "error",
    ),
    (
        StudyRow("A", int_events=150, int_total=140, ctl_events=20, ctl_total=138),
        "OR",
        "events_over_total",
        "int_events",
        "error",
    ),
    (
        StudyRow("A", int_mean=5, int_sd=-1.1, int_n=40, ctl_mean=4, ctl_sd=1.3, ctl_n=42),
        "MD",
        "negative",
        "int_sd",
        "error",
    ),
    (
        StudyRow("A", int_mean=5, int_sd=1.1, int_n=-40, ctl_mean=4, ctl_sd=1.3, ctl_n=42),
        "MD",
        "negative",
        "int_n",
        "error",
    ),
    (
        StudyRow("A", int_events=-1, int_total=140, ctl_events=20, ctl_total=138),
        "OR",
        "negative",
        "int_events",
        "error",
    ),
    (StudyRow("A", estimate=0.5, se=-0.1), "MD", "negative", "se", "error"),
    (
        StudyRow("A", int_mean=5, int_sd=0, int_n=40, ctl_mean=4, ctl_sd=1.3, ctl_n=42),
        "MD",
        "sd_zero",
        "int_sd",
        "warning",
    ),
    (StudyRow("A", estimate=0.5, se=0.0), "MD", "se_zero", "se", "error"),
    (
        StudyRow("A", int_events=12.5, int_total=140, ctl_events=20, ctl_total=138),
        "OR",
        "not_whole",
        "int_events",
        "warning",
    ),
    (
        StudyRow("A", estimate=0.82, lower=0.61, upper=1.10, level=0.95),
        "OR",
        "level_range",
        "level",
        "error",
    ),
    (
        StudyRow("A", estimate=0.82, lower=0.61, upper=1.10, level=100.0),
        "OR",
        "level_range",
        "level",
        "error",
    ),
    (StudyRow("A", estimate=0.82, p=0.0), "OR", "p_range", "p", "error"),
    (StudyRow("A", estimate=0.82, p=1.5), "OR", "p_range", "p", "error"),
    (StudyRow("A", estimate=0.82, unread=(("lower", "abc"),)), "OR", "unread", "lower", "error"),
    (StudyRow("A"), "OR", "no_route", "", "error"),
    (StudyRow("A", estimate=0.82), "OR", "no_route", "", "error"),
    (
        StudyRow("A", int_events=3, int_total=40, ctl_events=5, ctl_total=41),
        "HR",
        "no_route_for_measure",
        "",
        "error",
    ),
    (
        StudyRow("A", int_events=0, int_total=40, ctl_events=0, ctl_total=41),
        "OR",
        "double_zero",
        "int_events",
        "warning",
    ),
    (
        StudyRow("A", int_events=0, int_total=40, ctl_events=0, ctl_total=41),
        "RR",
        "double_zero",
        "int_events",
        "warning",
    ),
    (
        StudyRow("A", int_events=40, int_total=40, ctl_events=41, ctl_total=41),
        "OR",
        "all_events",
        "int_events",
        "warning",
    ),
    (StudyRow("A", estimate=0.82, lower=0.61, se=0.1), "OR", "partial_ci", "upper", "warning"),
    (StudyRow("A", lower=0.61, upper=1.10), "OR", "ci_without_estimate", "estimate", "warning"),
    (
        StudyRow("A", estimate=0.8, se=0.1, int_events=3, int_total=40),
        "OR",
        "partial_counts",
        "ctl_events",
        "warning",
    ),
    (StudyRow("A", estimate=0.8, se=0.1, int_mean=3.0), "MD", "partial_means", "int_sd", "warning"),
    (
        StudyRow("A", estimate=0.8, se=0.1, int_events=3, int_total=40, ctl_events=5, ctl_total=41),
        "HR",
        "counts_unused",
        "int_events",
        "warning",
    ),
    (
        StudyRow(
            "A",
            estimate=0.8,
            se=0.1,
            int_mean=5,
            int_sd=1,
            int_n=40,
            ctl_mean=4,
            ctl_sd=1,
            ctl_n=41,
        ),
        "HR",
        "means_unused",
        "int_mean",
        "warning",
    ),
    (
        StudyRow("A", estimate=0.8, se=0.1, risk_of_bias="unclear"),
        "OR",
        "risk_of_bias_unknown",
        "risk_of_bias",
        "warning",
    ),
    (StudyRow("A", estimate=0.8, p=0.001, p_bound="<"), "OR", "p_bound_approx", "p", "warning"),
    (StudyRow("A", estimate=0.8, p=0.05, p_bound=">"), "OR", "p_bound_unusable", "p", "warning"),
    (StudyRow("A", estimate=1.0, p=0.5), "OR", "p_at_null", "estimate", "error"),
    (StudyRow("A", estimate=0.0, p=0.5), "MD", "p_at_null", "estimate", "error"),
    (StudyRow("A", estimate=0.9, p=0.95), "OR", "p_near_one", "p", "warning"),
    (StudyRow("", estimate=0.8, se=0.1), "OR", "no_label", "study", "warning"),
    # symmetry (see the module docstring for the source)
    (
        StudyRow("A", estimate=0.50, lower=0.25, upper=0.75),
        "OR",
        "ratio_linear_symmetric",
        "estimate",
        "warning",
    ),
    (
        StudyRow("A", estimate=0.50, lower=0.25, upper=2.00),
        "HR",
        "ratio_asymmetric",
        "estimate",
        "warning",
    ),
    (
        StudyRow("A", estimate=0.50, lower=0.25, upper=1.00),
        "MD",
        "difference_log_symmetric",
        "estimate",
        "warning",
    ),
    (
        StudyRow("A", estimate=-0.35, lower=-0.60, upper=-0.30),
        "MD",
        "difference_asymmetric",
        "estimate",
        "warning",
    ),
]


@pytest.mark.parametrize(
    ("row", "measure", "code", "fld", "severity"), FIRING, ids=[f"{c[2]}-{c[1]}" for c in FIRING]
)
def test_each_rule_fires(row: StudyRow, measure: str, code: str, fld: str, severity: str) -> None:
    problems = check_row(row, measure)
    assert (code, fld, severity) in _codes(problems), _codes(problems)
    for p in problems:
        assert p.code in M.CHECKS  # every message is declared in one place
        assert p.message.startswith(M.where(0, row.study, p.field))
        assert p.severity in ("error", "warning")


def test_message_example_from_the_brief() -> None:
    row = StudyRow("Smith 2004", estimate=1.00, lower=1.20, upper=0.90)
    problems = check_row(
        row, "OR", index=2, printed={"estimate": "1.00", "lower": "1.20", "upper": "0.90"}
    )
    assert [p.message for p in problems] == [
        "Row 3 (Smith 2004), lower: the lower limit 1.20 is above the upper limit 0.90. Check the "
        "order of the limits in the paper."
    ]
    assert problems[0].row == 2 and problems[0].study == "Smith 2004"


def test_unread_message_quotes_the_text() -> None:
    (p,) = check_row(StudyRow("A", estimate=0.8, se=0.1, unread=(("p", "abc"),)), "OR")
    assert "could not read 'abc' as a number" in p.message


def test_no_route_message_says_what_to_enter() -> None:
    (p,) = check_row(StudyRow("A"), "OR")
    assert p.message.endswith(
        "Enter an estimate with its CI, or an SE, or a P value, or counts, or means/SDs."
    )


def test_double_zero_not_warned_for_risk_difference() -> None:
    row = StudyRow("A", int_events=0, int_total=40, ctl_events=0, ctl_total=41)
    assert check_row(row, "RD") == ()
    assert "left out of odds ratio analyses" in check_row(row, "OR")[0].message


def test_review_level_is_checked_for_rows_with_an_interval() -> None:
    row = StudyRow("A", estimate=0.82, lower=0.61, upper=1.10)
    assert ("level_range", "level", "error") in _codes(check_row(row, "OR", ci_level=0.95))
    assert check_row(row, "OR", ci_level=99.0) == ()
    assert check_row(StudyRow("A", estimate=0.8, se=0.1), "OR", ci_level=0.95) == ()


def test_unknown_measure_is_a_programming_error() -> None:
    with pytest.raises(ValueError):
        check_row(StudyRow("A"), "XYZ")


def test_check_rows_indexes_and_duplicates() -> None:
    rows = [
        StudyRow("A", estimate=0.8, se=0.1),
        StudyRow("B", estimate=0.5, lower=0.25, upper=0.75),
        StudyRow("A", estimate=0.8, se=0.1),
    ]
    problems = check_rows(rows, "OR")
    assert [(p.row, p.code) for p in problems] == [(1, "ratio_linear_symmetric"), (2, "duplicate")]
    assert problems[1].message == "Row 3 (A): " + M.check_message("duplicate", other=1)


# -- symmetry and rounding ------------------------------------------------------------


def test_handbook_log_symmetry_examples() -> None:
    # Handbook 5.1 s7.7.7.3: ratio CIs are symmetric on the log scale.
    ok = symmetry(0.50, 0.25, 1.00, "OR")
    assert ok.log_ok is True and ok.log_gap == pytest.approx(0.0, abs=1e-12)
    bad = symmetry(0.50, 0.25, 0.75, "OR")
    assert bad.log_ok is False and bad.linear_ok is True
    # the limits of the flagged row point to an estimate of sqrt(0.25 * 0.75) = 0.433
    assert bad.implied == pytest.approx(math.sqrt(0.25 * 0.75))
    (p,) = check_row(StudyRow("A", estimate=0.50, lower=0.25, upper=0.75), "OR")
    assert "symmetric around 0.5 on the plain scale" in p.message
    assert "strong sign of a typo" in p.message


def test_printed_decimals_set_the_tolerance() -> None:
    # OR 0.5 (0.3 to 0.9): ln 0.5 = -0.693, mid of ln limits = -0.655, a gap of 0.038.
    # With one printed decimal the rounding box is wide enough to hold a symmetric interval;
    # with two decimals (0.50, 0.30, 0.90) it is not.
    row = StudyRow("A", estimate=0.5, lower=0.3, upper=0.9)
    one = {"estimate": "0.5", "lower": "0.3", "upper": "0.9"}
    two = {"estimate": "0.50", "lower": "0.30", "upper": "0.90"}
    assert check_row(row, "OR", printed=one) == ()
    assert _codes(check_row(row, "OR", printed=two)) == [
        ("ratio_asymmetric", "estimate", "warning")
    ]
    # without printed text the row is read as a whole: all three show one decimal, so one
    # decimal is taken (a paper printing 0.50 (0.30 to 0.90) is the rare case this reads
    # too leniently; see interval_decimals)
    assert check_row(row, "OR") == ()
    # ... and where any of them shows two, two are assumed for all: still flagged
    assert _codes(check_row(replace(row, upper=0.91), "OR")) == [
        ("ratio_asymmetric", "estimate", "warning")
    ]


def test_interval_decimals_reads_a_row_without_printed_text_as_a_whole() -> None:
    from lopside.intake.numbers import interval_decimals

    none = (None, None, None)
    assert interval_decimals((0.9, 0.6, 1.4), none) == (1, 1, 1)
    assert interval_decimals((5.0, 2.0, 8.0), none) == (0, 0, 0)  # an MD printed whole
    assert interval_decimals((5.0, 2.5, 8.0), none) == (1, 1, 1)
    assert interval_decimals((0.9, 0.6, 1.45), none) == (2, 2, 2)  # two shown: two for all
    assert interval_decimals((0.823, 0.6, 1.4), none) == (3, 2, 2)  # more where shown
    assert interval_decimals((1e-7, 0.5, 1.0), none) == (2, 2, 2)  # exponent form: default
    # printed text wins wherever it was kept
    assert interval_decimals((0.9, 0.6, 1.4), ("0.90", "0.60", "1.40")) == (2, 2, 2)
    assert interval_decimals((0.9, 0.6, 1.4), ("0.9", None, None)) == (1, 2, 2)


def test_narrow_interval_is_not_judged() -> None:
    # OR 1.02 (1.00 to 1.04) is symmetric on both scales within rounding: nothing to say
    assert check_row(StudyRow("A", estimate=1.02, lower=1.00, upper=1.04), "OR") == ()


def test_count_decimals() -> None:
    assert count_decimals("0.70") == 2
    assert count_decimals("1,10") == 2
    assert count_decimals("0·700") == 3
    assert count_decimals("12") == 0
    assert count_decimals(None, 0.5) == 2  # assumed: a float cannot tell 0.5 from 0.50
    assert count_decimals(None, 0.823) == 3
    assert count_decimals(None) == 2


_Z95 = 1.959963984540054  # standard normal 0.975 quantile (scipy.stats.norm.ppf(0.975))


@settings(max_examples=200, deadline=None)
@given(
    st.floats(-3.0, 3.0),
    st.floats(0.02, 1.5),
    st.sampled_from([2, 3]),
    st.sampled_from(["OR", "RR", "HR"]),
)
def test_wald_ratio_intervals_rounded_are_never_flagged(
    y: float, se: float, d: int, measure: str
) -> None:
    # A Wald interval exp(y +/- z*se), printed to d decimals, is symmetric on the log scale
    # up to rounding alone, so the check must stay quiet (Handbook 5.1 s7.7.7.3).
    est, lo, hi = (round(math.exp(v), d) for v in (y, y - _Z95 * se, y + _Z95 * se))
    if lo <= 0 or not lo < est < hi:
        return  # rounding to zero or to a limit: not a printable interval at d decimals
    printed = {k: f"{v:.{d}f}" for k, v in (("estimate", est), ("lower", lo), ("upper", hi))}
    problems = check_row(StudyRow("A", estimate=est, lower=lo, upper=hi), measure, printed=printed)
    assert problems == (), (printed, problems)


@settings(max_examples=200, deadline=None)
@given(
    st.floats(-50, 50),
    st.floats(0.01, 20),
    st.sampled_from([1, 2, 3]),
    st.sampled_from(["MD", "RD", "SMD"]),
)
def test_wald_difference_intervals_rounded_are_never_flagged(
    y: float, se: float, d: int, measure: str
) -> None:
    est, lo, hi = (round(v, d) for v in (y, y - _Z95 * se, y + _Z95 * se))
    if not lo < est < hi:
        return
    printed = {k: f"{v:.{d}f}" for k, v in (("estimate", est), ("lower", lo), ("upper", hi))}
    problems = check_row(StudyRow("A", estimate=est, lower=lo, upper=hi), measure, printed=printed)
    # a risk difference beyond -1..1 is impossible and reported as such (issue 12)
    beyond = measure == "RD" and max(abs(est), abs(lo), abs(hi)) > 1
    assert {p.code for p in problems if p.code == "rd_over_one"} == (
        {"rd_over_one"} if beyond else set()
    )
    problems = tuple(p for p in problems if p.code != "rd_over_one")
    assert problems == (), (printed, problems)


@pytest.mark.parametrize("measure", MEASURES)
def test_checks_never_raise_on_odd_values(measure: str) -> None:
    fields = ("estimate", "lower", "upper", "se", "p", "int_events", "int_total")
    for v in (float("nan"), float("inf"), -float("inf")):
        row = StudyRow("A", **{f: v for f in fields})
        problems = check_row(row, measure)
        assert [p.field for p in problems if p.code == "not_finite"] == list(fields)
        # the values are then treated as missing: nothing else is said about them
        assert {p.code for p in problems} <= {"not_finite", "no_route"}
    for v in (0.0, -0.0, 1e308, -1e-308):
        row = StudyRow("A", **{f: v for f in fields})
        problems = check_row(row, measure)
        assert problems and all(p.code in M.CHECKS for p in problems)
