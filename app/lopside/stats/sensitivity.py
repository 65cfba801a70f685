"""Leave-one-out, cumulative meta-analysis by precision, and fail-safe N.

All estimates are on the analysis scale (log for ratio measures) and come from
:mod:`lopside.stats.pooling`, so they match the main analysis exactly.

Fail-safe N is offered only because readers meet it in published reviews; each result
carries :data:`FAIL_SAFE_CAUTION` and the window, CLI and sheet must show it with the
number (Cochrane Handbook 5.1 §10.4.4.3 does not recommend it).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import NamedTuple

import numpy as np

from .data import StudyData
from .pooling import (
    TAU2_METHODS,
    cochran_q_batch,
    fixed_effect,
    fixed_effect_batch,
    leave_one_out_large,
    random_effects,
    random_effects_batch,
)
from .pooling_loo import cumulative_large
from .results import NotComputable, PooledEstimate, RowsOnDemand, instances

FAIL_SAFE_CAUTION = (
    "Fail-safe N is not recommended (Cochrane Handbook 5.1, section 10.4.4.3): the number "
    "depends heavily on what is assumed about the results of the unpublished studies, the "
    "different versions give widely different numbers, and it asks whether significance "
    "would be lost rather than how large the effect is and how precisely it is known. It "
    "also ignores heterogeneity and the size of the studies."
)


#: above this many studies, leave-one-out runs from running sums warm-started at the
#: full-data tau², the cumulative analysis is shown at chosen steps from running sums
#: with REML by scoring alone, and the selection model starts from one point (each result says so). 500: the
#: exact paths grow as k² (a review of 1,000 studies took twice as long as one of 3,000
#: by the fast paths); at 500 they cost about what the fast paths cost at 3,000.
LARGE_K = 500
#: steps of a thinned cumulative analysis: every one up to this many studies ...
CUMULATIVE_EVERY_UP_TO = 50
#: ... then about this many more, evenly spaced on a log scale, and the last
CUMULATIVE_MORE_STEPS = 250


def loo_large_note(k: int) -> str:
    return (
        f"With {k:,} studies (more than {LARGE_K:,}), each leave-one-out pooling was found "
        "from running sums, the between-study variance by steps started from the all-study "
        "value (without the search for a second maximum on a grid); the results agree with "
        "pooling each subset on its own to about 1e-9."
    )


def cumulative_large_note(k: int, steps: int, tau2_method: str = "REML") -> str:
    grid = (
        " At each step the between-study variance (REML) was found by scoring steps from "
        "the DerSimonian-Laird value, without the search for a second maximum on a grid."
        if tau2_method == "REML"
        else ""
    )
    return (
        f"With {k:,} studies (more than {LARGE_K:,}), the cumulative analysis is shown at "
        f"{steps:,} steps (after each of the first {CUMULATIVE_EVERY_UP_TO} studies, then at "
        "evenly spaced steps on a log scale, and with all studies), not after every study. "
        "Each step was pooled from running sums over the studies in precision order; the "
        "results agree with pooling each step's studies on its own to about 1e-8." + grid
    )


def _labels(data: StudyData) -> tuple[str, ...]:
    if len(data.labels) == data.k:
        return data.labels
    return tuple(f"Study {i + 1}" for i in range(data.k))


# --------------------------------------------------------------------------------------
# Leave-one-out


@dataclass(frozen=True, slots=True)
class LeaveOneOutRow:
    """The pooled result without one study.

    ``i2`` is in percent (NotComputable when one study remains); ``q`` is Cochran's Q of
    the remaining studies (the influence diagnostics read it).
    """

    omitted: str
    index: int
    fixed: PooledEstimate
    random: PooledEstimate
    tau2: float
    i2: float | NotComputable
    q: float = float("nan")


class LeaveOneOutColumns(NamedTuple):
    """The leave-one-out rows' random-effects numbers as arrays (row i without study i):
    what the influence diagnostics and the summary read, without making each row."""

    omitted: tuple[str, ...]
    estimate: np.ndarray
    #: model-based SE (without HKSJ)
    se: np.ndarray
    tau2: np.ndarray
    q: np.ndarray
    i2: np.ndarray


@dataclass(frozen=True, slots=True)
class LeaveOneOutResult:
    #: a tuple; above LARGE_K a RowsOnDemand (equal to the tuple, made when first read)
    #: whose ``columns`` hold the arrays
    rows: tuple[LeaveOneOutRow, ...]
    full_fixed: PooledEstimate
    full_random: PooledEstimate
    tau2_method: str
    hksj: bool
    confidence_level: float = 0.95
    #: how the rows were computed when that differs from pooling each subset on its own
    note: str = ""


def leave_one_out(
    data: StudyData,
    *,
    tau2_method: str = "REML",
    hksj: bool = False,
    confidence_level: float = 0.95,
) -> LeaveOneOutResult | NotComputable:
    """Pool without each study in turn (fixed and random effects, τ², I²).

    Parameters
    ----------
    data : StudyData
    tau2_method : {"DL", "PM", "REML"}
    hksj : bool
        Use the modified Hartung-Knapp-Sidik-Jonkman interval for the random effects.
    confidence_level : float

    Returns
    -------
    LeaveOneOutResult or NotComputable
        NotComputable with fewer than three studies (two must remain).
    """
    if tau2_method not in TAU2_METHODS:
        raise ValueError(f"unknown tau² method {tau2_method!r}; use one of {TAU2_METHODS}")
    y = np.asarray(data.y, dtype=float)
    v = np.asarray(data.se, dtype=float) ** 2
    k = y.size
    if k < 3:
        return NotComputable("leave-one-out needs at least three studies")
    labels = _labels(data)
    full_random = random_effects(
        y, v, method=tau2_method, hksj=hksj, confidence_level=confidence_level
    )
    full_fixed = fixed_effect(y, v, confidence_level=confidence_level)
    if k > LARGE_K:
        # O(k) memory: running sums and warm starts instead of a k x k mask; the rows are
        # made when an output first lists them
        make_fixed, make_random, q, arrays = leave_one_out_large(
            y,
            v,
            method=tau2_method,
            hksj=hksj,
            confidence_level=confidence_level,
            tau2_full=getattr(full_random, "tau2", None),
            deferred=True,
        )
        q, i2 = _q_and_i2(q, k)

        def make():
            random = make_random()
            return _loo_rows(labels, make_fixed(), random, i2, q)

        columns = LeaveOneOutColumns(labels, arrays.estimate, arrays.se, arrays.tau2, q, i2)
        for a in columns[1:]:
            a.setflags(write=False)  # the rows are made from these later: kept as they are
        rows = RowsOnDemand(k, make, columns)
        return LeaveOneOutResult(
            rows, full_fixed, full_random, tau2_method, hksj, confidence_level, loo_large_note(k)
        )
    else:
        # all k subsets pooled at once (row i leaves study i out); same numbers as pooling
        # each subset on its own, see tests/test_pooling_batch.py
        keep = ~np.eye(k, dtype=bool)
        # rows carry no percent weights: nothing shows them, and at k = 3,000 they would be
        # millions of numbers
        fixed = fixed_effect_batch(
            y, v, keep, confidence_level=confidence_level, with_weights=False
        )
        random = random_effects_batch(
            y,
            v,
            keep,
            method=tau2_method,
            hksj=hksj,
            confidence_level=confidence_level,
            with_weights=False,
        )
        q = cochran_q_batch(y, v, keep)
    q, i2 = _q_and_i2(q, k)
    return LeaveOneOutResult(
        tuple(_loo_rows(labels, fixed, random, i2, q)),
        full_fixed,
        full_random,
        tau2_method,
        hksj,
        confidence_level,
    )


def _q_and_i2(q, k: int) -> tuple[np.ndarray, np.ndarray]:
    """Cochran's Q of each subset of k - 1 studies, and its I² in percent."""
    q = np.asarray(q, dtype=float)
    # I² (percent) of the k - 1 studies left: max(0, (Q - (k - 2))/Q) 100, 0 when Q = 0
    with np.errstate(invalid="ignore", divide="ignore"):
        i2 = np.where(q > 0, np.maximum(0.0, (q - (k - 2)) / q) * 100.0, 0.0)
    return q, i2


def _loo_rows(labels, fixed, random, i2: np.ndarray, q: np.ndarray) -> list:
    return instances(
        LeaveOneOutRow,
        labels,
        range(len(labels)),
        fixed,
        random,
        [re.tau2 for re in random],
        i2.tolist(),
        q.tolist(),
    )


def leave_one_out_columns(loo: LeaveOneOutResult) -> LeaveOneOutColumns | None:
    """The rows' random-effects numbers as arrays (None when a study left out could not
    be pooled): from the arrays the rows are made from when the result keeps them, else
    read off the rows (the same numbers either way)."""
    columns = getattr(loo.rows, "columns", None)
    if columns is not None:
        return columns
    rows = loo.rows
    if not all(hasattr(r.random, "estimate") for r in rows):
        return None
    return LeaveOneOutColumns(
        tuple(r.omitted for r in rows),
        np.array([r.random.estimate for r in rows]),
        np.array([r.random.se for r in rows]),
        np.array([r.tau2 for r in rows]),
        np.array([r.q for r in rows]),
        np.array([r.i2 if isinstance(r.i2, (int, float)) else np.nan for r in rows]),
    )


# --------------------------------------------------------------------------------------
# Cumulative meta-analysis by precision


@dataclass(frozen=True, slots=True)
class CumulativeStep:
    """Pooled result of the ``k`` most precise studies (``added`` is the k-th)."""

    added: str
    index: int
    k: int
    se_added: float
    fixed: PooledEstimate
    random: PooledEstimate


@dataclass(frozen=True, slots=True)
class CumulativeResult:
    steps: tuple[CumulativeStep, ...]
    order: str
    tau2_method: str
    hksj: bool
    confidence_level: float = 0.95
    #: set when the analysis is shown at chosen steps only (many studies)
    note: str = ""


def cumulative(
    data: StudyData,
    *,
    tau2_method: str = "REML",
    hksj: bool = False,
    confidence_level: float = 0.95,
) -> CumulativeResult | NotComputable:
    """Cumulative meta-analysis, most precise study first.

    A drift of the estimate as less precise studies are added is a picture of a
    small-study effect. Studies with equal SE keep their table order.

    Returns
    -------
    CumulativeResult or NotComputable
        NotComputable with fewer than two studies.
    """
    if tau2_method not in TAU2_METHODS:
        raise ValueError(f"unknown tau² method {tau2_method!r}; use one of {TAU2_METHODS}")
    y = np.asarray(data.y, dtype=float)
    se = np.asarray(data.se, dtype=float)
    v = se**2
    k = y.size
    if k < 2:
        return NotComputable("a cumulative meta-analysis needs at least two studies")
    labels = _labels(data)
    order = np.argsort(se, kind="mergesort")
    # row m - 1 holds the m most precise studies (a prefix in precision order)
    ys, vs = y[order], v[order]
    sizes = cumulative_steps(k)
    if k > LARGE_K:
        # O(k): running sums over the prefixes and power series near one tau^2, REML by
        # scoring alone (the note says so)
        fixed, random = cumulative_large(
            ys, vs, sizes, method=tau2_method, hksj=hksj, confidence_level=confidence_level
        )
    else:
        prefix = np.arange(k)[None, :] < sizes[:, None]
        fixed = fixed_effect_batch(
            ys, vs, prefix, confidence_level=confidence_level, with_weights=False
        )
        random = random_effects_batch(
            ys,
            vs,
            prefix,
            method=tau2_method,
            hksj=hksj,
            confidence_level=confidence_level,
            with_weights=False,
        )
    added = order[sizes - 1].tolist()
    steps = instances(
        CumulativeStep,
        [labels[j] for j in added],
        added,
        sizes.tolist(),
        se[order[sizes - 1]].tolist(),
        fixed,
        random,
    )
    return CumulativeResult(
        steps=tuple(steps),
        order="most precise (smallest SE) first",
        tau2_method=tau2_method,
        hksj=hksj,
        confidence_level=confidence_level,
        note=cumulative_large_note(k, sizes.size, tau2_method) if k > LARGE_K else "",
    )


def cumulative_steps(k: int) -> np.ndarray:
    """Numbers of studies at which the cumulative analysis is shown: every step up to
    :data:`LARGE_K` studies; beyond, the first :data:`CUMULATIVE_EVERY_UP_TO`, then about
    :data:`CUMULATIVE_MORE_STEPS` steps evenly spaced on a log scale, and k."""
    if k <= LARGE_K:
        return np.arange(1, k + 1)
    tail = np.geomspace(CUMULATIVE_EVERY_UP_TO + 1, k, CUMULATIVE_MORE_STEPS)
    picks = np.concatenate([np.arange(1, CUMULATIVE_EVERY_UP_TO + 1), np.rint(tail), [k]])
    return np.unique(picks.astype(int))


# --------------------------------------------------------------------------------------
# Fail-safe N


@dataclass(frozen=True, slots=True)
class FailSafeN:
    """A fail-safe N, always shown with ``caution``.

    Attributes
    ----------
    method : str
        "Rosenthal" or "Orwin".
    n : float
        The number of unpublished null studies (not rounded; 0 when already not met).
    n_whole : int
        ``n`` rounded up to whole studies.
    formula : str
        The formula in words with the values used.
    tolerance : float or None
        Rosenthal's 5k + 10 (for Rosenthal only).
    caution : str
        :data:`FAIL_SAFE_CAUTION`.
    """

    method: str
    n: float
    n_whole: int
    formula: str
    k: int
    tolerance: float | None = None
    caution: str = FAIL_SAFE_CAUTION
    note: str = ""


def fail_safe_n(
    data: StudyData, *, trivial: float | None = None, alpha: float = 0.05
) -> FailSafeN | NotComputable:
    """Orwin's fail-safe N when a ``trivial`` effect is given, otherwise Rosenthal's.

    Parameters
    ----------
    data : StudyData
    trivial : float, optional
        Trivial effect on the analysis scale for Orwin's version (log scale for ratios).
    alpha : float
        One-tailed level for Rosenthal's version.
    """
    if trivial is None:
        return fail_safe_rosenthal(data, alpha=alpha)
    return fail_safe_orwin(data, trivial)


def fail_safe_rosenthal(data: StudyData, *, alpha: float = 0.05) -> FailSafeN | NotComputable:
    """Rosenthal's (1979) fail-safe N: N = (Σz_i)²/z_α² − k, one-tailed ``alpha``.

    z_i = y_i/SE_i; z_α = Φ⁻¹(1 − α) (1.645 for one-tailed 0.05). The unpublished studies
    are assumed to average z = 0.
    """
    from scipy.special import ndtri

    y = np.asarray(data.y, dtype=float)
    se = np.asarray(data.se, dtype=float)
    k = y.size
    if k < 1:
        return NotComputable("no study has a usable effect and standard error")
    z = y / se
    sz = float(z.sum())
    za = float(ndtri(1.0 - alpha))
    n = sz**2 / za**2 - k
    note = ""
    # n < 0 exactly when the combined (Stouffer) z = Σz/√k is already below z_α in size.
    if n < 0:
        n = 0.0
        note = "the combined result is not significant even without unpublished studies"
    return FailSafeN(
        method="Rosenthal",
        n=float(n),
        n_whole=int(math.ceil(n - 1e-9)) if n > 0 else 0,
        formula=f"(Σz)²/z_α² − k = ({sz:.4g})²/{za:.4g}² − {k}, one-tailed α = {alpha:g}",
        k=int(k),
        tolerance=float(5 * k + 10),
        note=note,
    )


def fail_safe_orwin(data: StudyData, trivial_effect: float) -> FailSafeN | NotComputable:
    """Orwin's (1983) fail-safe N: N = k(ȳ − y_c)/y_c.

    ȳ is the fixed-effect mean and ``trivial_effect`` (y_c) the effect the user would
    regard as trivial, on the analysis scale (e.g. ln 0.95 for an odds ratio of 0.95).
    The unpublished studies are assumed to average 0.
    """
    y = np.asarray(data.y, dtype=float)
    v = np.asarray(data.se, dtype=float) ** 2
    k = y.size
    if k < 1:
        return NotComputable("no study has a usable effect and standard error")
    yc = float(trivial_effect)
    if not math.isfinite(yc) or yc == 0.0:
        return NotComputable(
            "Orwin's fail-safe N needs a trivial effect different from the null (not 0 on "
            "the analysis scale)"
        )
    fe = fixed_effect(y, v)
    ybar = fe.estimate
    note = ""
    if ybar * yc <= 0:
        return NotComputable(
            "the trivial effect lies on the other side of the null from the pooled "
            "estimate; enter it in the direction of the pooled effect"
        )
    n = k * (ybar - yc) / yc
    if n < 0:
        n = 0.0
        note = "the pooled estimate is already no larger than the trivial effect"
    return FailSafeN(
        method="Orwin",
        n=float(n),
        n_whole=int(math.ceil(n - 1e-9)) if n > 0 else 0,
        formula=f"k(ȳ − y_c)/y_c = {k}·({ybar:.4g} − {yc:.4g})/{yc:.4g}",
        k=int(k),
        note=note,
    )
