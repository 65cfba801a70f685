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


def selection_items(result) -> list[Evidence]:
    from ..summary import is_ok, missing_trials_sentence, selection_sentence
    from .claim import compare_claim

    out: list[Evidence] = []
    missing = getattr(result, "unreported_trials", None)
    if missing is not None:
        text = missing_trials_sentence(result)
        if is_ok(missing):
            out.append(Evidence("for", text))
        else:
            n = sum(1 for r in result.review.studies if not r.reported)
            out.append(
                Evidence(
                    "for",
                    f"{n} trial{'s' if n != 1 else ''} known to exist never reported results "
                    "(their size is needed to say what they would change).",
                )
            )
    ss = getattr(result, "selection_sensitivity", None)
    if is_ok(ss) and is_ok(ss.random):
        out.append(Evidence("unclear", selection_sentence(result)))
    c = compare_claim(result)
    if c is not None:
        out.append(Evidence("unclear", f"The review's own claim: {c.verdict}"))
    return out
