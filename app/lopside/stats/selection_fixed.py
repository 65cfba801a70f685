"""Fixed-weight selection models (Vevea & Woods 2005, Psychol Methods 10:428).

The step-function selection model of :mod:`adjust_selection` (Vevea & Hedges 1995), but
with the publication weights fixed a priori instead of estimated: only μ and τ² are fitted
by maximum likelihood. Useful exactly where k is too small to estimate the weights: the
adjusted estimate says what the pooled effect would be *if* selection were moderate or
severe, one- or two-tailed.

The four weight patterns below are Table 1 of Vevea & Woods (2005) **as recalled from
memory** (methods.md 11.4). They could not be checked against the paper in this project;
the sheet and the JSON say so (``WEIGHTS_PROVENANCE``). The likelihood itself does not
rest on memory: with every weight equal it gives the ordinary ML random-effects fit, which
tests/test_selection_first_principles.py checks against its score equations and scipy;
each pattern's fit is checked against scipy's maximisation of the same weighted
likelihood written out independently (tests/test_selection_sensitivity.py). One-sided
p-values are computed in the direction of the pooled estimate (small p = a large effect on
that side), as in the fitted selection model.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .data import StudyData
from .results import NotComputable

#: upper bounds of the one-sided p intervals (the last interval runs to 1)
CUTPOINTS: tuple[float, ...] = (
    0.005, 0.01, 0.05, 0.10, 0.25, 0.35, 0.50, 0.65, 0.75, 0.90, 0.95, 0.99, 0.995,
)  # fmt: skip

#: weights per interval, most significant first (14 intervals) - from memory
PATTERNS: dict[str, tuple[float, ...]] = {
    "moderate one-tailed": (
        1, 0.99, 0.95, 0.90, 0.80, 0.75, 0.65, 0.60, 0.55, 0.50, 0.50, 0.50, 0.50, 0.50,
    ),
    "severe one-tailed": (
        1, 0.99, 0.90, 0.75, 0.60, 0.50, 0.40, 0.35, 0.30, 0.25, 0.10, 0.10, 0.10, 0.10,
    ),
    "moderate two-tailed": (
        1, 0.99, 0.95, 0.90, 0.80, 0.75, 0.60, 0.60, 0.75, 0.80, 0.90, 0.95, 0.99, 1,
    ),
    "severe two-tailed": (
        1, 0.99, 0.90, 0.75, 0.60, 0.50, 0.25, 0.25, 0.50, 0.60, 0.75, 0.90, 0.99, 1,
    ),
}  # fmt: skip

WEIGHTS_PROVENANCE = (
    "weight patterns of Vevea & Woods (2005, Table 1) as recalled from memory; "
    "not re-checked against the paper"
)


@dataclass(frozen=True, slots=True)
class FixedWeightEstimate:
    pattern: str
    estimate: float
    tau2: float
    weights: tuple[float, ...]


@dataclass(frozen=True, slots=True)
class FixedWeightSelection:
    """Adjusted estimates under each a priori weight pattern (analysis scale)."""

    unadjusted: float  # ML random-effects estimate (all weights 1), for comparison
    unadjusted_tau2: float
    estimates: tuple[FixedWeightEstimate | NotComputable, ...]
    patterns: tuple[str, ...]
    cutpoints: tuple[float, ...]
    direction: str
    provenance: str = WEIGHTS_PROVENANCE
    k: int = 0

    def by_pattern(self) -> dict[str, FixedWeightEstimate | NotComputable]:
        return dict(zip(self.patterns, self.estimates))


class _Batch:
    """Negative log-likelihood and exact gradient over (μ, τ²) for many weight sets at once.

    Same likelihood as :class:`adjust_selection._Model` (Vevea & Hedges 1995, methods.md
    5.4), vectorised over B parameter points so that the Newton steps of every pattern
    cost one array evaluation.
    """

    def __init__(self, y: np.ndarray, se: np.ndarray, cutpoints: tuple[float, ...]):
        from scipy.special import ndtr, ndtri

        self.y, self.v = y, se**2
        zc = ndtri(1.0 - np.asarray(cutpoints))  # interior bounds, decreasing
        self.inner = se[:, None] * zc[None, :]  # k x (J-1)
        p = ndtr(-y / se)
        self.interval = np.searchsorted(np.asarray(cutpoints), p, side="left")
        #: studies per interval: Σ_i log ω_j(i) = counts · log ω
        self.counts = np.bincount(self.interval, minlength=len(cutpoints) + 1).astype(float)
        self._ndtr = ndtr

    def _selection_sums(self, mu, st, steps, n, inner=None):
        """Σ_m Δω_m a_mʲ φ(a_m) (and Σ_m Δω_m Φ(a_m) first), per point and study (or per
        point and SE of ``inner``, the inner bounds on the effect scale of those SEs)."""
        dwb = steps[None, :, :, None]
        inner = self.inner if inner is None else inner
        a = inner[None, :, :] - mu[:, None, None]
        a /= st[:, :, None]  # B,k,J-1
        T = np.empty((n, *a.shape))  # Φ(a), φ(a), aφ(a) [, a²φ(a), a³φ(a)]
        self._ndtr(a, out=T[0])
        np.multiply(a, a, out=T[1])
        if n == 5:
            np.multiply(T[1], a, out=T[4])  # a³ for now
        T[1] *= -0.5
        np.exp(T[1], out=T[1])
        T[1] *= 1.0 / math.sqrt(2.0 * math.pi)
        np.multiply(a, T[1], out=T[2])
        if n == 5:
            np.multiply(a, T[2], out=T[3])
            T[4] *= T[1]
        # sums over the inner bounds in one batched matrix product: (n,B,k,m) @ (1,B,m,1)
        return (T @ dwb)[..., 0]

    def __call__(self, mu: np.ndarray, t2: np.ndarray, logw: np.ndarray, *, hessian=False):
        """f (B,), grad (B, 2) [and Hessian (B, 2, 2)] of the negative log-likelihood at B
        points; ``logw`` is B x J with logw[:, 0] = 0.

        With σ² = v + τ², a_m = (b_m − μ)/σ at the inner bounds, Δω_m = ω_{m+1} − ω_m and
        S_n = Σ_m Δω_m a_mⁿ φ(a_m): A = ω_1 + Σ_m Δω_m Φ(a_m),
        ∂A/∂μ = −S_0/σ, ∂A/∂τ² = −S_1/(2σ²), ∂²A/∂μ² = −S_1/σ²,
        ∂²A/∂μ∂τ² = −(S_2 − S_0)/(2σ³), ∂²A/∂(τ²)² = (3S_1 − S_3)/(4σ⁴)
        (from φ′(a) = −aφ(a), ∂a/∂μ = −1/σ, ∂a/∂τ² = −a/(2σ²)).
        """
        st2 = self.v[None, :] + t2[:, None]
        st = np.sqrt(st2)
        r = self.y[None, :] - mu[:, None]
        z2 = r * r / st2
        omega = np.exp(logw)
        steps = omega[:, 1:] - omega[:, :-1]  # weight step per inner bound
        n = 5 if hessian else 3
        # a set of equal weights (the unadjusted model) has no selection term: its sums
        # below are exactly 0 (a product with 0 weight steps), so they are not formed
        sel = np.flatnonzero(np.any(steps != 0.0, axis=1))
        Ssum = np.zeros((n, mu.size, self.y.size))
        if sel.size:
            Ssum[:, sel] = self._selection_sums(mu[sel], st[sel], steps[sel], n)
        A = omega[:, :1] + Ssum[0]
        S0, S1 = Ssum[1], Ssum[2]
        dA_mu = -S0 / st
        dA_t2 = -0.5 * S1 / st2
        with np.errstate(divide="ignore", invalid="ignore"):
            ll = -0.5 * np.log(2.0 * np.pi * st2) - 0.5 * z2 - np.log(A)
            q_mu = dA_mu / A
            q_t2 = dA_t2 / A
            g_mu = (r / st2 - q_mu).sum(axis=1)
            g_t2 = (0.5 * (z2 - 1.0) / st2 - q_t2).sum(axis=1)
        f = -ll.sum(axis=1) - logw @ self.counts
        f[~np.isfinite(f) | np.any(A <= 0, axis=1)] = np.inf
        grad = -np.stack([g_mu, g_t2], axis=1)
        if not hessian:
            return f, grad
        S2, S3 = Ssum[3], Ssum[4]
        st4 = st2 * st2
        with np.errstate(divide="ignore", invalid="ignore"):
            A_mm = -S1 / st2
            A_mt = -(S2 - S0) / (2.0 * st2 * st)
            A_tt = (3.0 * S1 - S3) / (4.0 * st4)
            h_mm = (-1.0 / st2 - (A_mm / A - q_mu * q_mu)).sum(axis=1)
            h_mt = (-r / st4 - (A_mt / A - q_mu * q_t2)).sum(axis=1)
            h_tt = (-(r * r) / (st4 * st2) + 0.5 / st4 - (A_tt / A - q_t2 * q_t2)).sum(axis=1)
        H = np.empty((f.size, 2, 2))
        H[:, 0, 0] = -h_mm
        H[:, 0, 1] = H[:, 1, 0] = -h_mt
        H[:, 1, 1] = -h_tt
        return f, grad, H


class _SmoothBatch(_Batch):
    """The same likelihood with its selection terms summed by quadrature over the
    studies' SEs: a cheap model to find the starting point of the exact fit of a large
    review.

    Given (μ, τ², ω) a study's selection terms (log A and its derivatives) depend on the
    study only through its SE, as a smooth function of log SE (analytic in the strip
    |Im| < π/2, where SE² + τ² stays away from 0). Interpolated from ``nodes`` Chebyshev
    points spanning the SEs (barycentric weights L_n), their sum over the studies is
    Σ_n f(node_n) Σ_i L_n(SE_i): they are evaluated at the nodes only. The terms in y are
    summed over every study as in :class:`_Batch`. Its maximum is only a starting point:
    the fit itself is the exact Newton iteration of :class:`_Batch` from there, which
    stops by the same rule as from any other start.
    """

    def __init__(self, y, se, cutpoints, nodes: int = 32):
        super().__init__(y, se, cutpoints)
        from scipy.special import ndtri

        t = np.log(se)
        lo, hi = float(t.min()), float(t.max())
        j = np.arange(nodes)
        tn = lo + (hi - lo) * 0.5 * (1.0 + np.cos(np.pi * j / (nodes - 1)))
        se_n = np.exp(tn)
        zc = ndtri(1.0 - np.asarray(cutpoints))
        self.node_inner = se_n[:, None] * zc[None, :]
        self.node_v = se_n**2
        bw = np.where(j % 2 == 0, 1.0, -1.0)
        bw[[0, -1]] *= 0.5
        diff = t[:, None] - tn[None, :]
        hit = diff == 0.0
        with np.errstate(divide="ignore", invalid="ignore"):
            C = bw[None, :] / diff
        on_node = hit.any(axis=1)
        C[on_node] = hit[on_node]
        #: Σ_i L_n(SE_i): the quadrature weight of each node
        self.node_weight = (C / C.sum(axis=1, keepdims=True)).sum(axis=0)

    def __call__(self, mu: np.ndarray, t2: np.ndarray, logw: np.ndarray, *, hessian=False):
        """f, grad [and Hessian] as :meth:`_Batch.__call__`, with the selection terms by
        quadrature (the expressions are those of :meth:`_Batch.__call__`, split into the
        terms in y and the terms in SE alone)."""
        st2 = self.v[None, :] + t2[:, None]
        r = self.y[None, :] - mu[:, None]
        z2 = r * r / st2
        omega = np.exp(logw)
        steps = omega[:, 1:] - omega[:, :-1]
        n = 5 if hessian else 3
        nv = self.node_v[None, :] + t2[:, None]  # σ² at the nodes
        ns = np.sqrt(nv)
        sel = np.flatnonzero(np.any(steps != 0.0, axis=1))
        S = np.zeros((n, mu.size, self.node_v.size))
        if sel.size:
            S[:, sel] = self._selection_sums(mu[sel], ns[sel], steps[sel], n, self.node_inner)
        W = self.node_weight
        A = omega[:, :1] + S[0]
        with np.errstate(divide="ignore", invalid="ignore"):
            q_mu = -S[1] / ns / A
            q_t2 = -0.5 * S[2] / nv / A
            ll = -0.5 * np.log(2.0 * np.pi * st2).sum(axis=1) - 0.5 * z2.sum(axis=1)
            ll -= np.log(A) @ W
            g_mu = (r / st2).sum(axis=1) - q_mu @ W
            g_t2 = (0.5 * (z2 - 1.0) / st2).sum(axis=1) - q_t2 @ W
        f = -ll - logw @ self.counts
        f[~np.isfinite(f) | np.any(A <= 0, axis=1)] = np.inf
        grad = -np.stack([g_mu, g_t2], axis=1)
        if not hessian:
            return f, grad
        st4 = st2 * st2
        nv2 = nv * nv
        with np.errstate(divide="ignore", invalid="ignore"):
            a_mm = -S[2] / nv / A - q_mu * q_mu
            a_mt = -(S[3] - S[1]) / (2.0 * nv * ns) / A - q_mu * q_t2
            a_tt = (3.0 * S[2] - S[4]) / (4.0 * nv2) / A - q_t2 * q_t2
            h_mm = (-1.0 / st2).sum(axis=1) - a_mm @ W
            h_mt = (-r / st4).sum(axis=1) - a_mt @ W
            h_tt = (-(r * r) / (st4 * st2) + 0.5 / st4).sum(axis=1) - a_tt @ W
        H = np.empty((f.size, 2, 2))
        H[:, 0, 0] = -h_mm
        H[:, 0, 1] = H[:, 1, 0] = -h_mt
        H[:, 1, 1] = -h_tt
        return f, grad, H


#: A full Newton step (exact Hessian) shorter than this, relative to the parameters' size,
#: is taken as the last one: Newton's error after a step is of the order of the step
#: squared (quadratic convergence), so one of 1e-6 lands within about 1e-12 of the
#: maximum, and a further evaluation to confirm it would change nothing that is shown.
NEWTON_LAST_STEP = 1e-6


def _newton_batch(model: _Batch, logw: np.ndarray, x0: np.ndarray, *, maxiter: int = 60):
    """Damped Newton over (μ, τ² ≥ 0) for every weight set at once.

    Exact gradient and Hessian (see :meth:`_Batch.__call__`), evaluated for all the weight
    sets still moving in one array call; the 2 x 2 step of each is plain arithmetic. A
    step that does not lower the objective is halved at the next round (backtracking
    folded into the loop); on the τ² = 0 boundary with the gradient pushing outwards only
    μ moves. Returns (x, converged) with x of shape B x 2.
    """
    P = logw.shape[0]
    x = [[float(a), max(float(b), 0.0)] for a, b in np.asarray(x0, dtype=float)]
    best_x = [list(p) for p in x]
    best_f = [math.inf] * P
    step = [[0.0, 0.0] for _ in range(P)]
    done = [False] * P
    for _ in range(maxiter):
        idx = [p for p in range(P) if not done[p]]
        if not idx:
            break
        pts = np.array([x[p] for p in idx])
        fa, ga, Ha = model(pts[:, 0], pts[:, 1], logw[idx], hessian=True)
        fa, ga, Ha = fa.tolist(), ga.tolist(), Ha.tolist()
        for n, p in enumerate(idx):
            f = fa[n]
            g0, g1 = ga[n]
            (h00, h01), (_, h11) = Ha[n]
            bf = best_f[p]
            if math.isfinite(bf) and not f <= bf + 1e-13 * abs(bf):
                # worse than the best point: halve the step from there
                step[p] = [0.5 * step[p][0], 0.5 * step[p][1]]
                if max(abs(step[p][0]), abs(step[p][1])) < 1e-14:
                    done[p] = True
                    continue
                x[p] = [best_x[p][0] + step[p][0], max(best_x[p][1] + step[p][1], 0.0)]
                continue
            best_x[p], best_f[p] = list(x[p]), f
            at_bound = x[p][1] <= 0.0 and g1 > 0
            g1f = 0.0 if at_bound else g1
            if max(abs(g0), abs(g1f)) < 1e-9 * max(1.0, abs(f)):
                done[p] = True
                continue
            det = h00 * h11 - h01 * h01
            newton = False
            if at_bound:
                if h00 > 0:
                    s0, s1, newton = -g0 / h00, 0.0, True
            elif h00 > 0 and det > 0:
                s0 = -(h11 * g0 - h01 * g1) / det
                s1 = -(h00 * g1 - h01 * g0) / det
                newton = math.isfinite(s0) and math.isfinite(s1)
            if not newton:
                gmax = max(1.0, abs(g0), abs(g1))
                s0, s1 = -g0 / gmax, -g1f / gmax
            step[p] = [s0, s1]
            new = [best_x[p][0] + s0, max(best_x[p][1] + s1, 0.0)]
            moved = max(abs(new[0] - best_x[p][0]), abs(new[1] - best_x[p][1]))
            x[p] = new
            scale = max(1.0, abs(best_x[p][0]), abs(best_x[p][1]))
            if newton and moved < NEWTON_LAST_STEP * scale:
                # a full Newton step this small lands within rounding of the maximum
                # (quadratic convergence): take it without another evaluation to confirm
                best_x[p] = new
                done[p] = True
            elif moved < 1e-13:
                done[p] = True
    return np.array(best_x), np.array(done)


def fixed_weight_selection(
    data: StudyData,
    *,
    pooled_estimate: float,
    tau2: float | None = None,
    patterns: dict[str, tuple[float, ...]] | None = None,
) -> FixedWeightSelection | NotComputable:
    """Adjusted estimates under the Vevea & Woods a priori weight patterns.

    ``pooled_estimate`` (the uncorrected random-effects estimate) sets the direction of
    the one-sided p-values. Each pattern is fitted by ML over μ and τ² ≥ 0.
    """
    patterns = PATTERNS if patterns is None else patterns
    y = np.asarray(data.y, dtype=float)
    se = np.asarray(data.se, dtype=float)
    k = y.size
    if k < 2:
        return NotComputable("the fixed-weight selection models need at least two studies")
    if not math.isfinite(pooled_estimate):
        return NotComputable("the uncorrected pooled estimate is not available")
    sign = -1.0 if pooled_estimate < 0 else 1.0
    direction = "negative" if sign < 0 else "positive"
    model = _Batch(sign * y, se, CUTPOINTS)
    names = ["(unadjusted)", *patterns]
    logw = np.zeros((len(names), len(CUTPOINTS) + 1))
    for i, name in enumerate(patterns, start=1):
        w = tuple(float(x) for x in patterns[name])
        if len(w) != len(CUTPOINTS) + 1 or w[0] != 1.0 or min(w) <= 0:
            raise ValueError(f"pattern {name!r} needs {len(CUTPOINTS) + 1} weights, first 1")
        logw[i] = np.log(w)
    # start every pattern at the uncorrected estimate with its τ² (when given), else the
    # moment τ² of the data; the starting point changes the speed, not the maximum
    t0 = tau2 if tau2 is not None and math.isfinite(tau2) and tau2 >= 0 else None
    if t0 is None:
        t0 = max(0.0, float(np.var(y) - np.mean(se**2)))
    start = np.tile([sign * pooled_estimate, t0], (len(names), 1))
    from .sensitivity import LARGE_K

    if k > LARGE_K:
        # many studies: start the exact fit where the same likelihood with interpolated
        # selection sums peaks (see _SmoothBatch); the exact Newton steps then need one or
        # two evaluations instead of five or six. The maximum is the exact model's.
        warm, warm_ok = _newton_batch(_SmoothBatch(sign * y, se, CUTPOINTS), logw, start)
        start = np.where(warm_ok[:, None] & np.isfinite(warm).all(axis=1)[:, None], warm, start)
    x, ok = _newton_batch(model, logw, start)
    if not ok[0]:
        return NotComputable("the random-effects likelihood could not be maximised")
    estimates: list[FixedWeightEstimate | NotComputable] = []
    for i, name in enumerate(names[1:], start=1):
        if not ok[i]:
            estimates.append(
                NotComputable(f"the {name} pattern: the likelihood maximisation did not converge")
            )
            continue
        w = tuple(float(t) for t in patterns[name])
        estimates.append(FixedWeightEstimate(name, sign * float(x[i, 0]), float(x[i, 1]), w))
    return FixedWeightSelection(
        unadjusted=sign * float(x[0, 0]),
        unadjusted_tau2=float(x[0, 1]),
        estimates=tuple(estimates),
        patterns=tuple(patterns),
        cutpoints=CUTPOINTS,
        direction=direction,
        k=int(k),
    )
