"""Step-function selection model (Vevea & Hedges 1995, Psychometrika 60:419).

Random-effects model θ_i ~ N(μ, τ²), y_i | θ_i ~ N(θ_i, s_i²), with publication weights
that are constant within intervals of the one-sided p-value (methods.md section 5.4):

    f(y_i) = ω_{j(i)} φ((y_i − μ)/σ̃_i)/σ̃_i / Σ_j ω_j P_ij,   σ̃_i² = s_i² + τ²,

ω_1 = 1 for the most significant interval. Fitted by maximum likelihood over μ, τ² ≥ 0
and log ω_j (j ≥ 2, bounded to ±ln 1000 so that a runaway weight is detected rather than
followed), with L-BFGS-B and the exact gradient from two starting points and a restart
from the best. The search runs over τ² rather than τ: in τ the gradient is 0 at τ = 0
for any data, so a search that reached that bound would stay there even when the
likelihood rises inside.

Standard errors are Wald, from a central-difference numerical Hessian of the
log-likelihood at the maximum. Above ``sensitivity.LARGE_K`` studies the fit is Newton
steps with the exact gradient and Hessian (selection_newton.py) from the first starting
point and the SEs come from that exact Hessian (L-BFGS-B as below when Newton cannot be
trusted); the result's note and ``se_method`` say which. The likelihood-ratio test compares with the same model
with every ω = 1 (plain ML random effects), χ² on J − 1 df.

Cautions (methods.md 5.4): the LRT is very sensitive to a misspecified random-effects
distribution, the adjusted estimate is more variable than the unadjusted one, and with
few studies the model is often not estimable. Use it as a sensitivity analysis.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .data import StudyData
from .pooling import TAU2_METHODS, random_effects
from .results import ConfidenceInterval, NotComputable

DIRECTIONS: tuple[str, ...] = ("positive", "negative", "auto")
_LOGW_BOUND = math.log(1000.0)

SE_METHOD = (
    "Wald standard errors from a numerical (central-difference) Hessian of the "
    "log-likelihood at its maximum; normal (z) interval for μ; SE of ω by the delta "
    "method from log ω."
)
#: the same for a large review fitted by Newton steps (selection_newton.py)
SE_METHOD_EXACT = (
    "Wald standard errors from the exact (analytic) Hessian of the log-likelihood at its "
    "maximum; normal (z) interval for μ; SE of ω by the delta method from log ω."
)


@dataclass(frozen=True, slots=True)
class SelectionModelResult:
    """Result of :func:`selection_model`.

    Attributes
    ----------
    mu, se, ci, statistic, pvalue
        Adjusted estimate μ (analysis scale), its Wald SE, interval and z test of μ = 0.
    tau2 : float
        Between-study variance under the selection model.
    omega, omega_se : tuple
        Publication weights per p-interval (ω_1 = 1 fixed, its SE is None).
    cutpoints : tuple of float
        One-sided p-value cut-points (the last interval runs to p = 1).
    intervals : tuple of str
        Interval labels, e.g. "p ≤ 0.025", "p > 0.025".
    counts : tuple of int
        Number of studies per interval.
    direction : str
        "positive" or "negative": the direction in which one-sided p-values are computed.
    direction_rule : str
        How the direction was chosen.
    loglik, loglik_unadjusted : float
        Maximised log-likelihoods with and without selection.
    unadjusted_mu, unadjusted_tau2 : float
        ML random-effects estimates without selection (the comparison model of the LRT).
    lrt_statistic, lrt_df, lrt_pvalue
        Likelihood-ratio test of ω = 1 (χ² with J − 1 df).
    """

    mu: float
    se: float
    ci: ConfidenceInterval
    statistic: float
    pvalue: float
    tau2: float
    omega: tuple[float, ...]
    omega_se: tuple[float | None, ...]
    cutpoints: tuple[float, ...]
    intervals: tuple[str, ...]
    counts: tuple[int, ...]
    direction: str
    direction_rule: str
    loglik: float
    loglik_unadjusted: float
    unadjusted_mu: float
    unadjusted_tau2: float
    lrt_statistic: float
    lrt_df: int
    lrt_pvalue: float
    converged: bool
    k: int
    se_method: str = SE_METHOD
    confidence_level: float = 0.95
    note: str = ""


def _interval_labels(cutpoints: tuple[float, ...]) -> tuple[str, ...]:
    labels = [f"p ≤ {cutpoints[0]:g}"]
    for lo, hi in zip(cutpoints[:-1], cutpoints[1:]):
        labels.append(f"{lo:g} < p ≤ {hi:g}")
    labels.append(f"p > {cutpoints[-1]:g}")
    return tuple(labels)


class _Model:
    """Negative log-likelihood of the step-function model for fixed data."""

    def __init__(self, y: np.ndarray, se: np.ndarray, cutpoints: tuple[float, ...]):
        from scipy.special import ndtr, ndtri

        self.y, self.se, self.v = y, se, se**2
        self.J = len(cutpoints) + 1
        # z-boundaries z_j = Φ⁻¹(1 − c_j) for c_0 = 0 … c_J = 1 (from +inf down to -inf)
        zc = np.concatenate([[np.inf], ndtri(1.0 - np.asarray(cutpoints)), [-np.inf]])
        with np.errstate(invalid="ignore"):
            self.bounds = se[:, None] * zc[None, :]  # k x (J+1), on the y scale
        p = ndtr(-y / se)  # one-sided p in the positive direction
        self.interval = np.searchsorted(np.asarray(cutpoints), p, side="left")
        self.counts = np.bincount(self.interval, minlength=self.J)
        self._ndtr = ndtr

    def negll(self, theta: np.ndarray, *, selection: bool = True) -> float:
        mu, tau = float(theta[0]), float(theta[1])
        st2 = self.v + tau * tau
        st = np.sqrt(st2)
        r = self.y - mu
        ll = -0.5 * np.log(2.0 * np.pi * st2) - 0.5 * r * r / st2
        if selection:
            logw = np.concatenate([[0.0], theta[2:]])
            cdf = np.empty_like(self.bounds)
            cdf[:, 0] = 1.0
            cdf[:, -1] = 0.0
            self._ndtr((self.bounds[:, 1:-1] - mu) / st[:, None], out=cdf[:, 1:-1])
            P = cdf[:, :-1] - cdf[:, 1:]
            A = P @ np.exp(logw)
            if np.any(A <= 0):
                return 1e300
            ll = ll + logw[self.interval] - np.log(A)
        return float(-ll.sum())

    def negll_grad(self, phi: np.ndarray, *, selection: bool = True):
        """Negative log-likelihood and its exact gradient at phi = (mu, tau², log ω_2..J).

        The fit works in τ² (bounded below by 0): in τ the gradient vanishes at τ = 0
        whatever the data, so an exact-gradient search that touched the bound would stop
        there. With a_ij = (b_ij − μ)/σ_i at the interval bounds (σ_i² = s_i² + τ²) and
        P_ij = Φ(a_ij) − Φ(a_i,j+1):
        ∂P_ij/∂μ = −(φ(a_ij) − φ(a_i,j+1))/σ_i and
        ∂P_ij/∂τ² = −(a_ij φ(a_ij) − a_i,j+1 φ(a_i,j+1))/(2σ_i²),
        with φ and a·φ taken as 0 at the infinite bounds.
        """
        mu, tau2 = float(phi[0]), float(phi[1])
        st2 = self.v + tau2
        r = self.y - mu
        z2 = r * r / st2
        ll = -0.5 * np.log(2.0 * np.pi * st2) - 0.5 * z2
        g_mu = r / st2
        g_t2 = 0.5 * (z2 - 1.0) / st2
        g_w = np.zeros(len(phi) - 2)  # without selection the likelihood ignores the weights
        if selection:
            st = np.sqrt(st2)
            logw = np.concatenate([[0.0], phi[2:]])
            omega = np.exp(logw)
            # Φ is 1 and 0 at the outer bounds (+inf, -inf): only the inner ones are
            # evaluated (ndtr of an infinity costs as much as a number)
            inner = (self.bounds[:, 1:-1] - mu) / st[:, None]
            cdf = np.empty_like(self.bounds)
            cdf[:, 0] = 1.0
            cdf[:, -1] = 0.0
            self._ndtr(inner, out=cdf[:, 1:-1])
            P = cdf[:, :-1] - cdf[:, 1:]
            A = P @ omega
            if np.any(A <= 0):
                return 1e300, np.zeros(len(phi))
            pdf = np.zeros_like(cdf)
            apdf = np.zeros_like(cdf)
            pdf[:, 1:-1] = np.exp(-0.5 * inner * inner) / math.sqrt(2.0 * math.pi)
            apdf[:, 1:-1] = inner * pdf[:, 1:-1]
            dP_mu = -(pdf[:, :-1] - pdf[:, 1:]) / st[:, None]
            dP_t2 = -(0.5 / st2)[:, None] * (apdf[:, :-1] - apdf[:, 1:])
            ll = ll + logw[self.interval] - np.log(A)
            g_mu = g_mu - (dP_mu @ omega) / A
            g_t2 = g_t2 - (dP_t2 @ omega) / A
            share = (P * omega[None, :]) / A[:, None]
            g_w = self.counts[1:] - share[:, 1:].sum(axis=0)
        grad = np.concatenate([[g_mu.sum(), g_t2.sum()], g_w])
        return float(-ll.sum()), -grad


def selection_large_note(k: int, *, newton: bool = False) -> str:
    """What :func:`selection_model` says when it thins its search for a large review:
    ``newton`` for the fit by Newton steps with the exact Hessian (the usual one above
    LARGE_K), otherwise the L-BFGS-B fit it falls back to."""
    from .sensitivity import LARGE_K

    head = f"With {k:,} studies (more than {LARGE_K:,}), the selection model was fitted "
    if newton:
        return head + (
            "by Newton steps with the exact gradient and Hessian from one starting point "
            "(the random-effects estimate with equal weights), not also from a second "
            "starting point; its standard errors come from that exact Hessian, not a "
            "numerical one."
        )
    return head + (
        "from one starting point (the random-effects estimate with equal weights) and a "
        "restart from its result, not also from a second starting point."
    )


def selection_fit_note(result) -> str:
    """The large-review note of a selection model result ("" when it has none)."""
    k, note = getattr(result, "k", 0), getattr(result, "note", "")
    if not k:
        return ""
    for newton in (True, False):
        large = selection_large_note(k, newton=newton)
        if large in note:
            return large
    return ""


#: L-BFGS-B options: with the exact gradient the fit can be taken much closer to the
#: maximum than with finite differences (whose noise limited the old tolerance)
_FIT_OPTIONS = {"maxiter": 2000, "ftol": 1e-13, "gtol": 1e-9}


@dataclass(frozen=True, slots=True)
class _Fit:
    x: np.ndarray  # (mu, tau, log omega...): tau, as the rest of the module uses
    fun: float
    success: bool


def _fit(model: _Model, starts: list[np.ndarray], bounds, selection: bool):
    """Minimise the negative log-likelihood from each start, then restart from the best.

    ``starts`` and the returned ``x`` hold τ; the search itself runs over τ² with the
    exact gradient (see :meth:`_Model.negll_grad`).
    """
    from scipy.optimize import minimize

    def fg(phi):
        return model.negll_grad(phi, selection=selection)

    bounds = [bounds[0], (0.0, None)] + list(bounds[2:])

    def run(x0):
        phi0 = np.array(x0, dtype=float)
        phi0[1] = phi0[1] ** 2
        res = minimize(fg, phi0, jac=True, method="L-BFGS-B", bounds=bounds, options=_FIT_OPTIONS)
        x = np.array(res.x, dtype=float)
        x[1] = math.sqrt(max(0.0, x[1]))
        return _Fit(x, float(res.fun), bool(res.success))

    best = None
    for x0 in starts:
        res = run(x0)
        if best is None or res.fun < best.fun:
            best = res
    # Restart from the best point: L-BFGS-B can stop early on flat stretches.
    again = run(best.x)
    ok = bool(best.success or again.success) and abs(again.fun - best.fun) < 1e-5 * max(
        1.0, abs(best.fun)
    )
    if again.fun < best.fun:
        best = again
    return best, ok


def _hessian(f, x: np.ndarray, free: np.ndarray) -> np.ndarray:
    """Central-difference Hessian of f over the coordinates ``free``."""
    idx = np.flatnonzero(free)
    m = idx.size
    h = 1e-4 * np.maximum(1.0, np.abs(x))
    H = np.empty((m, m))
    f0 = f(x)
    for a in range(m):
        i = idx[a]
        ei = np.zeros_like(x)
        ei[i] = h[i]
        H[a, a] = (f(x + ei) - 2.0 * f0 + f(x - ei)) / h[i] ** 2
        for b in range(a + 1, m):
            j = idx[b]
            ej = np.zeros_like(x)
            ej[j] = h[j]
            val = (f(x + ei + ej) - f(x + ei - ej) - f(x - ei + ej) + f(x - ei - ej)) / (
                4.0 * h[i] * h[j]
            )
            H[a, b] = H[b, a] = val
    return H


def selection_model(
    data: StudyData,
    *,
    cutpoints: tuple[float, ...] = (0.025,),
    direction: str = "auto",
    tau2_method: str = "REML",
    confidence_level: float = 0.95,
) -> SelectionModelResult | NotComputable:
    """Vevea & Hedges step-function selection model with random effects.

    Parameters
    ----------
    data : StudyData
    cutpoints : tuple of float
        Increasing one-sided p-value cut-points in (0, 1); default (0.025,), i.e. a
        single step at two-sided p = 0.05 in the favoured direction. More steps, e.g.
        (0.025, 0.05, 0.5), need more studies.
    direction : {"auto", "positive", "negative"}
        Direction in which results count as "significant". "auto" uses the sign of the
        random-effects pooled estimate (``tau2_method``).
    tau2_method : {"DL", "PM", "REML"}
        Only used for the "auto" direction and the starting values.
    confidence_level : float

    Returns
    -------
    SelectionModelResult or NotComputable
        NotComputable when a p-interval holds no study, when there are fewer than
        (number of parameters + 2) studies, when the fit does not converge, when a
        weight runs to its boundary, or when the likelihood is flat.
    """
    from scipy.special import chdtrc, ndtr, ndtri

    cutpoints = _check_options(cutpoints, direction, tau2_method)
    y = np.asarray(data.y, dtype=float)
    se = np.asarray(data.se, dtype=float)
    k = y.size
    J = len(cutpoints) + 1
    n_par = 2 + (J - 1)
    if k < n_par + 2:
        return NotComputable(
            f"the selection model with {J} p-value intervals has {n_par} parameters and "
            f"needs at least {n_par + 2} studies; there are {k}"
        )
    re = random_effects(y, se**2, method=tau2_method)
    if isinstance(re, NotComputable):
        return re
    dir_used, direction_rule = _direction(re.estimate, direction)
    sign = 1.0 if dir_used == "positive" else -1.0

    model = _Model(sign * y, se, cutpoints)
    labels = _interval_labels(cutpoints)
    counts = tuple(int(c) for c in model.counts)
    empty = [labels[j] for j in range(J) if counts[j] == 0]
    if empty:
        return NotComputable(
            "the selection model is not estimable: no study falls in the interval "
            + ", ".join(empty)
            + " (one-sided p in the "
            + dir_used
            + " direction); use fewer cut-points"
        )
    from .sensitivity import LARGE_K

    # many studies: Newton steps from one starting point, or when they cannot be trusted
    # L-BFGS-B from that point and the restart (the note says which)
    few_starts, mu0 = k > LARGE_K, sign * re.estimate
    fits = _maximise_newton(model, mu0, re.tau2, se) if few_starts else None
    newton = fits is not None
    fits = fits or _maximise(model, mu0, re.tau2, se, labels, few_starts=few_starts)
    if isinstance(fits, NotComputable):
        return fits
    fit, null, x = fits
    logw = x[2:]
    note_parts = [selection_large_note(k, newton=newton)] if few_starts else []
    se_x = _standard_errors(model, x, se, note_parts, exact=newton)
    if isinstance(se_x, NotComputable):
        return se_x

    mu = sign * float(x[0])
    se_mu = float(se_x[0])
    crit = float(ndtri(0.5 + confidence_level / 2.0))
    stat = mu / se_mu
    omega = (1.0,) + tuple(float(math.exp(t)) for t in logw)
    omega_se = (None,) + tuple(float(math.exp(logw[j]) * se_x[2 + j]) for j in range(J - 1))
    ll_adj = -float(fit.fun)
    ll_null = -float(null.fun)
    lrt = max(0.0, 2.0 * (ll_adj - ll_null))
    if k < 20:
        note_parts.append(
            "fewer than 20 studies: selection-model estimates are unstable and the "
            "interval may be too narrow"
        )
    return SelectionModelResult(
        mu=mu,
        se=se_mu,
        ci=ConfidenceInterval(mu - crit * se_mu, mu + crit * se_mu),
        statistic=float(stat),
        pvalue=float(2.0 * ndtr(-abs(stat))),
        tau2=float(x[1] ** 2),
        omega=omega,
        omega_se=omega_se,
        cutpoints=cutpoints,
        intervals=labels,
        counts=counts,
        direction=dir_used,
        direction_rule=direction_rule,
        loglik=ll_adj,
        loglik_unadjusted=ll_null,
        unadjusted_mu=sign * float(null.x[0]),
        unadjusted_tau2=float(null.x[1] ** 2),
        lrt_statistic=float(lrt),
        lrt_df=J - 1,
        lrt_pvalue=float(chdtrc(J - 1, lrt)),
        converged=True,
        k=int(k),
        se_method=SE_METHOD_EXACT if newton else SE_METHOD,
        confidence_level=confidence_level,
        note="; ".join(note_parts),
    )


def _check_options(cutpoints, direction: str, tau2_method: str) -> tuple[float, ...]:
    """The cut-points as floats; ValueError for an option the model does not know."""
    if direction not in DIRECTIONS:
        raise ValueError(f"unknown direction {direction!r}; use one of {DIRECTIONS}")
    if tau2_method not in TAU2_METHODS:
        raise ValueError(f"unknown tau² method {tau2_method!r}; use one of {TAU2_METHODS}")
    cutpoints = tuple(float(c) for c in cutpoints)
    if (
        not cutpoints
        or any(not 0.0 < c < 1.0 for c in cutpoints)
        or any(b <= a for a, b in zip(cutpoints[:-1], cutpoints[1:]))
    ):
        raise ValueError("cutpoints must be increasing values strictly between 0 and 1")
    return cutpoints


def _direction(estimate: float, direction: str) -> tuple[str, str]:
    """(the direction p-values are one-sided in, the rule that chose it, in words)."""
    if direction != "auto":
        return direction, f"chosen by the user: one-sided p-values favour {direction} effects"
    dir_used = "negative" if estimate < 0 else "positive"
    return dir_used, (
        f"automatic: the random-effects pooled estimate is {dir_used} "
        f"({estimate:.3g}), so p-values are one-sided in that direction"
    )


def _maximise(model: _Model, mu0: float, tau2: float, se: np.ndarray, labels, *, few_starts=False):
    """The fits with and without selection, and the parameters with it (mu, tau, log
    weights), or NotComputable when either fit fails or a weight runs to its bound.
    ``few_starts`` leaves out the second starting point of the fit with selection."""
    J = len(labels)
    tau0 = _start_tau(tau2, se)
    bounds_null = [(None, None), (0.0, None)]
    null, ok_null = _fit(model, [np.array([mu0, tau0])], bounds_null, selection=False)
    bounds = bounds_null + [(-_LOGW_BOUND, _LOGW_BOUND)] * (J - 1)
    starts = [
        np.concatenate([[mu0, tau0], np.zeros(J - 1)]),
        np.concatenate([[0.5 * mu0, tau0], np.full(J - 1, math.log(0.5))]),
    ]
    if few_starts:
        starts = starts[:1]
    fit, ok = _fit(model, starts, bounds, selection=True)
    if not (ok and ok_null):
        return NotComputable(
            "the selection model is not estimable: the likelihood maximisation did not "
            "converge for these data"
        )
    x = np.asarray(fit.x, dtype=float)
    logw = x[2:]
    at_edge = [labels[j + 1] for j in range(J - 1) if abs(logw[j]) > _LOGW_BOUND - 1e-2]
    if at_edge:
        return NotComputable(
            "the selection model is not estimable: the publication weight for "
            + ", ".join(at_edge)
            + " runs to its limit (the data push it towards 0 or infinity)"
        )
    return fit, null, x


def _start_tau(tau2: float, se: np.ndarray) -> float:
    """τ at the start of the fits: from the random-effects τ², or a tenth of the median SE."""
    return math.sqrt(tau2) if tau2 > 0 else 0.1 * float(np.median(se))


def _maximise_newton(model: _Model, mu0: float, tau2: float, se: np.ndarray):
    """As :func:`_maximise` from its first starting point, by Newton steps with the exact
    Hessian (selection_newton.py); ``None`` when they cannot be trusted or a weight comes
    near its bound (the caller then runs :func:`_maximise`, which also reports that)."""
    from .selection_newton import newton_fit

    t0 = _start_tau(tau2, se) ** 2
    J = model.J
    null = newton_fit(model, np.array([mu0, t0]), selection=False, logw_bound=_LOGW_BOUND)
    start = np.concatenate([[mu0, t0], np.zeros(J - 1)])
    fit = newton_fit(model, start, selection=True, logw_bound=_LOGW_BOUND)
    if null is None or fit is None or np.any(np.abs(fit[0][2:]) > _LOGW_BOUND - 1e-2):
        return None
    fits = []
    for phi, fun in (fit, null):
        x = np.array(phi, dtype=float)
        x[1] = math.sqrt(x[1])
        fits.append(_Fit(x, float(fun), True))
    return fits[0], fits[1], fits[0].x


def _standard_errors(model: _Model, x, se: np.ndarray, note_parts: list[str], exact=False):
    """SEs of the parameters from the Hessian (numerical, or ``exact`` from
    selection_newton.py); τ at its boundary is held fixed (set to 0 in ``x``, said in
    ``note_parts``). NotComputable when the likelihood is flat."""
    tau_zero = x[1] <= 1e-6 * max(1.0, float(np.median(se)))
    free = np.ones(x.size, dtype=bool)
    if tau_zero:
        x[1] = 0.0
        free[1] = False
        note_parts.append("τ² was estimated at 0 (boundary); the SEs treat it as fixed")
    if exact:
        from .selection_newton import hessian_in_tau

        H = hessian_in_tau(model, x, free)
    else:
        H = _hessian(lambda t: model.negll(t, selection=True), x, free)
    eig = np.linalg.eigvalsh(0.5 * (H + H.T))
    if not np.all(np.isfinite(eig)) or eig.min() <= 1e-8 * max(1.0, abs(eig.max())):
        return NotComputable(
            "the selection model is not estimable: the likelihood is flat in at least one "
            "direction, so the data cannot pin down the weights and the estimate together"
        )
    cov_free = np.linalg.inv(H)
    cov = np.zeros((x.size, x.size))
    cov[np.ix_(free, free)] = cov_free
    return np.sqrt(np.clip(np.diag(cov), 0.0, None))
