"""A suggested rating of the publication-bias domain: the rules, written down.

Sources
-------
* GRADE (Guyatt et al. 2011, J Clin Epidemiol 64:1277, "GRADE guidelines 5: rating the
  quality of evidence - publication bias"): the domain is rated "undetected" or "strongly
  suspected" (rate down one level when strongly suspected); a body of evidence made of
  few, small studies is itself a reason for suspicion, and funnel-based methods are
  unreliable with few studies.
* Sterne et al. 2011 (BMJ 343:d4002, "Recommendations for examining and interpreting
  funnel plot asymmetry in meta-analyses of randomised controlled trials"): tests only
  with at least 10 studies; not when all studies are of similar size; interpret a test
  in the light of the contour-enhanced funnel and the other explanations of asymmetry;
  a negative test does not exclude bias, and a positive one does not prove it.
* Ioannidis & Trikalinos 2007 (CMAJ 176:1091): at least one study with a statistically
  significant result, else the tests have nothing to detect.

Lopside adds its own middle category, "suspected (mixed evidence)", for reviews where the
signals point both ways, and its own state "cannot be rated from these data" for reviews
where the data cannot support any rating. Neither is a GRADE term; the sheet says so.
The appraiser can always rate (the override), whatever the suggestion.

Rules (each one tested in tests/test_reading_rules.py and checked over generated reviews
by tests/contradictions.py):

1. *Can the data support a rating?* Not when there are fewer than :data:`MIN_STUDIES`
   studies, when no recommended test could be run, when no study is significant at
   p < 0.05 on its own, or when the simulated power of the recommended test is below
   :data:`MIN_POWER`. Then the suggestion is :data:`CANNOT_RATE` (``assessable`` False),
   the reasons say which condition failed, and every line "for" publication bias is still
   listed ("signals even so"), so the appraiser can rate on them.
2. *Strong signals*: a line "for" publication bias with a p-value below the test
   threshold (the recommended test with small studies showing larger effects; the
   selection model with weights favouring significant results). With any strong signal
   the suggestion is never "undetected".
3. *Strongly suspected* needs the recommended test's signal (T), corroborated by the
   contours (C: imputed studies in the non-significant region on the harm side) or by the
   selection model (S), with every applicability condition met and no other explanation
   leaning "for" on this review's data. Otherwise a strong signal gives "suspected (mixed
   evidence)".
4. *Without a strong signal*: the contours and the adjusted estimates together (C and A)
   give "suspected (mixed evidence)"; otherwise "undetected".
5. Every line "for" publication bias appears in the reasons (and in ``evidence``).
6. Cautions about weak tests are the same for positive and null results
   (:func:`lopside.words.sentences.test_caution`).
"""

from __future__ import annotations

from ..model.review import CAUSE_TITLES, DOMAIN_RATINGS
from ..words.numbers import plural
from .model import CauseReading, DomainRating, Evidence, SmallStudyReading
from .reading import NON_SIGNIFICANT

UNDETECTED, SUSPECTED, STRONGLY = DOMAIN_RATINGS
#: The state where the data cannot support a rating (Lopside's words, not GRADE's).
CANNOT_RATE = "cannot be rated from these data"
#: Every value ``DomainRating.suggested`` can take.
SUGGESTIONS: tuple[str, ...] = (*DOMAIN_RATINGS, CANNOT_RATE)

#: Fewer studies than this and the tests cannot be read (Sterne et al. 2011).
MIN_STUDIES = 10
#: Simulated power below this and neither a positive nor a negative test is informative
#: (our threshold: below one half the test misses more biased reviews than it finds, so
#: its result tells less than a coin about the bias the simulation assumed; 80 % is the
#: usual target, common practice).
MIN_POWER = 0.5

RATING_NOTE = (
    "A suggestion for the appraiser to confirm or override, based on this review's data "
    "only. 'Undetected' and 'strongly suspected' are GRADE's terms (Guyatt et al. 2011; "
    "rate down one level when strongly suspected); 'suspected (mixed evidence)' is "
    "Lopside's own middle category, not a GRADE term, and so is "
    f"'{CANNOT_RATE}' (too few or too weak data for any rating). Rules: Sterne et al. 2011."
)


#: the first reason of a rating the data cannot support begins so
UNRATED_PREFIX = "The data cannot support a rating: "


def unrated_because(rating: DomainRating) -> str:
    """Why the data cannot support a rating ("only 7 studies (at least 10 advised; ...)"),
    or "" when they can: the one wording for the glance line, the slide and the panel."""
    if rating.assessable or not rating.reasons:
        return ""
    return rating.reasons[0].removeprefix(UNRATED_PREFIX).rstrip(".")


def strong_signal(e: Evidence, alpha: float) -> bool:
    """A line "for" publication bias backed by a p-value below the threshold."""
    p = e.number("p")
    return e.direction == "for" and p is not None and p < alpha


def _why_not_assessable(result, ss: SmallStudyReading) -> list[str]:
    k = result.k
    out = []
    if k < MIN_STUDIES:
        out.append(
            f"only {plural(k, 'study', 'studies')} (at least {MIN_STUDIES} advised; Sterne et al. 2011)"
        )
    if not ss.test.computed:
        out.append("no recommended test could be run")
    counts = dict(ss.contour.observed_regions)
    n_obs = sum(counts.values())
    sig = n_obs - counts.get(NON_SIGNIFICANT, 0) - counts.get("0.05 to 0.10", 0)
    if n_obs and sig == 0:
        out.append(
            "no study is significant on its own, so there is no excess of significant results "
            "to detect (Ioannidis & Trikalinos 2007)"
        )
    pw = result.power
    power = getattr(pw, "power", None)
    if isinstance(power, float) and power == power and power < MIN_POWER:
        out.append(
            f"the simulated power of the test is {round(100 * power)}%, below "
            f"{round(100 * MIN_POWER)}%"
        )
    return out


def suggest_rating(result, ss: SmallStudyReading, causes: tuple[CauseReading, ...]) -> DomainRating:
    """Suggest a rating, with its reasons, and attach the appraiser's override if any."""
    alpha = result.settings.test_alpha
    t = ss.test
    selection = next(c for c in causes if c.key == "selection")
    for_items = tuple(e for e in selection.evidence if e.direction == "for")
    strong = [e for e in for_items if strong_signal(e, alpha)]
    T = any(e.source == "test" for e in strong)
    S = any(e.source == "selection model" for e in strong)
    C = any(e.source == "contour" for e in for_items)
    A = any(e.source == "adjustment" for e in for_items)
    alternatives = [c for c in causes if c.key != "selection" and c.leaning == "for"]
    reasons: list[str] = []
    not_ok = _why_not_assessable(result, ss)
    assessable = not not_ok
    leaning = ""

    if t.computed and t.signal and t.larger_in_small is False:
        reasons.append(
            "The test's signal runs the wrong way for publication bias (small studies show "
            "smaller effects)."
        )
    if for_items:
        reasons.append("Signals for publication bias:")
        reasons.extend(f"  {e.text}" for e in for_items)
    else:
        reasons.append("No line of this review's evidence points to publication bias.")

    if not assessable:
        suggested = CANNOT_RATE
        reasons.insert(0, UNRATED_PREFIX + "; ".join(not_ok) + ".")
        if for_items:
            leaning = "towards bias"
            reasons.append(
                "Even so, the signals above point to bias: the appraiser may rate it "
                "'suspected' on them and on other information (registries, funding, many "
                "small trials; Guyatt et al. 2011)."
            )
        else:
            reasons.append(
                "Not detecting bias with so little to go on is no reassurance: rate on the "
                "other information (registries, funding, many small trials; Guyatt et al. 2011)."
            )
    elif strong:
        blockers = []
        if not T:
            blockers.append("the recommended test does not signal it")
        if T and not (C or S):
            blockers.append(
                "neither the contours nor the selection model place the missing studies "
                "where bias would"
            )
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
    elif C and A:
        suggested = SUSPECTED
        reasons.append(
            "No test signals bias, but the funnel's gap and the adjustments both point to "
            "missing non-significant studies."
        )
    else:
        suggested = UNDETECTED
        if for_items:
            reasons.append("These signals are weak alone (no p-value below the threshold).")
    if alternatives and suggested != STRONGLY:
        reasons.append(
            "Other explanations with support in this review: "
            + "; ".join(CAUSE_TITLES[c.key].lower() for c in alternatives)
            + "."
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
        assessable=assessable,
        evidence=for_items,
        leaning=leaning,
    )
