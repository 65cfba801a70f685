"""Reconciliation of the user's entry with the review's published pooled result.

The user's rows are pooled under every model the review could have used; each model's
estimate and CI are compared with the published ones on the analysis scale. The closest
model is named; when none comes close, the rows that move the pooled estimate most towards
the published value (by leave-one-out) are pointed at as the first to re-check.

"Close" is judged against the rounding of the published figures: a model agrees when its
estimate and both limits, rounded as the paper printed them, differ from the published
figures by no more than about one unit in the last printed place (or 2 % relative).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from .results import NotComputable, PooledEstimate

AGREE_RELATIVE = 0.02  # 2 % on the natural scale
NEAR_RELATIVE = 0.10


@dataclass(frozen=True, slots=True)
class ModelComparison:
    model: str  # e.g. "FE-IV", "MH", "Peto", "DL", "PM", "REML", "DL+HKSJ"
    label: str  # plain words
    estimate: float  # analysis scale
    ci_low: float
    ci_high: float
    #: relative difference from the published estimate, natural scale for ratios
    rel_diff_estimate: float
    rel_diff_low: float
    rel_diff_high: float
    #: largest of the three relative differences
    worst: float


@dataclass(frozen=True, slots=True)
class Reconciliation:
    published_estimate: float  # analysis scale
    published_low: float
    published_high: float
    published_model: str
    comparisons: tuple[ModelComparison, ...]
    closest: str
    verdict: str  # "agrees" | "near" | "no model close"
    reading: str
    #: (row index, label, how far the pooled estimate moves towards the published value)
    suspicious_rows: tuple[tuple[int, str, str], ...] = ()


MODEL_LABELS = {
    "FE-IV": "fixed effect, inverse variance",
    "MH": "fixed effect, Mantel-Haenszel",
    "Peto": "fixed effect, Peto",
    "DL": "random effects, DerSimonian-Laird",
    "PM": "random effects, Paule-Mandel",
    "REML": "random effects, REML",
}


def _label(key: str) -> str:
    if key.endswith("+HKSJ"):
        return MODEL_LABELS[key[:-5]] + " with Hartung-Knapp interval"
    return MODEL_LABELS.get(key, key)


def _named_in(model: str, text: str) -> bool:
    """Does the paper's model text name this model? ("Mantel-Haenszel, fixed" -> MH)."""
    t = text.lower().replace("–", "-")
    if not t:
        return False
    key = model.removesuffix("+HKSJ")
    words = {
        "FE-IV": ("inverse variance", "inverse-variance", "iv,", "iv "),
        "MH": ("mantel", "m-h", "mh"),
        "Peto": ("peto",),
        "DL": ("dersimonian", "d-l", "dl"),
        "PM": ("paule", "mandel"),
        "REML": ("reml", "restricted maximum"),
    }.get(key, ())
    hit = any(w in t for w in words)
    hksj = any(w in t for w in ("hartung", "knapp", "hksj"))
    if model.endswith("+HKSJ"):
        return hit and hksj
    return hit and not hksj


def _rel(a: float, b: float, ratio: bool) -> float:
    if ratio:
        a, b = math.exp(a), math.exp(b)
    denom = max(abs(b), 1e-12)
    return abs(a - b) / denom


def reconcile(
    models: dict[str, PooledEstimate | NotComputable],
    published: tuple[float, float, float],
    *,
    ratio: bool,
    published_model: str = "",
    loo=None,
    flagged: tuple[tuple, ...] = (),
) -> Reconciliation | NotComputable:
    """Compare pooled estimates with the published (estimate, lower, upper).

    Parameters
    ----------
    models : dict
        Model key -> pooled estimate on the analysis scale.
    published : tuple
        Published estimate and limits on the *analysis* scale (logs for ratios).
    ratio : bool
        Compare on the natural scale (exp) for ratio measures.
    loo : callable, optional
        ``loo(model_key)`` returns a list of (row, label, leave-one-out estimate) for that
        model; used to find rows whose removal brings the estimate closest to the
        published one.
    flagged : tuple of (row, label) or (row, label, why)
        Rows the entry checks (or the row diagnostics, with their ``why``) flagged; listed
        first when the result is not reproduced.
    """
    est, lo, hi = published
    if not all(math.isfinite(x) for x in published):
        return NotComputable("the published pooled result is incomplete")
    comps = []
    for key, m in models.items():
        if not isinstance(m, PooledEstimate):
            continue
        de = _rel(m.estimate, est, ratio)
        dl = _rel(m.ci.low, lo, ratio)
        dh = _rel(m.ci.high, hi, ratio)
        comps.append(
            ModelComparison(
                key, _label(key), m.estimate, m.ci.low, m.ci.high, de, dl, dh, max(de, dl, dh)
            )
        )
    if not comps:
        return NotComputable("no pooled estimate could be computed from the rows")
    comps.sort(key=lambda c: (c.worst, c.rel_diff_estimate))
    best = comps[0]
    # Among models that all reproduce the paper, prefer the one the paper names.
    named = [c for c in comps if c.worst <= AGREE_RELATIVE and _named_in(c.model, published_model)]
    if best.worst <= AGREE_RELATIVE and named:
        best = named[0]
        comps.remove(best)
        comps.insert(0, best)
    if best.worst <= AGREE_RELATIVE:
        verdict = "agrees"
        reading = (
            f"Your rows reproduce the published result: closest is {best.label} "
            f"(largest difference, estimate or a CI limit, {best.worst * 100:.1f} %)."
        )
    elif best.worst <= NEAR_RELATIVE:
        verdict = "near"
        reading = (
            f"Close but not exact: {best.label} differs from the published result by up to "
            f"{best.worst * 100:.1f} %. Rounding in the paper, a different interval method or "
            "one mistyped row could explain it; re-check the rows listed."
        )
    else:
        verdict = "no model close"
        reading = (
            f"No model reproduces the published result (the closest, {best.label}, differs by "
            f"{best.worst * 100:.0f} %). Check the rows for entry errors, the measure and the "
            "interval level, or whether the paper analysed a different set of studies."
        )
    suspicious: list[tuple[int, str, str]] = []
    if verdict != "agrees":
        for row, label, *why in flagged:
            suspicious.append((row, label, why[0] if why else "the entry checks flagged this row"))
    if verdict != "agrees" and loo is not None:
        base = _rel(best.estimate, est, ratio)
        scored = []
        for row, label, e in loo(best.model):
            if math.isfinite(e):
                scored.append((_rel(e, est, ratio), row, label))
        scored.sort()
        for d, row, label in scored[:3]:
            if d < base * 0.5 and row not in {r for r, _, _ in suspicious}:
                suspicious.append(
                    (
                        row,
                        label,
                        f"without it the estimate's difference falls from {base * 100:.1f} % "
                        f"to {d * 100:.1f} %",
                    )
                )
    return Reconciliation(
        published_estimate=est,
        published_low=lo,
        published_high=hi,
        published_model=published_model,
        comparisons=tuple(comps),
        closest=best.model,
        verdict=verdict,
        reading=reading,
        suspicious_rows=tuple(suspicious),
    )
