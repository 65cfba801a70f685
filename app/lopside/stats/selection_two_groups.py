"""The corrected estimates of :mod:`selection_sensitivity` from sums over two groups.

Every row the sensitivity analysis evaluates weights the studies by one of two factors:
α for the affirmative studies and β for the others (α = 1, β = η for a selection ratio η;
α = 0, β = 1 for the worst case). The estimate and the fixed-effect variance are then
weighted means of per-group sums, O(1) per row once the sums are formed. The robust (CR2)
variance and the Satterthwaite degrees of freedom have one factor per study that does not
split by group, q_i = 1/(S − γω_i) (S = Σ_j W_j, γ the study's factor), so each row forms
q over the studies and sums it against a few fixed columns in one matrix product instead
of the dozen full passes of :func:`selection_sensitivity._robust`.

The formulas are the same ones, rearranged (with W_i = γω_i, h_i = W_i/S, u_i = h_iφ_i):

    c_i = W_i²/((1 − h_i)S²) = γ²ω_i² q_i / S,      u_i = γ ω_i φ_i / S,
    Σ c_i e_i² = Σ_g γ²/S [Σ ω²q d² + 2δ_g Σ ω²q d + δ_g² Σ ω²q]
        (d_i = y_i − m_g about the group's weighted mean m_g, δ_g = m_g − μ̂_η),
    s = Σ h_i u_i = Σ_g γ²/S² Σ ω²φ,   Σ c_i = Σ_g γ²/S Σ ω²q,
    Σ c_i φ_i = Σ_g γ²/S Σ ω²φq,   Σ c_i u_i = Σ_g γ³/S² Σ ω³φq,
    Σ c_i u_i² = Σ_g γ⁴/S³ Σ ω⁴φ²q,   Σ c_i²φ_i² = Σ_g γ⁴/S² Σ ω⁴φ²q²,
    Σ c_i²φ_i = Σ_g γ⁴/S² Σ ω⁴φq²,   Σ c_i²φ_i u_i = Σ_g γ⁵/S³ Σ ω⁵φ²q²,

and tr(CΣ), tr(CΣCΣ) are put together from them exactly as in ``_robust``. Only the order
of the floating-point sums differs, so the results agree with ``_robust`` and ``_fe`` to
rounding (the tests ask for 1e-9 relative; tests/test_full_stage_large.py). Nothing is
left out or approximated. Used above ``sensitivity.LARGE_K`` studies; below it the
row-by-row code keeps every digit as before.
"""

from __future__ import annotations

import numpy as np


class TwoGroups:
    """Per-group sums of one pooling model (``phi`` None: fixed effect)."""

    def __init__(self, y: np.ndarray, w: np.ndarray, aff: np.ndarray, phi: np.ndarray | None):
        self.robust = phi is not None
        # the weights enter every formula homogeneously: scaled to at most 1 so that their
        # fifth powers below cannot overflow
        scale = float(w.max())
        self.scale = scale
        self.groups = []
        for mask in (aff, ~aff):
            wg = w[mask] / scale
            yg = y[mask]
            om = float(wg.sum())
            m = float(wg @ yg) / om if om > 0 else 0.0
            g = {"n": int(mask.sum()), "omega": om, "mean": m}
            if self.robust and g["n"]:
                ph = phi[mask]
                d = yg - m
                w2 = wg * wg
                # columns summed against q, then against q²
                g["w"] = wg
                g["F1"] = np.column_stack(
                    [w2, w2 * d, w2 * d * d, w2 * ph, w2 * wg * ph, w2 * w2 * ph * ph]
                )
                g["F2"] = np.column_stack([w2 * w2 * ph * ph, w2 * w2 * ph, w2 * w2 * wg * ph * ph])
                g["w2phi"] = float(w2 @ ph)
            self.groups.append(g)

    def evaluate(self, alpha: np.ndarray, beta: np.ndarray):
        """(estimate, SE, df) per row; df is NaN for the fixed-effect model."""
        ga, gn = self.groups
        S = alpha * ga["omega"] + beta * gn["omega"]
        est = (alpha * ga["omega"] * ga["mean"] + beta * gn["omega"] * gn["mean"]) / S
        if not self.robust:
            # Var = Σ a² w / (Σ a w)², in the unscaled weights
            # (the weights were divided by ``scale``, this ratio by 1/scale)
            var = (alpha**2 * ga["omega"] + beta**2 * gn["omega"]) / (S * S) / self.scale
            return est, np.sqrt(var), np.full(est.shape, np.nan)
        R = S.size
        var = np.zeros(R)
        s = np.zeros(R)
        c1 = np.zeros(R)
        cphi = np.zeros(R)
        cu = np.zeros(R)
        cuu = np.zeros(R)
        c2phi2 = np.zeros(R)
        c2phi = np.zeros(R)
        c2phiu = np.zeros(R)
        with np.errstate(divide="ignore", invalid="ignore"):
            for g, gam in ((ga, alpha), (gn, beta)):
                if not g["n"]:
                    continue
                q = np.subtract(S[:, None], gam[:, None] * g["w"][None, :])
                np.reciprocal(q, out=q)
                M1 = q @ g["F1"]
                q *= q
                M2 = q @ g["F2"]
                g2 = gam * gam
                delta = g["mean"] - est
                var += g2 / S * (M1[:, 2] + 2.0 * delta * M1[:, 1] + delta * delta * M1[:, 0])
                s += g2 / (S * S) * g["w2phi"]
                c1 += g2 / S * M1[:, 0]
                cphi += g2 / S * M1[:, 3]
                cu += g2 * gam / (S * S) * M1[:, 4]
                g4 = g2 * g2
                cuu += g4 / (S * S * S) * M1[:, 5]
                c2phi2 += g4 / (S * S) * M2[:, 0]
                c2phi += g4 / (S * S) * M2[:, 1]
                c2phiu += g4 * gam / (S * S * S) * M2[:, 2]
            tr1 = cphi - 2.0 * cu + s * c1
            tr2 = (
                c2phi2
                + 2.0 * s * c2phi
                - 4.0 * c2phiu
                + s**2 * c1**2
                + 2.0 * c1 * cuu
                - 4.0 * s * c1 * cu
                + 2.0 * cu**2
            )
            df = tr1**2 / tr2
        return est, np.sqrt(var), df
