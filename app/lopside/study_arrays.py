"""The arrays an analysis reads: the included, usable studies of a review, and the rows
left out with why (read column by column; see :func:`build_study_data`)."""

from __future__ import annotations

import math
import operator
from dataclasses import dataclass

import numpy as np

from .model.review import Review
from .stats.data import StudyData


@dataclass(frozen=True, slots=True)
class ExcludedStudy:
    row: int
    label: str
    reason: str
    y: float | None = None
    se: float | None = None


UNREPORTED_REASON = "never reported results: used only in the missing-trial scenarios"


#: StudyData's optional columns and the Derived attribute each is read from
_OPTIONAL_COLUMNS = {
    "n": "n_total",
    "n1": "n1",
    "n0": "n0",
    "a": "a",
    "b": "b",
    "c": "c",
    "d": "d",
    "se_modified": "se_modified",
    "asd": "asd",
    "asd_var": "asd_var",
}


def _nan_columns(derived, columns: dict[str, str]) -> dict[str, np.ndarray]:
    """The named attributes of each derived row as float columns, None as nan."""
    names = tuple(columns.values())
    get = operator.attrgetter(*names)
    table = np.array([get(d) for d in derived], dtype=float).reshape(-1, len(names))
    return {key: table[:, j].copy() for j, key in enumerate(columns)}


def build_study_data(review: Review, measure: str, derived) -> tuple[StudyData, tuple]:
    """Arrays of the included, usable studies, and the list of those left out (with why).

    Read column by column (each field of all rows at once); rows whose effect or SE is not
    a float or None take :func:`_build_study_data_by_row`, which gives the same."""
    from .stats.derived_rows import RowColumns, columns_of

    studies = tuple(review.studies)
    derived = tuple(derived)
    size = min(len(studies), len(derived))
    studies, derived = studies[:size], derived[:size]
    ys = list(map(_GET_Y, derived))
    ses = list(map(_GET_SE, derived))
    if not (_floats_or_none(ys) and _floats_or_none(ses)):
        return _build_study_data_by_row(review, measure, derived)
    y, se = np.array(ys, dtype=float), np.array(ses, dtype=float)  # None -> nan
    cols = columns_of(review.studies) if size == len(review.studies) else RowColumns(studies)
    reported = np.fromiter(map(bool, cols.raw("reported")), bool, size)
    exclude = np.fromiter(map(bool, cols.raw("exclude")), bool, size)
    with np.errstate(invalid="ignore"):
        usable = np.isfinite(y) & (se > 0)
    keep_mask = reported & ~exclude & usable
    keep = np.flatnonzero(keep_mask).tolist()
    excluded = [
        _excluded(i, studies[i], derived[i], bool(usable[i]))
        for i in np.flatnonzero(~keep_mask).tolist()
    ]

    def kept(col: list) -> list:
        return col if len(keep) == size else [col[i] for i in keep]

    optional = {}
    for key, attr in _OPTIONAL_COLUMNS.items():
        col = list(map(operator.attrgetter(attr), derived))
        if col and col[0] is None and col.count(None) == size:
            optional[key] = np.full(len(keep), np.nan)
        else:
            optional[key] = np.array(kept(col), dtype=float).reshape(-1)
    labels = kept(cols.raw("study"))
    if not all(labels):
        labels = [s or f"Row {i + 1}" for i, s in zip(keep, labels, strict=True)]
    data = StudyData(
        measure=measure,
        y=y[keep] if keep else np.array([], dtype=float),
        se=se[keep] if keep else np.array([], dtype=float),
        labels=tuple(labels),
        rows=tuple(keep),
        **optional,
        risk_of_bias=_texts(kept(cols.raw("risk_of_bias")), lambda v: v.strip().lower()),
        subgroup=_texts(kept(cols.raw("subgroup")), lambda v: v.strip()),
    )
    return data, tuple(excluded)


_GET_Y, _GET_SE = operator.attrgetter("y"), operator.attrgetter("se")


def _floats_or_none(col: list) -> bool:
    """True when every value is a float or None."""
    types = list(map(type, col))
    return types.count(float) + types.count(type(None)) == len(col)


def _texts(col: list, tidy) -> tuple[str, ...]:
    """``tidy(v or "")`` of each value, worked out once per distinct value."""
    try:
        once = {v: tidy(v or "") for v in set(col)}
    except TypeError:  # a value that cannot be a key: one by one
        return tuple(tidy(v or "") for v in col)
    return tuple(map(once.__getitem__, col))


def _excluded(i: int, row, d, usable: bool) -> ExcludedStudy:
    """A row left out of the analysis, and why."""
    label = row.study or f"Row {i + 1}"
    if not row.reported:
        return ExcludedStudy(i, label, UNREPORTED_REASON)
    if row.exclude:
        return ExcludedStudy(
            i,
            label,
            "excluded by the appraiser",
            d.y if usable else None,
            d.se if usable else None,
        )
    why = "; ".join(d.problems) if d.problems else "no usable effect and standard error"
    return ExcludedStudy(i, label, why)


def _build_study_data_by_row(review: Review, measure: str, derived) -> tuple[StudyData, tuple]:
    """build_study_data row by row (for effects or SEs that are not floats or None)."""
    keep: list[int] = []
    excluded: list[ExcludedStudy] = []
    for i, (row, d) in enumerate(zip(review.studies, derived)):
        label = row.study or f"Row {i + 1}"
        usable = d.y is not None and d.se is not None and math.isfinite(d.y) and d.se > 0
        if not row.reported:
            excluded.append(ExcludedStudy(i, label, UNREPORTED_REASON))
        elif row.exclude:
            excluded.append(
                ExcludedStudy(
                    i,
                    label,
                    "excluded by the appraiser",
                    d.y if usable else None,
                    d.se if usable else None,
                )
            )
        elif not usable:
            why = "; ".join(d.problems) if d.problems else "no usable effect and standard error"
            excluded.append(ExcludedStudy(i, label, why))
        else:
            keep.append(i)
    rows = [review.studies[i] for i in keep]
    ds = [derived[i] for i in keep]
    # one table of the optional numbers (None -> nan, as float() of each value would give)
    cols = _nan_columns(ds, _OPTIONAL_COLUMNS)
    data = StudyData(
        measure=measure,
        y=np.array([d.y for d in ds], dtype=float),
        se=np.array([d.se for d in ds], dtype=float),
        labels=tuple(r.study or f"Row {i + 1}" for i, r in zip(keep, rows)),
        rows=tuple(keep),
        **cols,
        risk_of_bias=tuple((r.risk_of_bias or "").strip().lower() for r in rows),
        subgroup=tuple((r.subgroup or "").strip() for r in rows),
    )
    return data, tuple(excluded)
