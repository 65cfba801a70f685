"""Newton fit of the step-function selection model for a large review (above LARGE_K).

The log-likelihood is the one of :class:`adjust_selection._Model` (Vevea & Hedges 1995),
here with its exact first and second derivatives, so that the maximum is found by Newton
steps and the Wald standard errors come from the exact Hessian instead of a central-
difference one. Parameters phi = (μ, τ², log ω_2 … log ω_J), τ² ≥ 0.

Per study, with σ² = s² + τ², r = y − μ, the bounds b_c of the p-intervals on the y scale
(inner ones c = 1 … J−1), a_c = (b_c − μ)/σ, F_c = Φ(a_c) (F_0 = 1, F_J = 0),
P_j = F_j − F_{j+1} and A = Σ_j ω_j P_j:

    ℓ = −½ log(2πσ²) − ½ r²/σ² + log ω_{j(i)} − log A.

Normal part: ∂μ = r/σ², ∂τ² = ½(r²/σ² − 1)/σ², ∂μμ = −1/σ², ∂μτ² = −r/σ⁴,
∂τ²τ² = ½/σ⁴ − r²/σ⁶. Selection part (φ' = −aφ, ∂a/∂μ = −1/σ, ∂a/∂τ² = −a/(2σ²)):

    ∂F/∂μ = −φ/σ,               ∂F/∂τ² = −aφ/(2σ²),
    ∂²F/∂μ² = −aφ/σ²,          ∂²F/∂μ∂τ² = (1 − a²)φ/(2σ³),
    ∂²F/∂(τ²)² = aφ(3 − a²)/(4σ⁴),

A = 1 + Σ_c (ω_c − ω_{c−1}) F_c over the inner bounds, ∂A/∂log ω_j = ω_j P_j (also its
second derivative; 0 across two weights), ∂²A/∂log ω_j ∂x = ω_j ∂P_j/∂x, and
∂² (−log A) = −A''/A + A'A'ᵀ/A². The tests check these against finite differences of
``_Model.negll_grad`` and the maximum against scipy's L-BFGS-B fit of the same model.
"""

from __future__ import annotations

import math

import numpy as np

_LOG_2PI = math.log(2.0 * math.pi)
_INV_SQRT_2PI = 1.0 / math.sqrt(2.0 * math.pi)
#: Newton stops when its step is below this fraction of the parameters' size (after
#: a step of 1e-7 the next one is about 1e-14 at quadratic convergence)
_STEP_TOL = 1e-11
_MAX_ITER = 60


class Prepared:
    """The data of an ``adjust_selection._Model`` laid out for :func:`derivatives`: each
    inner interval bound as its own contiguous array (numpy is slow on k x 2 arrays)."""

    def __init__(self, model):
        self.y, self.v = model.y, model.v
        self.J = model.J
        self.inner = [np.ascontiguousarray(model.bounds[:, c]) for c in range(1, model.J)]
        self.counts = model.counts.astype(float)


def derivatives(prep: Prepared, phi: np.ndarray, *, selection: bool = True):
    """Negative log-likelihood, its gradient and Hessian at phi = (μ, τ², log ω_2..J).

    Returns ``None`` where the likelihood is not defined (a selection sum A ≤ 0)."""
    from scipy.special import ndtr

    mu, t2 = float(phi[0]), float(phi[1])
    m = phi.size
    s2 = prep.v + t2
    inv = 1.0 / s2
    inv2 = inv * inv
    r = prep.y - mu
    rinv = r * inv
    z2 = r * rinv
    ll = -0.5 * (prep.y.size * _LOG_2PI + np.log(s2).sum() + z2.sum())
    g = np.zeros(m)
    H = np.zeros((m, m))
    g[0] = rinv.sum()
    g[1] = 0.5 * ((z2 - 1.0) @ inv)
    H[0, 0] = -inv.sum()
    H[0, 1] = -(rinv @ inv)
    H[1, 1] = (0.5 - z2) @ inv2
    if selection:
        J = prep.J
        sigma = np.sqrt(s2)
        isig = 1.0 / sigma
        logw = np.concatenate([[0.0], phi[2:]])
        omega = np.exp(logw)
        D = omega[1:] - omega[:-1]  # the weight of each inner F in A = 1 + Σ D_c F_c
        A = np.ones_like(s2)
        F, pdf, apdf, a2 = [], [], [], []
        for c, b in enumerate(prep.inner):
            a = (b - mu) * isig
            F.append(ndtr(a))
            pdf.append(np.exp(-0.5 * a * a) * _INV_SQRT_2PI)
            apdf.append(a * pdf[c])
            a2.append(a * a)
            A += D[c] * F[c]
        if np.any(A <= 0):
            return None
        invA = 1.0 / A
        # A's first derivatives, each divided by A (rows of Q)
        Q = np.empty((m, s2.size))
        sum_pdf = sum(D[c] * pdf[c] for c in range(J - 1))
        sum_apdf = sum(D[c] * apdf[c] for c in range(J - 1))
        Q[0] = -(sum_pdf * isig) * invA
        Q[1] = -(sum_apdf * (0.5 * inv)) * invA
        # ∂F_c/∂μ and ∂F_c/∂τ² at each bound, 0 at the outer ones
        Fm = [0.0] + [-p * isig for p in pdf] + [0.0]
        Ft = [0.0] + [-p * (0.5 * inv) for p in apdf] + [0.0]
        Fc = [1.0] + F + [0.0]
        for j in range(1, J):
            Q[1 + j] = (omega[j] * invA) * (Fc[j] - Fc[j + 1])
            H[0, 1 + j] = -omega[j] * ((Fm[j] - Fm[j + 1]) @ invA)
            H[1, 1 + j] = -omega[j] * ((Ft[j] - Ft[j + 1]) @ invA)
        ll += float(prep.counts @ logw) - np.log(A).sum()
        g -= Q.sum(axis=1)
        g[2:] += prep.counts[1:]
        # A's second derivatives, divided by A and summed over the studies
        H[0, 0] += (sum_apdf * inv) @ invA
        mt = sum(D[c] * pdf[c] * (1.0 - a2[c]) for c in range(J - 1))
        H[0, 1] -= (mt * (0.5 * inv * isig)) @ invA
        tt = sum(D[c] * apdf[c] * (3.0 - a2[c]) for c in range(J - 1))
        H[1, 1] -= (tt * (0.25 * inv2)) @ invA
        QQ = Q @ Q.T
        H[2:, 2:] -= np.diag(Q[2:].sum(axis=1))
        H += QQ
    H = np.triu(H) + np.triu(H, 1).T
    return -float(ll), -g, -H


def hessian_in_tau(model, x: np.ndarray, free: np.ndarray) -> np.ndarray:
    """Exact Hessian of the negative log-likelihood over the coordinates ``free`` of
    x = (μ, τ, log ω…) (τ, not τ², as ``adjust_selection._hessian`` takes it): with
    τ² = t(τ), ∂²/∂τ² = 4τ² ∂²/∂(τ²)² + 2 ∂/∂τ², ∂²/∂τ∂x = 2τ ∂²/∂τ²∂x."""
    phi = np.array(x, dtype=float)
    phi[1] = x[1] * x[1]
    out = derivatives(Prepared(model), phi, selection=True)
    if out is None:
        return np.full((int(free.sum()),) * 2, np.nan)
    _, g, H = out
    jac = np.ones(x.size)
    jac[1] = 2.0 * x[1]
    Ht = H * jac[:, None] * jac[None, :]
    Ht[1, 1] += 2.0 * g[1]
    return Ht[np.ix_(free, free)]


def _step(H: np.ndarray, g: np.ndarray, free: np.ndarray):
    """(Newton step over ``free``, whether it is undamped). Where the Hessian is not
    positive definite (far from the maximum, e.g. at a small τ²) its diagonal is raised
    (Marquardt: H + λ diag|H|) until it is, which turns the step towards the gradient."""
    Hf = H[np.ix_(free, free)]
    scale = np.maximum(np.abs(np.diag(Hf)), 1e-12 * max(1.0, float(np.max(np.abs(Hf)))))
    lam = 0.0
    step = np.zeros(g.size)
    for _ in range(40):
        try:
            L = np.linalg.cholesky(Hf + lam * np.diag(scale))
        except np.linalg.LinAlgError:
            lam = 1e-3 if lam == 0.0 else 10.0 * lam
            continue
        step[free] = -np.linalg.solve(L.T, np.linalg.solve(L, g[free]))
        return step, lam == 0.0
    return None, False


def newton_fit(model, phi0: np.ndarray, *, selection: bool, logw_bound: float):
    """Maximise the likelihood by Newton steps with a backtracking line search from phi0.

    τ² is kept ≥ 0: a step that would make it negative stops at 0, and at 0 it is held
    there while the likelihood falls as it rises (projected Newton). Returns (phi,
    negative log-likelihood) at the maximum, reached by an undamped step with a positive
    definite Hessian, or ``None`` when Newton cannot be trusted from here (no progress, a
    weight beyond ±``logw_bound``, too many steps); the caller then uses the L-BFGS-B
    fit."""
    prep = model if isinstance(model, Prepared) else Prepared(model)
    phi = np.array(phi0, dtype=float)
    phi[1] = max(phi[1], 0.0)
    out = derivatives(prep, phi, selection=selection)
    if out is None:
        return None
    f, g, H = out
    for _ in range(_MAX_ITER):
        free = np.ones(phi.size, dtype=bool)
        if phi[1] == 0.0 and g[1] > 0.0:  # at the bound and pushed against it
            free[1] = False
        step, newton = _step(H, g, free)
        if step is not None and phi[1] == 0.0 and free[1] and step[1] < 0.0:
            free[1] = False  # the step would leave the bound: hold τ² at 0
            step, newton = _step(H, g, free)
        if step is None:
            return None
        size = np.maximum(1.0, np.abs(phi))
        rel = float(np.max(np.abs(step) / size))
        if rel < _STEP_TOL:
            return (phi, f) if newton else None
        alpha = 1.0
        while True:
            trial = phi + alpha * step
            trial[1] = max(trial[1], 0.0)
            out = None
            if np.all(np.abs(trial[2:]) <= logw_bound):
                out = derivatives(prep, trial, selection=selection)
            if out is not None and out[0] <= f + 1e-4 * float(g @ (trial - phi)):
                break
            alpha *= 0.5
            if alpha < 1e-6:
                # at the rounding level of f a step cannot show a rise: stop there
                return (phi, f) if newton and rel < 1e-7 else None
        phi = trial
        f, g, H = out
    return None
