"""Row checks: what looks wrong in a study row, and what to do about it.

Design invariants
-----------------
* Checks never raise on bad data and never change a row: they return
  :class:`Problem` values (errors stop a row being analysed; warnings do not).
* Every message comes from :data:`lopside.intake.messages.CHECKS` and names the row
  (counted from 1 for the user), the study and the field.
* Rounding tolerance comes from the decimals *as printed*: half a unit in the last
  printed place of each number. The printed text is used when the caller has it
  (the paste and table readers keep it); otherwise two decimals are assumed, the usual
  precision of forest tables (more if the stored value itself shows more), except that an
  estimate and limits that all show at most one decimal are read as printed so
  (:func:`lopside.intake.numbers.interval_decimals`).
* The symmetry check uses the fact that ratio intervals (OR, RR, HR) computed the usual
  way are symmetric on the log scale, and difference intervals on the plain scale
  (Cochrane Handbook 5.1, section 7.7.7.3 for ratios; section 7.7.3.2 for differences).
  A row is flagged only if *no* set of true values within the rounding of the printed
  numbers is symmetric on the expected scale.
"""

from __future__ import annotations

import math
import operator
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, fields, replace

from lopside.intake import messages as M
from lopside.intake.clean_rows import (  # clean_count_rows is also this module's API
    clean_count_rows,
    clean_estimate_rows,
    clean_means_rows,
)
from lopside.intake.numbers import interval_decimals
from lopside.intake.symmetry import Symmetry, symmetry  # noqa: F401 - part of this API
from lopside.model.review import (
    BINARY_MEASURES,
    CONTINUOUS_MEASURES,
    MEASURE_NAMES,
    MEASURES,
    NUMERIC_FIELDS,
    RATIO_MEASURES,
    RISK_OF_BIAS_LEVELS,
    StudyRow,
)

ERROR = "error"
WARNING = "warning"

#: Bounds of a usable CI level in percent (both excluded).
LEVEL_MIN = 50.0
LEVEL_MAX = 99.99


@dataclass(frozen=True, slots=True)
class Problem:
    """One thing wrong with one row.

    ``row`` is the 0-based index of the row in the list checked (-1 for the review's
    own settings); the message counts rows from 1. ``code`` is the key of the message
    in :data:`lopside.intake.messages.CHECKS`, for tests and for the window's icons.
    """

    row: int
    study: str
    field: str
    severity: str
    message: str
    code: str = ""


def _problem(
    index: int, row: StudyRow, fld: str, severity: str, code: str, place: str = "", **fields: object
) -> Problem:
    text = M.where(index, row.study, fld, place) + M.check_message(code, **fields)
    return Problem(index, row.study, fld, severity, text, code)


def _fmt(value: float, printed: Mapping[str, str], fld: str) -> str:
    """A value as the user typed it where we know that, else in short form."""
    if fld in printed and printed[fld]:
        return printed[fld]
    if value == int(value) and abs(value) < 1e15:
        return str(int(value))
    return f"{value:.6g}"


def _fmt_like(value: float, decimals: int) -> str:
    return f"{value:.{max(decimals, 0)}f}"


# -- one row --------------------------------------------------------------------------


def _finite(v: float) -> bool:
    """math.isfinite, False (not an error) for an int beyond the float range."""
    try:
        return math.isfinite(v)
    except OverflowError:
        return False


def _arm(prefix: str) -> str:
    return "intervention" if prefix == "int" else "control"


def check_row(
    row: StudyRow,
    measure: str,
    ci_level: float = 95.0,
    *,
    index: int = 0,
    printed: Mapping[str, str] | None = None,
    place: str = "",
) -> tuple[Problem, ...]:
    """Check one study row.

    Parameters
    ----------
    row : StudyRow
        The row as entered (natural scale).
    measure : str
        The review's measure, one of MEASURES.
    ci_level : float
        The review's CI level in percent; checked for a row that has an interval but no
        level of its own.
    index : int
        0-based position of the row, for the message ("Row index+1").
    printed : mapping, optional
        Field -> number as printed (from the paste or table reader), so that the
        rounding tolerance follows the printed decimals.
    place : str, optional
        Where the row came from ("spreadsheet row 5", "pasted line 7"), named in the
        messages beside the study's own row number.

    Returns
    -------
    tuple of Problem
        Empty for a clean row.

    Raises
    ------
    ValueError
        If ``measure`` is not one of MEASURES (a programming error, not bad data).
    """
    if measure not in MEASURES:
        raise ValueError(f"unknown measure {measure!r}; expected one of {MEASURES}")
    c = _RowCheck(row, measure, ci_level, index, printed or {}, place)
    c.not_finite()
    c.unread_and_label()
    c.impossible_values()
    if not c.row.reported:
        c.unreported()
        return tuple(c.out)
    c.interval()
    c.counts_and_means()
    c.p_only()
    c.anything_to_analyse()
    return tuple(c.out)


class _RowCheck:
    """The checks of one row, in the order their problems are listed (see check_row)."""

    def __init__(self, row, measure, ci_level, index, printed, place) -> None:
        self.row, self.measure, self.ci_level = row, measure, ci_level
        self.index, self.pr, self.place = index, printed, place
        self.out: list[Problem] = []
        self.name = MEASURE_NAMES[measure]
        self.ratio = measure in RATIO_MEASURES
        self.unread: dict[str, str] = {}

    def add(self, fld: str, severity: str, code: str, **fields: object) -> None:
        self.out.append(_problem(self.index, self.row, fld, severity, code, self.place, **fields))

    def fmt(self, fld: str) -> str:
        return _fmt(getattr(self.row, fld), self.pr, fld)

    def not_finite(self) -> None:
        """Values that are not finite numbers (NaN, infinity, a stray type) are reported
        once and then treated as missing by every other rule."""
        bad: dict[str, object] = {}
        for fld in NUMERIC_FIELDS:
            v = getattr(self.row, fld)
            if v is None:
                continue
            if isinstance(v, bool) or not isinstance(v, (int, float)) or not _finite(v):
                bad[fld] = v
        if bad:
            for fld, v in bad.items():
                self.add(fld, ERROR, "not_finite", value=v)
            self.row = replace(self.row, **{fld: None for fld in bad})

    def unread_and_label(self) -> None:
        self.unread = self.row.unread_dict()
        for fld, text in self.row.unread:
            self.add(fld, ERROR, "unread", text=text)
        if not self.row.study.strip():
            self.add("study", WARNING, "no_label")

    def impossible_values(self) -> None:
        """Values that cannot be right whatever the measure."""
        row, add, fmt = self.row, self.add, self.fmt
        # the row's own CI level, else the review's (an interval needs a usable level)
        if row.level is not None and not (LEVEL_MIN < row.level < LEVEL_MAX):
            add("level", ERROR, "level_range", level=fmt("level"))
        elif row.level is None and lo_hi_given(row) and not (LEVEL_MIN < self.ci_level < LEVEL_MAX):
            add("level", ERROR, "level_range", level=f"{self.ci_level:g}")
        if row.p is not None and not (0.0 < row.p <= 1.0):
            add("p", ERROR, "p_range", p=fmt("p"))
        if row.se is not None:
            if row.se < 0:
                add("se", ERROR, "negative", what="SE", value=fmt("se"))
            elif row.se == 0:
                add("se", ERROR, "se_zero")
        for prefix in ("int", "ctl"):
            sd_field = f"{prefix}_sd"
            sd = getattr(row, sd_field)
            if sd is not None:
                if sd < 0:
                    add(sd_field, ERROR, "negative", what="SD", value=fmt(sd_field))
                elif sd == 0:
                    add(sd_field, WARNING, "sd_zero")
        self._whole_numbers()
        self._arms()

    def _whole_numbers(self) -> None:
        for fld, what in WHOLE_FIELDS.items():
            v = getattr(self.row, fld)
            if v is None:
                continue
            if v < 0:
                self.add(
                    fld,
                    ERROR,
                    "negative",
                    what=f"{_arm(fld[:3])} {what}" if fld != "n" else "n",
                    value=self.fmt(fld),
                )
            elif v != int(v):
                self.add(fld, WARNING, "not_whole", what=fld.replace("_", " "), value=self.fmt(fld))

    def _arms(self) -> None:
        row, add, fmt = self.row, self.add, self.fmt
        for prefix in ("int", "ctl"):
            ev, tot = getattr(row, f"{prefix}_events"), getattr(row, f"{prefix}_total")
            if ev is not None and tot is not None and ev > tot >= 0:
                add(
                    f"{prefix}_events",
                    ERROR,
                    "events_over_total",
                    arm=_arm(prefix),
                    events=fmt(f"{prefix}_events"),
                    total=fmt(f"{prefix}_total"),
                )
        for prefix in ("int", "ctl"):
            arm_n = getattr(row, f"{prefix}_n")
            if arm_n is not None and 0 <= arm_n < 2:
                add(
                    f"{prefix}_n",
                    ERROR,
                    "arm_too_small",
                    arm=_arm(prefix),
                    value=fmt(f"{prefix}_n"),
                )
            tot = getattr(row, f"{prefix}_total")
            if tot is not None and tot == 0:
                add(f"{prefix}_total", ERROR, "total_zero", arm=_arm(prefix))

    def unreported(self) -> None:
        """A trial known to be missing: only its size is used (the missing-trial
        scenarios)."""
        row = self.row
        if row.total_n() is None:
            self.add("n", ERROR, "unreported_no_size")
        results = [
            f
            for f in ("estimate", "lower", "upper", "se", "p", "int_events", "ctl_events",
                      "int_mean", "ctl_mean", "int_sd", "ctl_sd")
            if getattr(row, f) is not None
        ]  # fmt: skip
        if results:
            self.add(results[0], WARNING, "unreported_has_results", fields=", ".join(results))

    def interval(self) -> None:
        """The estimate and its interval."""
        row, add, fmt = self.row, self.add, self.fmt
        est, lo, hi = row.estimate, row.lower, row.upper
        if self.measure == "RD":
            for fld in ("estimate", "lower", "upper"):
                v = getattr(row, fld)
                if v is not None and abs(v) > 1.0:
                    add(fld, ERROR, "rd_over_one", value=fmt(fld))
        if self.ratio:
            for fld, what in (
                ("estimate", "estimate"),
                ("lower", "lower limit"),
                ("upper", "upper limit"),
            ):
                v = getattr(row, fld)
                if v is not None and v <= 0:
                    add(
                        fld,
                        ERROR,
                        "ratio_not_positive",
                        what=what,
                        value=fmt(fld),
                        measure_name=self.name,
                    )
        limits_ok = False
        if lo is not None and hi is not None:
            if lo > hi:
                add("lower", ERROR, "limits_reversed", lower=fmt("lower"), upper=fmt("upper"))
            elif lo == hi:
                add("lower", ERROR, "limits_equal", lower=fmt("lower"))
            else:
                limits_ok = True
        elif (lo is None) != (hi is None) and not ({"lower", "upper"} & set(self.unread)):
            add(
                "upper" if hi is None else "lower",
                WARNING,
                "partial_ci",
                given="lower" if lo is not None else "upper",
            )
        if (lo is not None or hi is not None) and est is None and "estimate" not in self.unread:
            add("estimate", WARNING, "ci_without_estimate")
        if est is not None and limits_ok:
            assert lo is not None and hi is not None
            if est < lo or est > hi:
                add(
                    "estimate",
                    ERROR,
                    "estimate_outside",
                    estimate=fmt("estimate"),
                    lower=fmt("lower"),
                    upper=fmt("upper"),
                )
            elif not self.ratio or (est > 0 and lo > 0):
                self.out.extend(
                    _symmetry_problems(row, self.measure, self.index, self.pr, self.place)
                )

    def counts_and_means(self) -> None:
        row, add, fmt, measure, name = self.row, self.add, self.fmt, self.measure, self.name
        unread = self.unread
        count_fields = ("int_events", "int_total", "ctl_events", "ctl_total")
        mean_fields = ("int_mean", "int_sd", "int_n", "ctl_mean", "ctl_sd", "ctl_n")
        given_counts = [f for f in count_fields if getattr(row, f) is not None]
        given_means = [f for f in mean_fields if getattr(row, f) is not None]
        if given_counts and len(given_counts) < 4:
            missing = ", ".join(
                f for f in count_fields if f not in given_counts and f not in unread
            )
            if missing:
                add(missing.split(", ")[0], WARNING, "partial_counts", missing=missing)
        if given_means and len(given_means) < 6:
            missing = ", ".join(f for f in mean_fields if f not in given_means and f not in unread)
            if missing:
                add(missing.split(", ")[0], WARNING, "partial_means", missing=missing)
        est, lo, hi = row.estimate, row.lower, row.upper
        has_estimate_route = est is not None and (
            (lo is not None and hi is not None) or row.se is not None or row.p is not None
        )
        if row.has_counts() and measure not in BINARY_MEASURES and not has_estimate_route:
            pass  # reported below as "nothing to analyse for this measure"
        elif row.has_counts() and measure not in BINARY_MEASURES:
            add("int_events", WARNING, "counts_unused", measure_name=name)
        if row.has_means() and measure not in CONTINUOUS_MEASURES and has_estimate_route:
            add("int_mean", WARNING, "means_unused", measure_name=name)
        if row.has_counts() and measure in ("OR", "RR"):
            a, n1, c, n0 = row.int_events, row.int_total, row.ctl_events, row.ctl_total
            if a == 0 and c == 0:
                add(
                    "int_events",
                    WARNING,
                    "double_zero",
                    int_total=fmt("int_total"),
                    ctl_total=fmt("ctl_total"),
                    measure_name=name,
                )
            elif a == n1 and c == n0 and (n1 or 0) > 0:
                add(
                    "int_events",
                    WARNING,
                    "all_events",
                    int_events=fmt("int_events"),
                    int_total=fmt("int_total"),
                    ctl_events=fmt("ctl_events"),
                    ctl_total=fmt("ctl_total"),
                    measure_name=name,
                )

    def p_only(self) -> None:
        """A P value as the only route."""
        row, add, fmt = self.row, self.add, self.fmt
        est, lo, hi = row.estimate, row.lower, row.upper
        only_p = (
            est is not None
            and row.p is not None
            and row.se is None
            and not (lo is not None and hi is not None)
        )
        if only_p and row.p is not None and 0.0 < row.p <= 1.0:
            assert est is not None
            null = 1.0 if self.ratio else 0.0
            if row.p_bound == ">":
                add("p", WARNING, "p_bound_unusable", p=fmt("p"))
            elif row.p_bound == "<":
                add("p", WARNING, "p_bound_approx", p=fmt("p"))
            if est == null:
                add("estimate", ERROR, "p_at_null", estimate=fmt("estimate"))
            elif row.p >= 0.9:
                add("p", ERROR if row.p == 1.0 else WARNING, "p_near_one", p=fmt("p"))

    def anything_to_analyse(self) -> None:
        """Is there anything to analyse? And a risk of bias we can read."""
        row, add, measure, name = self.row, self.add, self.measure, self.name
        routes = _routes(row, measure)
        if not routes and not self.unread:
            if row.has_counts() and measure not in BINARY_MEASURES:
                add(
                    "",
                    ERROR,
                    "no_route_for_measure",
                    measure_name=name,
                    why=f"counts cannot give the {name}",
                )
            elif row.has_means() and measure not in CONTINUOUS_MEASURES:
                add(
                    "",
                    ERROR,
                    "no_route_for_measure",
                    measure_name=name,
                    why=f"means and SDs cannot give the {name}",
                )
            else:
                add("", ERROR, "no_route")
        if (
            row.risk_of_bias is not None
            and row.risk_of_bias.strip().casefold() not in RISK_OF_BIAS_LEVELS
        ):
            add("risk_of_bias", WARNING, "risk_of_bias_unknown", value=row.risk_of_bias)


#: whole-number fields and what each counts (for the "negative" and "not whole" checks)
WHOLE_FIELDS = {
    "int_events": "events",
    "int_total": "total",
    "ctl_events": "events",
    "ctl_total": "total",
    "int_n": "number",
    "ctl_n": "number",
    "n": "number",
}


def lo_hi_given(row: StudyRow) -> bool:
    """True when the row has both limits of an interval."""
    return row.lower is not None and row.upper is not None


def _routes(row: StudyRow, measure: str) -> tuple[str, ...]:
    """The entry routes this row offers for the measure (before any value is checked)."""
    routes = []
    if row.estimate is not None:
        if row.lower is not None and row.upper is not None:
            routes.append("ci")
        if row.se is not None:
            routes.append("se")
        if row.p is not None and row.p_bound != ">":
            routes.append("p")
    if row.has_counts() and measure in BINARY_MEASURES:
        routes.append("counts")
    if row.has_means() and measure in CONTINUOUS_MEASURES:
        routes.append("means")
    return tuple(routes)


def _symmetry_problems(
    row: StudyRow, measure: str, index: int, pr: Mapping[str, str], place: str = ""
) -> list[Problem]:
    est, lo, hi = row.estimate, row.lower, row.upper
    assert est is not None and lo is not None and hi is not None
    decimals = interval_decimals(
        (est, lo, hi), (pr.get("estimate"), pr.get("lower"), pr.get("upper"))
    )
    sym = symmetry(est, lo, hi, measure, decimals)
    name = MEASURE_NAMES[measure]
    values = {
        "estimate": _fmt(est, pr, "estimate"),
        "lower": _fmt(lo, pr, "lower"),
        "upper": _fmt(hi, pr, "upper"),
        "measure_name": name,
        "implied": _fmt_like(sym.implied, decimals[0]),
    }
    if measure in RATIO_MEASURES:
        if sym.log_ok is False:
            code = "ratio_linear_symmetric" if sym.linear_ok else "ratio_asymmetric"
            return [_problem(index, row, "estimate", WARNING, code, place, **values)]
        return []
    if not sym.linear_ok:
        code = "difference_log_symmetric" if sym.log_ok else "difference_asymmetric"
        return [_problem(index, row, "estimate", WARNING, code, place, **values)]
    return []


# -- many rows ------------------------------------------------------------------------


def check_rows(
    rows: Sequence[StudyRow],
    measure: str,
    ci_level: float = 95.0,
    *,
    printed: Sequence[Mapping[str, str]] | None = None,
    places: Sequence[str] | None = None,
) -> tuple[Problem, ...]:
    """Check every row, the review's CI level, and rows entered twice.

    Parameters
    ----------
    rows : sequence of StudyRow
    measure : str
        One of MEASURES.
    ci_level : float
        The review's CI level in percent.
    printed : sequence of mappings, optional
        For each row, field -> number as printed (same order as ``rows``).
    places : sequence of str, optional
        For each row, where it came from in the file ("spreadsheet row 5"; "" unknown).

    Returns
    -------
    tuple of Problem
        In row order. A review CI level outside (50, 99.99) is reported on each row
        that has an interval without a level of its own.
    """
    out: list[Problem] = []
    clean = clean_count_rows(rows, measure)
    bounds = (LEVEL_MIN, LEVEL_MAX)
    for other in (
        clean_estimate_rows(rows, measure, ci_level, bounds, printed),
        clean_means_rows(rows, measure),
    ):
        clean = [a or b for a, b in zip(clean, other, strict=True)]
    twice = entered_twice(rows)
    # only the rows with something to say: not cleared together, or a repeat
    for i in sorted({i for i, ok in enumerate(clean) if not ok}.union(twice)):
        row = rows[i]
        place = places[i] if places is not None and i < len(places) else ""
        if not clean[i]:
            pr = printed[i] if printed is not None and i < len(printed) else None
            out.extend(check_row(row, measure, ci_level, index=i, printed=pr, place=place))
        if i in twice:
            text = M.where(i, row.study, "", place) + M.check_message(
                "duplicate", other=twice[i] + 1
            )
            out.append(Problem(i, row.study, "", WARNING, text, "duplicate"))
    return tuple(out)


_ROW_FIELDS = tuple(f.name for f in fields(StudyRow))


def _entry_key(row: StudyRow) -> tuple:
    """What makes two rows the same entry: ``row.to_dict()`` as sorted (field, repr)."""
    items = []
    for name in _ROW_FIELDS:
        value = getattr(row, name)
        if name == "unread":
            if value:
                items.append(("unread", repr(dict(value))))
            continue
        if value is None or (name == "exclude" and value is False):
            continue
        if name == "reported" and value is True:
            continue
        items.append((name, repr(value)))
    return tuple(sorted(items))


def entered_twice(rows: Sequence[StudyRow]) -> dict[int, int]:
    """Row -> the earlier row it repeats (same entry in every field; a row with neither a
    label nor an estimate is never called a repeat)."""
    # rows can be the same entry only if they have the same label and these few fields
    # print the same: compare whole entries only within such groups
    by_label: dict[object, list[int]] = {}
    for i, study in enumerate(map(_study, rows)):
        by_label.setdefault(study, []).append(i)
    out: dict[int, int] = {}
    for same_label in by_label.values():
        if len(same_label) < 2:
            continue
        groups: dict[tuple, list[int]] = {}
        for i in same_label:
            r = rows[i]
            quick = (repr(r.int_events), repr(r.estimate), repr(r.int_total))
            groups.setdefault(quick, []).append(i)
        for members in groups.values():
            if len(members) < 2:
                continue
            seen: dict[tuple, int] = {}
            for i in members:
                key = _entry_key(rows[i])
                if key in seen and (rows[i].study or rows[i].estimate is not None):
                    out[i] = seen[key]
                else:
                    seen.setdefault(key, i)
    return out


_study = operator.attrgetter("study")
