"""Page one: the key messages (sheet page 1, the text's first block, JSON appraisal.page_one).

Each line is one function (assessment) -> (label, text) or None (line left out). To add a
page-1 line, write such a function and append it to PAGE_ONE_LINES: the sheet, the text
and the JSON all pick it up, in that order.
"""

from __future__ import annotations

from ..words.selection import missing_trials_sentence, selection_sentence
from ..words.sentences import trim_fill_range
from .asymmetry import review_claim_section
from .section import Section


def _flagged_rows_line(assessment):
    """Rows that stand out (stats.diagnostics): first, as a mistyped row changes every
    reading after it."""
    from ..stats.diagnostics import HEADLINE, glance_text

    text = glance_text(getattr(assessment.analysis, "row_flags", None))
    return (HEADLINE, text) if text else None


def _rating_line(assessment):
    from ..appraise.rating import unrated_because

    r = assessment.appraisal.rating
    text = r.suggested
    if not r.assessable:
        # a colon, not parentheses: the reasons carry parentheses of their own ("only 7
        # studies (at least 10 advised; ...)")
        text += ": " + unrated_because(r)
        text += "; even so, signals point towards bias" if r.leaning else ""
    if r.override:
        text += f"; appraiser's rating: {r.override}"
    else:
        text += "; for the appraiser to confirm or override"
    return ("Publication bias, suggested rating", text)


def _funnel_line(assessment):
    c = assessment.appraisal.small_study.contour
    return ("Funnel", c.conclusion or c.text)


def _test_line(assessment):
    return ("Test", assessment.appraisal.small_study.test.text)


def _power_line(assessment):
    return ("Power of the test", assessment.appraisal.small_study.power_text)


def _alternative_line(assessment):
    best = assessment.appraisal.strongest_alternative
    if best is None:
        return (
            "Strongest other explanation",
            "None of the other explanations has support in this review's data; what the data "
            "cannot show is listed with the explanations.",
        )
    cause, ev = best
    return ("Strongest other explanation", f"{cause.title}: {ev.text}")


def _adjusted_line(assessment):
    return ("Adjusted estimates", assessment.appraisal.small_study.adjustments.text)


def _trim_fill_line(assessment):
    rng = trim_fill_range(assessment.analysis)
    if rng is None or rng.n < 2 or rng.agree:
        return None
    return ("Trim and fill settings", rng.text)


def _claim_line(assessment):
    """The review's own claim about small-study effects, set beside this reading."""
    sec = review_claim_section(assessment.analysis)
    return None if sec is None else ("The review's own claim", sec.rows[-1][1])


def _selection_needed_line(assessment):
    """How strong selection would have to be (Mathur & VanderWeele 2020)."""
    # the short form on page 1 (the worst case is in the window, the text and the JSON)
    text = selection_sentence(assessment.analysis, brief=True)
    return None if not text else ("Selection needed", text)


def _missing_trials_line(assessment):
    text = missing_trials_sentence(assessment.analysis)
    return None if not text else ("Trials never reported", text)


PAGE_ONE_LINES = [
    _flagged_rows_line,
    _rating_line,
    _funnel_line,
    _test_line,
    _power_line,
    _alternative_line,
    _adjusted_line,
    _trim_fill_line,
    _claim_line,
    _selection_needed_line,
    _missing_trials_line,
]


def glance_section(assessment) -> Section:
    """The key messages: rating, funnel, test, power, strongest other explanation, range."""
    from ..assessment import assessment_of

    assessment = assessment_of(assessment)
    rows = []
    for fn in PAGE_ONE_LINES:
        line = fn(assessment)
        if line is not None:
            rows.append(line)
    return Section("glance", "At a glance", tuple(rows))
