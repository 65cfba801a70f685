"""What every asymmetry test shares: thresholds, status codes, user-facing messages (declared
once, so tests can assert them) and the result types.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import NamedTuple

import numpy as np

from lopside.stats.results import NotComputable

#: Conventional threshold for asymmetry tests: Egger et al. 1997 used P < 0.10 because the
#: tests have low power; Sterne et al. 2011 repeat it (from memory).
DEFAULT_ALPHA = 0.10


#: Largest k for which Begg's test uses the exact null distribution of Kendall's S.
BEGG_EXACT_MAX = 50


ALL_MEASURES = frozenset({"OR", "RR", "HR", "RD", "MD", "SMD"})


# Status codes shared by the batched cores (one per replicate).
OK, TOO_FEW, SINGULAR, EXACT_FIT = 0, 1, 2, 3


# Begg's test: a weight or standardised effect overflowed (numbers too extreme).
NUMERIC = 4


# A design is singular when the weighted spread of the regressor is this small relative
# to its weighted square (relative spread about 1e-6): the SEs are equal for all purposes.
_SINGULAR_TOL = 1e-12


# A fit is exact when the residual sum of squares is this small relative to the weighted
# square of the response (relative residual about 1e-10): there is no scatter to test.
_EXACT_TOL = 1e-20


# Formulations A and B of Egger's test are algebraically identical (methods.md 3.1);
# we require agreement to this relative tolerance before reporting.
_EGGER_AGREE_RTOL = 1e-6


# User-facing messages, declared once so that tests can assert them.
MSG_NEEDS_COUNTS = "{name} needs 2x2 counts (events and totals in both groups) for every study"


MSG_NEEDS_SIZES = "{name} needs the size of both groups for every study"


MSG_WRONG_MEASURE = "{name} is meant for {suits}; this analysis uses the {measure}"


MSG_TOO_FEW = "{name} needs at least 3 studies{qual}; {k_used} {verb} available{aside}"


MSG_SINGULAR = (
    "{name} cannot be computed: all studies have the same {what}, so there is no spread "
    "of study size to relate the effects to"
)


MSG_EXACT_FIT = (
    "{name} cannot be computed: the studies lie exactly on a straight line, so there is "
    "no scatter left to test against"
)


MSG_BEGG_FLAT = (
    "{name} cannot be computed: all standardised effects are equal, so they cannot be ranked"
)


MSG_NUMERIC = (
    "{name} cannot be computed: the effects or standard errors are too extreme for "
    "accurate arithmetic (check the entries for typing or unit errors)"
)


MSG_EGGER_DISAGREE = (
    "{name} cannot be computed reliably: two equivalent forms of the regression gave "
    "different answers (the standard errors are too extreme for accurate arithmetic)"
)


# --------------------------------------------------------------------------------------
# Results


@dataclass(frozen=True, slots=True)
class AsymmetryResult:
    """The outcome of one small-study-effect test.

    Attributes
    ----------
    key, name : str
        Registry key ("egger") and display name ("Egger's test").
    statistic : float
        The test statistic: a t (regression tests), a z (random-effects arcsine test) or
        Kendall's tau-b (Begg's test).
    pvalue : float
        Two-sided p-value.
    df : float or None
        Degrees of freedom of the t distribution, None for z or rank tests.
    intercept, intercept_se, slope, slope_se : float or None
        Fitted coefficients of the regression and their standard errors (None for Begg).
    k_used : int
        Studies that entered the test.
    dropped : tuple of (label, why)
        Studies set aside, with the reason in plain words.
    method_note : str
        How the p-value was obtained ("t test on 12 df", "exact p (no ties)").
    what_is_tested : str
        The quantity tested, in plain words.
    reading : str
        One plain-language line about this result.
    alpha : float
        Threshold used for the reading.
    tested : str
        Which quantity carries the test: "intercept", "slope" or "tau".
    bias : float
        The tested coefficient (or tau); positive means smaller studies show more positive
        effects on the analysis scale.
    z : float or None
        Begg's test: the normal deviate of Kendall's S (tie-corrected variance).
    tau2 : float or None
        Random-effects arcsine test: residual between-study variance (method of moments).
    """

    key: str
    name: str
    statistic: float
    pvalue: float
    df: float | None
    intercept: float | None
    intercept_se: float | None
    slope: float | None
    slope_se: float | None
    k_used: int
    dropped: tuple[tuple[str, str], ...]
    method_note: str
    what_is_tested: str
    reading: str
    alpha: float = DEFAULT_ALPHA
    tested: str = "intercept"
    bias: float = 0.0
    z: float | None = None
    tau2: float | None = None

    @property
    def suggests_asymmetry(self) -> bool:
        """True when ``pvalue < alpha``."""
        return self.pvalue < self.alpha


@dataclass(frozen=True)
class TestSpec:
    """One registered test.

    Attributes
    ----------
    key, name : str
    function : callable
        ``function(data, *, alpha=0.10, **options) -> AsymmetryResult | NotComputable``.
    suits : frozenset of str
        Measures the test is meant for.
    needs : str
        "se" (effects and SEs suffice), "counts" (2x2 counts for every study) or "sizes"
        (both group sizes for every study).
    source : str
        Published source.
    summary : str
        One line in plain language.
    """

    __test__ = False  # not a pytest class, despite the name

    key: str
    name: str
    function: Callable[..., AsymmetryResult | NotComputable]
    suits: frozenset[str]
    needs: str
    source: str
    summary: str


class TestArrays(NamedTuple):
    """Batched output of a ``*_core`` function (arrays over the leading axes)."""

    statistic: np.ndarray
    pvalue: np.ndarray
    df: np.ndarray | None
    status: np.ndarray
    k_used: np.ndarray
    bias: np.ndarray
    intercept: np.ndarray | None = None
    intercept_se: np.ndarray | None = None
    slope: np.ndarray | None = None
    slope_se: np.ndarray | None = None
    z: np.ndarray | None = None
    tau2: np.ndarray | None = None
    exact: np.ndarray | None = None
    ties: np.ndarray | None = None


class LineFit(NamedTuple):
    """Batched weighted least-squares fit of ``z = intercept + slope * x``."""

    intercept: np.ndarray
    intercept_se: np.ndarray
    slope: np.ndarray
    slope_se: np.ndarray
    df: np.ndarray
    k_used: np.ndarray
    rss: np.ndarray
    status: np.ndarray


# --------------------------------------------------------------------------------------
# Batched arithmetic


def _t_sf2(t, df):
    from scipy.special import stdtr

    return 2.0 * stdtr(df, -np.abs(t))


def _norm_sf2(z):
    from scipy.special import ndtr

    return 2.0 * ndtr(-np.abs(z))


def _finite_use(*arrays, use=None) -> np.ndarray:
    ok = np.ones(np.broadcast_shapes(*(np.shape(a) for a in arrays)), dtype=bool)
    for a in arrays:
        ok = ok & np.isfinite(a)
    if use is not None:
        ok = ok & np.asarray(use, dtype=bool)
    return ok


#: Registry key -> :class:`TestSpec`, in the order the faces list the tests. Declared here,
#: below the test families, so that they can name a test by its key; filled once by
#: :mod:`lopside.stats.asymmetry.registry` when the package is imported (importing any
#: module of the package imports the package first).
REGISTRY: dict[str, TestSpec] = {}
