"""Per-study effect sizes and their standard errors, derived from what a paper printed.

:func:`derive` turns one :class:`~lopside.model.review.StudyRow` (natural scale, as
printed) into an effect ``y`` on the analysis scale (natural log for OR, RR and HR) and
its standard error ``se``, and says in plain words how it got there.

Route priority
--------------
When a row offers more than one way in, the first usable route in this order is taken:

1. ``"counts"`` - 2x2 counts per arm (OR, RR and RD only);
2. ``"means"`` - means, SDs and sizes per arm (MD and SMD only);
3. ``"ci"`` - estimate with its confidence interval;
4. ``"se"`` - estimate with its standard error;
5. ``"p"`` - estimate with its two-sided P value (test-based SE).

Raw data come first because they need no assumption about how the paper built its
interval. A route that is entered but unusable (say events larger than the arm total)
is reported in ``problems`` and the next route is tried; routes that were entered but
not needed are named in ``notes``. There are no cross-conversions: an estimate is taken
to be of the review's measure, and a row that offers nothing for that measure gets
``y = None`` with a problem naming what to enter.

Choices made here (documented so the appraisal sheet can repeat them)
----------------------------------------------------------------------
* Zero cells: 0.5 is added to all four cells of a table with a zero cell, and only to
  such tables, before the log odds ratio or log risk ratio (common practice).
* Tables with no events in either arm (double zero), or with events in every
  participant of both arms, say nothing about a ratio: ``y = None`` for OR and RR.
  The risk difference is still computed; when its variance is zero (no variation in
  either arm) 0.5 is added to every cell for the variance only.
* Hedges' g uses the pooled SD and the small-sample factor J, exact
  (Gamma(m/2) / (sqrt(m/2) Gamma((m-1)/2)), m = n1 + n0 - 2) or approximate
  (1 - 3/(4m - 1)). Its variance is the large-sample one of Hedges & Olkin (1985),
  Var(g) = N/(n1 n0) + g^2/(2N). The modified SE of Pustejovsky & Rodgers (2019),
  sqrt(1/n1 + 1/n0), which does not depend on g, is stored as ``se_modified``.
* Standard errors from a CI: (U - L) / (2 q) on the analysis scale (limits logged
  first for ratio measures; Cochrane Handbook 5.1 section 7.7.7.3), where q is the
  normal quantile or, with ``ci_method="t"``, the t quantile with n1 + n0 - 2 degrees
  of freedom (n - 2 when only the total is known). ``ci_method="auto"`` uses t when
  every arm has fewer than 60 participants (Handbook 5.1 section 7.7.3.2 rule of
  thumb), but only for MD and SMD: that rule is about intervals for means, while
  intervals for ratios and risk differences are normally Wald (z) intervals.
* Standard errors from P (Handbook 5.1 section 7.7.7.2): z = Phi^-1(1 - P/2) (or the
  t quantile), SE = |y| / z. "P < x" uses the boundary x and marks the SE approximate.

* Effects larger than 1e12 in size on the analysis scale, and SEs outside 1e-12 to 1e12,
  are reported and not used: their squares and weights overflow the pooled sums, and
  such numbers are typing or unit errors, not data. So are 2x2 group totals above 1e9.

:func:`derive` never raises for any row: non-finite or impossible numbers give
``y = se = None`` (or a fallback route) and a plain-language entry in ``problems``.
It ignores ``row.exclude``; leaving studies out is the caller's decision.
"""

from __future__ import annotations

import math
import numbers
from collections.abc import Iterable
from dataclasses import dataclass

from lopside.model.review import (
    BINARY_MEASURES,
    CONTINUOUS_MEASURES,
    MEASURES,
    RATIO_MEASURES,
    StudyRow,
)

from .derived import (  # noqa: F401 - Derived, hedges_j and the limits are this module's API
    _MEASURE_WORDS,
    ASYMMETRY_NOTE,
    AUTO_T_ARM_SIZE,
    MAX_ABS_EFFECT,
    MAX_ARM_TOTAL,
    MAX_SE,
    MIN_SE,
    Derived,
    _fmt,
    _t_quantile,
    _z_quantile,
    hedges_j,
)
from .derived_batch import batch_rows
from .derived_rows import columns_of

ROUTES: tuple[str, ...] = ("counts", "means", "ci", "se", "p")
ROUTE_NAMES: dict[str, str] = {
    "counts": "2x2 counts",
    "means": "means and SDs",
    "ci": "estimate with CI",
    "se": "estimate with SE",
    "p": "estimate with P value",
}
CI_METHODS: tuple[str, ...] = ("z", "t", "auto")
SMD_CORRECTIONS: tuple[str, ...] = ("exact", "approx")

#: P at or above this gives z close to 0 and an unbounded SE.
P_TOO_LARGE = 0.999
#: P at or below this was probably rounded, so the SE is only roughly known.
P_ROUNDED = 0.001

# --------------------------------------------------------------------------------------
# small helpers


class _RouteFailed(Exception):
    """Internal: a route could not be used; ``final`` stops the fallback to later routes."""

    def __init__(self, problem: str, *, final: bool = False) -> None:
        super().__init__(problem)
        self.problem = problem
        self.final = final


@dataclass(slots=True)
class _Work:
    """Mutable scratch state while one row is derived."""

    problems: list[str]
    notes: list[str]
    approximate: bool = False
    corrected: bool = False
    df: float | None = None


def _num(value: object, name: str, work: _Work) -> float | None:
    """A finite float from a row field, or ``None`` (with a problem when it is unusable)."""
    if value is None:
        return None
    # numbers.Real also admits numpy scalars, which arrive from table readers
    if isinstance(value, bool) or not isinstance(value, numbers.Real):
        work.problems.append(f"{name}: {value!r} is not a number; enter a number or leave it blank")
        return None
    try:
        x = float(value)
    except OverflowError:  # an int beyond the float range
        x = math.inf
    if not math.isfinite(x):
        work.problems.append(f"{name}: {value!r} is not a finite number; enter the value printed")
        return None
    return x


# --------------------------------------------------------------------------------------
# arm sizes and the t/z decision


def _arm_sizes(row: StudyRow, measure: str, work: _Work) -> tuple[float | None, float | None]:
    """Arm sizes from the counts' totals or the per-arm sizes (whichever suits the measure)."""
    pairs = [("int_total", "ctl_total"), ("int_n", "ctl_n")]
    if measure in CONTINUOUS_MEASURES:
        pairs.reverse()
    for f1, f0 in pairs:
        scratch = _Work([], [])
        n1 = _num(getattr(row, f1), f1, scratch)
        n0 = _num(getattr(row, f0), f0, scratch)
        if n1 is not None and n0 is not None and n1 > 0 and n0 > 0:
            return n1, n0
    return None, None


def _quantile(
    upper_tail: float,
    measure: str,
    ci_method: str,
    n1: float | None,
    n0: float | None,
    n_total: float | None,
    work: _Work,
) -> tuple[float, str]:
    """The z or t quantile for ``upper_tail`` and a short description ("z" or "t(45)")."""
    use_t = ci_method == "t"
    df: float | None = None
    if n1 is not None and n0 is not None:
        df = n1 + n0 - 2.0
    elif n_total is not None:
        df = n_total - 2.0
    if ci_method == "auto":
        if measure not in CONTINUOUS_MEASURES:
            use_t = False
        elif n1 is not None and n0 is not None:
            use_t = n1 < AUTO_T_ARM_SIZE and n0 < AUTO_T_ARM_SIZE
        elif n_total is not None:
            use_t = n_total < 2 * AUTO_T_ARM_SIZE
            if use_t:
                work.notes.append(
                    "arm sizes not entered: arms taken to be about equal when choosing a "
                    "t-based interval"
                )
        else:
            work.notes.append("no sample sizes entered: the interval is taken to be z-based")
    if use_t:
        if df is None or not df >= 1:
            work.problems.append(
                "t-based SE asked for but the sample sizes needed for its degrees of freedom "
                "are missing or too small; a z-based SE was used instead (enter the arm sizes)"
            )
            work.approximate = True
        else:
            work.df = df
            return _t_quantile(upper_tail, df), f"t({_fmt(df)})"
    return _z_quantile(upper_tail), "z"


# --------------------------------------------------------------------------------------
# the routes


def _counts_present(row: StudyRow) -> bool:
    return row.has_counts()


def _read_counts(row: StudyRow, work: _Work) -> tuple[float, float, float, float] | None:
    """Valid counts (a, b, c, d) or ``None`` with a problem."""
    vals = [
        _num(getattr(row, f), f, work)
        for f in ("int_events", "int_total", "ctl_events", "ctl_total")
    ]
    if any(v is None for v in vals):
        return None
    e1, t1, e0, t0 = vals  # type: ignore[misc]
    for name, events, total in (("intervention", e1, t1), ("control", e0, t0)):
        if total <= 0:
            work.problems.append(f"{name} arm: the total must be more than 0 (check the row)")
            return None
        if total > MAX_ARM_TOTAL:
            work.problems.append(
                f"{name} arm: the total ({_fmt(total)}) is larger than any study "
                f"(more than {MAX_ARM_TOTAL:.0e}); check the row"
            )
            return None
        if events < 0:
            work.problems.append(f"{name} arm: events cannot be negative (check the row)")
            return None
        if events > total:
            work.problems.append(
                f"{name} arm: events ({_fmt(events)}) are more than the total ({_fmt(total)}); "
                "check that events and totals are not swapped"
            )
            return None
    return e1, t1 - e1, e0, t0 - e0


def _from_counts(
    measure: str, counts: tuple[float, float, float, float], work: _Work
) -> tuple[float, float, str]:
    a, b, c, d = counts
    n1, n0 = a + b, c + d
    words = _MEASURE_WORDS[measure]
    if measure in RATIO_MEASURES:
        if a == 0 and c == 0:
            raise _RouteFailed("no events in either arm: left out of ratio analyses", final=True)
        if b == 0 and d == 0:
            raise _RouteFailed(
                "every participant in both arms had the event: left out of ratio analyses",
                final=True,
            )
        text = f"{words} from 2x2 counts"
        if min(a, b, c, d) == 0:
            a, b, c, d = a + 0.5, b + 0.5, c + 0.5, d + 0.5
            n1, n0 = n1 + 1.0, n0 + 1.0
            work.corrected = True
            text += "; 0.5 added to every cell (zero cell)"
        if measure == "OR":
            y = math.log(a * d / (b * c))
            var = 1 / a + 1 / b + 1 / c + 1 / d
        else:
            y = math.log((a / n1) / (c / n0))
            var = 1 / a - 1 / n1 + 1 / c - 1 / n0
        return y, var, text
    # risk difference: no correction for the estimate
    y = a / n1 - c / n0
    var = a * b / n1**3 + c * d / n0**3
    text = f"{words} from 2x2 counts"
    if var <= 0:
        a2, b2, c2, d2 = a + 0.5, b + 0.5, c + 0.5, d + 0.5
        var = a2 * b2 / (a2 + b2) ** 3 + c2 * d2 / (c2 + d2) ** 3
        work.corrected = True
        text += "; 0.5 added to every cell for the variance only (no variation within either arm)"
    return y, var, text


def _means_present(row: StudyRow) -> bool:
    return row.has_means()


def _from_means(
    row: StudyRow, measure: str, smd_correction: str, work: _Work
) -> tuple[float, float, str]:
    names = ("int_mean", "int_sd", "int_n", "ctl_mean", "ctl_sd", "ctl_n")
    vals = [_num(getattr(row, f), f, work) for f in names]
    if any(v is None for v in vals):
        raise _RouteFailed("a value is missing or not a usable number")
    m1, s1, n1, m0, s0, n0 = vals  # type: ignore[misc]
    for label, s, n in (("intervention", s1, n1), ("control", s0, n0)):
        if s < 0:
            raise _RouteFailed(f"{label} arm: the SD cannot be negative (check the row)")
        if n < 2:
            raise _RouteFailed(
                f"{label} arm: an SD needs at least 2 participants (n = {_fmt(n)}); check the row"
            )
    if measure == "MD":
        return m1 - m0, s1 * s1 / n1 + s0 * s0 / n0, "mean difference from means and SDs"
    m = n1 + n0 - 2.0
    sp2 = ((n1 - 1) * s1 * s1 + (n0 - 1) * s0 * s0) / m
    if not sp2 > 0:
        raise _RouteFailed("both SDs are 0, so a standardised difference cannot be formed")
    dval = (m1 - m0) / math.sqrt(sp2)
    j = hedges_j(m, exact=smd_correction == "exact")
    g = j * dval
    big_n = n1 + n0
    var = big_n / (n1 * n0) + g * g / (2.0 * big_n)
    kind = "exact" if smd_correction == "exact" else "approximate"
    text = (
        f"Hedges' g from means and SDs (pooled SD; {kind} small-sample factor "
        f"J = {j:.4f}; large-sample variance)"
    )
    return g, var, text


def _ci_present(row: StudyRow) -> bool:
    return row.estimate is not None and row.lower is not None and row.upper is not None


def _level(row: StudyRow, ci_level: float, work: _Work) -> float:
    level = _num(row.level, "level", work) if row.level is not None else None
    if level is None:
        level = ci_level
    elif 0 < level < 1:
        work.notes.append(f"CI level {_fmt(level)} read as {_fmt(level * 100)}%")
        level *= 100
    if not 0 < level < 100:
        raise _RouteFailed(
            f"CI level {_fmt(level)}% is not between 0 and 100; enter the level printed (e.g. 95)"
        )
    return level


def _from_ci(
    row: StudyRow,
    measure: str,
    ci_level: float,
    ci_method: str,
    sizes: tuple[float | None, float | None, float | None],
    work: _Work,
) -> tuple[float, float, str]:
    est = _num(row.estimate, "estimate", work)
    lo = _num(row.lower, "lower", work)
    hi = _num(row.upper, "upper", work)
    if est is None or lo is None or hi is None:
        raise _RouteFailed("a value is missing or not a usable number")
    level = _level(row, ci_level, work)
    if not lo < hi:
        raise _RouteFailed(
            f"CI: the lower limit ({_fmt(lo)}) must be below the upper limit ({_fmt(hi)})"
        )
    if not lo <= est <= hi:
        raise _RouteFailed(
            f"CI: the estimate ({_fmt(est)}) lies outside its interval "
            f"({_fmt(lo)} to {_fmt(hi)}); check for a typo"
        )
    scale = ""
    if measure in RATIO_MEASURES:
        if min(est, lo, hi) <= 0:
            raise _RouteFailed(
                f"the {_MEASURE_WORDS[measure][4:]} and its limits must be above 0 "
                "(enter them as printed, not as logs)"
            )
        est, lo, hi = math.log(est), math.log(lo), math.log(hi)
        scale = " on the log scale"
    n1, n0, n_total = sizes
    q, qname = _quantile((1 - level / 100) / 2, measure, ci_method, n1, n0, n_total, work)
    divisor = 2 * q
    se = (hi - lo) / divisor
    kind = "z-based" if qname == "z" else f"t-based, df = {_fmt(work.df or 0)}"
    if se > 0 and abs(est - (lo + hi) / 2) > ASYMMETRY_NOTE * se:
        work.notes.append(
            f"the interval is not symmetric about the estimate{scale} (more than rounding "
            "would explain); it may not be a normal-theory interval, or a number may be "
            "mistyped"
        )
    text = f"SE from the {_fmt(level)}% CI{scale} ({kind}, divisor {divisor:.2f})"
    return est, se * se, text


def _se_present(row: StudyRow) -> bool:
    return row.estimate is not None and row.se is not None


def _log_estimate(est: float, measure: str) -> float:
    if measure in RATIO_MEASURES:
        if est <= 0:
            raise _RouteFailed(
                f"the {_MEASURE_WORDS[measure][4:]} must be above 0 "
                "(enter it as printed, not as a log)"
            )
        return math.log(est)
    return est


def _from_se(row: StudyRow, measure: str, work: _Work) -> tuple[float, float, str]:
    est = _num(row.estimate, "estimate", work)
    se = _num(row.se, "se", work)
    if est is None or se is None:
        raise _RouteFailed("a value is missing or not a usable number")
    if not se > 0:
        raise _RouteFailed(f"the SE must be more than 0 (entered {_fmt(se)})")
    y = _log_estimate(est, measure)
    _check_magnitude(y, se, measure)  # before squaring: 1e-300 squared is 0
    scale = " (taken to be on the log scale)" if measure in RATIO_MEASURES else ""
    return y, se * se, f"SE as entered{scale}"


def _p_present(row: StudyRow) -> bool:
    return row.estimate is not None and row.p is not None


def _from_p(
    row: StudyRow,
    measure: str,
    ci_method: str,
    sizes: tuple[float | None, float | None, float | None],
    work: _Work,
) -> tuple[float, float, str]:
    est = _num(row.estimate, "estimate", work)
    p = _num(row.p, "p", work)
    if est is None or p is None:
        raise _RouteFailed("a value is missing or not a usable number")
    bound = (row.p_bound or "").strip() if isinstance(row.p_bound, str) else ""
    if bound in (">", ">=", "≥"):
        raise _RouteFailed(f"P {bound} {_fmt(p)} gives no SE; ask for (or read off) the CI instead")
    if bound not in ("", "=", "<", "<=", "≤"):
        raise _RouteFailed(f"P bound {row.p_bound!r} not understood; use '<' or leave it blank")
    if not 0 < p <= 1:
        if p == 0:
            raise _RouteFailed(
                "P printed as 0 gives no SE; enter the CI, or the bound printed (e.g. P < 0.001)"
            )
        raise _RouteFailed(f"P must be between 0 and 1 (entered {_fmt(p)})")
    y = _log_estimate(est, measure)
    if y == 0:
        raise _RouteFailed("an estimate of no effect gives no SE from its P value; ask for the CI")
    if p >= P_TOO_LARGE:
        raise _RouteFailed(f"P = {_fmt(p)} is too close to 1 to give an SE; ask for the CI")
    n1, n0, n_total = sizes
    q, qname = _quantile(p / 2, measure, ci_method, n1, n0, n_total, work)
    se = abs(y) / q
    bounded = bound in ("<", "<=", "≤")
    if bounded:
        work.approximate = True
        work.problems.append(
            f"P < {_fmt(p)} was taken as P = {_fmt(p)}: the SE is approximate (an upper bound)"
        )
        ptext = f"P < {_fmt(p)}, taken as P = {_fmt(p)}"
    else:
        ptext = f"P = {_fmt(p)}"
        if p <= P_ROUNDED:
            work.approximate = True
            work.problems.append(
                f"P = {_fmt(p)} is probably rounded, so the SE from it is approximate; "
                "enter the CI if the paper gives one"
            )
    stat = "z" if qname == "z" else qname
    text = f"SE from {ptext} (test-based, {stat} = {q:.3f})"
    return y, se * se, text


# --------------------------------------------------------------------------------------
# public functions


def derive(
    row: StudyRow,
    measure: str,
    *,
    ci_level: float = 95.0,
    ci_method: str = "z",
    smd_correction: str = "exact",
) -> Derived:
    """Derive the analysis-scale effect and SE of one study.

    Parameters
    ----------
    row : StudyRow
        The study as entered (natural scale).
    measure : str
        One of ``OR, RR, HR, RD, MD, SMD``.
    ci_level : float
        CI level in percent used when ``row.level`` is blank.
    ci_method : {"z", "t", "auto"}
        How an interval or P value was computed in the paper (see the module docstring).
    smd_correction : {"exact", "approx"}
        Form of Hedges' J for SMDs.

    Returns
    -------
    Derived
        Never raises for bad row data; see ``problems``.

    Raises
    ------
    ValueError
        For an unknown ``ci_method`` or ``smd_correction`` (a programming error, not data).
    """
    if ci_method not in CI_METHODS:
        raise ValueError(f"ci_method must be one of {CI_METHODS}, not {ci_method!r}")
    if smd_correction not in SMD_CORRECTIONS:
        raise ValueError(f"smd_correction must be one of {SMD_CORRECTIONS}, not {smd_correction!r}")
    if not getattr(row, "reported", True):
        # a trial that never reported results: no effect to derive, and nothing missing
        # (its size feeds the missing-trial scenarios; the row check covers its entry)
        return Derived(
            route_text="never reported: used only in the missing-trial scenarios",
            notes=("never reported: only its size is used, in the missing-trial scenarios",),
        )
    try:
        return _derive(row, measure, ci_level, ci_method, smd_correction)
    except Exception as exc:
        # last line of defence: bad data must never raise (tests check this is not reached)
        return Derived(
            problems=(
                f"the numbers in this row could not be used ({type(exc).__name__}); "
                "check every value",
            )
        )


def _counts_of(row: StudyRow):
    """(counts, double zero?, arcsine difference, its variance) of a row's 2x2 counts."""
    counts: tuple[float, float, float, float] | None = None
    double_zero = False
    asd = asd_var = None
    if _counts_present(row):
        scratch = _Work([], [])
        counts = _read_counts(row, scratch)
        if counts is not None:
            a, b, c, d = counts
            n1c, n0c = a + b, c + d
            double_zero = a == 0 and c == 0
            asd = math.asin(math.sqrt(a / n1c)) - math.asin(math.sqrt(c / n0c))
            asd_var = 1 / (4 * n1c) + 1 / (4 * n0c)
    return counts, double_zero, asd, asd_var


def _sizes_of(row: StudyRow, measure: str, work: _Work):
    """(intervention, control, total) participants; a total that is not positive is
    noted and left out."""
    n1, n0 = _arm_sizes(row, measure, work)
    scratch = _Work([], [])
    n_given = _num(row.n, "n", scratch)
    n_total = n_given if n_given is not None and n_given > 0 else None
    if row.n is not None and n_total is None:
        work.notes.append("n: the total is not a positive number, so it was not used")
    if n_total is None and n1 is not None and n0 is not None:
        n_total = n1 + n0
    return n1, n0, n_total


def _routes_present(row: StudyRow, measure: str) -> list[str]:
    """The entry routes this row fills, in the order they are tried."""
    present = []
    if measure in BINARY_MEASURES and _counts_present(row):
        present.append("counts")
    if measure in CONTINUOUS_MEASURES and _means_present(row):
        present.append("means")
    if _ci_present(row):
        present.append("ci")
    if _se_present(row):
        present.append("se")
    if _p_present(row):
        present.append("p")
    return present


def _derive(
    row: StudyRow, measure: str, ci_level: float, ci_method: str, smd_correction: str
) -> Derived:
    work = _Work([], [])
    if measure not in MEASURES:
        return Derived(problems=(f"unknown effect measure {measure!r}; use one of {MEASURES}",))

    # counts and arm sizes are recorded whatever route gives y (Peters' test, axes)
    counts, double_zero, asd, asd_var = _counts_of(row)
    n1, n0, n_total = _sizes_of(row, measure, work)
    sizes = (n1, n0, n_total)
    present = _routes_present(row, measure)

    y = var = None
    route = text = ""
    excluded_from_ratio = False
    for i, key in enumerate(present):
        # each attempt gets its own scratch state so a failed route leaves no trace but
        # its own explanation
        local = _Work([], [])
        try:
            if key == "counts":
                if counts is None:
                    _read_counts(row, local)
                    reason = "; ".join(local.problems) or "the counts are not usable"
                    local.problems.clear()
                    raise _RouteFailed(reason)
                y, var, text = _from_counts(measure, counts, local)
            elif key == "means":
                y, var, text = _from_means(row, measure, smd_correction, local)
            elif key == "ci":
                y, var, text = _from_ci(row, measure, ci_level, ci_method, sizes, local)
            elif key == "se":
                y, var, text = _from_se(row, measure, local)
            else:
                y, var, text = _from_p(row, measure, ci_method, sizes, local)
            if not (math.isfinite(y) and math.isfinite(var) and var > 0):
                raise _RouteFailed("the numbers give no finite effect and SE (check the row)")
            _check_magnitude(y, math.sqrt(var), measure)
        except (_RouteFailed, ArithmeticError, ValueError) as failed:
            y = var = None
            if isinstance(failed, _RouteFailed) and failed.final:
                excluded_from_ratio = True
                work.problems.append(failed.problem)
                break
            reason = (
                failed.problem
                if isinstance(failed, _RouteFailed)
                else "the numbers give no finite effect and SE (check the row)"
            )
            work.problems.append(
                f"{ROUTE_NAMES[key]} not used: " + "; ".join([*local.problems, reason])
            )
            continue
        route = key
        work.problems.extend(local.problems)
        work.notes.extend(local.notes)
        work.approximate = local.approximate
        work.corrected = local.corrected
        work.df = local.df
        unused = present[i + 1 :]
        if unused:
            work.notes.append(
                "also entered but not used: " + ", ".join(ROUTE_NAMES[k] for k in unused)
            )
        break

    if not route and not excluded_from_ratio:
        work.problems.append(_what_to_enter(measure, present))

    se_modified = None
    if measure == "SMD" and n1 is not None and n0 is not None:
        # arm sizes far below one participant (a typo such as 5e-324) overflow 1/n
        inv = 1 / n1 + 1 / n0
        se_modified = math.sqrt(inv) if math.isfinite(inv) else None

    return Derived(
        y=y if route else None,
        se=math.sqrt(var) if route and var is not None else None,
        route=route,
        route_text=text if route else "",
        problems=tuple(work.problems),
        notes=tuple(work.notes),
        approximate=work.approximate if route else False,
        corrected=work.corrected if route else False,
        double_zero=double_zero,
        a=counts[0] if counts else None,
        b=counts[1] if counts else None,
        c=counts[2] if counts else None,
        d=counts[3] if counts else None,
        n1=n1,
        n0=n0,
        n_total=n_total,
        df=work.df if route else None,
        se_modified=se_modified,
        asd=asd,
        asd_var=asd_var,
    )


def _check_magnitude(y: float, se: float, measure: str) -> None:
    """Refuse effects and SEs too extreme to compute with (see :data:`MAX_ABS_EFFECT`)."""
    words = _MEASURE_WORDS[measure]
    if abs(y) > MAX_ABS_EFFECT:
        raise _RouteFailed(
            f"the {words} ({y:.3g}) is too large to analyse (more than {MAX_ABS_EFFECT:.0e} "
            "in size); check the value and its units"
        )
    if se < MIN_SE:
        raise _RouteFailed(
            f"the SE ({se:.3g}) is too small to analyse (below {MIN_SE:.0e}); check the value "
            "and its units"
        )
    if se > MAX_SE:
        raise _RouteFailed(
            f"the SE ({se:.3g}) is too large to analyse (above {MAX_SE:.0e}); check the value "
            "and its units"
        )


def _what_to_enter(measure: str, present: list[str]) -> str:
    options = []
    if measure in BINARY_MEASURES:
        options.append("events and totals for both arms")
    if measure in CONTINUOUS_MEASURES:
        options.append("mean, SD and n for both arms")
    options.append("the estimate with its CI limits")
    options.append("the estimate with its SE or P value")
    lead = "nothing entered gives" if not present else "no entered route gives"
    return f"{lead} a usable {_MEASURE_WORDS[measure]}: enter " + ", or ".join(options)


def derive_all(rows: Iterable[StudyRow], measure: str, **kw: object) -> tuple[Derived, ...]:
    """:func:`derive` for every row, in order.

    Parameters
    ----------
    rows : iterable of StudyRow
    measure : str
    **kw
        Passed to :func:`derive` (``ci_level``, ``ci_method``, ``smd_correction``).

    Returns
    -------
    tuple of Derived

    Rows entered by one clean route (2x2 counts, an estimate with its SE or CI, or means
    and SDs) are derived together over arrays
    (:func:`lopside.stats.derived_batch.batch_rows`, the same numbers); the first row
    always takes the one-row path, so bad keyword arguments raise as before.
    """
    rows = tuple(rows)
    if not rows:
        return ()
    first = derive(rows[0], measure, **kw)  # type: ignore[arg-type]
    out: list[Derived | None] = [None] * len(rows)
    for idx, made in batch_rows(columns_of(rows), measure, **kw):  # type: ignore[arg-type]
        for i, d in zip(idx.tolist(), made, strict=True):
            out[i] = d
    out[0] = first
    for i in [i for i, d in enumerate(out) if d is None]:
        out[i] = derive(rows[i], measure, **kw)  # type: ignore[arg-type]
    return tuple(out)  # type: ignore[arg-type]
