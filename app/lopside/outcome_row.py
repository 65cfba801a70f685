"""One outcome as one flat row of machine-readable numbers.

The columns a panel summary, a spreadsheet export and ``lopside batch`` share. Every value
is read from the one analysis result and its appraisal; nothing here computes a statistic.
Estimates and intervals are on the natural scale (an odds ratio of 0.8, not its log) and are
numbers, never formatted text; a value that does not exist is ``None``.
"""

from __future__ import annotations

import math
from typing import Any

from .stats.results import NotComputable, PooledEstimate

#: The outcome columns, in order (panel summary and batch share them).
OUTCOME_COLUMNS: tuple[str, ...] = (
    "outcome",
    "measure",
    "k",
    "participants",
    "estimate",
    "ci_low",
    "ci_high",
    "i2",
    "tau2",
    "pi_low",
    "pi_high",
    "recommended_test",
    "test_p",
    "power",
    "trim_fill_k0",
    "trim_fill_estimate",
    "trim_fill_ci_low",
    "trim_fill_ci_high",
    "adjusted_low",
    "adjusted_high",
    "rating_suggested",
    "rating_accepted",
    "reason",
    "fingerprint",
)

#: Columns that hold text; every other column holds a number or nothing.
TEXT_COLUMNS = frozenset(
    {
        "outcome",
        "measure",
        "recommended_test",
        "rating_suggested",
        "rating_accepted",
        "reason",
        "fingerprint",
    }
)
#: Columns that hold whole numbers.
INTEGER_COLUMNS = frozenset({"k", "participants", "trim_fill_k0"})


def _finite(x: Any) -> float | None:
    try:
        v = float(x)
    except (TypeError, ValueError):
        return None
    return v if math.isfinite(v) else None


def _natural(x: Any, ratio: bool) -> float | None:
    v = _finite(x)
    if v is None:
        return None
    if not ratio:
        return v
    try:
        out = math.exp(v)
    except OverflowError:
        return None
    return out if math.isfinite(out) else None


def participants(result) -> int | None:
    """Participants in the studies that enter the analysis (None when any size is unknown)."""
    total = 0.0
    for i in result.data.rows:
        n = getattr(result.derived[i], "n_total", None)
        if n is None or not math.isfinite(n):
            return None
        total += n
    return int(round(total)) if result.data.rows else None


def outcome_row(result, appraisal, outcome: str) -> dict[str, Any]:
    """The :data:`OUTCOME_COLUMNS` of one analysed outcome.

    Parameters
    ----------
    result : AnalysisResult
    appraisal : Appraisal
        The reading of ``result`` (suggested rating, adjustment range).
    outcome : str
        The outcome's name as the user gave it.
    """
    ratio = result.is_ratio
    row: dict[str, Any] = dict.fromkeys(OUTCOME_COLUMNS)
    row.update(outcome=outcome, measure=result.measure, k=int(result.k))
    row["participants"] = participants(result)
    rnd = result.random
    if isinstance(rnd, PooledEstimate):
        row["estimate"] = _natural(rnd.estimate, ratio)
        row["ci_low"] = _natural(rnd.ci.low, ratio)
        row["ci_high"] = _natural(rnd.ci.high, ratio)
        if rnd.pi is not None:
            row["pi_low"] = _natural(rnd.pi.low, ratio)
            row["pi_high"] = _natural(rnd.pi.high, ratio)
    het = result.heterogeneity
    if not isinstance(het, NotComputable) and het is not None:
        row["i2"] = _finite(het.i2)
        row["tau2"] = _finite(het.tau2)
    rec = result.recommendation
    if not isinstance(rec, NotComputable) and rec is not None:
        row["recommended_test"] = rec.key
        test = result.tests.get(rec.key)
        if not isinstance(test, NotComputable) and test is not None:
            row["test_p"] = _finite(getattr(test, "pvalue", None))
    power = result.power
    if power is not None and not isinstance(power, NotComputable):
        row["power"] = _finite(getattr(power, "power", None))
    tf = result.trim_fill
    if not isinstance(tf, NotComputable) and tf is not None:
        row["trim_fill_k0"] = int(tf.k0)
        adj = getattr(tf, "adjusted", None)
        if isinstance(adj, PooledEstimate):
            row["trim_fill_estimate"] = _natural(adj.estimate, ratio)
            row["trim_fill_ci_low"] = _natural(adj.ci.low, ratio)
            row["trim_fill_ci_high"] = _natural(adj.ci.high, ratio)
    adjustments = appraisal.small_study.adjustments
    row["adjusted_low"] = _natural(adjustments.low, ratio)
    row["adjusted_high"] = _natural(adjustments.high, ratio)
    if ratio and row["adjusted_low"] is not None and row["adjusted_high"] is not None:
        lo, hi = sorted((row["adjusted_low"], row["adjusted_high"]))
        row["adjusted_low"], row["adjusted_high"] = lo, hi
    rating = appraisal.rating
    row["rating_suggested"] = rating.suggested
    row["rating_accepted"] = rating.override or None
    row["reason"] = (
        rating.override_reason if rating.override else " ".join(x.strip() for x in rating.reasons)
    )
    row["fingerprint"] = result.fingerprint
    return row
