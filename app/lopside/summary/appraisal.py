"""The appraisal's sections (content from :mod:`lopside.appraise`): what the funnel shows,
the explanations side by side, the suggested rating."""

from __future__ import annotations

from .section import Section

#: How an evidence line's direction is written (text, window and sheet alike).
EVIDENCE_WORDS: dict[str, str] = {"for": "For", "against": "Against", "unclear": "Can't tell"}


def small_study_section(appraisal) -> Section:
    """What the funnel, the test, the rules, power and the adjustments say."""
    r = appraisal.small_study
    rows = tuple((label, text) for label, text in r.lines)
    return Section("small_study", "What the funnel shows", rows)


def causes_section(appraisal) -> Section:
    """The alternative explanations side by side with publication bias."""
    rows = []
    for c in appraisal.causes:
        ev = "\n".join(
            f"{EVIDENCE_WORDS.get(e.direction, EVIDENCE_WORDS['unclear'])}: {e.text}"
            for e in c.evidence
        )
        check = f"Look for: {c.what_to_check}" if c.what_to_check else ""
        evidence = ev + ("\n" + check if check else "")
        rows.append((c.title, evidence, c.judgement, c.notes))
    notes = (
        "For / Against: evidence from this review for or against the explanation; Can't tell: "
        "the data cannot say. The judgement and notes are the appraiser's own.",
    )
    return Section(
        "causes",
        "Why might the funnel lean? Explanations side by side",
        tuple(rows),
        header=("Explanation", "Evidence from this review", "Appraiser's judgement", "Notes"),
        notes=notes,
        widths=(1.5, 5.0, 1.1, 1.6),
    )


def rating_section(appraisal) -> Section:
    """The suggested publication-bias rating, its reasons, and the appraiser's override."""
    r = appraisal.rating
    # reasons indented by two spaces are the lines under "Signals for publication bias:"
    why = "\n".join(f"   – {x.strip()}" if x.startswith("  ") else f"• {x}" for x in r.reasons)
    rows = [
        ("Suggested", r.suggested),
        ("Can the data support a rating?", "yes" if r.assessable else "no"),
    ]
    rows.append(("Why", why))
    if r.override:
        rows.append(("Appraiser's rating", r.override))
        rows.append(("Appraiser's reason", r.override_reason or "(no reason given)"))
    else:
        rows.append(("Appraiser's rating", "not recorded: confirm or override the suggestion"))
    # the rating that stands is the one a renderer should make stand out
    final = 3 if r.override else 0
    return Section(
        "rating",
        "Publication bias: suggested rating",
        tuple(rows),
        notes=(r.note,),
        emphasis=(final,),
    )


def appraisal_sections(appraisal) -> tuple[Section, ...]:
    return (small_study_section(appraisal), causes_section(appraisal), rating_section(appraisal))
