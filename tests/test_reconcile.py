"""Reconciliation of the entered rows with the published pooled result.

The published figures here are produced by the engine's own pooling and rounded to two
decimals as a paper prints them (common practice); the checks are about which model is
named and which row is pointed at, not about the pooled numbers themselves (those are
checked against statsmodels in test_pooling.py).
"""

from __future__ import annotations

import math

import numpy as np

from lopside.analysis import analyse
from lopside.model.review import PublishedResult, Review, ReviewDetails, StudyRow


def _review(seed=4, k=12):
    rng = np.random.default_rng(seed)
    rows = []
    for i in range(k):
        se = rng.uniform(0.08, 0.5)
        y = rng.normal(-0.3, math.sqrt(se**2 + 0.08))
        rows.append(
            StudyRow(
                study=f"Invented {i + 1}",
                estimate=round(math.exp(y), 2),
                lower=round(math.exp(y - 1.96 * se), 2),
                upper=round(math.exp(y + 1.96 * se), 2),
            )
        )
    return Review(details=ReviewDetails(measure="HR"), studies=tuple(rows))


def _publish(review, pooled, model):
    pub = PublishedResult(
        round(math.exp(pooled.estimate), 2),
        round(math.exp(pooled.ci.low), 2),
        round(math.exp(pooled.ci.high), 2),
        model,
    )
    return review.with_details(published=pub)


def test_names_the_model_the_paper_used():
    base = _review()
    res = analyse(base)
    for key in ("DL", "REML"):
        r = analyse(_publish(base, res.random_by_method[key], "random effects"))
        rec = r.reconciliation
        assert rec.verdict == "agrees"
        # the paper's own model is among the models within rounding of the published figures
        agreeing = [c.model for c in rec.comparisons if c.worst <= 0.02]
        assert key in agreeing


def test_paper_naming_breaks_ties():
    base = _review()
    res = analyse(base)
    r = analyse(_publish(base, res.random_by_method["DL"], "random effects (DerSimonian-Laird)"))
    assert r.reconciliation.closest in ("DL", "DL+HKSJ")


def test_a_mistyped_row_is_pointed_at():
    base = _review()
    res = analyse(base)
    published = _publish(base, res.random_by_method["REML"], "random effects")
    rows = list(published.studies)
    bad = rows[3]
    # a typo: the estimate and limits entered as if the decimal point had slipped
    rows[3] = bad.with_values(
        estimate=bad.estimate * 10, lower=bad.lower * 10, upper=bad.upper * 10
    )
    r = analyse(published.with_studies(rows))
    rec = r.reconciliation
    assert rec.verdict != "agrees"
    assert rec.suspicious_rows and rec.suspicious_rows[0][0] == 3


def test_no_published_result_is_not_computable():
    r = analyse(_review())
    assert not r.reconciliation
    assert "published" in r.reconciliation.reason
