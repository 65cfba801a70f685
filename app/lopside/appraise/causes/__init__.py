"""The alternative explanations of funnel asymmetry, side by side with publication bias.

Explanations and their order follow Egger et al. 1997 as adapted in the Cochrane Handbook
5.1, Table 10.4.a (methods.md section 7.2): selection and reporting biases, poorer methods
in smaller studies, true heterogeneity, artefact, chance. Each gets evidence lines from
this review (for / against / unclear, with the numbers) and what to look for in the paper
where the data entered cannot speak.

Nothing here computes a statistic: the lines compare numbers the engine produced with the
usual thresholds (p against the test threshold, I² against 25 % and 50 %).

One module per explanation (:mod:`.selection`, :mod:`.methods`, :mod:`.heterogeneity`,
:mod:`.artefact`, :mod:`.chance`), each giving ``f(result, ss, glossary) -> [Evidence]``;
what they share (thresholds, what to look for, helpers) is in :mod:`.common`.
"""

from __future__ import annotations

from dataclasses import replace

from lopside.appraise.causes.artefact import artefact_evidence
from lopside.appraise.causes.chance import chance_evidence
from lopside.appraise.causes.common import (
    I2_HIGH,
    I2_LOW,
    KEEPS_SLOPE,
    LARGE_OR,
    LOW_POWER,
    ROB_HIGHER,
    ROB_LOW,
    STRONG_P,
    WHAT_TO_CHECK,
)
from lopside.appraise.causes.heterogeneity import heterogeneity_evidence
from lopside.appraise.causes.methods import methods_evidence
from lopside.appraise.causes.selection import (
    selection_evidence,
    selection_model_evidence,
    trim_fill_variants_evidence,
)
from lopside.appraise.glossary import Glossary
from lopside.appraise.model import CauseReading, SmallStudyReading
from lopside.model.review import CAUSE_TITLES, CAUSES

_BUILDERS = {
    "selection": selection_evidence,
    "methods": methods_evidence,
    "heterogeneity": heterogeneity_evidence,
    "artefact": artefact_evidence,
    "chance": chance_evidence,
}


def cause_readings(result, ss: SmallStudyReading, g: Glossary) -> tuple[CauseReading, ...]:
    """All five explanations with evidence, what to check, and the appraiser's notes."""
    notes = result.review.notes
    out = []
    for key in CAUSES:
        ev = tuple(replace(e, cause=key) for e in _BUILDERS[key](result, ss, g))
        cn = notes.cause(key)
        out.append(
            CauseReading(
                key=key,
                title=CAUSE_TITLES[key],
                evidence=ev,
                what_to_check=WHAT_TO_CHECK[key],
                judgement=cn.judgement,
                notes=cn.notes,
            )
        )
    return tuple(out)


__all__ = [
    "I2_HIGH",
    "I2_LOW",
    "KEEPS_SLOPE",
    "LARGE_OR",
    "LOW_POWER",
    "ROB_HIGHER",
    "ROB_LOW",
    "STRONG_P",
    "WHAT_TO_CHECK",
    "artefact_evidence",
    "cause_readings",
    "chance_evidence",
    "heterogeneity_evidence",
    "methods_evidence",
    "selection_evidence",
    "selection_model_evidence",
    "trim_fill_variants_evidence",
]
