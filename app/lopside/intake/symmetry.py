"""Symmetry of an interval about its estimate, allowing for the rounding of the printed
numbers (the row checks' CI rule; :mod:`lopside.intake.checks` re-exports it).

Ratio intervals (OR, RR, HR) computed the usual way are symmetric on the log scale, and
difference intervals on the plain scale (Cochrane Handbook 5.1, section 7.7.7.3 for
ratios; section 7.7.3.2 for differences). An interval is called asymmetric only if *no*
set of true values within the rounding of the printed numbers is symmetric on the scale.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from lopside.model.review import RATIO_MEASURES


@dataclass(frozen=True, slots=True)
class Symmetry:
    """Whether an interval is symmetric around its estimate, allowing for rounding.

    ``log_ok``/``linear_ok`` are True when some true values within half a unit of the
    last printed decimal of each number are exactly symmetric on that scale (``None``
    for the log scale when a number is not positive). ``implied`` is the estimate the
    limits point to on the scale expected for the measure.
    """

    log_ok: bool | None
    linear_ok: bool
    implied: float
    log_gap: float | None
    linear_gap: float


def _gap_range(
    e: float, lo: float, hi: float, he: float, hl: float, hu: float, f
) -> tuple[float, float] | None:
    """Range of f(e) - (f(lo) + f(hi)) / 2 over the rounding box (f increasing)."""
    try:
        low = f(e - he) - (f(lo + hl) + f(hi + hu)) / 2.0
    except ValueError:
        return None
    try:
        high = f(e + he) - (f(lo - hl) + f(hi - hu)) / 2.0
    except ValueError:
        high = math.inf  # a limit that may round to 0: the box reaches any asymmetry
    return low, high


def _safe_log(x: float) -> float:
    if x <= 0:
        raise ValueError("log of a non-positive number")
    return math.log(x)


def symmetry(
    estimate: float,
    lower: float,
    upper: float,
    measure: str,
    decimals: tuple[int, int, int] = (2, 2, 2),
) -> Symmetry:
    """Test an interval for symmetry on the log and the plain scale, allowing for rounding.

    Parameters
    ----------
    estimate, lower, upper : float
        As printed (natural scale).
    measure : str
        One of MEASURES; decides the expected scale and ``implied``.
    decimals : tuple of int
        Decimals printed for the estimate, the lower and the upper limit.

    Notes
    -----
    Half a unit in the last printed place bounds the rounding error of each number.
    Because ``f(e) - (f(lo) + f(hi)) / 2`` is monotone in each number for an increasing
    ``f``, its range over the rounding box is reached at two corners, so the test is
    exact, not a first-order approximation.
    """
    he, hl, hu = (0.5 * 10.0 ** (-d) for d in decimals)
    lin = _gap_range(estimate, lower, upper, he, hl, hu, lambda x: x)
    assert lin is not None
    linear_ok = lin[0] <= 0.0 <= lin[1]
    log_ok: bool | None = None
    log_gap: float | None = None
    if estimate > 0 and lower > 0 and upper > 0:
        rng = _gap_range(estimate, lower, upper, he, hl, hu, _safe_log)
        log_ok = rng is None or rng[0] <= 0.0 <= rng[1]
        log_gap = math.log(estimate) - (math.log(lower) + math.log(upper)) / 2.0
    if measure in RATIO_MEASURES and lower > 0 and upper > 0:
        implied = math.sqrt(lower * upper)
    else:
        implied = (lower + upper) / 2.0
    return Symmetry(log_ok, linear_ok, implied, log_gap, estimate - (lower + upper) / 2.0)
