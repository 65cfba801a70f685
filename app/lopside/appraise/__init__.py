"""Readings: turn one analysis result into words an appraiser can weigh.

Design invariants
-----------------
* Pure: :func:`appraise` reads an :class:`~lopside.analysis.AnalysisResult` and returns a
  frozen :class:`Appraisal`; it computes no statistic. It classifies (which significance
  region a study falls in), compares (a p-value with its threshold, I² with 50 %) and
  puts the engine's numbers into sentences, formatted by :mod:`lopside.summary`.
* Publication bias is read side by side with the other explanations of a lopsided funnel
  (methods.md section 7.2); every explanation has evidence lines from this review and
  what to look for in the paper.
* The domain rating is a suggestion the appraiser confirms or overrides.
* Jargon is glossed at first mention, in a fixed order, so the text is reproducible.
"""

from __future__ import annotations

from .model import (
    AdjustmentRange,
    Appraisal,
    CauseReading,
    ContourReading,
    DomainRating,
    Evidence,
    SmallStudyReading,
    TestReading,
)

__all__ = [
    "AdjustmentRange",
    "Appraisal",
    "CauseReading",
    "ContourReading",
    "DomainRating",
    "Evidence",
    "SmallStudyReading",
    "TestReading",
    "appraise",
]


def appraise(result) -> Appraisal:
    """Read one analysis: the small-study-effects reading, the explanations, the rating.

    Parameters
    ----------
    result : AnalysisResult
        From :func:`lopside.analysis.analyse`.

    Returns
    -------
    Appraisal
        Frozen; ``small_study`` (contour, test, rules, power, adjustment range),
        ``causes`` (one :class:`CauseReading` per explanation, in the order of
        :data:`lopside.model.review.CAUSES`), ``rating`` (suggested domain rating with
        reasons and the appraiser's override) and ``glossary`` (terms glossed).
    """
    from .causes import cause_readings
    from .glossary import Glossary
    from .rating import suggest_rating
    from .reading import small_study_lines

    g = Glossary()
    parts = small_study_lines(result, g)
    ss = SmallStudyReading(
        contour=parts["contour"],
        test=parts["test"],
        failed_rules=parts["failed"],
        rules_text=parts["rules_text"],
        power_text=parts["power_text"],
        adjustments=parts["adjustments"],
        lines=parts["lines"],
    )
    causes = cause_readings(result, ss, g)
    rating = suggest_rating(result, ss, causes)
    return Appraisal(small_study=ss, causes=causes, rating=rating, glossary=g.used())
