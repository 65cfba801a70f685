"""What the pooling modules share: the distribution functions (scipy.special, imported when
first used), the array conversion, and the check that the weighted sums are finite.
"""

from __future__ import annotations

import math

import numpy as np


def _norm_ppf(p: float) -> float:
    from scipy.special import ndtri

    return float(ndtri(p))


def _norm_sf2(z: float) -> float:
    """Two-sided normal p-value."""
    from scipy.special import ndtr

    return float(2.0 * ndtr(-abs(z)))


def _t_ppf(p: float, df: float) -> float:
    from scipy.special import stdtrit

    return float(stdtrit(df, p))


def _t_sf2(t: float, df: float) -> float:
    from scipy.special import stdtr

    return float(2.0 * stdtr(df, -abs(t)))


def _chi2_sf(x: float, df: float) -> float:
    from scipy.special import chdtrc

    return float(chdtrc(df, x))


TOO_EXTREME = (
    "the effects or standard errors are too extreme for reliable arithmetic; check the "
    "entered values"
)


def _too_extreme(y: np.ndarray, v: np.ndarray) -> bool:
    """True when the weighted sums that every estimator needs overflow or are not finite."""
    with np.errstate(all="ignore"):
        return not (
            np.isfinite(y).all()
            and np.isfinite(v).all()
            and (v > 0).all()
            and math.isfinite((y * y / v).sum())
            and math.isfinite((1.0 / v).sum())
        )


def _as_arrays(y, v) -> tuple[np.ndarray, np.ndarray]:
    return np.asarray(y, dtype=float), np.asarray(v, dtype=float)
