"""Helpers for the single-review path: whether the data meet a test's needs, the reason
when they do not, and the wrapping of a core's arrays into an :class:`AsymmetryResult`.
"""

from __future__ import annotations

import numpy as np

from lopside.model.review import MEASURE_NAMES
from lopside.stats.asymmetry.base import (
    DEFAULT_ALPHA,
    MSG_BEGG_FLAT,
    MSG_EXACT_FIT,
    MSG_NEEDS_COUNTS,
    MSG_NEEDS_SIZES,
    MSG_NUMERIC,
    MSG_SINGULAR,
    MSG_TOO_FEW,
    MSG_WRONG_MEASURE,
    NUMERIC,
    REGISTRY,
    SINGULAR,
    TOO_FEW,
    AsymmetryResult,
    TestArrays,
)
from lopside.stats.data import StudyData
from lopside.stats.results import NotComputable

# --------------------------------------------------------------------------------------
# Helpers for the single-review path


def _name(key: str) -> str:
    return REGISTRY[key].name


def _suits_words(suits: frozenset[str]) -> str:
    order = ("OR", "RR", "RD", "HR", "MD", "SMD")
    words = [MEASURE_NAMES[m].split(" (")[0] + "s" for m in order if m in suits]
    if len(words) == 1:
        return words[0]
    return ", ".join(words[:-1]) + " and " + words[-1]


def _has_counts(data: StudyData) -> bool:
    k = data.k
    return k > 0 and all(
        x.size == k and bool(np.all(np.isfinite(x))) for x in (data.a, data.b, data.c, data.d)
    )


def _has_arm_sizes(data: StudyData) -> bool:
    k = data.k
    if k == 0:
        return False
    if data.se_modified.size == k and bool(np.all(np.isfinite(data.se_modified))):
        return True
    return all(
        x.size == k and bool(np.all(np.isfinite(x)) and np.all(x > 0)) for x in (data.n1, data.n0)
    )


def needs_met(needs: str, data: StudyData) -> bool:
    """Whether ``data`` provides what a test with these ``needs`` requires."""
    if needs == "counts":
        return _has_counts(data)
    if needs == "sizes":
        return _has_arm_sizes(data)
    return data.k > 0


def precheck(key: str, data: StudyData) -> NotComputable | None:
    """NotComputable when the measure or the available data do not allow test ``key``."""
    spec = REGISTRY[key]
    if data.measure not in spec.suits:
        return NotComputable(
            MSG_WRONG_MEASURE.format(
                name=spec.name,
                suits=_suits_words(spec.suits),
                measure=MEASURE_NAMES.get(data.measure, data.measure),
            )
        )
    if not needs_met(spec.needs, data):
        msg = MSG_NEEDS_COUNTS if spec.needs == "counts" else MSG_NEEDS_SIZES
        if spec.needs == "se":
            return NotComputable(
                MSG_TOO_FEW.format(name=spec.name, qual="", k_used=0, verb="are", aside="")
            )
        return NotComputable(msg.format(name=spec.name))
    return None


def _label(data: StudyData, i: int) -> str:
    return data.labels[i] if i < len(data.labels) and data.labels[i] else f"Study {i + 1}"


def _fe_direction(y, v) -> float:
    y, v = np.asarray(y, dtype=float), np.asarray(v, dtype=float)
    ok = np.isfinite(y) & np.isfinite(v) & (v > 0)
    if not ok.any():
        return 0.0
    w = 1.0 / v[ok]
    return float((w * y[ok]).sum() / w.sum())


def format_p(p: float, alpha: float = DEFAULT_ALPHA) -> str:
    """'p = 0.03', 'p = 0.004', 'p < 0.001'; never rounds across ``alpha``."""
    if p < 0.001:
        return "p < 0.001"
    if p < 0.01:
        return f"p = {p:.3f}"
    text = f"{p:.2f}"
    if (float(text) < alpha) != (p < alpha) or float(text) == alpha:
        text = f"{p:.3f}"
    return f"p = {text}"


def _reading(p: float, bias: float, pooled: float, alpha: float) -> str:
    ptxt = format_p(p, alpha)
    if not p < alpha:
        return f"no clear sign of small-study effects ({ptxt})"
    if pooled == 0.0 or bias == 0.0:
        side = "more positive" if bias > 0 else "more negative"
        return f"small studies show {side} effects than large ones ({ptxt})"
    if np.sign(bias) == np.sign(pooled):
        return f"small studies show larger effects than large ones ({ptxt})"
    return (
        "small studies show smaller effects than large ones, the reverse of the usual "
        f"pattern ({ptxt})"
    )


def _not_computable(
    key: str,
    status: int,
    k_used: int,
    what: str = "standard error",
    n_dropped: int = 0,
) -> NotComputable:
    name = _name(key)
    if status == TOO_FEW:
        verb = "is" if k_used == 1 else "are"
        qual = " with usable data" if n_dropped else ""
        aside = f" ({n_dropped} set aside)" if n_dropped else ""
        return NotComputable(
            MSG_TOO_FEW.format(name=name, qual=qual, k_used=k_used, verb=verb, aside=aside)
        )
    if status == SINGULAR:
        return NotComputable(MSG_SINGULAR.format(name=name, what=what))
    if status == NUMERIC:
        return NotComputable(MSG_NUMERIC.format(name=name))
    if key == "begg":
        return NotComputable(MSG_BEGG_FLAT.format(name=name))
    return NotComputable(MSG_EXACT_FIT.format(name=name))


def _f(x) -> float | None:
    return None if x is None else float(np.asarray(x))


def _wrap(
    key: str,
    arr: TestArrays,
    *,
    tested: str,
    dropped: tuple[tuple[str, str], ...],
    method_note: str,
    what: str,
    pooled: float,
    alpha: float,
    name: str | None = None,
) -> AsymmetryResult:
    p = float(arr.pvalue)
    bias = float(arr.bias)
    return AsymmetryResult(
        key=key,
        name=name or _name(key),
        statistic=float(arr.statistic),
        pvalue=p,
        df=_f(arr.df),
        intercept=_f(arr.intercept),
        intercept_se=_f(arr.intercept_se),
        slope=_f(arr.slope),
        slope_se=_f(arr.slope_se),
        k_used=int(arr.k_used),
        dropped=dropped,
        method_note=method_note,
        what_is_tested=what,
        reading=_reading(p, bias, pooled, alpha),
        alpha=alpha,
        tested=tested,
        bias=bias,
        z=_f(arr.z),
        tau2=_f(arr.tau2),
    )


def _dropped_nonfinite(data: StudyData, y, se) -> tuple[np.ndarray, list[tuple[str, str]]]:
    use = np.isfinite(y) & np.isfinite(se) & (se > 0)
    dropped = [
        (_label(data, i), "no usable effect or standard error") for i in np.flatnonzero(~use)
    ]
    return use, dropped


def _t_note(df) -> str:
    return f"t test on {int(df)} degrees of freedom (residual variance estimated)"
