"""Readings on constructed data: each explanation's evidence reacts as it should.

All reviews here are constructed for testing (invented numbers). The engine computes every
statistic; these tests check that the readings turn them into the right words.
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest

from lopside.analysis import analyse
from lopside.appraise import appraise
from lopside.appraise.glossary import GLOSSES
from lopside.appraise.rating import CANNOT_RATE
from lopside.appraise.reading import REGIONS, Z_01, Z_05, Z_10, significance_region
from lopside.model.review import (
    CAUSE_TITLES,
    CAUSES,
    DOMAIN_RATINGS,
    AppraisalNotes,
    CauseNote,
    Review,
    ReviewDetails,
    StudyRow,
)
from lopside.summary import rating_section

# A fixed pattern of residuals, uncorrelated with the order of the SEs, so that a group of
# studies has scatter but no lean of its own.
DELTAS = (0.4, -0.4, 0.1, -0.1, 0.0, 0.3, -0.3, 0.2, -0.2)


def md_review(rows, **details) -> Review:
    return Review(details=ReviewDetails(measure="MD", **details), studies=tuple(rows))


def lines(reading, direction=None):
    return [e.text for e in reading.evidence if direction is None or e.direction == direction]


def all_texts(a) -> list[str]:
    out = [t for _l, t in a.small_study.lines]
    for c in a.causes:
        out += [e.text for e in c.evidence]
    return out + list(a.rating.reasons)


# --------------------------------------------------------------------------------------
# Contour regions (a classification of y/SE; the funnel's bands)


def test_region_thresholds_are_the_normal_quantiles():
    from scipy.stats import norm

    # two-sided p = 0.10, 0.05, 0.01 (scipy.stats.norm.ppf, a reference outside the project)
    assert Z_10 == pytest.approx(norm.ppf(0.95), abs=1e-12)
    assert Z_05 == pytest.approx(norm.ppf(0.975), abs=1e-12)
    assert Z_01 == pytest.approx(norm.ppf(0.995), abs=1e-12)


@pytest.mark.parametrize(
    "z, region",
    [(0.5, "p > 0.10"), (1.8, "0.05 to 0.10"), (-2.2, "0.01 to 0.05"), (3.1, "p < 0.01")],
)
def test_significance_region(z, region):
    # two-sided p of z: 0.617, 0.072, 0.028, 0.0019 (scipy.stats.norm.sf(|z|) * 2)
    assert significance_region(z * 0.2, 0.2) == region
    assert region in REGIONS


def _with_filled(result, points, side="right"):
    """The same analysis with trim and fill's pseudo-studies replaced by ``points``.

    The reviews here favour lower values, so "right" is the side of smaller benefit or
    harm, where the usual mechanism (withholding unfavourable results) leaves its gap.
    """
    from lopside.stats.adjust import FilledStudy

    filled = tuple(FilledStudy(y=y, se=se, mirrored_from="constructed") for y, se in points)
    tf = replace(result.trim_fill, k0=len(filled), side=side, filled=filled)
    return replace(result, trim_fill=tf)


@pytest.fixture(scope="module")
def symmetric_result():
    # mirror-image pairs around -0.5 at each SE: no lean at all
    rows = []
    for i, se in enumerate((0.2, 0.3, 0.45, 0.6, 0.8, 1.0)):
        for sign in (1, -1):
            rows.append(StudyRow(study=f"S{i}{sign}", estimate=-0.5 + sign * 0.6 * se, se=se))
    return analyse(md_review(rows, title="constructed symmetric review"))


def test_missing_studies_in_the_non_significant_region_read_as_publication_bias(
    symmetric_result,
):
    res = _with_filled(symmetric_result, [(0.1, 0.5), (-0.2, 0.4)])  # |z| 0.2, 0.5
    c = appraise(res).small_study.contour
    assert c.verdict == "non-significant"
    assert "consistent with publication bias" in c.text
    assert "Peters et al. 2008" in c.text
    sel = appraise(res).cause("selection")
    assert any("non-significant region" in t for t in lines(sel, "for"))


def test_missing_studies_that_would_have_been_significant_point_elsewhere(symmetric_result):
    # right of the pooled -0.5 but still significant benefit: |z| 4.0, 3.0
    res = _with_filled(symmetric_result, [(-0.4, 0.1), (-0.3, 0.1)])
    a = appraise(res)
    assert a.small_study.contour.verdict == "significant"
    assert "other" in a.small_study.contour.text and "more likely" in a.small_study.contour.text
    assert any("significant" in t for t in lines(a.cause("selection"), "against"))


def test_symmetric_review_is_rated_undetected(symmetric_result):
    a = appraise(symmetric_result)
    assert symmetric_result.tests["egger"].pvalue > 0.5
    assert a.small_study.test.signal is False
    assert a.rating.suggested == "undetected"
    assert a.rating.suggested in DOMAIN_RATINGS


# --------------------------------------------------------------------------------------
# True heterogeneity: a subgroup that explains the lean


@pytest.fixture(scope="module")
def subgroup_result():
    rows = []
    for i, d in enumerate(DELTAS):
        se = 1.2 + 0.25 * i  # small community studies with a large effect
        rows.append(StudyRow(study=f"C{i}", estimate=-3.0 + d * se, se=se, subgroup="community"))
    for i, d in enumerate(DELTAS):
        se = 0.3 + 0.06 * i  # large hospital studies with a small effect
        rows.append(StudyRow(study=f"H{i}", estimate=-0.5 + d * se, se=se, subgroup="hospital"))
    return analyse(md_review(rows, title="constructed subgroup review"))


def test_a_subgroup_that_removes_the_asymmetry_is_reported(subgroup_result):
    r = subgroup_result
    assert r.tests["egger"].pvalue < 0.10  # the whole funnel leans
    for lv in r.subgroups["subgroup"].levels:
        assert lv.egger.pvalue > 0.10  # ... but no subgroup does
    het = appraise(r).cause("heterogeneity")
    found = [t for t in lines(het, "for") if "asymmetry disappears" in t]
    assert found, lines(het)
    assert "community" in found[0] and "hospital" in found[0]


def test_a_subgroup_that_does_not_remove_it_is_reported_too():
    rows = []
    for g, mu in (("north", -0.5), ("south", -0.7)):
        for i in range(8):
            se = 0.2 + 0.15 * i
            rows.append(StudyRow(study=f"{g}{i}", estimate=mu - 2.0 * se, se=se, subgroup=g))
    # the same lean (effect grows with SE) in both subgroups; a little scatter
    rows = [replace(r, estimate=r.estimate + 0.05 * DELTAS[i % 9]) for i, r in enumerate(rows)]
    r = analyse(md_review(rows))
    het = appraise(r).cause("heterogeneity")
    assert any("lean persists within" in t for t in lines(het, "against")), lines(het)


def test_without_a_subgroup_column_the_reading_says_what_to_look_for(symmetric_result):
    het = appraise(symmetric_result).cause("heterogeneity")
    assert any("No subgroup feature" in t for t in lines(het, "unclear"))
    assert "dose" in het.what_to_check and "setting" in het.what_to_check


# --------------------------------------------------------------------------------------
# Poorer methods in smaller studies


def test_asymmetry_confined_to_high_risk_of_bias_studies():
    rows = []
    for i, d in enumerate(DELTAS):
        se = 0.15 + 0.03 * i  # large, well-conducted trials: no lean
        rows.append(StudyRow(study=f"L{i}", estimate=-0.2 + d * se, se=se, risk_of_bias="low"))
    for i, d in enumerate(DELTAS):
        se = 0.5 + 0.2 * i  # small trials at high risk: effect grows with SE
        rows.append(
            StudyRow(study=f"Hi{i}", estimate=-0.2 - 1.5 * se + 0.3 * d, se=se, risk_of_bias="high")
        )
    r = analyse(md_review(rows))
    m = appraise(r).cause("methods")
    assert any("confined to studies at higher risk" in t for t in lines(m, "for")), lines(m)
    assert any("larger effect" in t for t in lines(m))


def test_no_risk_of_bias_column_means_the_data_cannot_speak(symmetric_result):
    m = appraise(symmetric_result).cause("methods")
    assert [e.direction for e in m.evidence] == ["unclear"]
    assert "No risk-of-bias ratings" in m.evidence[0].text
    assert "risk-of-bias table" in m.what_to_check


# --------------------------------------------------------------------------------------
# Chance and artefact


def test_fewer_than_ten_studies_make_the_chance_reading_say_tests_are_unreliable():
    rows = [
        StudyRow(study=f"K{i}", estimate=-0.4 - 0.8 * se + 0.1 * DELTAS[i], se=se)
        for i, se in enumerate((0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9))
    ]
    r = analyse(md_review(rows))
    a = appraise(r)
    ch = a.cause("chance")
    found = [t for t in lines(ch, "for") if "unreliable" in t]
    assert found and "8 studies" in found[0]
    # issue 14: with fewer than 10 studies the data cannot support a rating (Sterne 2011)
    assert a.rating.suggested == CANNOT_RATE and not a.rating.assessable
    assert any("at least 10 advised" in x for x in a.rating.reasons)


def test_ten_or_more_studies_count_against_chance(symmetric_result):
    ch = appraise(symmetric_result).cause("chance")
    assert any("12 studies" in t for t in lines(ch, "against"))


def _or_rows_from_ci(log_or: float, ses) -> list[StudyRow]:
    z = 1.959963984540054
    rows = []
    for i, se in enumerate(ses):
        y = log_or - 1.2 * se + 0.15 * DELTAS[i % 9]  # a lean: small studies larger effects
        rows.append(
            StudyRow(
                study=f"OR{i}",
                estimate=round(math.exp(y), 4),
                lower=round(math.exp(y - z * se), 4),
                upper=round(math.exp(y + z * se), 4),
            )
        )
    return rows


def test_large_odds_ratio_tested_with_eggers_test_flags_the_artefact():
    ses = np.linspace(0.15, 0.9, 12)
    r = analyse(
        Review(
            details=ReviewDetails(measure="OR"), studies=tuple(_or_rows_from_ci(math.log(0.3), ses))
        )
    )
    assert r.recommendation.key == "egger"  # no 2x2 counts: only Egger's test
    assert math.exp(r.random.estimate) < 0.5
    art = appraise(r).cause("artefact")
    found = [t for t in lines(art, "for") if "large effect" in t.lower()]
    assert found, lines(art)
    assert "Harbord et al. 2006" in found[0]


def test_small_odds_ratio_does_not_flag_a_large_effect():
    ses = np.linspace(0.15, 0.9, 12)
    # an effect near 1 and no lean
    z = 1.959963984540054
    rows = []
    for i, se in enumerate(ses):
        y = math.log(0.95) + 0.3 * DELTAS[i % 9] * se
        rows.append(
            StudyRow(
                study=f"S{i}",
                estimate=math.exp(y),
                lower=math.exp(y - z * se),
                upper=math.exp(y + z * se),
            )
        )
    r = analyse(Review(details=ReviewDetails(measure="OR"), studies=tuple(rows)))
    art = appraise(r).cause("artefact")
    assert not any("large effect" in t.lower() for t in lines(art, "for")), lines(art)


def test_mean_differences_count_against_the_artefact(symmetric_result):
    art = appraise(symmetric_result).cause("artefact")
    assert any("does not depend on the difference" in t for t in lines(art, "against"))


# --------------------------------------------------------------------------------------
# Structure, the appraiser's notes and the override


def test_every_cause_is_present_with_title_evidence_and_what_to_check(subgroup_result):
    a = appraise(subgroup_result)
    assert [c.key for c in a.causes] == list(CAUSES)
    for c in a.causes:
        assert c.title == CAUSE_TITLES[c.key]
        assert c.evidence and c.what_to_check
        assert all(e.direction in ("for", "against", "unclear") for e in c.evidence)


def test_appraisers_judgement_notes_and_override_are_carried(symmetric_result):
    notes = AppraisalNotes(
        rating_override="strongly suspected", rating_reason="registry: 4 unreported trials"
    )
    notes = notes.with_cause("methods", CauseNote("likely", "small trials unblinded"))
    res = replace(symmetric_result, review=symmetric_result.review.with_notes(notes))
    a = appraise(res)
    assert a.cause("methods").judgement == "likely"
    assert a.cause("methods").notes == "small trials unblinded"
    assert a.rating.suggested == "undetected"
    assert a.rating.override == "strongly suspected" and a.rating.final == "strongly suspected"
    assert a.rating.overridden
    rows = dict(rating_section(a).rows)
    assert rows["Appraiser's rating"] == "strongly suspected"
    assert rows["Appraiser's reason"] == "registry: 4 unreported trials"
    assert rows["Suggested"] == "undetected"


def test_rating_note_says_the_middle_category_is_ours(symmetric_result):
    note = appraise(symmetric_result).rating.note
    assert "Guyatt et al. 2011" in note
    assert "suspected (mixed evidence)" in note and "not a GRADE term" in note


def test_jargon_is_glossed_exactly_once(subgroup_result):
    a = appraise(subgroup_result)
    text = "\n".join(all_texts(a))
    for term, _gloss in a.glossary:
        assert text.count(GLOSSES[term]) == 1, term
    assert "I²" in dict(a.glossary)


def test_adjustments_are_a_range_never_a_corrected_answer(subgroup_result):
    adj = appraise(subgroup_result).small_study.adjustments
    assert adj.low <= adj.high
    assert "not a corrected estimate" in adj.text
    assert "range from" in adj.text


def test_appraisal_is_frozen(symmetric_result):
    a = appraise(symmetric_result)
    with pytest.raises(AttributeError):
        a.rating = None  # type: ignore[misc]


def test_one_study_is_counted_in_the_singular():
    # "only 1 studies" was printed for a single-study review (common practice: English
    # grammar); the reason for not rating names the count correctly
    from lopside.assessment import assess
    from lopside.model.review import Review, StudyRow

    review = Review(studies=(StudyRow(study="Invented 2001", estimate=0.8, lower=0.6, upper=1.1),))
    rating = assess(review).appraisal.rating
    words = " ".join([rating.suggested, *rating.reasons])
    assert "only 1 study " in words and "1 studies" not in words
