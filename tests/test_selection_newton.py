"""The selection model's Newton fit for a large review (stats/selection_newton.py).

Checked against things outside that module:

* its gradient against the gradient of ``adjust_selection._Model.negll_grad`` (the
  L-BFGS-B fit's own code, itself checked against scipy in test_selection.py) and its
  Hessian against scipy.differentiate.jacobian of that gradient (adaptive finite
  differences with error estimates);
* the maximum against scipy.optimize.root on that gradient (the point where it is 0, or
  with τ² held at 0 when the likelihood falls as τ² rises there), started from the
  L-BFGS-B maximum of the exact path;
* the standard errors' Hessian, taken over τ as the exact path takes it, against the
  central-difference Hessian that path uses (to its truncation error, about h² = 1e-8
  times the fourth derivatives).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import differentiate, optimize

import lopside.stats.adjust_selection as asel
from lopside.stats import selection_newton as sn
from lopside.stats.data import StudyData
from lopside.stats.pooling import random_effects

CUTS = [(0.025,), (0.025, 0.5), (0.01, 0.05, 0.5)]


def _review(seed: int):
    """An invented review: small-study effects, τ² of 0, 0.02 or 0.3, SEs over a decade
    or two."""
    rng = np.random.default_rng(900 + seed)
    k = int(rng.choice([40, 150, 400]))
    se = np.exp(rng.uniform(math.log(0.03), math.log(float(rng.choice([0.4, 3.0]))), k))
    tau2 = float(rng.choice([0.0, 0.02, 0.3]))
    y = rng.normal(rng.normal(-0.3, 0.4) - rng.uniform(0, 1.5) * se, np.sqrt(se**2 + tau2))
    return y, se


def _gradient_of(model, selection=True):
    """negll_grad's gradient in the vectorised form scipy.differentiate asks for."""

    def grad(x):
        x = np.asarray(x)
        flat = x.reshape(x.shape[0], -1)
        cols = [model.negll_grad(flat[:, i], selection=selection)[1] for i in range(flat.shape[1])]
        return np.stack(cols, axis=-1).reshape(x.shape)

    return grad


@pytest.mark.parametrize("cuts", CUTS)
@pytest.mark.parametrize("tau2", [0.0, 0.04])
def test_exact_derivatives_are_those_of_the_likelihood(cuts, tau2):
    rng = np.random.default_rng(len(cuts))
    se = rng.uniform(0.05, 0.6, 120)
    y = rng.normal(0.2 + 0.6 * se, np.sqrt(se**2 + 0.05))
    model = asel._Model(y, se, cuts)
    prep = sn.Prepared(model)
    for selection in (True, False):
        phi = np.concatenate([[0.25, tau2], rng.normal(0, 0.6, len(cuts))])
        if not selection:
            phi = phi[:2]
        f, g, H = sn.derivatives(prep, phi, selection=selection)
        f0, g0 = model.negll_grad(phi, selection=selection)
        assert f == pytest.approx(f0, rel=1e-13)
        assert g == pytest.approx(g0[: phi.size], rel=1e-9, abs=1e-9 * np.max(np.abs(g0)))
        # one-sided at τ² = 0 would differ; the likelihood is smooth through it, so a
        # central difference there is fine (σ² = s² + τ² stays positive)
        ref = differentiate.jacobian(_gradient_of(model, selection), phi, initial_step=1e-3)
        assert ref.success.all()
        assert np.all(ref.error <= 1e-9 * np.max(np.abs(H)))
        assert H == pytest.approx(ref.df, rel=1e-8, abs=1e-9 * np.max(np.abs(H)))
        assert np.array_equal(H, H.T)


def test_hessian_over_tau_is_the_one_the_standard_errors_used():
    # The exact path's central-difference Hessian (adjust_selection._hessian) is taken over
    # τ, not τ²: the chain rule must give the same matrix, to that difference's error.
    rng = np.random.default_rng(4)
    se = rng.uniform(0.08, 0.6, 300)
    y = rng.normal(0.3 + 0.5 * se, np.sqrt(se**2 + 0.05))
    for cuts in CUTS:
        model = asel._Model(y, se, cuts)
        x = np.concatenate([[0.3, 0.2], rng.normal(0, 0.4, len(cuts))])
        free = np.ones(x.size, dtype=bool)
        exact = sn.hessian_in_tau(model, x, free)
        numeric = asel._hessian(model.negll, x, free)
        assert exact == pytest.approx(numeric, rel=1e-5, abs=1e-5 * np.max(np.abs(exact)))
        free[1] = False  # τ held at 0: the rows of the other parameters
        x[1] = 0.0
        exact = sn.hessian_in_tau(model, x, free)
        numeric = asel._hessian(model.negll, x, free)
        assert exact == pytest.approx(numeric, rel=1e-5, abs=1e-5 * np.max(np.abs(exact)))


def _root_reference(model, phi, selection):
    """scipy.optimize.root on negll_grad's gradient from phi (τ² held at 0 if it is 0)."""
    free = np.ones(phi.size, dtype=bool)
    free[1] = phi[1] > 0.0

    def grad(p):
        full = phi.copy()
        full[free] = p
        return model.negll_grad(full, selection=selection)[1][free]

    sol = optimize.root(grad, phi[free], method="hybr", options={"xtol": 1e-13})
    # success, or stopped at the rounding level of the gradient (the sums of k terms)
    assert sol.success or np.max(np.abs(sol.fun)) < 1e-9
    out = phi.copy()
    out[free] = sol.x
    return out


# seed 4 leaves a p-interval empty: not estimable by either path, so no fit to compare
@pytest.mark.parametrize("seed", [s for s in range(11) if s != 4])
def test_newton_maximum_is_where_the_gradient_vanishes(seed):
    y, se = _review(seed)
    cuts = CUTS[seed % 3]
    re = random_effects(y, se**2, method="REML")
    sign = -1.0 if re.estimate < 0 else 1.0
    model = asel._Model(sign * y, se, cuts)
    labels = asel._interval_labels(cuts)
    assert np.all(model.counts > 0)
    exact = asel._maximise(model, sign * re.estimate, re.tau2, se, labels)
    newton = asel._maximise_newton(model, sign * re.estimate, re.tau2, se)
    assert not isinstance(exact, asel.NotComputable) and newton is not None
    for fit_exact, fit_newton, selection in (
        (exact[0], newton[0], True),
        (exact[1], newton[1], False),
    ):
        phi = np.array(fit_exact.x, dtype=float)
        phi[1] = phi[1] ** 2 if phi[1] ** 2 > 1e-10 else 0.0
        got = np.array(fit_newton.x, dtype=float)
        got[1] = got[1] ** 2
        # the L-BFGS-B fit (exact path) reaches the same likelihood, to its tolerance
        assert fit_newton.fun <= fit_exact.fun + 1e-10 * max(1.0, abs(fit_exact.fun))
        ref = _root_reference(model, phi, selection)
        assert (got[1] == 0.0) == (ref[1] == 0.0)
        assert got == pytest.approx(ref, rel=1e-9, abs=1e-12)
        if ref[1] == 0.0:  # at the bound the likelihood falls as τ² rises (a maximum)
            assert model.negll_grad(ref, selection=selection)[1][1] > 0.0


def test_newton_declines_a_weight_at_its_limit():
    # One interval almost empty of studies with a very different effect: the weight runs
    # towards its bound, where Newton gives way to L-BFGS-B, which reports it
    rng = np.random.default_rng(11)
    se = rng.uniform(0.1, 0.4, 200)
    y = np.abs(rng.normal(0.0, 0.05, 200)) + 2.2 * se  # nearly all significant
    y[:2] = 0.01
    model = asel._Model(y, se, (0.025,))
    assert asel._maximise_newton(model, 0.5, 0.01, se) is None
    labels = asel._interval_labels((0.025,))
    assert "runs to its limit" in asel._maximise(model, 0.5, 0.01, se, labels).reason


def test_falling_back_to_lbfgsb_says_so(monkeypatch):
    import lopside.stats.sensitivity as sens

    y, se = _review(1)
    d = StudyData.from_arrays("OR", y, se)
    monkeypatch.setattr(sens, "LARGE_K", 10)
    newton = asel.selection_model(d)
    assert "Newton steps" in newton.note and newton.se_method == asel.SE_METHOD_EXACT
    assert asel.selection_fit_note(newton) == asel.selection_large_note(d.k, newton=True)
    monkeypatch.setattr(asel, "_maximise_newton", lambda *a: None)
    old = asel.selection_model(d)
    assert "restart" in old.note and "Newton" not in old.note
    assert old.se_method == asel.SE_METHOD
    assert asel.selection_fit_note(old) == asel.selection_large_note(d.k)
