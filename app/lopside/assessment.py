"""One assessment: the analysis of a review and its reading, computed once, read by every face.

Design invariants
-----------------
* :func:`assess` runs :func:`lopside.analysis.analyse` and :func:`lopside.appraise.appraise`
  once and returns a frozen :class:`Assessment`. The window (Causes view, sections), the
  ``check`` text, the ``check --json`` object and the PDF sheet only read it; none of them
  calls ``appraise`` itself.
* :func:`assessment_of` wraps an analysis computed elsewhere (the session's cache, the
  window's worker) and memoises by identity, so several views of the same result share one
  appraisal. The appraisal reads the appraiser's notes, so a result carrying new notes
  (``dataclasses.replace(result, review=...)``) is a new result and gets a new reading.
* Layer: above ``analysis`` and ``appraise``, below ``report``/``summary``, ``sheet``,
  ``session``, ``window`` and ``cli`` (DEVELOPERS.md, "Layers").
"""

from __future__ import annotations

from collections import OrderedDict
from dataclasses import dataclass
from typing import Any

from .analysis import AnalysisResult, analyse
from .appraise import Appraisal, appraise
from .settings import AnalysisSettings

#: How many recent results keep their appraisal in memory (the session keeps 8 analyses).
MEMO_SIZE = 16


@dataclass(frozen=True, slots=True, eq=False)
class Assessment:
    """The analysis of one review and its reading.

    Attributes
    ----------
    analysis : AnalysisResult
        Every number (from :func:`lopside.analysis.analyse`).
    appraisal : Appraisal
        Every reading (evidence, causes, suggested rating) of exactly that analysis.
    """

    analysis: AnalysisResult
    appraisal: Appraisal

    # the faces read these often; spelled out so that they need not know the nesting
    @property
    def result(self) -> AnalysisResult:
        return self.analysis

    @property
    def rating(self):
        return self.appraisal.rating


_memo: OrderedDict[int, tuple[AnalysisResult, Assessment]] = OrderedDict()


def assessment_of(result: AnalysisResult | Assessment) -> Assessment:
    """The assessment of an analysis already computed (memoised by identity).

    Parameters
    ----------
    result : AnalysisResult or Assessment
        An assessment is returned as it is.
    """
    if isinstance(result, Assessment):
        return result
    hit = _memo.get(id(result))
    if hit is not None and hit[0] is result:
        _memo.move_to_end(id(result))
        return hit[1]
    a = Assessment(result, appraise(result))
    _memo[id(result)] = (result, a)
    while len(_memo) > MEMO_SIZE:
        _memo.popitem(last=False)
    return a


def assess(
    review,
    settings: AnalysisSettings | None = None,
    **options: Any,
) -> Assessment:
    """Analyse a review and read it: the one call every face can make.

    ``options`` are those of :func:`lopside.analysis.analyse` (``with_power``,
    ``power_progress``, ``progress``, ``stage``, ``core``), passed through unchanged.
    """
    result = analyse(review, settings, **options)
    return assessment_of(result)
