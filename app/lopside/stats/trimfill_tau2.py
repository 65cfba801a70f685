"""REML between-study variance started from a nearby value: trim and fill in a large review.

Trim and fill pools many subsets that differ by a few studies (the kept studies at each
trimming step, then the observed plus the filled ones). :func:`tau2.tau2_reml` starts
each one from the DerSimonian-Laird value and then searches a grid of 50 values for a
second, higher maximum; above ``sensitivity.LARGE_K`` studies trim and fill instead
starts from the value of a neighbouring subset (see adjust_trimfill) and solves the
score equation by Newton's method (the observed information: three to six steps, where
scoring takes six or more and converges only linearly); if the curvature there is not
that of a maximum it falls back on the scoring of :func:`tau2.tau2_reml`. The grid and
the rule that picks between it and the local maximum are those of
:func:`tau2.tau2_reml`, reused from it. Where the restricted likelihood has one maximum
on tau² >= 0 both reach it: Newton's root is exact to rounding (checked against brentq),
tau2_reml stops when its steps fall below 1e-10·max(1, tau²) and is that far from the
root or a little more, so the two agree to 1e-9 (relative, or absolute below 1).
"""

from __future__ import annotations

import math

import numpy as np

from .tau2 import (
    _MAX_ITER,
    Tau2Estimate,
    _reml_point,
    _reml_scoring,
    checked_on_grid,
    tau2_dl,
    tau2_reml,
)


def reml_from(y: np.ndarray, v: np.ndarray, start: float, *, grid: bool) -> Tau2Estimate:
    """REML tau² by Newton's method from ``start``; with ``grid``, tau2_reml's safeguard.

    Without ``grid`` the search for a second maximum is left out: the caller says so in
    its result's note.
    """
    if y.size < 2:
        return tau2_reml(y, v)
    est = _reml_newton(y, v, float(start))
    if est is None:
        est, ll_est = _reml_scoring(y, v, float(start), _MAX_ITER)
    elif grid:
        ll_est = _reml_point(y, v, est.tau2)[0]
    if not grid:
        return est
    # the grid check of tau2_reml (its scale uses the DerSimonian-Laird value)
    return checked_on_grid(y, v, est, ll_est, tau2_dl(y, v).tau2, _MAX_ITER)


#: Newton steps before falling back on scoring
_NEWTON_ITER = 30


def _reml_newton(y: np.ndarray, v: np.ndarray, tau2: float) -> Tau2Estimate | None:
    """The root of the REML score by Newton's method from ``tau2``; None if not clean.

    Score (as in tau2._reml_scoring): S = -½(Σw - Σw²/Σw) + ½Σw²r², w = 1/(v + tau²),
    r = y - μ̂; its derivative (dw/dtau² = -w², dμ̂/dtau² = -Σw²r/Σw):
    S' = ½Σw² - Σw³/Σw + ½(Σw²/Σw)² - Σw³r² + (Σw²r)²/Σw.
    A maximum at 0 is accepted when S(0) <= 0 and S' < 0 there.
    """
    for it in range(1, _NEWTON_ITER + 1):
        w = 1.0 / (v + tau2)
        sw = w.sum()
        r = y - (w * y).sum() / sw
        w2 = w * w
        w3 = w2 * w
        s2 = w2.sum()
        w2r = w2 * r
        score = -0.5 * (sw - s2 / sw) + 0.5 * (w2r * r).sum()
        slope = (
            0.5 * s2
            - w3.sum() / sw
            + 0.5 * (s2 / sw) ** 2
            - (w3 * r * r).sum()
            + w2r.sum() ** 2 / sw
        )
        if not (slope < 0.0 and math.isfinite(score)):
            return None  # not clearly a maximum nearby: scoring with step-halving
        if tau2 == 0.0 and score <= 0.0:
            return Tau2Estimate("REML", 0.0, iterations=it)
        new = max(0.0, tau2 - score / slope)
        # quadratic convergence: after a step this small the error is of order its square
        if abs(new - tau2) <= 1e-9 * max(new, 1e-12):
            return Tau2Estimate("REML", new, iterations=it)
        tau2 = new
    return None
