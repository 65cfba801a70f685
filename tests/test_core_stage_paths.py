"""The core stage's quick paths give the same answers as the general code they skip
(issue 16: the core stage at 30 studies should cost no more than a user's own script).

Each check compares with something outside the quick path: numpy's own ``isclose`` and
``all`` (the general-purpose definitions), and the full fixed-effect pooling of the subset.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from lopside.stats.asymmetry.regression import _EGGER_AGREE_RTOL, _close
from lopside.stats.pooling import fixed_effect
from lopside.stats.pooling_base import _too_extreme

AWKWARD = [0.0, -0.0, 1.0, 1 + 1e-9, 1 + 1e-6, 1e-13, -1e-13, 2e-12, 5e-324, 1e308, -1e308]
AWKWARD += [math.inf, -math.inf, math.nan]


def test_egger_agreement_check_is_numpys_isclose():
    """Source: numpy.isclose(a, b, rtol, atol) = |a - b| <= atol + rtol |b|, infinities
    equal only to themselves, nan never (numpy documentation)."""
    rng = np.random.default_rng(7)
    values = AWKWARD + list(rng.uniform(-3, 3, 40))
    values += [v * (1 + rng.choice([1e-10, 1e-8, 1e-7, 1e-5])) for v in values[-40:]]
    mismatches = [
        (p, q)
        for p in values
        for q in values
        if bool(np.isclose(p, q, rtol=_EGGER_AGREE_RTOL, atol=1e-12)) != _close(p, q)
    ]
    assert mismatches == []


@pytest.mark.parametrize("seed", range(30))
def test_too_extreme_is_the_all_finite_definition(seed):
    """Source: the definition in numpy terms (np.all of isfinite and v > 0, finite sums)."""
    rng = np.random.default_rng(seed)
    k = int(rng.integers(1, 12))
    y = rng.normal(0, 1, k)
    v = rng.uniform(0.01, 1, k)
    for arr in (y, v):
        if rng.random() < 0.5:
            arr[rng.integers(0, k)] = rng.choice(
                [math.inf, -math.inf, math.nan, 0.0, -1.0, 1e-320, 1e308]
            )
    with np.errstate(all="ignore"):
        expected = not (
            np.all(np.isfinite(y))
            and np.all(np.isfinite(v))
            and np.all(v > 0)
            and np.isfinite((y * y / v).sum())
            and np.isfinite((1.0 / v).sum())
        )
    assert _too_extreme(y, v) is expected


@pytest.mark.parametrize("seed", range(20))
def test_trim_and_fill_fixed_effect_centres_equal_full_pooling(seed):
    """The fixed-effect centre while trimming is fixed_effect()'s estimate of the kept
    studies, bit for bit (trim and fill with trim FE recomputed by pooling each subset)."""
    from lopside.stats.adjust_trimfill import _pool as pool_subset
    from lopside.stats.adjust_trimfill import _trim, k0_statistic

    rng = np.random.default_rng(100 + seed)
    k = int(rng.integers(3, 40))
    se = rng.uniform(0.05, 0.8, k)
    yw = rng.normal(0.2 + 0.8 * se, np.sqrt(se**2 + 0.05))
    v = se**2
    order = np.lexsort((-se, -yw))
    k0, centre, _sequence, _iterations, converged, _note = _trim(
        yw, v, order, "L0", "FE", "REML", 100, 0.95
    )
    keep = np.ones(k, dtype=bool)
    keep[order[:k0]] = False
    assert centre == fixed_effect(yw[keep], v[keep]).estimate
    assert centre == pool_subset(yw[keep], v[keep], "FE", "REML", 0.95).estimate
    if converged:  # the number settled: L0 from that centre gives k0 again (Duval & Tweedie 2000)
        assert min(k0_statistic(yw - centre, "L0")[1], k - 1) == k0


def test_row_to_dict_is_the_set_fields_in_field_order():
    """StudyRow.to_dict (what the fingerprint and project files hash and save) keeps the
    fields that are set, in field order, leaving out the defaults; the definition is
    checked field by field with dataclasses.fields (the standard library)."""
    import dataclasses

    from lopside.model.review import StudyRow

    rng = np.random.default_rng(3)
    names = [f.name for f in dataclasses.fields(StudyRow)]
    numeric = [n for n in names if n not in ("study", "risk_of_bias", "subgroup")]
    numeric = [n for n in numeric if n not in ("exclude", "reported", "unread")]
    for _ in range(300):
        kw = {n: float(rng.normal()) for n in numeric if rng.random() < 0.3}
        if rng.random() < 0.7:
            kw["study"] = f"Invented {int(rng.integers(100))}"
        kw["exclude"] = bool(rng.random() < 0.3)
        kw["reported"] = bool(rng.random() < 0.7)
        if rng.random() < 0.3:
            kw["unread"] = (("lower", "0,5"),)
        row = StudyRow(**kw)
        expected = {}
        for f in dataclasses.fields(row):
            v = getattr(row, f.name)
            if v is None or (f.name, v) in (("exclude", False), ("reported", True)):
                continue
            if f.name == "unread":
                if v:
                    expected["unread"] = dict(v)
                continue
            expected[f.name] = v
        got = row.to_dict()
        assert got == expected and list(got) == list(expected)


@pytest.mark.parametrize(
    "row",
    [
        {"estimate": 10**400, "se": 0.1},
        {"estimate": 1.1, "lower": 0.5, "upper": 10**400},
        {"int_events": 10**400, "int_total": 10**401, "ctl_events": 3, "ctl_total": 20},
        {"int_events": 3, "int_total": 20, "ctl_events": 4, "ctl_total": 10**400},
    ],
)
def test_an_int_beyond_the_float_range_is_a_problem_not_a_crash(row):
    """A number too large for a float (10**400 from a script or a hand-edited file) is
    reported on its row, like infinity, never raised (DESIGN 8; Python floats top out near
    1.8e308, common practice)."""
    from lopside.analysis import analyse
    from lopside.model.review import Review, ReviewDetails, StudyRow

    others = [
        StudyRow(study=f"Invented {i}", int_events=3 + i, int_total=40, ctl_events=6, ctl_total=40)
        for i in range(3)
    ]
    review = Review(
        details=ReviewDetails(measure="OR"), studies=(StudyRow(study="Huge", **row), *others)
    )
    result = analyse(review)
    assert result.k == 3 and [e.row for e in result.excluded] == [0]
    assert any(p.row == 0 and p.code == "not_finite" for p in result.problems)


def test_fingerprint_is_computed_when_asked_and_follows_the_review(monkeypatch):
    """The data fingerprint is SHA-256 (hashlib, the standard library) of the JSON of the
    measure and every row's set fields (sorted keys, ASCII): computed when an output first
    asks, not by the analysis an edit runs, and never kept for another review."""
    import dataclasses
    import hashlib
    import json

    import lopside.analysis as analysis
    from lopside.model.review import Review, ReviewDetails, StudyRow

    rows = tuple(StudyRow(study=f"Invented {i}", estimate=1.0 + i / 10, se=0.2) for i in range(6))
    review = Review(details=ReviewDetails(measure="OR"), studies=rows)
    calls = []
    real = analysis.fingerprint
    monkeypatch.setattr(analysis, "fingerprint", lambda *a: calls.append(a) or real(*a))
    result = analysis.analyse(review)
    assert calls == []
    payload = {"measure": "OR", "studies": [r.to_dict() for r in rows]}
    text = json.dumps(payload, sort_keys=True, ensure_ascii=True)
    assert result.fingerprint == hashlib.sha256(text.encode("ascii")).hexdigest()
    assert result.fingerprint == result.fingerprint and len(calls) == 1
    other = dataclasses.replace(review, studies=rows[:5])
    moved = dataclasses.replace(result, review=other)
    assert moved.fingerprint != result.fingerprint
    assert moved.fingerprint == real(other, "OR")
