"""Shared result vocabulary for the statistics core (scipy-style words).

Every statistic returns a frozen, slotted dataclass. Where a quantity cannot be computed
for these data, functions return :class:`NotComputable` with a plain-language reason
instead of raising or returning NaN; the window, CLI and sheet show the reason.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import NamedTuple


class ConfidenceInterval(NamedTuple):
    low: float
    high: float


@dataclass(frozen=True, slots=True)
class NotComputable:
    """A result that could not be computed, and why (plain words for the user)."""

    reason: str

    def __bool__(self) -> bool:  # lets callers write ``if result:``
        return False


#: what a view shows for a number of the full stage while only the core stage is ready
CORE_PENDING = "being updated (the full analysis follows in a moment)"


def is_pending(x: object) -> bool:
    """True for a result the full stage of the analysis has still to compute."""
    return isinstance(x, NotComputable) and x.reason == CORE_PENDING


def finite(x: float | None) -> bool:
    return x is not None and isinstance(x, (int, float)) and math.isfinite(x)


@dataclass(frozen=True, slots=True)
class PooledEstimate:
    """A pooled effect on the analysis scale (log for ratio measures).

    ``model`` is a short key: "FE-IV", "MH", "Peto", "DL", "PM", "REML" (random-effects
    keys are the tau^2 estimator); ``hksj`` says whether the Hartung-Knapp-Sidik-Jonkman
    (modified, max(1, q)) interval was used, in which case ``statistic`` is a t with
    ``df`` degrees of freedom, otherwise a z.
    """

    model: str
    estimate: float
    se: float
    ci: ConfidenceInterval
    statistic: float
    pvalue: float
    confidence_level: float = 0.95
    tau2: float = 0.0
    df: float | None = None
    hksj: bool = False
    k: int = 0
    #: prediction interval (random effects with k >= 3 only)
    pi: ConfidenceInterval | None = None
    #: random-effects weights in percent (same order as the studies passed in)
    weights: tuple[float, ...] = ()
    converged: bool = True
    note: str = ""
