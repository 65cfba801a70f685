"""Small row builders shared by the summary tables and the readings.

:func:`adjustment_rows` is the single list the adjustments table, the Adjust view and the
appraisal's range all read, so a count of methods in a sentence always equals the rows.
"""

from __future__ import annotations

from typing import Any

from ..stats.results import PooledEstimate
from .numbers import (
    _lower_first,
    fmt_df,
    fmt_num,
    fmt_p_eq,
    fmt_stat,
    is_ok,
    model_name,
    plural,
    why_not,
)


def _test_result_text(t) -> str:
    if t.key == "begg" or t.tested == "tau":
        return f"Kendall's τ = {fmt_stat(t.statistic)}"
    if t.df is None:
        return f"z = {fmt_stat(t.statistic)}"
    return f"t = {fmt_stat(t.statistic)} ({fmt_df(t.df)} df)"


def recommended_key(result) -> str | None:
    rec = result.recommendation
    return rec.key if is_ok(rec) else None


def adjustment_rows(result) -> list[tuple[str, Any, Any, Any, str]]:
    """(method, estimate, low, high, note) on the analysis scale; estimate None if missing.

    The single list the adjustments table and the appraisal's range both read.
    """
    out: list[tuple[str, Any, Any, Any, str]] = []
    rnd = result.random
    if isinstance(rnd, PooledEstimate):
        out.append(
            (
                f"No adjustment ({_lower_first(model_name(rnd.model, rnd.hksj))})",
                rnd.estimate,
                rnd.ci.low,
                rnd.ci.high,
                "",
            )
        )
    tf = result.trim_fill
    if is_ok(tf):
        adj = tf.adjusted
        note = f"{plural(tf.k0, 'study', 'studies')} filled on the {tf.side}"
        if not tf.converged:
            note += "; did not settle"
        out.append(
            (
                f"Trim and fill ({tf.estimator})",
                adj.estimate if isinstance(adj, PooledEstimate) else None,
                adj.ci.low if isinstance(adj, PooledEstimate) else None,
                adj.ci.high if isinstance(adj, PooledEstimate) else None,
                note,
            )
        )
    else:
        out.append(("Trim and fill", None, None, None, why_not(tf)))
    pp = result.pet_peese
    if is_ok(pp):
        for name, c in (("PET", pp.pet), ("PEESE", pp.peese)):
            chosen = " (reported by the PET-PEESE rule)" if pp.chosen == name else ""
            out.append((name, c.estimate, c.ci.low, c.ci.high, chosen.strip(" ()")))
    else:
        out.append(("PET-PEESE", None, None, None, why_not(pp)))
    lim = result.limit
    if is_ok(lim):
        out.append(("Limit meta-analysis", lim.estimate, lim.ci.low, lim.ci.high, lim.note))
    else:
        out.append(("Limit meta-analysis", None, None, None, why_not(lim)))
    sel = result.selection
    if is_ok(sel):
        note = f"test of selection {fmt_p_eq(sel.lrt_pvalue)}"
        if not sel.converged:
            note += "; fit did not converge"
        cuts = ", ".join(fmt_num(c, 3) for c in sel.cutpoints)
        out.append(
            (f"Selection model (cut at one-sided p {cuts})", sel.mu, sel.ci.low, sel.ci.high, note)
        )
    else:
        out.append(("Selection model", None, None, None, why_not(sel)))
    return out
