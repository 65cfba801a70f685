"""The review's own claim about small-study effects, set beside Lopside's reading.

Pure: reads the analysis result (the claim is part of the review details) and returns
sentences; computes no statistic. The rules quoted:

* at least 10 studies for an asymmetry test to be meaningful (Sterne et al. 2011, BMJ
  343:d4002, common practice);
* the power of the test is the simulated one of the analysis (only when simulated, and
  only for the test that was simulated);
* agreement compares the review's conclusion with whether Lopside's recommended test
  signals at its threshold.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

from ..stats.results import NotComputable
from ..words.numbers import plural

MIN_K = 10

#: words in the review's test name -> registry key of the asymmetry tests
_TEST_WORDS: tuple[tuple[str, str], ...] = (
    (r"egger", "egger"),
    (r"begg|rank correlation|kendall", "begg"),
    (r"harbord", "harbord"),
    (r"peters", "peters"),
    (r"arcsine|rücker|rucker", "arcsine"),
    (r"pustejovsky|modified se|smd", "smd"),
)


@dataclass(frozen=True, slots=True)
class ClaimComparison:
    """What the review said, and how it compares (each a plain sentence)."""

    said: str
    applicable: str
    power: str
    agreement: str
    verdict: str


def claim_test_key(name: str) -> str | None:
    """The registry key of a test named in a paper ("Egger's regression test" -> egger)."""
    low = (name or "").casefold()
    for pattern, key in _TEST_WORDS:
        if re.search(pattern, low):
            return key
    return None


def _pct(x: float) -> str:
    from ..words.numbers import fmt_share

    return fmt_share(x)


def compare_claim(result) -> ClaimComparison | None:
    """None when the review details hold no claim."""
    from ..stats.asymmetry import REGISTRY
    from ..words.numbers import fmt_p_eq, fmt_stat

    claim = result.review.details.claim
    if claim.is_empty():
        return None
    parts = []
    if claim.test:
        parts.append(claim.test)
    if claim.statistic is not None:
        parts.append(f"statistic {fmt_stat(claim.statistic)}")
    if claim.p is not None:
        parts.append(fmt_p_eq(claim.p))
    if claim.k is not None:
        parts.append(f"{claim.k} studies")
    said = "; ".join(parts) if parts else "no test named"
    if claim.conclusion:
        said += f"; conclusion: {claim.conclusion}"

    k = claim.k if claim.k is not None else result.k
    key = claim_test_key(claim.test)
    rec = result.recommendation
    rec_key = None if isinstance(rec, NotComputable) or rec is None else rec.key
    rec_name = REGISTRY[rec_key].name if rec_key in REGISTRY else "no test"

    # applicability for its k (and for these data)
    if not claim.test and claim.conclusion in ("not assessed", "not reported", ""):
        applicable = "No test was reported."
    elif k < MIN_K:
        applicable = (
            f"Not applicable: {plural(k, 'study', 'studies')} {'is' if k == 1 else 'are'} fewer "
            f"than the {MIN_K} an asymmetry test needs "
            "to be meaningful (Sterne et al. 2011)."
        )
    elif key is None:
        applicable = (
            f"'{claim.test}' is not one of the tests Lopside runs; for these data it "
            f"recommends {rec_name}."
        )
    elif rec_key is not None and key != rec_key:
        applicable = (
            f"Applicable for {k} studies, but for these data Lopside recommends {rec_name} "
            f"rather than {REGISTRY[key].name} ({rec.reason})."
        )
    else:
        applicable = f"Applicable: {k} studies, and the test Lopside recommends for these data."

    # power for these SEs: only what the analysis simulated
    pw = result.power
    if pw is None or isinstance(pw, NotComputable):
        power = "Not simulated (run the power simulation to see how often the test would "
        power += "detect moderate selection with these standard errors)."
        power_value = None
    elif key is not None and pw.test != key:
        power = (
            f"Simulated for {pw.name} only: {_pct(pw.power)} power here; the review's test "
            "was not simulated."
        )
        power_value = None
    else:
        power = f"{_pct(pw.power)} estimated power of {pw.name} with these standard errors."
        power_value = pw.power

    # agreement with Lopside's reading
    ours = result.recommended_test()
    ours_found = None
    if ours is not None and not isinstance(ours, NotComputable):
        ours_found = bool(ours.pvalue < ours.alpha)
        ours_text = (
            f"Lopside's recommended test ({rec_name}) "
            f"{'signals' if ours_found else 'does not signal'} small-study effects "
            f"({fmt_p_eq(ours.pvalue)})"
        )
    else:
        ours_text = "Lopside's recommended test could not be run"
    concl = claim.conclusion
    if concl in ("found", "none found") and ours_found is not None:
        same = (concl == "found") == ours_found
        agreement = f"{'Agrees' if same else 'Disagrees'}: {ours_text}."
    elif concl in ("not assessed", "not reported"):
        agreement = f"The review did not assess it; {ours_text[0].lower() + ours_text[1:]}."
    else:
        agreement = f"{ours_text}."

    # one-line verdict
    if concl == "none found":
        if k < MIN_K:
            verdict = (
                f"The review's 'no evidence of bias' rests on a test run on "
                f"{plural(k, 'study', 'studies')}, "
                "too few for it to mean much."
            )
        elif power_value is not None and power_value < 0.5:
            verdict = (
                "The review's 'no evidence of bias' rests on a test with an estimated "
                f"{_pct(power_value)} power here: absence of evidence, not evidence of absence."
            )
        elif ours_found:
            verdict = "The review found no small-study effects, but Lopside's reading does."
        else:
            verdict = "The review's 'no evidence of bias' agrees with Lopside's reading."
    elif concl == "found":
        verdict = (
            "The review's finding of small-study effects agrees with Lopside's reading."
            if ours_found
            else "The review reports small-study effects that Lopside's test does not signal."
        )
    elif concl in ("not assessed", "not reported"):
        verdict = "The review did not report on small-study effects; rely on this appraisal."
    else:
        verdict = "The review's conclusion was not entered."
    return ClaimComparison(said, applicable, power, agreement, verdict)
