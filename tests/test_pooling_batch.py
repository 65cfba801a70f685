"""Batched pooling, and the speed-ups of the analysis, checked against the plain code.

Two kinds of check:

* The batched functions of :mod:`lopside.stats.pooling` (many subsets of one review at
  once) against the scalar functions applied to each subset — and the scalar functions
  are themselves checked against statsmodels and a direct numerical maximisation in
  tests/test_pooling.py.
* A regression record: ``tests/pooling_batch_reference.json`` holds the outputs of the
  plain, one-subset-at-a-time code (pooling, leave-one-out, cumulative, trim and fill,
  selection model) on seeded invented datasets, recorded before the speed-ups at commit
  eede3d4 by ``PYTHONPATH=app python tests/test_pooling_batch.py --record``. The faster
  code must reproduce them.
"""

from __future__ import annotations

import dataclasses
import json
import math
import sys
from pathlib import Path

import numpy as np
import pytest

from lopside.stats import pooling as pl
from lopside.stats import pooling_batch as plb
from lopside.stats import tau2 as t2m
from lopside.stats.adjust_selection import selection_model
from lopside.stats.adjust_trimfill import trim_and_fill
from lopside.stats.data import StudyData
from lopside.stats.results import NotComputable
from lopside.stats.sensitivity import cumulative, leave_one_out

REFERENCE = Path(__file__).with_name("pooling_batch_reference.json")

#: seeds of _rescue_dataset where Fisher scoring from the DL value stops at a lower
#: interior maximum (or leaves the boundary) and the grid safeguard of tau2_reml decides;
#: found by scanning seeds 0-20000 with the pre-speed-up code
RESCUE_SEEDS = (2800, 3890, 10919, 11177, 11211)


# --------------------------------------------------------------------------------------
# Invented datasets


def _random_dataset(rng: np.random.Generator) -> tuple[np.ndarray, np.ndarray]:
    k = int(rng.integers(3, 45))
    v = rng.uniform(0.005, 0.6, k)
    tau2 = rng.choice([0.0, 0.02, 0.1, 0.5])
    y = rng.normal(rng.normal(0, 0.5), np.sqrt(v + tau2))
    return y, v


def _rescue_dataset(seed: int) -> tuple[np.ndarray, np.ndarray]:
    # few studies with very unequal variances: the shape where the restricted likelihood
    # can have two maxima
    rng = np.random.default_rng(seed)
    k = int(rng.integers(3, 8))
    v = rng.choice([0.01, 1.0, 4.0], k) * rng.uniform(0.5, 2, k)
    y = rng.normal(0, 1.5, k)
    return y, v


def _binary_like(k: int, seed: int) -> tuple[np.ndarray, np.ndarray]:
    # log odds ratios of invented trials with a small-study effect
    rng = np.random.default_rng(seed)
    se = rng.uniform(0.08, 0.9, k)
    y = -0.3 + 0.8 * se + rng.normal(0, np.sqrt(se**2 + 0.03))
    return y, se**2


def datasets() -> list[tuple[str, np.ndarray, np.ndarray]]:
    """(name, y, v) for every recorded dataset."""
    out = []
    rng = np.random.default_rng(20240611)
    for i in range(14):
        y, v = _random_dataset(rng)
        out.append((f"random{i}", y, v))
    for s in RESCUE_SEEDS:
        y, v = _rescue_dataset(s)
        out.append((f"rescue{s}", y, v))
    y = np.array([0.3, -0.1, 0.5, 0.2, 0.05, 0.4])
    out.append(("equal_v", y, np.full(6, 0.04)))
    out.append(("two", np.array([0.1, 0.6]), np.array([0.02, 0.09])))
    out.append(("identical_y", np.full(5, 0.25), np.array([0.01, 0.04, 0.09, 0.16, 0.25])))
    for k, s in ((60, 3), (150, 4)):
        y, v = _binary_like(k, s)
        out.append((f"binary{k}", y, v))
    return out


# --------------------------------------------------------------------------------------
# Recording


def plain(obj, *, drop_weights: bool = False):
    """JSON-ready form of a result: dataclasses become dicts, NotComputable its reason."""
    if isinstance(obj, NotComputable):
        return {"NotComputable": obj.reason}
    if dataclasses.is_dataclass(obj) and not isinstance(obj, type):
        out = {}
        for f in dataclasses.fields(obj):
            if drop_weights and f.name == "weights":
                continue
            out[f.name] = plain(getattr(obj, f.name), drop_weights=drop_weights)
        return out
    if isinstance(obj, (tuple, list)):
        return [plain(x, drop_weights=drop_weights) for x in obj]
    if isinstance(obj, (np.floating, float)):
        return float(obj)
    if isinstance(obj, (np.integer, int)) and not isinstance(obj, bool):
        return int(obj)
    return obj


def _data(y, v) -> StudyData:
    return StudyData.from_arrays("MD", y, np.sqrt(v))


def pooling_outputs(y, v) -> dict:
    out = {
        "fixed": plain(pl.fixed_effect(y, v)),
        "q": pl.cochran_q(y, v),
        "dl": plain(pl.tau2_dl(y, v)),
        "pm": plain(pl.tau2_pm(y, v)),
        "reml": plain(pl.tau2_reml(y, v)),
        "rll": [pl.restricted_loglik(y, v, t) for t in (0.0, 0.05, 0.7)],
        "het": plain(pl.heterogeneity(y, v)),
        "het_dl": plain(pl.heterogeneity(y, v, tau2_method="DL")),
    }
    for m in pl.TAU2_METHODS:
        for h in (False, True):
            out[f"re_{m}_{h}"] = plain(pl.random_effects(y, v, method=m, hksj=h))
    out["re_fixed_tau2"] = plain(pl.random_effects(y, v, tau2=0.1, hksj=True))
    return out


def _pooled_row(r) -> list:
    """The numbers of one pooled estimate shown in a leave-one-out or cumulative row."""
    if isinstance(r, NotComputable):
        return ["NotComputable", r.reason]
    pi = list(r.pi) if r.pi is not None else None
    return [
        r.estimate,
        r.se,
        list(r.ci),
        r.statistic,
        r.pvalue,
        r.tau2,
        r.df,
        pi,
        r.k,
        r.converged,
        r.note,
        r.hksj,
    ]


def _sensitivity(res) -> dict:
    if isinstance(res, NotComputable):
        return plain(res)
    out = plain(res, drop_weights=True)
    if "rows" in out:
        out["rows"] = [
            [r.omitted, r.index, _pooled_row(r.fixed), _pooled_row(r.random), r.tau2, plain(r.i2)]
            for r in res.rows
        ]
    else:
        out["steps"] = [
            [s.added, s.index, s.k, s.se_added, _pooled_row(s.fixed), _pooled_row(s.random)]
            for s in res.steps
        ]
    return out


def sensitivity_outputs(y, v) -> dict:
    d = _data(y, v)
    out = {}
    variants = (("REML", False), ("REML", True), ("DL", False), ("PM", True))
    if d.k > 20:  # keeps the record small; the live tests below cover every variant
        variants = variants[:1] if d.k > 60 else variants[:2]
    for m, h in variants:
        out[f"loo_{m}_{h}"] = _sensitivity(leave_one_out(d, tau2_method=m, hksj=h))
        out[f"cum_{m}_{h}"] = _sensitivity(cumulative(d, tau2_method=m, hksj=h))
    return out


def trimfill_outputs(y, v) -> dict:
    d = _data(y, v)
    return {
        "default": plain(trim_and_fill(d)),
        "r0_right": plain(trim_and_fill(d, estimator="R0", side="right")),
        "re_trim": plain(trim_and_fill(d, trim_model="RE", tau2_method="DL")),
    }


def selection_outputs(y, v) -> dict:
    d = _data(y, v)
    return {
        "one_step": plain(selection_model(d)),
        "two_steps": plain(selection_model(d, cutpoints=(0.025, 0.5))),
    }


def record() -> dict:
    rec = {}
    for name, y, v in datasets():
        rec[name] = {
            "pooling": pooling_outputs(y, v),
            "sensitivity": sensitivity_outputs(y, v),
            "trimfill": trimfill_outputs(y, v),
            "selection": selection_outputs(y, v),
        }
    return rec


if __name__ == "__main__":
    if "--record" in sys.argv:
        rec = record()
        lines = [
            json.dumps(name) + ": " + json.dumps(rec[name], separators=(",", ":"))
            for name in sorted(rec)
        ]
        REFERENCE.write_text("{\n" + ",\n".join(lines) + "\n}\n")
        print(f"wrote {REFERENCE}")


# --------------------------------------------------------------------------------------
# The faster code reproduces the record of the plain code


def _reference() -> dict:
    return json.loads(REFERENCE.read_text())


def assert_same(new, old, *, rel: float, abs_: float, path: str = "") -> None:
    """Recursive equality of two recorded results: numbers to rel/abs, everything else exactly."""
    if isinstance(old, dict):
        assert isinstance(new, dict), path
        # a field added since the record was written must hold its empty default here
        # (e.g. the note of a leave-one-out that was computed the usual way)
        added = {key: new[key] for key in new.keys() - old.keys()}
        assert all(value == "" for value in added.values()), (path, added)
        assert old.keys() <= new.keys(), path
        for key in old:
            assert_same(new[key], old[key], rel=rel, abs_=abs_, path=f"{path}.{key}")
    elif isinstance(old, list):
        assert isinstance(new, list) and len(new) == len(old), path
        for i, (a, b) in enumerate(zip(new, old)):
            assert_same(a, b, rel=rel, abs_=abs_, path=f"{path}[{i}]")
    elif isinstance(old, float) and not isinstance(old, bool):
        assert isinstance(new, (int, float)), path
        if math.isnan(old):
            assert math.isnan(new), path
        else:
            assert new == pytest.approx(old, rel=rel, abs=abs_), path
    else:
        assert new == old, path


_NAMES = [name for name, _, _ in datasets()]


@pytest.fixture(scope="module")
def reference():
    return _reference()


@pytest.mark.parametrize("i", range(len(_NAMES)), ids=_NAMES)
def test_pooling_reproduces_the_record(i, reference):
    name, y, v = datasets()[i]
    # iteration counts included: the scalar REML runs the same steps as before
    assert_same(pooling_outputs(y, v), reference[name]["pooling"], rel=1e-10, abs_=1e-12)


@pytest.mark.parametrize("i", range(len(_NAMES)), ids=_NAMES)
def test_leave_one_out_and_cumulative_reproduce_the_record(i, reference):
    name, y, v = datasets()[i]
    # batched REML runs the scalar steps; PM is found by another root finder (Brent's
    # xtol 1e-12 then bounds the difference)
    assert_same(sensitivity_outputs(y, v), reference[name]["sensitivity"], rel=1e-9, abs_=1e-11)


# --------------------------------------------------------------------------------------
# Batched pooling equals the scalar functions on each subset


def _masks(k: int, seed: int) -> dict[str, np.ndarray]:
    rng = np.random.default_rng(seed)
    general = rng.random((9, k)) < 0.6
    general[0] = False  # an empty subset
    general[1] = False
    general[1, k // 2] = True  # a single study
    return {
        "leave_one_out": ~np.eye(k, dtype=bool),
        "prefix": np.tri(k, dtype=bool),
        "general": general,
    }


def _same_pooled(batch, scalar) -> None:
    if isinstance(scalar, NotComputable):
        assert batch == scalar
        return
    tol = {"rel": 1e-9, "abs": 1e-12}
    for f in ("estimate", "se", "statistic", "pvalue", "tau2"):
        assert getattr(batch, f) == pytest.approx(getattr(scalar, f), **tol), f
    assert batch.ci == pytest.approx(scalar.ci, **tol)
    assert (batch.pi is None) == (scalar.pi is None)
    if scalar.pi is not None:
        assert batch.pi == pytest.approx(scalar.pi, **tol)
    assert batch.weights == pytest.approx(scalar.weights, **tol)
    for f in ("model", "df", "hksj", "k", "converged", "note", "confidence_level"):
        assert getattr(batch, f) == getattr(scalar, f), f


_SMALL = [(n, y, v) for n, y, v in datasets() if y.size <= 60]


@pytest.mark.parametrize("name,y,v", _SMALL, ids=[n for n, _, _ in _SMALL])
@pytest.mark.parametrize("kind", ["leave_one_out", "prefix", "general"])
def test_batched_pooling_equals_scalar_pooling_of_each_subset(name, y, v, kind):
    mask = _masks(y.size, seed=y.size)[kind]
    subsets = [(y[m], v[m]) for m in mask]
    fe = pl.fixed_effect_batch(y, v, mask, confidence_level=0.9)
    q = pl.cochran_q_batch(y, v, mask)
    for b, (ys, vs) in enumerate(subsets):
        _same_pooled(fe[b], pl.fixed_effect(ys, vs, confidence_level=0.9))
        if ys.size:
            assert q[b] == pytest.approx(pl.cochran_q(ys, vs), rel=1e-10, abs=1e-12)
    for method in pl.TAU2_METHODS:
        t2 = pl.tau2_batch(y, v, mask, method)
        for b, (ys, vs) in enumerate(subsets):
            ref = pl.estimate_tau2(ys, vs, method) if ys.size else None
            if ref is None:
                continue
            got = t2.estimate(b)
            # Brent's method stops within xtol = 1e-12 of the Paule-Mandel root
            assert got.tau2 == pytest.approx(ref.tau2, rel=1e-9, abs=1e-11)
            assert (got.converged, got.note) == (ref.converged, ref.note)
            if method == "REML":
                assert got.iterations == ref.iterations  # the same scoring steps
        for hksj in (False, True):
            re = pl.random_effects_batch(y, v, mask, method=method, hksj=hksj)
            for b, (ys, vs) in enumerate(subsets):
                _same_pooled(re[b], pl.random_effects(ys, vs, method=method, hksj=hksj))


def test_fixed_tau2_is_used_as_given():
    name, y, v = datasets()[0]
    mask = _masks(y.size, 1)["general"]
    re = pl.random_effects_batch(y, v, mask, tau2=0.07, hksj=True)
    for b, m in enumerate(mask):
        _same_pooled(re[b], pl.random_effects(y[m], v[m], tau2=0.07, hksj=True))


def test_rows_where_the_grid_overturns_scoring_get_the_global_maximum():
    # Each rescue dataset (where scoring from DL stops at a lower maximum) is one row of
    # a batch that also holds ordinary rows; the batch must give tau2_reml's answer, which
    # tests/test_pooling.py checks against a direct maximisation.
    parts = [_rescue_dataset(s) for s in RESCUE_SEEDS] + [_random_dataset(np.random.default_rng(5))]
    y = np.concatenate([p[0] for p in parts])
    v = np.concatenate([p[1] for p in parts])
    sizes = [p[0].size for p in parts]
    mask = np.zeros((len(parts) + 1, y.size), bool)
    start = 0
    for i, n in enumerate(sizes):
        mask[i, start : start + n] = True
        start += n
    mask[-1] = True
    t2 = pl.tau2_reml_batch(y, v, mask)
    for b, m in enumerate(mask):
        ref = pl.tau2_reml(y[m], v[m])
        assert t2.tau2[b] == pytest.approx(ref.tau2, rel=1e-10, abs=1e-12)
        assert t2.iterations[b] == ref.iterations


def _grid_overturns(y, v) -> bool:
    """What tau2_reml decides: does a grid value beat the scoring result by > 1e-10?"""
    start = pl.tau2_dl(y, v).tau2
    _, ll_est = t2m._reml_scoring(y, v, start, 1000)
    grid = np.concatenate(([0.0], t2m._grid_scale(y, v, start) * t2m._GRID_UNIT))
    return bool(t2m._restricted_loglik_grid(y, v, grid).max() > ll_est + 1e-10)


def _two_maxima_batch(rng, n: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """n invented 5-study datasets side by side (row b of the mask selects dataset b):
    two precise studies near 0 and three imprecise ones far apart, a shape where the
    restricted likelihood often has two maxima (about 6 % of such datasets are overturned
    by the grid, found by trying the generator)."""
    y = np.concatenate(
        [np.concatenate([rng.normal(0, 0.3, 2), rng.normal(0, 3, 3)]) for _ in range(n)]
    )
    v = np.concatenate(
        [np.concatenate([rng.uniform(0.005, 0.02, 2), rng.uniform(2, 6, 3)]) for _ in range(n)]
    )
    mask = np.kron(np.eye(n, dtype=bool), np.ones((1, 5), dtype=bool))
    return y, v, mask


def _certify(y, v, masks):
    dl = pl.tau2_dl_batch(y, v, masks).tau2
    yc = y - np.median(y)
    t, ll, mag, _, ok = plb._reml_scoring_block(yc, v, masks.astype(float), dl, 1000)
    rows = np.flatnonzero(ok)
    scale = plb._grid_scale_batch(y, v, masks, rows, dl[rows])
    certified = plb._reml_certify(y, v, masks, rows, t[rows], ll[rows], mag[rows], scale)
    overturned = np.array([_grid_overturns(y[masks[b]], v[masks[b]]) for b in rows])
    return certified, overturned


@pytest.mark.parametrize("seed", range(3))
def test_certification_never_passes_a_row_the_grid_would_overturn(seed):
    # Soundness of the shortcut: a row certified by _reml_certify must be one where the
    # full grid of tau2_reml finds nothing better; rows in doubt go to tau2_reml.
    # 300 datasets in one batch: the bounds on shared grids are used.
    y, v, masks = _two_maxima_batch(np.random.default_rng(100 + seed), 300)
    certified, overturned = _certify(y, v, masks)
    assert overturned.sum() >= 5  # the check below is not vacuous
    assert not (certified & overturned).any()
    assert certified.sum() > 0.5 * certified.size  # and the shortcut does spare most rows
    # and the batch as a whole gives tau2_reml's answer on every row
    t2 = pl.tau2_reml_batch(y, v, masks)
    ref = np.array([pl.tau2_reml(y[m], v[m]).tau2 for m in masks])
    assert t2.tau2 == pytest.approx(ref, rel=1e-10, abs=1e-12)


def test_certification_of_small_batches_is_sound_too():
    # small batches evaluate every grid value exactly instead of bounding them
    rng = np.random.default_rng(7)
    certified, overturned = [], []
    for _ in range(40):
        y, v, masks = _two_maxima_batch(rng, 8)
        assert 8 * 50 * y.size <= 1 << 18  # the exact path of _reml_certify
        c, o = _certify(y, v, masks)
        certified.append(c)
        overturned.append(o)
    certified, overturned = np.concatenate(certified), np.concatenate(overturned)
    assert overturned.sum() >= 5
    assert not (certified & overturned).any()
    assert certified.sum() > 0.5 * certified.size


def test_larger_review_leave_one_out_equals_scalar():
    # blocks of rows and the bound-based grid check at a size where they matter
    y, v = _binary_like(400, 9)
    mask = ~np.eye(400, dtype=bool)
    re = pl.random_effects_batch(y, v, mask, hksj=True)
    for b in range(0, 400, 7):
        _same_pooled(re[b], pl.random_effects(y[mask[b]], v[mask[b]], hksj=True))


def test_mask_must_match_the_studies():
    with pytest.raises(ValueError):
        pl.tau2_batch(np.zeros(3), np.ones(3), np.ones((2, 4), bool), "REML")
    with pytest.raises(ValueError):
        pl.tau2_batch(np.zeros(3), np.ones(3), np.ones((2, 3), bool), "ML")


# --------------------------------------------------------------------------------------
# Selection model: exact gradient, and the fits against the record


@pytest.mark.parametrize("cuts", [(0.025,), (0.025, 0.5), (0.01, 0.05, 0.5)])
def test_selection_gradient_matches_finite_differences(cuts):
    # reference: central differences of the likelihood that tests/test_selection.py
    # checks against scipy.stats (step 1e-6: truncation ~1e-12, rounding ~1e-9)
    from lopside.stats.adjust_selection import _Model

    rng = np.random.default_rng(len(cuts))
    for _ in range(10):
        se = rng.uniform(0.05, 0.6, 25)
        y = rng.normal(0.2, np.sqrt(se**2 + 0.05))
        model = _Model(y, se, cuts)
        phi = np.concatenate(
            [[rng.normal(0.1, 0.2), rng.uniform(0.005, 0.3)], rng.normal(0, 0.7, len(cuts))]
        )

        def f(p, sel, model=model):
            th = p.copy()
            th[1] = math.sqrt(p[1])  # negll takes tau, the gradient is in tau^2
            return model.negll(th, selection=sel)

        for sel, p in ((True, phi), (False, phi[:2])):
            value, grad = model.negll_grad(p, selection=sel)
            assert value == pytest.approx(f(p, sel), rel=1e-13)
            h = 1e-6
            num = [(f(p + h * e, sel) - f(p - h * e, sel)) / (2 * h) for e in np.eye(p.size)]
            assert grad == pytest.approx(np.array(num), rel=1e-6, abs=1e-6)


@pytest.mark.parametrize("i", range(len(_NAMES)), ids=_NAMES)
def test_selection_fits_agree_with_the_record(i, reference):
    # The old fits used finite-difference gradients and L-BFGS-B's default tolerance,
    # which left them up to ~3e-6 from the maximum (measured by polishing them); the new
    # ones use the exact gradient and a tight tolerance. So: the same verdicts and texts,
    # numbers within 2e-5, and maxima that are never lower.
    name, y, v = datasets()[i]
    new = selection_outputs(y, v)
    old = reference[name]["selection"]
    for key in old:
        a, b = new[key], old[key]
        assert ("NotComputable" in a) == ("NotComputable" in b)
        if "NotComputable" in b:
            assert a == b
            continue
        assert a["loglik"] >= b["loglik"] - 1e-9
        assert a["loglik_unadjusted"] >= b["loglik_unadjusted"] - 1e-9
        if a["loglik_unadjusted"] > b["loglik_unadjusted"] + 1e-8:
            # the old null fit stopped on the boundary tau = 0 (see the next test)
            assert b["unadjusted_tau2"] < 1e-12 < a["unadjusted_tau2"]
            for f in ("unadjusted_tau2", "loglik_unadjusted", "lrt_statistic", "lrt_pvalue"):
                a.pop(f), b.pop(f)
        for f in ("direction", "direction_rule", "intervals", "counts", "k", "note", "lrt_df"):
            assert a[f] == b[f], f
        numbers = {f: a[f] for f in a if f not in ("direction_rule", "intervals", "note")}
        # weakly determined weights moved by up to 2.3e-5 relative
        assert_same(numbers, {f: b[f] for f in numbers}, rel=1e-4, abs_=2e-5)


@pytest.mark.parametrize("cuts", [(0.025,), (0.025, 0.5)])
def test_selection_fits_are_stationary_points(cuts):
    # at the reported maximum the exact gradient vanishes (tau^2 = 0 may be a boundary
    # maximum: there the derivative must only point outwards)
    from lopside.stats.adjust_selection import _Model

    checked = 0
    for name, y, v in datasets():
        r = selection_model(_data(y, v), cutpoints=cuts)
        if isinstance(r, NotComputable):
            continue
        sign = 1.0 if r.direction == "positive" else -1.0
        model = _Model(sign * y, np.sqrt(v), cuts)
        phi = np.array([sign * r.mu, r.tau2] + [math.log(w) for w in r.omega[1:]])
        _, g = model.negll_grad(phi)
        if r.tau2 == 0.0:
            assert g[1] >= -1e-6
            g[1] = 0.0
        assert np.abs(g).max() < 1e-4, name
        checked += 1
    assert checked >= 15


def test_unadjusted_fit_with_equal_variances_is_the_closed_form_ml():
    # With every s_i^2 = s^2 the ML random-effects fit is mu = mean(y) and
    # tau^2 = max(0, mean((y - mean)^2) - s^2) (common practice; it follows from setting
    # the derivatives of the normal log-likelihood to 0). The old tau-parametrised search
    # stopped at tau = 0 here.
    name, y, v = next(d for d in datasets() if d[0] == "equal_v")
    r = selection_model(_data(y, v))
    ml_tau2 = max(0.0, float(np.mean((y - y.mean()) ** 2)) - v[0])
    assert ml_tau2 > 0
    assert r.unadjusted_tau2 == pytest.approx(ml_tau2, rel=1e-6)
    assert r.unadjusted_mu == pytest.approx(y.mean(), abs=1e-8)


@pytest.mark.parametrize("i", range(len(_NAMES)), ids=_NAMES)
def test_trim_and_fill_reproduces_the_record(i, reference):
    name, y, v = datasets()[i]
    assert_same(trimfill_outputs(y, v), reference[name]["trimfill"], rel=1e-10, abs_=1e-12)


def test_average_ranks_match_scipy_rankdata_for_exact_ties():
    # scipy.stats.rankdata(method="average") is the reference for tol = 0
    from scipy.stats import rankdata

    from lopside.stats.adjust_trimfill import _average_ranks

    rng = np.random.default_rng(8)
    for _ in range(300):
        a = np.round(rng.normal(size=int(rng.integers(1, 40))), int(rng.integers(0, 3)))
        assert _average_ranks(a, 0.0) == pytest.approx(rankdata(a, method="average"))


# --------------------------------------------------------------------------------------
# Reusing tau^2 within one analysis


def test_reuse_tau2_returns_the_same_estimates_computed_once(monkeypatch):
    name, y, v = datasets()[2]
    plain = {m: pl.random_effects(y, v, method=m, hksj=h) for m in pl.TAU2_METHODS for h in (0, 1)}
    calls = []
    real = t2m._estimate_tau2

    def counting(yy, vv, method):
        calls.append(method)
        return real(yy, vv, method)

    monkeypatch.setattr(t2m, "_estimate_tau2", counting)
    with pl.reuse_tau2():
        reused = {
            m: pl.random_effects(y, v, method=m, hksj=h) for m in pl.TAU2_METHODS for h in (0, 1)
        }
        pl.heterogeneity(y, v)  # REML again: from the memo
        pl.random_effects(y[:-1], v[:-1])  # other studies: estimated
    assert sorted(calls) == ["DL", "PM", "REML", "REML"]
    assert reused == plain
    calls.clear()
    pl.random_effects(y, v)  # outside the block nothing is kept
    assert calls == ["REML"]
