"""Which sections, in which order: the numeric ones, then (with the header and the key
messages first) every section of the text summary."""

from __future__ import annotations

from .adjustments import adjustments_section, selection_strength_section, trim_fill_section
from .appraisal import appraisal_sections
from .asymmetry import applicability_section, power_section, review_claim_section, tests_section
from .entered import data_section, header_section, row_flags_section
from .page_one import glance_section
from .pooled import (
    heterogeneity_section,
    pooled_section,
    reconciliation_section,
    sensitivity_section,
    subgroups_section,
)
from .section import Section


def analysis_sections(result) -> tuple[Section, ...]:
    """The numeric sections in reading order (no appraisal readings)."""
    out: list[Section | None] = [
        data_section(result),
        row_flags_section(result),
        reconciliation_section(result),
        pooled_section(result),
        heterogeneity_section(result),
        tests_section(result),
        applicability_section(result),
        review_claim_section(result),
        adjustments_section(result),
    ]
    tf = trim_fill_section(result)
    if tf is not None:
        out.append(tf)
    out.append(selection_strength_section(result))
    out.append(sensitivity_section(result))
    sg = subgroups_section(result)
    if sg is not None:
        out.append(sg)
    out.append(power_section(result))
    return tuple(s for s in out if s is not None)


def all_sections(result, appraisal=None) -> tuple[Section, ...]:
    """Every section in the order of the text summary.

    ``result`` may be an :class:`~lopside.assessment.Assessment` (preferred) or an
    analysis, read through :func:`~lopside.assessment.assessment_of`; ``appraisal`` is
    accepted for older callers and must be that analysis' appraisal.
    """
    from ..assessment import assessment_of

    assessment = assessment_of(result)
    analysis = assessment.analysis
    appraisal = appraisal or assessment.appraisal
    a = appraisal_sections(appraisal)
    out = [header_section(analysis), glance_section(assessment)]
    out += list(analysis_sections(analysis))
    return tuple(out) + a
