"""Effect derivation for many rows at once: an estimate with its SE or CI, and means/SDs.

Reviews read off a published forest plot enter every study as an estimate with its
confidence interval (or its SE); reviews of continuous outcomes often enter means, SDs
and sizes per arm. For those rows the routes of :mod:`lopside.stats.effects` are the same
arithmetic row after row, so they are done here over arrays: the validity checks and the
+, -, *, / and square roots (exactly rounded in numpy as in Python), with the logarithms,
quantiles (the same helpers, one call per distinct level and degrees of freedom) and
Hedges' J (one call per distinct m) taken as the one-row routes take them. Each field is
read once for all rows (:class:`RowColumns`) and the results are made field by field
(:func:`derived_many`), not row by row. The numbers are therefore the
ones :func:`lopside.stats.effects.derive` gives, bit for bit (tests/test_rows_batch.py).

A row takes this path only when the one-row route would raise nothing, note nothing and
correct nothing: plain int/float values, exactly one route entered (no 2x2 counts, no P
value, no second estimate route), a blank or positive ``n``; for an interval a usable
level (given in percent), limits in order around the estimate, above 0 for ratios, an
interval symmetric enough not to be noted and a z or t quantile the one-row route would
use without a note; for an SE a positive SE; for means SDs of at least 0 and arms of at
least 2; and an effect and SE inside the limits. Every other row is left to
:func:`~lopside.stats.effects.derive` (``None`` in the list returned).
"""

from __future__ import annotations

import dataclasses
import math
import operator
from collections.abc import Sequence
from contextlib import contextmanager
from contextvars import ContextVar
from itertools import repeat

import numpy as np

from lopside.model.review import (
    CONTINUOUS_MEASURES,
    MEASURES,
    NUMERIC_FIELDS,
    RATIO_MEASURES,
    TEXT_FIELDS,
)

from .derived import (
    ASYMMETRY_NOTE,
    AUTO_T_ARM_SIZE,
    MAX_ABS_EFFECT,
    MAX_SE,
    MIN_SE,
    Derived,
    _fmt,
    _t_quantile,
    _z_quantile,
    hedges_j,
)

_COUNT_FIELDS = ("int_events", "int_total", "ctl_events", "ctl_total")
_MEAN_FIELDS = ("int_mean", "int_sd", "int_n", "ctl_mean", "ctl_sd", "ctl_n")
_NONE = type(None)


def _float(x: object) -> float | None:
    """``float(x)`` for a plain finite int or float, else None (left to the one-row path)."""
    t = type(x)
    if t is float:
        return x if math.isfinite(x) else None  # type: ignore[arg-type]
    if t is int:
        try:
            return float(x)  # type: ignore[arg-type]
        except OverflowError:
            return None
    return None


# --------------------------------------------------------------------------------------
# the rows' fields, one column at a time


class RowColumns:
    """The rows' fields, each read once for all rows and kept.

    ``given(name)`` says where a field is not None, ``number(name)`` where it is a plain
    finite int or float (what the one-row routes take without a word) and its value as a
    float; a field blank in every row is known as such after one cheap pass.
    """

    __slots__ = ("rows", "size", "_raw", "_blank", "_given", "_number")

    def __init__(self, rows: Sequence) -> None:
        self.rows = rows
        self.size = len(rows)
        self._raw: dict[str, list] = {}
        self._blank: dict[str, bool] = {}
        self._given: dict[str, np.ndarray] = {}
        self._number: dict[str, tuple[np.ndarray, np.ndarray]] = {}

    def raw(self, name: str) -> list:
        """The field of every row, as entered."""
        col = self._raw.get(name)
        if col is None:
            get = _GETTERS.get(name) or operator.attrgetter(name)
            col = self._raw[name] = list(map(get, self.rows))
        return col

    def blank(self, name: str) -> bool:
        """True when the field is None in every row."""
        b = self._blank.get(name)
        if b is None:
            col = self.raw(name)
            b = self._blank[name] = not col or (col[0] is None and col.count(None) == len(col))
        return b

    def given(self, name: str) -> np.ndarray:
        """For each row, whether the field is not None."""
        g = self._given.get(name)
        if g is None:
            if self.blank(name):
                g = np.zeros(self.size, dtype=bool)
            else:
                col = self.raw(name)
                g = np.fromiter(map(operator.is_not, col, repeat(None)), bool, self.size)
            self._given[name] = g
        return g

    def number(self, name: str) -> tuple[np.ndarray, np.ndarray]:
        """(plain, values): where the field is a plain finite int or float, and its float
        value there (nan elsewhere), as :func:`_float` reads it."""
        got = self._number.get(name)
        if got is not None:
            return got
        n = self.size
        if self.blank(name):
            got = np.zeros(n, dtype=bool), np.full(n, math.nan)
        else:
            col = self.raw(name)
            types = list(map(type, col))
            vals = None
            if types.count(float) + types.count(int) + types.count(_NONE) == n:
                try:
                    vals = np.array(col, dtype=float)  # None -> nan, int -> float(int)
                except OverflowError:  # an int beyond the float range
                    vals = None
            if vals is not None:
                got = np.isfinite(vals), vals
            else:
                conv = [_float(x) for x in col]
                plain = np.fromiter(map(operator.is_not, conv, repeat(None)), bool, n)
                vals = np.array([math.nan if x is None else x for x in conv], dtype=float)
                got = plain, vals
        self._number[name] = got
        return got

    def flag(self, name: str, default: bool) -> np.ndarray:
        """``bool(getattr(row, name, default))`` for each row."""
        col = self._raw.get(name)
        if col is None:
            try:
                col = self.raw(name)
            except AttributeError:
                col = self._raw[name] = [getattr(r, name, default) for r in self.rows]
        if all(col):
            return np.ones(self.size, dtype=bool)
        return np.fromiter(map(bool, col), bool, self.size)

    def none_of(self, names: Sequence[str]) -> np.ndarray:
        """For each row, whether every one of the fields is None."""
        out = np.ones(self.size, dtype=bool)
        for name in names:
            if not self.blank(name):
                out &= ~self.given(name)
        return out

    def total(self) -> tuple[np.ndarray, list]:
        """(usable?, n) for each row's total: blank, or a plain number above 0 (else
        noted); n is None where blank."""
        if self.blank("n"):
            return np.ones(self.size, dtype=bool), [None] * self.size
        given = self.given("n")
        plain, vals = self.number("n")
        ok = ~given | (plain & (vals > 0))
        ns = [v if g else None for v, g in zip(vals.tolist(), given.tolist(), strict=True)]
        return ok, ns


_GETTERS = {name: operator.attrgetter(name) for name in (*NUMERIC_FIELDS, *TEXT_FIELDS)}
#: (rows, their RowColumns) while one analysis reads them (see :func:`shared_columns`)
_SHARED: ContextVar[tuple | None] = ContextVar("lopside_row_columns", default=None)


@contextmanager
def shared_columns(rows: Sequence):
    """Within this block :func:`columns_of` gives one reader for this tuple of rows, so
    that deriving the effects, checking the rows and building the arrays of one analysis
    read each field once. Nothing is kept after the block (no state between analyses;
    each thread has its own)."""
    token = _SHARED.set((rows, RowColumns(rows)) if type(rows) is tuple else None)
    try:
        yield
    finally:
        _SHARED.reset(token)


def columns_of(rows: Sequence) -> RowColumns:
    """A reader of these rows' columns: the shared one inside :func:`shared_columns` for
    the same tuple, else a new one."""
    shared = _SHARED.get()
    if shared is not None and shared[0] is rows:
        return shared[1]
    return RowColumns(rows)


# --------------------------------------------------------------------------------------
# many Derived at once

_FIELDS = tuple(f.name for f in dataclasses.fields(Derived))
_DEFAULTS = {f.name: f.default for f in dataclasses.fields(Derived)}
#: set the slots directly only while Derived is what this relies on: slots in field
#: order, a plain default for each field and no __post_init__ (else call Derived())
_DIRECT = (
    getattr(Derived, "__slots__", None) == _FIELDS
    and all(d is not dataclasses.MISSING for d in _DEFAULTS.values())
    and not hasattr(Derived, "__post_init__")
)


def derived_many(count: int, **columns: object) -> list[Derived]:
    """``count`` results, field by field: a list gives each result its value, anything
    else is the value of every result; fields not named keep their defaults.

    The objects are those ``Derived(**fields)`` makes (equal, same repr; tested), made by
    :func:`~lopside.stats.pooling_batch.instances`, without a call of the generated
    ``__init__`` (20 frozen-attribute writes) per row.
    """
    for name, col in columns.items():
        if name not in _DEFAULTS:
            raise TypeError(f"Derived has no field {name!r}")
        if isinstance(col, list) and len(col) != count:
            raise ValueError(f"{name}: {len(col)} values for {count} results")
    if not _DIRECT or count < 8:  # a few: Derived() is quicker than 20 passes
        return [
            Derived(**{k: v[i] if isinstance(v, list) else v for k, v in columns.items()})  # type: ignore[arg-type]
            for i in range(count)
        ]
    from .results import instances

    values = (columns.get(name, _DEFAULTS[name]) for name in _FIELDS)
    return instances(Derived, *(c if isinstance(c, list) else repeat(c, count) for c in values))


def _inside(y: np.ndarray, var: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(passes, SE): the one-row route's final checks of an effect and its variance."""
    sd = np.sqrt(var)
    ok = np.isfinite(y) & np.isfinite(var) & (var > 0)
    ok &= (np.abs(y) <= MAX_ABS_EFFECT) & (sd >= MIN_SE) & (sd <= MAX_SE)
    return ok, sd


def _log(x: float) -> float:
    return math.log(x) if x > 0 else math.nan


def _logs(x: np.ndarray) -> np.ndarray:
    """math.log of each value (numpy's log may differ in the last bit); nan for a value
    not above 0 (an odds ratio of 2x2 counts that underflows: the one-row path reports
    the row)."""
    return np.array(list(map(_log, x.tolist())), dtype=float)


#: (indices of the rows, their results) from one batch path
Batch = tuple[np.ndarray, list[Derived]]


# --------------------------------------------------------------------------------------
# estimate with SE or CI


def _estimate_candidates(cols: RowColumns, ci_level: object):
    """Rows whose only route is the estimate with its SE, and those whose only route is
    the estimate with its CI (indices), with the rows' usable totals."""
    plain_e, _ = cols.number("estimate")
    ok_n, ns = cols.total()
    base = plain_e & ~cols.given("p") & cols.flag("reported", True) & ok_n
    base &= cols.none_of(_COUNT_FIELDS + _MEAN_FIELDS)  # counts or means entered too
    lo_g, hi_g = cols.given("lower"), cols.given("upper")
    se_rows = base & ~lo_g & ~hi_g & cols.number("se")[0]
    ci_rows = base & ~cols.given("se") & lo_g & hi_g
    ci_rows &= cols.number("lower")[0] & cols.number("upper")[0]
    if ci_rows.any():
        try:
            review_ok = bool(0 < ci_level < 100)  # type: ignore[operator]
        except TypeError:
            review_ok = False
        if cols.blank("level"):
            ci_rows &= review_ok
        else:
            lv_g = cols.given("level")
            lv_plain, lv = cols.number("level")
            with np.errstate(invalid="ignore"):
                row_ok = lv_plain & ~((lv > 0) & (lv < 1)) & (lv > 0) & (lv < 100)
            ci_rows &= np.where(lv_g, row_ok, review_ok)
    return np.flatnonzero(se_rows), np.flatnonzero(ci_rows), ns


def _se_rows(cols: RowColumns, idx: np.ndarray, ns: list, measure: str) -> Batch:
    """The SE route: the estimate (logged for ratios) and the SE as entered."""
    ratio = measure in RATIO_MEASURES
    e, s = cols.number("estimate")[1][idx], cols.number("se")[1][idx]
    ok = (s > 0) & (s >= MIN_SE) & (s <= MAX_SE)
    if ratio:
        ok &= e > 0
    idx, e, s = idx[ok], e[ok], s[ok]
    y = _logs(e) if ratio else e
    good, sd = _inside(y, s * s)
    idx = idx[good]
    text = "SE as entered" + (" (taken to be on the log scale)" if ratio else "")
    made = derived_many(
        idx.size,
        y=y[good].tolist(),
        se=sd[good].tolist(),
        route="se",
        route_text=text,
        n_total=[ns[j] for j in idx.tolist()],
    )
    return idx, made


def _quantile(level, n_total, measure: str, ci_method: str, cache: dict):
    """(q, df) as the one-row route chooses them for a row with no arm sizes, or None
    where that route would note or report something (no sizes, a t with too few)."""
    use_t = ci_method == "t"
    df = None if n_total is None else n_total - 2.0
    if ci_method == "auto" and measure in CONTINUOUS_MEASURES:
        if n_total is None or n_total < 2 * AUTO_T_ARM_SIZE:
            return None  # noted: no sizes, or arms taken to be about equal
        use_t = False
    elif ci_method == "auto":
        use_t = False
    if use_t and (df is None or not df >= 1):
        return None
    key = (level, df if use_t else None)
    if key not in cache:
        tail = (1 - level / 100) / 2
        try:
            cache[key] = _t_quantile(tail, df) if use_t else _z_quantile(tail)
        except (ArithmeticError, ValueError):  # the one-row route reports the row
            cache[key] = None
    return None if cache[key] is None else (cache[key], df if use_t else None)


def _ci_rows(
    cols: RowColumns, idx: np.ndarray, ns: list, measure: str, ci_level, ci_method: str
) -> Batch:
    """The CI route: SE = (U - L) / (2 q), limits logged first for ratios."""
    ratio = measure in RATIO_MEASURES
    e = cols.number("estimate")[1][idx]
    lo, hi = cols.number("lower")[1][idx], cols.number("upper")[1][idx]
    ok = (lo < hi) & (lo <= e) & (e <= hi)
    if ratio:
        ok &= (e > 0) & (lo > 0)
    idx, e, lo, hi = idx[ok], e[ok], lo[ok], hi[ok]
    if ratio:
        e, lo, hi = _logs(e), _logs(lo), _logs(hi)
    scale = " on the log scale" if ratio else ""
    rows = idx.tolist()
    if cols.blank("level"):
        levels: list = [ci_level] * len(rows)
    else:
        raw_level, lv = cols.raw("level"), cols.number("level")[1].tolist()
        levels = [ci_level if raw_level[j] is None else lv[j] for j in rows]
    # the quantile depends on the level, and on the total only where a t may be used
    by_total = ci_method == "t" or (ci_method == "auto" and measure in CONTINUOUS_MEASURES)
    keys = list(zip(levels, [ns[j] for j in rows], strict=True)) if by_total else levels
    cache: dict = {}
    found: dict = {}
    for key in dict.fromkeys(keys):
        level, n = key if by_total else (key, None)
        found[key] = _quantile(level, n, measure, ci_method, cache)
    qs = list(map(found.__getitem__, keys))
    keep = np.array([q is not None for q in qs], dtype=bool)
    if not keep.any():
        return idx[:0], []
    q = np.array([x[0] if x is not None else math.nan for x in qs], dtype=float)
    divisor = 2 * q
    se = (hi - lo) / divisor
    asym = (se > 0) & (np.abs(e - (lo + hi) / 2) > ASYMMETRY_NOTE * se)
    good, sd = _inside(e, se * se)
    good &= keep & ~asym
    take = np.flatnonzero(good).tolist()
    texts: dict = {}  # one text per level and df (the divisor follows from them)
    text_of, df_of = [], []
    divs = divisor.tolist()
    for m in take:
        df = qs[m][1]  # type: ignore[index]
        tkey = (levels[m], df)
        text = texts.get(tkey)
        if text is None:
            kind = "z-based" if df is None else f"t-based, df = {_fmt(df or 0)}"
            text = f"SE from the {_fmt(levels[m])}% CI{scale} ({kind}, divisor {divs[m]:.2f})"
            texts[tkey] = text
        text_of.append(text)
        df_of.append(df)
    idx = idx[good]
    made = derived_many(
        idx.size,
        y=e[good].tolist(),
        se=sd[good].tolist(),
        route="ci",
        route_text=text_of,
        n_total=[ns[j] for j in idx.tolist()],
        df=df_of,
    )
    return idx, made


def estimate_rows(
    cols: RowColumns, measure: str, *, ci_level: float = 95.0, ci_method: str = "z"
) -> list[Batch]:
    """The rows entered as an estimate with its SE or CI only that the batch vouches for
    (indices) and their results."""
    if measure not in MEASURES or not cols.size or cols.blank("estimate"):
        return []
    se_idx, ci_idx, ns = _estimate_candidates(cols, ci_level)
    out = []
    with np.errstate(all="ignore"):
        if se_idx.size:
            out.append(_se_rows(cols, se_idx, ns, measure))
        if ci_idx.size:
            out.append(_ci_rows(cols, ci_idx, ns, measure, ci_level, ci_method))
    return out


def _spread(size: int, batches: list[Batch]) -> list[Derived | None]:
    """One entry per row: its batch result, or None."""
    out: list[Derived | None] = [None] * size
    for idx, made in batches:
        for j, d in zip(idx.tolist(), made, strict=True):
            out[j] = d
    return out


def estimate_batch(
    rows: Sequence, measure: str, *, ci_level: float = 95.0, ci_method: str = "z"
) -> list[Derived | None]:
    """For each row entered as an estimate with its SE or CI only, its :class:`Derived`;
    None for the one-row path."""
    cols = RowColumns(rows)
    return _spread(cols.size, estimate_rows(cols, measure, ci_level=ci_level, ci_method=ci_method))


# --------------------------------------------------------------------------------------
# means, SDs and sizes per arm


def means_rows(cols: RowColumns, measure: str, *, smd_correction: str = "exact") -> list[Batch]:
    """The rows entered as means, SDs and sizes only (MD, SMD) that the batch vouches for
    (indices) and their results."""
    if measure not in CONTINUOUS_MEASURES or not cols.size or cols.blank("int_mean"):
        return []
    ok = cols.flag("reported", True) & cols.none_of(_COUNT_FIELDS)
    e_g = cols.given("estimate")
    other = cols.given("se") | cols.given("p") | (cols.given("lower") & cols.given("upper"))
    ok &= ~(e_g & other)  # another route entered: the one-row path notes it
    ok_n, ns = cols.total()
    ok &= ok_n
    vals = []
    for name in _MEAN_FIELDS:
        plain, v = cols.number(name)
        ok &= plain
        vals.append(v)
    m1, s1, n1, m0, s0, n0 = vals
    with np.errstate(all="ignore"):
        ok &= (s1 >= 0) & (s0 >= 0) & (n1 >= 2) & (n0 >= 2)
        if measure == "SMD":
            m = n1 + n0 - 2.0
            sp2 = ((n1 - 1) * s1 * s1 + (n0 - 1) * s0 * s0) / m
            ok &= sp2 > 0
        idx = np.flatnonzero(ok)
        m1, s1, n1, m0, s0, n0 = (v[idx] for v in vals)
        if measure == "MD":
            y, var = m1 - m0, s1 * s1 / n1 + s0 * s0 / n0
            texts: object = "mean difference from means and SDs"
            se_mod: object = None
            good, sd = _inside(y, var)
        else:
            m, sp2 = m[idx], sp2[idx]
            exact = smd_correction == "exact"
            kind = "exact" if exact else "approximate"
            js: dict = {}
            ml = m.tolist()  # one list: a nan m is found again by identity
            for mj in dict.fromkeys(ml):
                try:
                    js[mj] = hedges_j(mj, exact=exact)
                except (ArithmeticError, ValueError):
                    js[mj] = None
            jlist = [js[mj] for mj in ml]
            made_j = np.array([j is not None for j in jlist], dtype=bool)
            jj = np.array([math.nan if j is None else j for j in jlist], dtype=float)
            y = jj * ((m1 - m0) / np.sqrt(sp2))
            big_n = n1 + n0
            var = big_n / (n1 * n0) + y * y / (2.0 * big_n)
            good, sd = _inside(y, var)
            good &= made_j
            words = {
                j: f"Hedges' g from means and SDs (pooled SD; {kind} small-sample factor "
                f"J = {j:.4f}; large-sample variance)"
                for j in js.values()
                if j is not None
            }
            texts = [words[jlist[k]] for k in np.flatnonzero(good).tolist()]
            inv = 1 / n1[good] + 1 / n0[good]
            se_mod = [math.sqrt(x) if math.isfinite(x) else None for x in inv.tolist()]
    idx = idx[good]
    n1l, n0l = n1[good].tolist(), n0[good].tolist()
    totals = [ns[j] for j in idx.tolist()]
    made = derived_many(
        idx.size,
        y=y[good].tolist(),
        se=sd[good].tolist(),
        route="means",
        route_text=texts,
        n1=n1l,
        n0=n0l,
        n_total=[t if t is not None else a + b for t, a, b in zip(totals, n1l, n0l, strict=True)],
        se_modified=se_mod,
    )
    return [(idx, made)]


def means_batch(rows: Sequence, measure: str, *, smd_correction: str = "exact") -> list:
    """For each row entered as means, SDs and sizes only (MD, SMD), its :class:`Derived`;
    None for the one-row path."""
    cols = RowColumns(rows)
    return _spread(cols.size, means_rows(cols, measure, smd_correction=smd_correction))
