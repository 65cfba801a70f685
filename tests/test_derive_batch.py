"""Rows derived and checked together over arrays give what the one-row paths give.

The one-row routes (``derive``, ``check_row``) are checked against the Cochrane Handbook
formulas and worked examples in tests/test_effects.py and tests/test_checks*.py; here the
batch paths are held to them exactly: the same floats bit for bit, the same problems in
the same order, for invented rows chosen to reach every branch (zero cells, all events,
swapped counts, non-whole and non-finite values, extra routes, blank or bad ``n``).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from lopside.intake.checks import check_row, check_rows
from lopside.model.review import StudyRow
from lopside.stats.derived_batch import counts_batch
from lopside.stats.effects import derive, derive_all


def _invented_rows(seed: int, k: int = 400) -> list[StudyRow]:
    """INVENTED 2x2 rows, mostly clean, with every kind of oddity mixed in."""
    rng = np.random.default_rng(seed)
    rows = []
    for i in range(k):
        t1, t0 = int(rng.integers(1, 900)), int(rng.integers(1, 900))
        e1, e0 = int(rng.integers(0, t1 + 1)), int(rng.integers(0, t0 + 1))
        kw: dict = dict(
            study=f"Invented {i}", int_events=e1, int_total=t1, ctl_events=e0, ctl_total=t0
        )
        odd = rng.integers(0, 26)  # half the rows have nothing odd
        if odd == 1:
            kw["int_events"] = 0
            kw["ctl_events"] = 0
        elif odd == 2:
            kw["int_events"], kw["ctl_events"] = t1, t0
        elif odd == 3:
            kw["int_events"] = t1 + 3  # more events than participants
        elif odd == 4:
            kw["int_total"] = t1 + 0.5  # not a whole number
        elif odd == 5:
            kw["n"] = float(rng.choice([t1 + t0, -4.0, 0.0, math.nan, 12.5]))
        elif odd == 6:
            kw.update(estimate=1.3, lower=0.9, upper=1.9)  # a second route
        elif odd == 7:
            kw["ctl_total"] = 0
        elif odd == 8:
            kw["int_events"] = math.inf
        elif odd == 9:
            kw["risk_of_bias"] = rng.choice(["low", " High ", "unclear"])
        elif odd == 10:
            kw["study"] = "  "
        elif odd == 11:
            kw["int_events"] = 2.0e9  # beyond the largest arm
            kw["int_total"] = 3.0e9
        elif odd == 12:
            kw["reported"] = False
        rows.append(StudyRow(**kw))
    return rows


@pytest.mark.parametrize("measure", ["OR", "RR", "RD", "HR", "MD"])
@pytest.mark.parametrize("seed", [1, 2, 3])
def test_batch_derivation_is_the_one_row_derivation_bit_for_bit(measure, seed):
    rows = _invented_rows(seed)
    fast = counts_batch(rows, measure)
    one = [derive(r, measure) for r in rows]
    taken = [i for i, f in enumerate(fast) if f is not None]
    if measure in ("OR", "RR", "RD"):
        assert len(taken) > len(rows) // 2  # most clean rows go the fast way
    else:
        assert not taken
    for i in taken:
        assert fast[i] == one[i], (i, rows[i])
        assert type(fast[i].y) is float and type(fast[i].se) is float
    assert derive_all(rows, measure) == tuple(one)


@settings(max_examples=200, deadline=None)
@given(
    st.lists(
        st.tuples(st.integers(0, 60), st.integers(0, 60), st.integers(0, 60), st.integers(0, 60)),
        min_size=1,
        max_size=12,
    ),
    st.sampled_from(["OR", "RR", "RD"]),
)
def test_batch_derivation_matches_on_any_small_tables(cells, measure):
    rows = [
        StudyRow(study=f"S{i}", int_events=a, int_total=a + b, ctl_events=c, ctl_total=c + d)
        for i, (a, b, c, d) in enumerate(cells)
    ]
    assert derive_all(rows, measure) == tuple(derive(r, measure) for r in rows)


@pytest.mark.parametrize("measure", ["OR", "RR", "RD", "MD"])
@pytest.mark.parametrize("seed", [4, 5])
def test_batch_checks_are_the_one_row_checks(measure, seed):
    rows = _invented_rows(seed)
    rows += [rows[3], rows[3], StudyRow(), StudyRow()]  # entered three times; blank rows
    expected = []
    seen: dict = {}
    for i, r in enumerate(rows):  # the one-row check, then the repeat rule as it was
        expected += [(p.code, p.row, p.message) for p in check_row(r, measure, index=i)]
        key = tuple(sorted((k, repr(v)) for k, v in r.to_dict().items()))
        if key in seen and (r.study or r.estimate is not None):
            expected.append(("duplicate", i, seen[key]))
        else:
            seen.setdefault(key, i)
    got = [
        (p.code, p.row, p.message) if p.code != "duplicate" else (p.code, p.row, None)
        for p in check_rows(rows, measure)
    ]
    assert [g for g in got if g[0] != "duplicate"] == [e for e in expected if e[0] != "duplicate"]
    assert [g[1] for g in got if g[0] == "duplicate"] == [
        e[1] for e in expected if e[0] == "duplicate"
    ]
    assert [e[2] for e in expected if e[0] == "duplicate"] == [3, 3]
    assert got.index(("duplicate", len(rows) - 4, None)) > 0


def test_derive_all_still_refuses_a_bad_option():
    rows = _invented_rows(6, k=5)
    with pytest.raises(ValueError, match="ci_method"):
        derive_all(rows, "OR", ci_method="bogus")
