"""Evidence lines on selective publication from issue 20's results.

* trials known to be missing count *for* selective reporting (the most direct evidence);
* how strong selection would have to be (Mathur & VanderWeele 2020) speaks to what
  selection could do to the estimate, not to whether it happened: quoted as "can't tell"
  for the appraiser to weigh;
* the review's own claim, compared with this reading: quoted as "can't tell" (a review's
  own test is no stronger evidence than the tests run here).

Pure: sentences are the summary's; nothing is computed here.
"""

from __future__ import annotations

from .model import Evidence


def _ev(direction: str, text: str, source: str, **numbers) -> Evidence:
    from ..words.numbers import is_finite

    nums = tuple(
        (k, (v if isinstance(v, int) else float(v)) if is_finite(v) else None)
        for k, v in numbers.items()
    )
    return Evidence(direction, text, source, "", nums)


def selection_items(result) -> list[Evidence]:
    from ..words.numbers import is_ok
    from ..words.selection import missing_trials_sentence, selection_sentence
    from .claim import compare_claim

    out: list[Evidence] = []
    missing = getattr(result, "unreported_trials", None)
    if missing is not None:
        text = missing_trials_sentence(result)
        if is_ok(missing):
            null = next((sc for sc in missing.scenarios if sc.assumed == "no effect"), None)
            out.append(
                _ev(
                    "for",
                    text,
                    "unreported trials",
                    count=missing.count,
                    participants=missing.participants,
                    estimate=None if null is None else null.pooled.estimate,
                    unadjusted=missing.reported_estimate,
                )
            )
        else:
            n = sum(1 for r in result.review.studies if not r.reported)
            out.append(
                _ev(
                    "for",
                    f"{n} trial{'s' if n != 1 else ''} known to exist never reported results "
                    "(their size is needed to say what they would change).",
                    "unreported trials",
                    count=n,
                )
            )
    ss = getattr(result, "selection_sensitivity", None)
    if is_ok(ss) and is_ok(ss.random):
        m = ss.random
        wc = m.worst_case
        out.append(
            _ev(
                "unclear",
                selection_sentence(result),
                "selection strength",
                s_value=m.s_value,
                s_value_ci=m.s_value_ci,
                worst_case=wc.estimate if is_ok(wc) else None,
                affirmative=ss.affirmative,
            )
        )
    c = compare_claim(result)
    if c is not None:
        claim = result.review.details.claim
        out.append(
            _ev(
                "unclear",
                f"The review's own claim: {c.verdict}",
                "review's claim",
                k=claim.k,
                p=claim.p,
            )
        )
    return out
