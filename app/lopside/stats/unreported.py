"""Trials known to be missing: what the pooled estimate would be had they reported.

A trial that was registered (or presented, or listed among the review's ongoing or
excluded studies) but never reported its results is the most direct evidence of
selective publication. The appraiser enters its size only. Each such trial is given an
assumed estimate and the standard error its size implies, and is pooled with the included
studies (random effects, the analysis' τ² estimator). The scenarios never enter the main
analysis.

Standard error from size (our rule; stated on the sheet):

* binary outcomes with 2x2 counts in the review: both arms at the review's median
  control-arm risk p0 (the usual large-sample variances, common practice):
  OR: 1/(n1 p0(1−p0)) + 1/(n0 p0(1−p0)); RR: (1−p0)/(n1 p0) + (1−p0)/(n0 p0);
  RD: p0(1−p0)(1/n1 + 1/n0);
* continuous outcomes with SDs: MD with the review's median arm SD, SE = SD √(1/n1 + 1/n0);
  SMD at no effect: SE = √(1/n1 + 1/n0) (the usual large-sample variance at d = 0);
* otherwise (an estimate and CI only, e.g. hazard ratios): the review's own relation
  between SE and size, SE = c/√N with c the median of SE_i √N_i over the included studies
  whose size is known.

Arms: the entered arm totals, else N split equally.

Scenarios: every missing trial found no effect (y = 0), and, second, every missing trial
found an effect as large as the pooled one in the opposite direction (y = −μ̂).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .data import StudyData
from .results import NotComputable, PooledEstimate


@dataclass(frozen=True, slots=True)
class MissingScenario:
    assumed: str  # "no effect" | "opposite effect"
    assumed_value: float  # the estimate given to each missing trial (analysis scale)
    pooled: PooledEstimate


@dataclass(frozen=True, slots=True)
class UnreportedTrials:
    count: int
    participants: float
    rows: tuple[int, ...]  # table rows (0-based)
    se: tuple[float, ...]  # the SE given to each missing trial
    se_rule: str  # how the SE was obtained, in words (for the sheet)
    scenarios: tuple[MissingScenario, ...]
    reported_estimate: float  # the main pooled estimate, for "instead of ..."
    #: rows marked as never reported whose size is missing (listed, not used)
    rows_without_size: tuple[int, ...] = ()


def _arms(n, n1, n0):
    if n1 is not None and n0 is not None and n1 > 0 and n0 > 0:
        return float(n1), float(n0)
    return float(n) / 2.0, float(n) / 2.0


def se_from_size(
    data: StudyData, sizes: list[tuple[float, float | None, float | None]]
) -> tuple[np.ndarray, str] | NotComputable:
    """SE for each missing trial of (N, n1, n0); see the module docstring for the rule."""
    m = data.measure
    arms = [_arms(*s) for s in sizes]
    if any(a <= 0 or b <= 0 for a, b in arms):
        return NotComputable("a missing trial has no participants")
    n1 = np.array([a for a, _ in arms])
    n0 = np.array([b for _, b in arms])
    if m in ("OR", "RR", "RD") and data.c.size and np.isfinite(data.c).any():
        ok = np.isfinite(data.c) & np.isfinite(data.d) & ((data.c + data.d) > 0)
        p0 = float(np.median(data.c[ok] / (data.c[ok] + data.d[ok])))
        if 0.0 < p0 < 1.0:
            if m == "OR":
                var = 1 / (n1 * p0 * (1 - p0)) + 1 / (n0 * p0 * (1 - p0))
            elif m == "RR":
                var = (1 - p0) / (n1 * p0) + (1 - p0) / (n0 * p0)
            else:
                var = p0 * (1 - p0) * (1 / n1 + 1 / n0)
            return np.sqrt(var), (
                f"both arms at the review's median control-arm risk ({p0:.1%}), "
                "with the trial's arm sizes"
            )
    if m == "SMD":
        return np.sqrt(1 / n1 + 1 / n0), "the usual SE of a standardised difference of 0"
    if m == "MD":
        sds = [data_sd for data_sd in _arm_sds(data)]
        if sds:
            sd = float(np.median(sds))
            return sd * np.sqrt(1 / n1 + 1 / n0), (
                f"the review's median arm SD ({sd:.3g}) with the trial's arm sizes"
            )
    # the review's own relation between SE and size
    known = np.isfinite(data.n) & (data.n > 0) if data.n.size else np.zeros(0, bool)
    if not known.any():
        return NotComputable(
            "the SE of a missing trial cannot be told from its size: no included study "
            "gives its number of participants"
        )
    c = float(np.median(data.se[known] * np.sqrt(data.n[known])))
    total = n1 + n0
    return c / np.sqrt(total), (
        f"the review's own relation between SE and size (SE = {c:.3g}/√N, the median over "
        f"{int(known.sum())} included studies whose size is known)"
    )


def _arm_sds(data: StudyData) -> list[float]:
    # StudyData has no SD arrays: recover arm SDs of MD studies from the SE and the arms
    # (SE² = s²(1/n1 + 1/n0) with a common s), the same quantity the rule needs
    ok = np.isfinite(data.n1) & np.isfinite(data.n0) if data.n1.size else np.zeros(0, bool)
    if not ok.any():
        return []
    return list(data.se[ok] / np.sqrt(1 / data.n1[ok] + 1 / data.n0[ok]))


def unreported_trials(
    data: StudyData,
    sizes: list[tuple[float, float | None, float | None]],
    rows: tuple[int, ...],
    pooled: PooledEstimate,
    *,
    tau2_method: str = "REML",
    rows_without_size: tuple[int, ...] = (),
) -> UnreportedTrials | NotComputable:
    """Pool the included studies with the missing trials under the two scenarios."""
    from .pooling import random_effects

    if not sizes:
        return NotComputable("no trial is marked as never reported")
    if data.k < 1:
        return NotComputable("no included study to pool the missing trials with")
    got = se_from_size(data, sizes)
    if isinstance(got, NotComputable):
        return got
    se_m, rule = got
    mu = float(pooled.estimate)
    scenarios = []
    for name, value in (("no effect", 0.0), ("opposite effect", -mu)):
        y = np.concatenate([data.y, np.full(se_m.size, value)])
        v = np.concatenate([data.v, se_m**2])
        res = random_effects(y, v, method=tau2_method)
        if isinstance(res, NotComputable):
            return res
        scenarios.append(MissingScenario(name, value, res))
    return UnreportedTrials(
        count=len(sizes),
        participants=float(sum(s[0] for s in sizes)),
        rows=tuple(rows),
        se=tuple(float(x) for x in se_m),
        se_rule=rule,
        scenarios=tuple(scenarios),
        reported_estimate=mu,
        rows_without_size=tuple(rows_without_size),
    )


def sizes_of(rows) -> list[tuple[float, float | None, float | None]]:
    """(N, n1, n0) of each row; arm totals, else arm ns, else n."""
    out = []
    for r in rows:
        n1 = r.int_total if r.int_total is not None else r.int_n
        n0 = r.ctl_total if r.ctl_total is not None else r.ctl_n
        total = r.total_n()
        if total is None or not math.isfinite(total) or total <= 0:
            continue
        out.append((float(total), n1, n0))
    return out
