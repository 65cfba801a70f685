"""Lopside: offline appraisal of small-study effects in a published meta-analysis.

Lopside informs an appraisal; it decides nothing clinical.
"""

__version__ = "0.1.0"

#: The caution carried by the README, the About box and every sheet (DESIGN.md section 6).
CAUTION = (
    "Lopside informs an appraisal; it does not make clinical or guideline decisions. "
    "Its reading depends on the data entered and on the quality of the review itself. "
    "Funnel asymmetry is not proof of publication bias. Decisions follow the guideline "
    "body's own methods and licensed clinical judgement."
)
