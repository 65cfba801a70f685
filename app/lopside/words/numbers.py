"""How numbers and small phrases are written for people: the one place for every format.

The floor of the wording layers: :mod:`lopside.summary`, :mod:`lopside.appraise`,
:mod:`lopside.sheet` and :mod:`lopside.window` all format through here, so the terminal,
the window and the PDF print the same figures the same way (STYLE.md item 7). Effects
arrive on the analysis scale (natural log for ratio measures) and are printed on the
natural scale. A value that is absent or not finite prints as a dash, never as "nan".

Imports only the model and the statistics' result types (no summary, no appraise).
"""

from __future__ import annotations

import math
from typing import Any

from ..model.review import RATIO_MEASURES
from ..stats.results import NotComputable, PooledEstimate, is_pending

MINUS = "\u2212"
DASH = "\u2013"
#: Shown where a value is absent (not a number the engine produced).
MISSING = DASH

#: Plain names of the pooling models (keys used by the engine).
MODEL_NAMES: dict[str, str] = {
    "FE-IV": "Fixed effect (inverse variance)",
    "MH": "Fixed effect (Mantel-Haenszel)",
    "Peto": "Fixed effect (Peto)",
    "DL": "Random effects, DerSimonian-Laird τ²",
    "PM": "Random effects, Paule-Mandel τ²",
    "REML": "Random effects, REML τ²",
}
SHORT_MEASURE: dict[str, str] = {
    "OR": "odds ratio",
    "RR": "risk ratio",
    "HR": "hazard ratio",
    "RD": "risk difference",
    "MD": "mean difference",
    "SMD": "SMD",
}

# --------------------------------------------------------------------------------------
# Number formatting: the one place


def is_finite(x: Any) -> bool:
    if x is None or isinstance(x, bool):
        return False
    try:
        return math.isfinite(float(x))
    except (TypeError, ValueError):
        return False


def _minus(s: str) -> str:
    """True minus sign; "-0.00" becomes "0.00" (it would read as a negative effect)."""
    if s.startswith("-"):
        body = s[1:]
        try:
            if float(body.replace(",", "")) == 0.0:
                return body
        except ValueError:
            pass
        return MINUS + body
    return s


def fmt_num(x: Any, digits: int = 2) -> str:
    """A number with fixed decimals and a true minus sign; "–" when absent or not finite.

    Parameters
    ----------
    x : float or None
    digits : int
        Decimals.

    Returns
    -------
    str
    """
    if not is_finite(x):
        return MISSING
    return _minus(f"{float(x):.{digits}f}")


def fmt_int(x: Any) -> str:
    """A whole number with thousands separators ("1,820")."""
    if not is_finite(x):
        return MISSING
    return _minus(f"{int(round(float(x))):,}")


def fmt_effect(x: Any, measure: str, digits: int | None = None) -> str:
    """An effect given on the analysis scale, printed on the natural scale.

    Ratio measures (OR, RR, HR) are exponentiated and shown with 2 decimals (3 significant
    digits below 0.1, no decimals from 100 up, so that tiny or huge ratios are not shown as
    0.00 or 1234.57). Risk differences get 3 decimals, other measures 2.

    Parameters
    ----------
    x : float or None
        Value on the analysis scale (natural log for ratio measures).
    measure : str
        "OR", "RR", "HR", "RD", "MD" or "SMD".
    digits : int, optional
        Override the number of decimals.

    Returns
    -------
    str
    """
    if not is_finite(x):
        return MISSING
    x = float(x)
    if measure in RATIO_MEASURES:
        try:
            v = math.exp(x)
        except OverflowError:
            return "> 10^300"
        if digits is not None:
            return fmt_num(v, digits)
        if v >= 100:
            return fmt_int(v)
        if v < 0.1:
            return f"{v:.2g}" if v >= 1e-4 else f"{v:.1e}"
        return fmt_num(v, 2)
    if digits is None:
        digits = 3 if measure == "RD" else 2
    return fmt_num(x, digits)


def fmt_ci(lo: Any, hi: Any, measure: str) -> str:
    """An interval on the natural scale: "0.62 to 0.91" ("to" never clashes with a minus)."""
    if not (is_finite(lo) and is_finite(hi)):
        return MISSING
    return f"{fmt_effect(lo, measure)} to {fmt_effect(hi, measure)}"


def fmt_effect_ci(est: Any, lo: Any, hi: Any, measure: str) -> str:
    """ "0.62 (0.50 to 0.77)"."""
    if not is_finite(est):
        return MISSING
    if not (is_finite(lo) and is_finite(hi)):
        return fmt_effect(est, measure)
    return f"{fmt_effect(est, measure)} ({fmt_ci(lo, hi, measure)})"


def fmt_p(p: Any) -> str:
    """A p-value: 3 decimals, "< 0.001" below that, "–" when absent."""
    if not is_finite(p):
        return MISSING
    p = float(p)
    if p < 0.001:
        return "< 0.001"
    if p > 0.999:
        return "> 0.999"
    return f"{p:.3f}"


def fmt_p_eq(p: Any) -> str:
    """ "p = 0.034" or "p < 0.001" (for running text)."""
    s = fmt_p(p)
    if s[0] in "<>":
        return f"p {s}"
    return f"p = {s}"


def fmt_pct(x: Any, digits: int = 0) -> str:
    """A percentage given in percent units (I² = 45.2 -> "45%")."""
    if not is_finite(x):
        return MISSING
    return f"{fmt_num(x, digits)}%"


def fmt_share(x: Any, digits: int = 0) -> str:
    """A proportion (0-1) as a percentage (0.42 -> "42%")."""
    if not is_finite(x):
        return MISSING
    return fmt_pct(100.0 * float(x), digits)


def fmt_tau2(x: Any) -> str:
    """A between-study variance: 3 decimals, "0" when exactly zero, "< 0.001" when tiny."""
    if not is_finite(x):
        return MISSING
    x = float(x)
    if x == 0.0:
        return "0"
    if abs(x) < 0.001:
        return "< 0.001"
    if abs(x) >= 100:
        return fmt_num(x, 0)
    return fmt_num(x, 3)


def fmt_se(x: Any) -> str:
    """A standard error (analysis scale): 3 significant digits."""
    if not is_finite(x):
        return MISSING
    x = float(x)
    if x >= 100:
        return fmt_num(x, 0)
    if x < 0.001:
        return _minus(f"{x:.2g}")
    # three decimals below 1 so that a column of SEs lines up ("0.100 to 0.180")
    return fmt_num(x, 3) if x < 1 else fmt_num(x, 2)


def fmt_stat(x: Any, digits: int = 2) -> str:
    """A test statistic (t, z, tau, Q)."""
    return fmt_num(x, digits)


def fmt_df(df: Any) -> str:
    if not is_finite(df):
        return MISSING
    d = float(df)
    return f"{int(d)}" if d == int(d) else fmt_num(d, 1)


def plural(n: int, one: str, many: str | None = None) -> str:
    """ "1 study", "3 studies"."""
    return f"{n} {one if n == 1 else (many or one + 's')}"


def measure_word(measure: str) -> str:
    return SHORT_MEASURE.get(measure, measure)


def is_ok(x: Any) -> bool:
    """A usable engine result (not None, not NotComputable)."""
    return x is not None and not isinstance(x, NotComputable)


def why_not(x: Any, default: str = "not computed") -> str:
    """The reason a result is missing, in words."""
    if isinstance(x, NotComputable):
        return x.reason
    return default


#: the result column of a number the full stage has still to compute
UPDATING = "updating\u2026"


def missing_word(x: Any) -> str:
    """The result column of a missing result: "updating…" while the full stage runs,
    else "not computed" (the reason goes in its own column)."""
    return UPDATING if is_pending(x) else "not computed"


def pooled_text(p: PooledEstimate | Any, measure: str) -> str:
    """ "0.62 (0.50 to 0.77)" for a pooled estimate, or the reason it is missing."""
    if not isinstance(p, PooledEstimate):
        return why_not(p)
    return fmt_effect_ci(p.estimate, p.ci.low, p.ci.high, measure)


def _lower_first(s: str) -> str:
    return s[:1].lower() + s[1:]


def model_name(key: str, hksj: bool = False) -> str:
    base = MODEL_NAMES.get(key.removesuffix("+HKSJ"), key)
    if hksj or key.endswith("+HKSJ"):
        base += ", Hartung-Knapp interval"
    return base
