"""What effect derivation gives for one study (:class:`Derived`) and the limits it keeps.

A low module of its own so that :mod:`lopside.stats.effects` (one row at a time, every
route) and :mod:`lopside.stats.derived_batch` (many rows at once, the 2x2, estimate and
means routes) share one definition of the result, the limits, the quantiles, Hedges' J
and the way numbers are written into the route text.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from statistics import NormalDist

#: Largest |effect| on the analysis scale that is used. Squares and inverse-variance
#: weights of larger numbers overflow or lose all precision in the pooled sums, so such a
#: row (almost always a typing or unit error, e.g. "1e300") is reported, not analysed.
MAX_ABS_EFFECT = 1e12
#: Smallest and largest SE that is used, for the same reason (a weight 1/SE^2 of 1e24 is
#: still an ordinary float; SEs of 1e-300 make the weights infinite).
MIN_SE = 1e-12
MAX_SE = 1e12
#: Largest group total in a 2x2 table that is used (a billion participants per group).
MAX_ARM_TOTAL = 1e9


#: Handbook 5.1 section 7.7.3.2: below about 60 per group a CI was probably t-based.
AUTO_T_ARM_SIZE = 60.0
#: Asymmetry of the estimate within its interval (in SEs) worth a note.
ASYMMETRY_NOTE = 0.2
_NORMAL = NormalDist()

_MEASURE_WORDS = {
    "OR": "log odds ratio",
    "RR": "log risk ratio",
    "HR": "log hazard ratio",
    "RD": "risk difference",
    "MD": "mean difference",
    "SMD": "Hedges' g",
}


def _fmt(x: float) -> str:
    """A number as a person would write it (up to 4 significant digits)."""
    return f"{x:.4g}"


def _z_quantile(upper_tail: float) -> float:
    """Normal quantile with ``upper_tail`` probability above it (accurate for tiny tails)."""
    return -_NORMAL.inv_cdf(upper_tail)


def _t_quantile(upper_tail: float, df: float) -> float:
    """Student t quantile with ``upper_tail`` probability above it."""
    # scipy.special is imported here, not at module level, to keep window start-up fast.
    from scipy.special import stdtrit

    return -float(stdtrit(df, upper_tail))


def hedges_j(m: float, *, exact: bool = True) -> float:
    """Hedges' small-sample correction factor J for ``m`` degrees of freedom.

    Parameters
    ----------
    m : float
        Degrees of freedom, n1 + n0 - 2 (must be > 1 for the exact form, > 0.25 otherwise).
    exact : bool
        Exact Gamma(m/2) / (sqrt(m/2) Gamma((m-1)/2)) (computed with log-gamma, so large
        ``m`` does not overflow), or the approximation 1 - 3/(4m - 1).

    Returns
    -------
    float
    """
    if exact:
        return math.exp(math.lgamma(m / 2) - math.lgamma((m - 1) / 2)) / math.sqrt(m / 2)
    return 1.0 - 3.0 / (4.0 * m - 1.0)


@dataclass(frozen=True, slots=True)
class Derived:
    """The analysis-scale effect of one study and how it was obtained.

    Attributes
    ----------
    y, se : float or None
        Effect on the analysis scale (natural log for OR/RR/HR) and its standard error.
        Both are ``None`` together when they could not be derived; otherwise both are
        finite and ``se > 0``.
    route : str
        ``"counts"``, ``"means"``, ``"ci"``, ``"se"``, ``"p"``, or ``""`` when none worked.
    route_text : str
        How ``y`` and ``se`` were obtained, in plain words.
    problems : tuple of str
        Why ``y``/``se`` could not be derived, or why they are approximate, or why an
        entered route could not be used.
    notes : tuple of str
        Remarks that do not stop the study being used (routes entered but not used, an
        interval that is not symmetric about the estimate, assumptions made).
    approximate : bool
        The SE rests on a bound or a guess (e.g. "P < 0.05", P rounded to 0.001).
    corrected : bool
        0.5 was added to the cells of the 2x2 table (for y and se, or for se only for RD).
    double_zero : bool
        The 2x2 table has no events in either arm.
    a, b, c, d : float or None
        The 2x2 counts as entered (events/non-events, intervention then control), before
        any correction; ``None`` unless all four counts are valid.
    n1, n0 : float or None
        Arm sizes (intervention, control), from the counts or from the per-arm sizes.
    n_total : float or None
        Total participants: ``row.n`` if valid, else ``n1 + n0``.
    df : float or None
        Degrees of freedom of the t quantile used (CI or P routes), else ``None``.
    se_modified : float or None
        SMD only: sqrt(1/n1 + 1/n0), the SE of Pustejovsky & Rodgers (2019) that does
        not depend on g.
    asd, asd_var : float or None
        Arcsine difference arcsin(sqrt(a/n1)) - arcsin(sqrt(c/n0)) and its variance
        1/(4 n1) + 1/(4 n0) (Rücker et al. 2008), whenever valid counts exist.
    """

    y: float | None = None
    se: float | None = None
    route: str = ""
    route_text: str = ""
    problems: tuple[str, ...] = ()
    notes: tuple[str, ...] = ()
    approximate: bool = False
    corrected: bool = False
    double_zero: bool = False
    a: float | None = None
    b: float | None = None
    c: float | None = None
    d: float | None = None
    n1: float | None = None
    n0: float | None = None
    n_total: float | None = None
    df: float | None = None
    se_modified: float | None = None
    asd: float | None = None
    asd_var: float | None = None

    @property
    def ok(self) -> bool:
        """Whether ``y`` and ``se`` are both available."""
        return self.y is not None and self.se is not None

    @property
    def variance(self) -> float | None:
        """``se**2``, or ``None``."""
        return None if self.se is None else self.se * self.se
