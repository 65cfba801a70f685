"""The renderer-neutral summary: number formats, section wiring, the `check` text.

Reviews here are invented (seeded generator), for testing only.
"""

from __future__ import annotations

import math
import re

import numpy as np
import pytest

from lopside import CAUTION
from lopside.analysis import analyse
from lopside.model.review import Review, ReviewDetails, StudyRow
from lopside.summary import (
    MINUS,
    all_sections,
    fmt_ci,
    fmt_effect,
    fmt_int,
    fmt_p,
    fmt_pct,
    fmt_tau2,
    pooled_section,
    render_text,
    tests_section,
    text_summary,
)


def invented_or_review(k: int = 14, seed: int = 20260501) -> Review:
    """Invented 2x2 trials with a built-in small-study effect (testing only)."""
    rng = np.random.default_rng(seed)
    rows = []
    for i in range(k):
        n = int(rng.integers(40, 900))
        n1, n0 = n // 2, n - n // 2
        lor = -0.2 - 0.8 * (1 - math.log(n / 40) / math.log(900 / 40))
        o1 = 0.25 / 0.75 * math.exp(lor)
        a = int(rng.binomial(n1, o1 / (1 + o1)))
        c = int(rng.binomial(n0, 0.25))
        rows.append(
            StudyRow(
                study=f"Invented trial {i + 1}",
                year=2000 + i,
                int_events=a,
                int_total=n1,
                ctl_events=c,
                ctl_total=n0,
            )
        )
    return Review(
        details=ReviewDetails(title="Invented review for tests", measure="OR"),
        studies=tuple(rows),
    )


@pytest.fixture(scope="module")
def result():
    return analyse(invented_or_review())


# --------------------------------------------------------------------------------------
# Number formats


def test_ratio_effects_are_printed_on_the_natural_scale():
    # exp(log 0.62) = 0.62: ratios are analysed on the log scale (Cochrane Handbook 5.1
    # section 9.2.2.2) and reported as ratios
    assert fmt_effect(math.log(0.62), "OR") == "0.62"
    assert fmt_effect(math.log(1.5), "RR") == "1.50"
    assert fmt_effect(math.log(0.045), "HR") == "0.045"
    assert fmt_effect(math.log(250.0), "OR") == "250"
    assert fmt_ci(math.log(0.5), math.log(0.8), "OR") == "0.50 to 0.80"


def test_differences_keep_their_sign_with_a_true_minus():
    assert fmt_effect(-7.4, "MD") == f"{MINUS}7.40"
    assert fmt_effect(-0.0001, "MD") == "0.00"  # never "-0.00"
    assert fmt_effect(0.0423, "RD") == "0.042"
    assert fmt_ci(-9.81, -4.99, "MD") == f"{MINUS}9.81 to {MINUS}4.99"


def test_missing_values_are_a_dash_never_nan():
    for f in (lambda: fmt_effect(float("nan"), "OR"), lambda: fmt_p(None), lambda: fmt_pct(None)):
        assert f() == "\u2013"


def test_p_values_and_percentages():
    assert fmt_p(0.0004) == "< 0.001"
    assert fmt_p(0.0349) == "0.035"
    assert fmt_p(0.5) == "0.500"
    assert fmt_pct(44.4) == "44%"
    assert fmt_tau2(0.0) == "0"
    assert fmt_tau2(0.0251) == "0.025"
    assert fmt_int(7114) == "7,114"


# --------------------------------------------------------------------------------------
# Wiring: sections show the result's own numbers, formatted once


def test_pooled_section_shows_the_results_numbers(result):
    sec = pooled_section(result)
    fixed = next(r for r in sec.rows if r[0].startswith("Fixed effect (inverse"))
    assert fixed[1] == fmt_effect(result.fixed.estimate, "OR")
    assert fixed[2] == fmt_ci(result.fixed.ci.low, result.fixed.ci.high, "OR")
    chosen = sec.rows[sec.emphasis[0]]
    assert "(chosen)" in chosen[0] and result.settings.tau2_method in chosen[0]
    assert chosen[1] == fmt_effect(result.random.estimate, "OR")


def test_fixed_effect_estimate_against_an_independent_computation(result):
    # Inverse-variance fixed effect from the raw counts, written out here from the
    # handbook formulas: log OR = ln(ad/bc), Var = 1/a + 1/b + 1/c + 1/d (no zero cells
    # in these data), pooled = sum(w y)/sum(w), w = 1/Var (Cochrane Handbook 5.1,
    # sections 9.4.2 and 9.4.3.1; methods.md 1.3 and 2.1).
    y, w = [], []
    for s in result.review.studies:
        a, b = s.int_events, s.int_total - s.int_events
        c, d = s.ctl_events, s.ctl_total - s.ctl_events
        assert min(a, b, c, d) > 0
        y.append(math.log(a * d / (b * c)))
        w.append(1.0 / (1 / a + 1 / b + 1 / c + 1 / d))
    pooled = sum(wi * yi for wi, yi in zip(w, y)) / sum(w)
    fixed = next(r for r in pooled_section(result).rows if r[0].startswith("Fixed effect (inv"))
    assert fixed[1] == fmt_effect(pooled, "OR")
    assert result.fixed.estimate == pytest.approx(pooled, rel=1e-12)


def test_tests_section_marks_the_recommended_test(result):
    sec = tests_section(result)
    rec = result.recommendation.key
    marked = [sec.rows[i] for i in sec.emphasis]
    assert len(marked) == 1
    assert marked[0][4].startswith("recommended")
    t = result.tests[rec]
    assert marked[0][2] == fmt_p(t.pvalue)
    # tests meant for other measures are not listed as rows but named in a note
    assert not any(r[0] == "Egger's test with modified SE" for r in sec.rows)
    assert any("meant for other measures" in n for n in sec.notes)


def test_every_section_has_rows_of_strings(result):
    for sec in all_sections(result):
        assert sec.title
        for row in sec.rows:
            assert all(isinstance(c, str) for c in row), (sec.key, row)
            if sec.header:
                assert len(row) <= len(sec.header)


# --------------------------------------------------------------------------------------
# The `lopside check` text


def test_text_summary_is_terminal_width_and_complete(result):
    text = text_summary(result)
    assert text.endswith("\n")
    assert max(len(line) for line in text.splitlines()) <= 100
    for title in (
        "Data entered",
        "Pooled results",
        "Heterogeneity",
        "Tests for small-study effects",
        "Can the tests be trusted here?",
        "Sensitivity of the estimate to small-study effects",
        "What the funnel shows",
        "Why might the funnel lean? Explanations side by side",
        "Publication bias: suggested rating",
    ):
        assert title in text
    flat = " ".join(text.split())
    assert " ".join(CAUTION.split()) in flat
    assert result.fingerprint in text
    assert "nan" not in re.findall(r"[a-z]+", text.lower())


def test_render_text_wraps_long_cells():
    from lopside.summary import Section

    sec = Section("x", "Title", (("Label", "word " * 60),))
    lines = render_text(sec, width=60).splitlines()
    assert max(len(line) for line in lines) <= 60
    assert len(lines) > 4


def test_a_rating_that_cannot_be_given_says_why_after_a_colon():
    """The glance line read 'cannot be rated from these data (only 7 studies (at least 10
    advised; ...); ...; signals point towards bias)': parentheses inside parentheses."""
    from lopside.assessment import assess
    from lopside.cli_common import load_review_file
    from lopside.paths import sample_reviews_dir
    from lopside.summary.page_one import _rating_line

    review, _ = load_review_file(sample_reviews_dir() / "wound_dressings_small.lopside")
    assessment = assess(review)
    rating = assessment.appraisal.rating
    assert not rating.assessable  # 7 studies: the case this test is about
    label, text = _rating_line(assessment)
    assert text.startswith(f"{rating.suggested}: only 7 studies (")
    assert not text.startswith(f"{rating.suggested} (")
    assert text.count("(") == text.count(")")
    if rating.leaning:
        assert "; even so, signals point towards bias;" in text
