"""A suggested rating of the publication-bias domain (GRADE wording, Guyatt et al. 2011).

GRADE's summary-of-findings wording for this domain is "undetected" or "strongly
suspected" (rate down one level when strongly suspected). Lopside adds its own middle
category, "suspected (mixed evidence)", for reviews where the signals point both ways; it
is not a GRADE term, and the sheet says so.

The suggestion rests on the data only (the appraiser's cause judgements are shown beside
it, not folded into it), and it is always a suggestion: the appraiser confirms or
overrides it, and an override is recorded with its reason.

Decision logic (methods.md section 7.4, made explicit here):

* The signals for publication bias are: the recommended test below its threshold with
  small studies showing larger effects (T); trim and fill's imputed studies in the
  non-significant region of the contour-enhanced funnel (C); the adjusted estimates lying
  nearer no effect (A).
* Tests are unreliable when there are fewer than 10 studies or the test could not be run.
  Then: T, or C and A together -> "suspected (mixed evidence)"; otherwise "undetected"
  (trim and fill is itself unreliable with few studies, so C alone is not enough).
* With a reliable test and no T: C and A together -> "suspected (mixed evidence)";
  otherwise "undetected".
* With T: "strongly suspected" when C also holds, no applicability rule fails, and no
  other explanation leans "for" on this review's evidence; otherwise "suspected (mixed
  evidence)".
"""

from __future__ import annotations

from ..model.review import CAUSE_TITLES, DOMAIN_RATINGS
from .model import CauseReading, DomainRating, SmallStudyReading

UNDETECTED, SUSPECTED, STRONGLY = DOMAIN_RATINGS

RATING_NOTE = (
    "A suggestion for the appraiser to confirm or override, based on this review's data "
    "only. 'Undetected' and 'strongly suspected' are GRADE's terms (Guyatt et al. 2011; "
    "rate down one level when strongly suspected); 'suspected (mixed evidence)' is "
    "Lopside's own middle category, not a GRADE term."
)


def suggest_rating(result, ss: SmallStudyReading, causes: tuple[CauseReading, ...]) -> DomainRating:
    """Suggest a rating, with its reasons, and attach the appraiser's override if any."""
    t = ss.test
    k = result.k
    T = bool(t.computed and t.signal and t.larger_in_small is not False)
    C = ss.contour.verdict == "non-significant"
    A = ss.adjustments.moves == "towards null"
    reliable = t.computed and k >= 10
    alternatives = [c for c in causes if c.key != "selection" and c.leaning == "for"]
    reasons: list[str] = []

    if t.computed and t.signal and t.larger_in_small is False:
        reasons.append(
            "The test's signal runs the wrong way for publication bias (small studies show "
            "smaller effects)."
        )
    if T:
        reasons.append(f"The recommended test signals a lean ({t.name}).")
    elif t.computed:
        reasons.append(f"The recommended test shows no clear lean ({t.name}).")
    else:
        reasons.append("No recommended test could be run.")
    if C:
        reasons.append("Trim and fill's imputed studies lie in the non-significant region.")
    elif ss.contour.verdict == "significant":
        reasons.append(
            "Trim and fill's imputed studies would have been significant, which points away "
            "from publication bias."
        )
    elif ss.contour.verdict == "none filled":
        reasons.append("Trim and fill imputes no missing studies.")
    elif ss.contour.verdict == "mixed":
        reasons.append(
            "Trim and fill's imputed studies fall partly in the non-significant region and "
            "partly where they would have been significant."
        )
    if A:
        reasons.append("The adjusted estimates lie nearer no effect.")
    elif ss.adjustments.moves == "little":
        reasons.append("The adjusted estimates hardly move.")

    if ss.failed_rules and reliable:
        reasons.append(
            "Some conditions for a meaningful test are not met, so the test result weighs "
            "less either way."
        )
    if not reliable:
        why = f"only {k} studies (at least 10 advised)" if k < 10 else "the test could not be run"
        reasons.append(f"The tests cannot be relied on here: {why}.")
        if T or (C and A):
            suggested = SUSPECTED
            reasons.append(
                "Some signals point to bias, but too weakly to rate it strongly suspected."
            )
        else:
            suggested = UNDETECTED
            reasons.append(
                "Not detecting bias with so little to go on is weak reassurance: weigh the "
                "other information (registries, funding, many small trials)."
            )
    elif not T:
        if C and A:
            suggested = SUSPECTED
            reasons.append(
                "The test is negative, but the funnel's gap and the adjustments both point "
                "to missing non-significant studies."
            )
        else:
            suggested = UNDETECTED
    else:
        blockers = []
        if not C:
            blockers.append("the contours do not place the missing studies where bias would")
        if ss.failed_rules:
            blockers.append("some conditions for a meaningful test are not met")
        if alternatives:
            blockers.append(
                "other explanations lean 'for' on this review's evidence ("
                + "; ".join(CAUSE_TITLES[c.key].lower() for c in alternatives)
                + ")"
            )
        if blockers:
            suggested = SUSPECTED
            reasons.append("Not rated strongly suspected because " + "; ".join(blockers) + ".")
        else:
            suggested = STRONGLY
            reasons.append(
                "The signals agree and no other explanation is supported by this review's data."
            )
    notes = result.review.notes
    override = notes.rating_override if notes.rating_override in DOMAIN_RATINGS else ""
    if notes.rating_override and not override:
        # an unknown word in the project file is kept visible rather than silently dropped
        override = notes.rating_override
    return DomainRating(
        suggested=suggested,
        reasons=tuple(reasons),
        override=override,
        override_reason=notes.rating_reason if override else "",
        note=RATING_NOTE,
    )
