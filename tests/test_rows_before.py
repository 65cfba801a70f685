"""Rows derived and checked column by column give what the former row-by-row batch code gave.

The former code (commit d6e8c31) is kept in tests/rows_before.py and
tests/rows_checks_before.py. Both it and the one-row routes it was held to
(tests/test_rows_batch.py, tests/test_derive_batch.py, which tie them to the Cochrane
Handbook formulas and to scipy) are the reference here: for random mixed reviews (2x2
counts, estimates with SE or CI, means, P values, two routes at once, blank and odd
values, unreported trials, repeats) the new code must give the same Derived objects
(floats compared bit for bit by their hex form), the same problems in the same order and
words, and the same StudyData arrays.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import rows_before
import rows_checks_before
from lopside.analysis import build_study_data
from lopside.intake.checks import LEVEL_MAX, LEVEL_MIN, check_rows, entered_twice
from lopside.intake.clean_rows import clean_count_rows, clean_estimate_rows, clean_means_rows
from lopside.model.review import MEASURES, Review, ReviewDetails, StudyRow
from lopside.stats.derived import Derived
from lopside.stats.derived_batch import counts_batch, derive_batch
from lopside.stats.derived_rows import derived_many, estimate_batch, means_batch
from lopside.stats.effects import derive, derive_all
from test_rows_batch import OPTIONS, _awkward, rows_of


def _bits(d) -> tuple:
    """A Derived as a tuple in which floats compare bit for bit."""
    return tuple(
        ("float", v.hex()) if isinstance(v, float) else (type(v).__name__, v)
        for v in dataclasses.astuple(d)
    )


def _same(a, b) -> bool:
    return (a is None and b is None) or (
        a is not None and b is not None and type(a) is type(b) and _bits(a) == _bits(b)
    )


_count = st.one_of(st.integers(0, 400), st.floats(0, 400).map(lambda x: round(x, 1)), _awkward)


@st.composite
def counts_rows(draw):
    """Rows entered as 2x2 counts, mostly whole and in order, some odd."""
    out = []
    for i in range(draw(st.integers(0, 10))):
        t1, t0 = draw(st.integers(1, 500)), draw(st.integers(1, 500))
        kw: dict = dict(
            study=f"Counts {i}",
            int_events=draw(st.integers(0, t1)),
            int_total=t1,
            ctl_events=draw(st.integers(0, t0)),
            ctl_total=t0,
        )
        odd = draw(st.integers(0, 12))
        if odd == 1:
            kw[draw(st.sampled_from(list(kw)[1:]))] = draw(_count)
        elif odd == 2:
            kw["int_events"] = kw["ctl_events"] = 0
        elif odd == 3:
            kw["n"] = draw(st.sampled_from([t1 + t0, 0, -1.0, math.nan, 7.5, None]))
        elif odd == 4:
            kw.update(estimate=1.2, se=draw(st.sampled_from([0.3, None])), p=0.04)
        elif odd == 5:
            kw["reported"] = False
        elif odd == 6:
            kw["int_events"], kw["ctl_events"] = t1, t0
        elif odd == 7:
            kw["int_mean"] = 3.0
        out.append(StudyRow(**kw))
    return out


@st.composite
def mixed_review(draw, measure: str):
    """A review whose rows take every route, shuffled, with repeats."""
    rows = draw(rows_of(measure)) + draw(counts_rows()) + draw(rows_of(measure))
    rows = draw(st.permutations(rows))
    if rows and draw(st.booleans()):
        rows.append(rows[draw(st.integers(0, len(rows) - 1))])
    return rows


@pytest.mark.parametrize("measure", MEASURES)
@settings(max_examples=100, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(data=st.data())
def test_derivation_is_as_before(measure, data):
    rows = data.draw(mixed_review(measure))
    opts = data.draw(st.sampled_from(OPTIONS))
    level, method = opts["ci_level"], opts["ci_method"]
    try:
        rows_before.derive_all(rows, measure, **opts)
    except ValueError:
        # the former code raised (math.log of an odds ratio that underflows to 0); the new
        # one leaves such a row to the one-row path, which reports it: every row as
        # effects.derive gives it alone
        assert derive_all(rows, measure, **opts) == tuple(derive(r, measure, **opts) for r in rows)
        return
    # each batch path: the former one vouched for exactly the rows the new one vouches for
    for new, old in (
        (counts_batch(rows, measure), rows_before.counts_batch(rows, measure)),
        (
            estimate_batch(rows, measure, ci_level=level, ci_method=method),
            rows_before.estimate_batch(rows, measure, ci_level=level, ci_method=method),
        ),
        (
            means_batch(rows, measure, smd_correction=opts["smd_correction"]),
            rows_before.means_batch(rows, measure, smd_correction=opts["smd_correction"]),
        ),
        (derive_batch(rows, measure, **opts), rows_before.derive_batch(rows, measure, **opts)),
    ):
        assert len(new) == len(old)
        assert all(_same(a, b) for a, b in zip(new, old, strict=True))
    new_all = derive_all(rows, measure, **opts)
    old_all = rows_before.derive_all(rows, measure, **opts)
    assert [_bits(d) for d in new_all] == [_bits(d) for d in old_all]
    # the analysed studies' arrays and the list of those left out
    review = Review(details=ReviewDetails(measure=measure), studies=tuple(rows))
    if rows:
        new_data, new_out = build_study_data(review, measure, new_all)
        old_data, old_out = rows_before.build_study_data(review, measure, old_all)
        assert new_out == old_out
        for f in dataclasses.fields(new_data):
            a, b = getattr(new_data, f.name), getattr(old_data, f.name)
            if isinstance(a, np.ndarray):
                assert a.dtype == b.dtype and a.shape == b.shape
                assert a.tobytes() == b.tobytes(), f.name
            else:
                assert a == b, f.name


def _outcome(run):
    """What a call gives, or the kind of exception it raises (10**400 in a number field
    makes check_row raise OverflowError; the new code must raise it too)."""
    try:
        return run()
    except Exception as exc:  # noqa: BLE001 - compared, not swallowed
        return type(exc).__name__


@pytest.mark.parametrize("measure", MEASURES)
@settings(max_examples=100, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(data=st.data())
def test_checks_are_as_before(measure, data):
    rows = data.draw(mixed_review(measure))
    level = data.draw(st.sampled_from([95.0, 90, 99.995, 40.0]))
    printed = places = None
    if data.draw(st.booleans()):  # numbers as printed: the rounding follows them
        fields = st.sets(st.sampled_from(["estimate", "lower", "upper"]))
        text = st.sampled_from(["1.0", "0.83", "2", "0.8312", "1,5", ""])
        printed = [{f: data.draw(text) for f in data.draw(fields)} for _ in rows]
        printed = printed[: data.draw(st.integers(0, len(rows)))]
    if data.draw(st.booleans()):
        places = [f"pasted line {i + 3}" for i in range(len(rows))]
    bounds = (LEVEL_MIN, LEVEL_MAX)
    for new, old in (
        (clean_count_rows, rows_checks_before.clean_count_rows),
        (clean_means_rows, rows_checks_before.clean_means_rows),
    ):
        assert _outcome(lambda f=new: f(rows, measure)) == _outcome(lambda f=old: f(rows, measure))
    assert _outcome(lambda: clean_estimate_rows(rows, measure, level, bounds, printed)) == _outcome(
        lambda: rows_checks_before.clean_estimate_rows(rows, measure, level, bounds, printed)
    )
    assert entered_twice(rows) == rows_checks_before.entered_twice(rows)
    got = _outcome(lambda: check_rows(rows, measure, level, printed=printed, places=places))
    want = _outcome(
        lambda: rows_checks_before.check_rows(rows, measure, level, printed=printed, places=places)
    )
    assert got == want


def test_derived_many_makes_what_derived_makes():
    """Results made field by field equal Derived(**fields), repr and hash of fields alike,
    and every field is set (a missing slot would raise on reading)."""
    made = derived_many(
        3, y=[0.1, -0.0, 2.5], se=[0.2, 0.3, 0.4], route="ci", route_text=["a", "b", "c"], df=None
    )
    for i, d in enumerate(made):
        want = Derived(
            y=[0.1, -0.0, 2.5][i], se=[0.2, 0.3, 0.4][i], route="ci", route_text="abc"[i]
        )
        assert type(d) is Derived and d == want and repr(d) == repr(want)
        assert _bits(d) == _bits(want)
        names = [f.name for f in dataclasses.fields(Derived)]
        assert len([getattr(d, name) for name in names]) == len(Derived.__slots__)
        with pytest.raises(dataclasses.FrozenInstanceError):
            d.y = 1.0  # type: ignore[misc]
    assert derived_many(0, y=[]) == []
    with pytest.raises(ValueError):
        derived_many(2, y=[1.0])
    with pytest.raises(TypeError):
        derived_many(1, weight=[1.0])


def test_counts_that_underflow_are_left_to_the_one_row_path():
    """An odds ratio of 2x2 counts that underflows to 0 made the former batch code raise
    (math.log(0)) from derive_all; the row now goes to the one-row route, which reports it."""
    row = StudyRow(
        study="Odd", int_events=1e-310, int_total=1.0, ctl_events=1.0, ctl_total=1.0 + 1e-15
    )
    with pytest.raises(ValueError):
        rows_before.derive_all([row, row], "OR")
    assert counts_batch([row], "OR") == [None]
    one = derive(row, "OR")
    assert one.y is None and "2x2 counts not used" in one.problems[0]
    assert derive_all([row, row], "OR") == (one, one)


def test_one_reader_per_tuple_of_study_rows_within_one_analysis(monkeypatch):
    """Within one analysis the same tuple of StudyRows is read once (derivation, checks
    and arrays share the reader); another tuple or a list gets a reader of its own, and
    nothing is kept once the analysis is over. What the reader gives is the rows' own
    fields."""
    import lopside.stats.derived_rows as dr
    from lopside.analysis import analyse
    from lopside.model.review import Review, ReviewDetails

    rows = (StudyRow(study="A", estimate=1.2, se=0.3), StudyRow(study="B", estimate=0.8))
    with dr.shared_columns(rows):
        cols = dr.columns_of(rows)
        assert dr.columns_of(rows) is cols
        assert dr.columns_of(tuple(list(rows))) is not cols
        assert dr.columns_of(list(rows)) is not dr.columns_of(list(rows))
    assert dr.columns_of(rows) is not cols  # no state after the block
    made = []
    real = dr.RowColumns
    monkeypatch.setattr(dr, "RowColumns", lambda r: made.append(r) or real(r))
    review = Review(details=ReviewDetails(measure="OR"), studies=rows * 3)
    analyse(review, stage="core")
    assert made == [review.studies]  # one reader for the whole analysis
    assert cols.raw("se") == [0.3, None] and cols.given("se").tolist() == [True, False]
    plain, vals = cols.number("estimate")
    assert plain.tolist() == [True, True] and vals.tolist() == [1.2, 0.8]
    assert cols.blank("lower") and not cols.blank("se")
