"""Renderer-neutral summary of one analysis: the rows the CLI text, the window and the sheet read.

Design invariants
-----------------
* Every number shown to the user is formatted by the ``fmt_*`` functions of
  :mod:`lopside.words.numbers`, so the terminal, the window and the PDF print the same
  figures the same way (STYLE.md item 7). Effects arrive on the analysis scale (natural log
  for ratio measures) and are printed on the natural scale.
* Nothing here computes a statistic: every value is read from the
  :class:`~lopside.analysis.AnalysisResult`. Counting rows, taking the smallest and largest
  of a column and comparing a p-value with a threshold are the only arithmetic done.
* A result the engine could not compute is shown with its reason, never as a number.
* Each section is a frozen :class:`Section` of plain strings; renderers choose fonts and
  column widths, not content.

The sections live by topic: ``section`` (the Section shape, list caps), ``entered`` (the
review, the data entered and how they were read, rows that stand out, the settings),
``pooled`` (the published-result check, pooled models, heterogeneity, leave-one-out and
cumulative, subgroups), ``asymmetry`` (the tests, when they can be trusted, the review's
claim, power), ``adjustments`` (adjusted estimates, trim and fill by setting, how strong
selection would have to be), ``appraisal`` (funnel reading, explanations, rating),
``page_one`` (the key messages), ``contents`` (which sections, in which order) and
``text`` (the plain-text rendering). This package re-exports every name, so callers import
``lopside.summary`` only.

This package imports no Qt and nothing heavy at import time.
"""

from __future__ import annotations

# Number formatting and the small predicates live in the floor module lopside.words; they
# are re-exported here so that code importing them from summary keeps working.
from ..words.numbers import (  # noqa: F401 - re-exported
    DASH,
    MINUS,
    MISSING,
    MODEL_NAMES,
    SHORT_MEASURE,
    _lower_first,
    _minus,
    fmt_ci,
    fmt_df,
    fmt_effect,
    fmt_effect_ci,
    fmt_int,
    fmt_num,
    fmt_p,
    fmt_p_eq,
    fmt_pct,
    fmt_se,
    fmt_share,
    fmt_stat,
    fmt_tau2,
    is_finite,
    is_ok,
    measure_word,
    model_name,
    plural,
    pooled_text,
    why_not,
)
from ..words.rows import _test_result_text, adjustment_rows, recommended_key  # noqa: F401
from ..words.selection import (  # noqa: F401 - re-exported
    fmt_eta,
    missing_trials_sentence,
    selection_sentence,
    short_reason,
)
from ..words.sentences import (  # noqa: F401 - re-exported
    heterogeneity_reconciled,
    rule_detail,
    spread_text,
    trim_fill_range,
)
from .adjustments import (  # noqa: F401 - re-exported
    adjustments_section,
    selection_strength_brief,
    selection_strength_section,
    trim_fill_section,
)
from .appraisal import (  # noqa: F401 - re-exported
    EVIDENCE_WORDS,
    appraisal_sections,
    causes_section,
    rating_section,
    small_study_section,
)
from .asymmetry import (  # noqa: F401 - re-exported
    applicability_section,
    power_section,
    review_claim_section,
    tests_section,
)
from .contents import all_sections, analysis_sections  # noqa: F401 - re-exported
from .entered import (  # noqa: F401 - re-exported
    NOT_READ_LIMIT,
    _problem_text,
    _route_counts,
    data_section,
    favours_text,
    header_section,
    intake_rows,
    not_read_label,
    row_flags_section,
    settings_section,
)
from .page_one import PAGE_ONE_LINES, glance_section  # noqa: F401 - re-exported
from .pooled import (  # noqa: F401 - re-exported
    SMALL_SAMPLE_K,
    SMALL_SAMPLE_MARK,
    SMALL_SAMPLE_NOTE,
    _published_heterogeneity_row,
    heterogeneity_section,
    pooled_section,
    reconciliation_section,
    sensitivity_section,
    subgroups_section,
)
from .section import LIST_LIMIT, Section, _limit  # noqa: F401 - re-exported
from .text import WIDTH, _col_widths, _render_causes, _wrap, render_text, text_summary  # noqa: F401
