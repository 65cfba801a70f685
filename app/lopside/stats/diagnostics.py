"""Rows worth checking against the paper: outliers, influence, implausible arms, duplicates.

The entry checks (:mod:`lopside.intake.checks`) look at one row at a time. A row can pass
them and still be mistyped: a control total typed with a digit missing gives a valid 2x2
table with an event risk of 85 % where every other control arm has 6-15 %. This module
compares each study with the others and says which rows to look at again, with the
numbers that make them stand out and what to check in the paper. It never changes the
data and never merges rows.

Design invariants
-----------------
* Pure numbers: no Qt, no I/O. The leave-one-out pooling is not redone here: the
  influence diagnostics read :func:`lopside.stats.sensitivity.leave_one_out`'s result
  (one batched pooling per analysis), and the rest are O(k) array operations.
* Every user-facing sentence comes from :data:`MESSAGES` (one place); :func:`flag_rows`
  fills them from the numbers it also returns, so the window, the CLI text, the JSON and
  the sheet show the same words and the same numbers.
* Thresholds are module constants, each with its source (in :mod:`.diagnostics_base`,
  with the wording and the result types; :mod:`.influence` and :mod:`.row_checks` hold
  the two kinds of check; this module combines them and re-exports every public name).

Sources
-------
* Viechtbauer W, Cheung MWL. Outlier and influence diagnostics for meta-analysis. Res
  Synth Methods 2010;1:112-125 (methods.md 11.1). Externally studentised residuals,
  DFFITS, Cook's distance, covariance ratio, hat values, τ² and Q with the study left out,
  for the random-effects model with intercept only. The cut-offs (in diagnostics_base.py)
  are recalled (from memory), not re-checked against the paper.
* Iglewicz B, Hoaglin DC. How to detect and handle outliers. ASQC 1993: the modified
  z-score 0.6745 (x - median) / MAD with |z| > 3.5 as the outlier limit (from memory).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from lopside.stats.data import StudyData
from lopside.stats.diagnostics_base import (
    ARM_MIN,
    ARM_RATIO_LIMIT,
    ARM_RATIO_SPREAD,
    ARM_Z_LIMIT,
    CHECKED_WORDS,
    COOKS_FLAG,
    COOKS_QUANTILE,
    DFFITS_FACTOR,
    EXPLAIN,
    HAT_FACTOR,
    HEADLINE,
    I2_DRIVER_DROP,
    I2_DRIVER_FROM,
    KIND_TITLES,
    MESSAGES,
    NONE_CHECKED,
    NONE_FOUND,
    OUTLIER_ALPHA,
    ROUNDING,
    SUSPECT,
    SWITCH_ALL_K,
    SWITCH_CANDIDATES,
    TAU2_DRIVER_RATIO,
    FlaggedStudy,
    Reason,
    _effect,
    _g,
    _tau2,
)
from lopside.stats.influence import Influence, influence, influence_measures
from lopside.stats.results import NotComputable
from lopside.stats.row_checks import arm_reasons, duplicate_reasons


@dataclass(frozen=True, slots=True, eq=False)
class RowFlags:
    """The rows worth checking against the paper, in table order.

    ``influence`` holds the full diagnostics table (or why it could not be computed);
    ``drivers`` lists the labels of studies that alone drive τ² or the choice of test.
    """

    flagged: tuple[FlaggedStudy, ...]
    influence: Influence | NotComputable
    drivers: tuple[str, ...] = ()
    notes: tuple[str, ...] = ()
    #: keys of :data:`CHECKED_WORDS`: what there were enough studies to compare
    checked: tuple[str, ...] = ()

    def none_found(self) -> str:
        """The sentence for a review where no row is flagged (says what was compared)."""
        if not self.checked:
            return NONE_CHECKED
        words = [CHECKED_WORDS[c] for c in self.checked]
        listed = ", ".join(words[:-1]) + " and " + words[-1] if len(words) > 1 else words[0]
        return NONE_FOUND.format(checked=listed)

    def for_row(self, row: int) -> FlaggedStudy | None:
        for f in self.flagged:
            if f.row == row:
                return f
        return None


def _influence_reasons(inf: Influence, measure: str) -> dict[int, list[Reason]]:
    out: dict[int, list[Reason]] = {}
    k = inf.rstudent.size
    lim = inf.limits
    # only the flagged studies (a Python loop over every study cost more than the checks)
    for i in np.flatnonzero(inf.outlier | inf.influential).tolist():
        if inf.outlier[i]:
            nums = {
                "rstudent": float(inf.rstudent[i]),
                "limit": lim["rstudent"],
                "k": k,
            }
            out.setdefault(i, []).append(
                Reason(
                    "outlier",
                    MESSAGES["outlier"].format(
                        t=_g(inf.rstudent[i]), limit=_g(lim["rstudent"]), k=k
                    ),
                    MESSAGES["outlier_check"],
                    nums,
                )
            )
        if inf.influential[i]:
            what = [
                f"DFFITS {_g(inf.dffits[i])}, limit ±{_g(lim['dffits'])}",
                f"Cook's distance {_g(inf.cooks[i])}, limit {_g(COOKS_FLAG, 0)}",
            ]
            nums = {
                "estimate": inf.estimate,
                "estimate_without": float(inf.estimate_del[i]),
                "dffits": float(inf.dffits[i]),
                "dffits_limit": lim["dffits"],
                "cooks": float(inf.cooks[i]),
                "cooks_limit": COOKS_FLAG,
                "hat": float(inf.hat[i]),
                "covratio": float(inf.covratio[i]),
            }
            out.setdefault(i, []).append(
                Reason(
                    "influential",
                    MESSAGES["influential"].format(
                        est=_effect(inf.estimate, measure),
                        est_del=_effect(float(inf.estimate_del[i]), measure),
                        what="; ".join(what),
                    ),
                    MESSAGES["influential_check"],
                    nums,
                )
            )
    return out


def _heterogeneity_reasons(
    data: StudyData, inf: Influence, tau2_method: str
) -> dict[int, list[Reason]]:
    """Studies that alone halve a substantial τ² and take I² down by 25 points or more."""
    from .pooling import cochran_q

    out: dict[int, list[Reason]] = {}
    k = data.k
    tau2 = inf.tau2
    if not (tau2 > 0) or k < 3:
        return out
    q = cochran_q(data.y, data.v)
    i2 = max(0.0, (q - (k - 1)) / q) * 100.0 if q > 0 else 0.0
    if i2 < I2_DRIVER_FROM:
        return out
    with np.errstate(invalid="ignore"):
        halved = inf.tau2_del <= TAU2_DRIVER_RATIO * tau2
        material = i2 - inf.i2_del >= I2_DRIVER_DROP
    for i in np.flatnonzero(halved & material):
        nums = {
            "tau2": tau2,
            "tau2_without": float(inf.tau2_del[i]),
            "i2": i2,
            "i2_without": float(inf.i2_del[i]),
            "q": float(q),
            "q_without": float(inf.q_del[i]),
            "tau2_method": tau2_method,
        }
        out.setdefault(int(i), []).append(
            Reason(
                "heterogeneity",
                MESSAGES["heterogeneity"].format(
                    tau2=_tau2(tau2),
                    tau2_del=_tau2(float(inf.tau2_del[i])),
                    i2=f"{i2:.0f}%",
                    i2_del=f"{inf.i2_del[i]:.0f}%",
                ),
                MESSAGES["heterogeneity_check"],
                nums,
            )
        )
    return out


def _test_name(name: str, options) -> str:
    # "Arcsine test" reads mid-sentence as "the arcsine test"; named tests keep their name
    if "'" not in name.split(" ")[0]:
        name = "the " + name[:1].lower() + name[1:]
    return name + (" with random effects" if options else "")


def _switch_reasons(
    data: StudyData, inf: Influence, candidates: set[int]
) -> dict[int, list[Reason]]:
    """Studies without which a different asymmetry test would be recommended."""
    from .applicability import recommend
    from .asymmetry import REGISTRY

    out: dict[int, list[Reason]] = {}
    k = data.k
    full = recommend(data, inf.tau2)
    if k <= SWITCH_ALL_K:
        todo = range(k)
    else:  # recommend() is O(k): only the studies most likely to change it
        drop = np.nan_to_num(inf.tau2 - inf.tau2_del, nan=-np.inf)
        top = np.argsort(-drop, kind="stable")[:SWITCH_CANDIDATES]
        todo = sorted(set(int(i) for i in top) | candidates)
    if not inf.tau2 > 0:
        return out
    for i in todo:
        if not inf.tau2_del[i] <= TAU2_DRIVER_RATIO * inf.tau2:
            continue
        keep = np.ones(k, dtype=bool)
        keep[i] = False
        rec = recommend(data.subset(keep), float(inf.tau2_del[i]))
        if (rec.key, rec.options) == (full.key, full.options):
            continue
        other = _test_name(REGISTRY[rec.key].name, rec.options)
        this = _test_name(REGISTRY[full.key].name, full.options)
        out.setdefault(int(i), []).append(
            Reason(
                "test_switch",
                MESSAGES["test_switch"].format(
                    other=other,
                    this=this,
                    tau2_del=_tau2(float(inf.tau2_del[i])),
                    tau2=_tau2(inf.tau2),
                ),
                MESSAGES["test_switch_check"],
                {
                    "test": full.key,
                    "test_without": rec.key,
                    "tau2": inf.tau2,
                    "tau2_without": float(inf.tau2_del[i]),
                },
            )
        )
    return out


#: order in which a row's reasons are listed (the most specific first)
_ORDER = (
    "arm_risk",
    "arm_size",
    "duplicate",
    "outlier",
    "heterogeneity",
    "test_switch",
    "influential",
)


def flag_rows(data: StudyData, loo) -> RowFlags:
    """Every row worth checking against the paper, with its evidence.

    Parameters
    ----------
    data : StudyData
        The studies of the analysis.
    loo : LeaveOneOutResult or NotComputable
        The analysis' leave-one-out result (read, not recomputed).

    Returns
    -------
    RowFlags
    """
    by_index: dict[int, list[Reason]] = {}

    def merge(part: dict[int, list[Reason]]) -> None:
        for i, reasons in part.items():
            by_index.setdefault(i, []).extend(reasons)

    merge(arm_reasons(data))
    merge(duplicate_reasons(data))
    inf = influence(data, loo)
    drivers: list[str] = []
    notes: list[str] = []
    if isinstance(inf, Influence):
        merge(_influence_reasons(inf, data.measure))
        het = _heterogeneity_reasons(data, inf, inf.tau2_method)
        merge(het)
        sw = _switch_reasons(data, inf, set(by_index))
        merge(sw)
        drivers = [inf.labels[i] for i in sorted(set(het) | set(sw))]
    else:
        notes.append(f"Outlier and influence diagnostics: {inf.reason}.")
    labels = (
        data.labels
        if len(data.labels) == data.k
        else tuple(f"Study {i + 1}" for i in range(data.k))
    )
    rows = data.rows if len(data.rows) == data.k else tuple(range(data.k))
    flagged = []
    for i in sorted(by_index, key=lambda j: rows[j]):
        reasons = sorted(by_index[i], key=lambda r: _ORDER.index(r.kind))
        flagged.append(FlaggedStudy(rows[i], labels[i], tuple(reasons)))
    checked = []
    if _enough_arms(data):
        checked.append("arms")
    if isinstance(inf, Influence):
        checked += ["influence", "tau2"]
    if data.k >= 2:
        checked.append("duplicates")
    return RowFlags(tuple(flagged), inf, tuple(drivers), tuple(notes), tuple(checked))


def _enough_arms(data: StudyData) -> bool:
    """Whether :func:`arm_reasons` had enough arms (counts or sizes) to compare."""
    k = data.k
    sizes = (
        int((np.isfinite(data.n1) & np.isfinite(data.n0)).sum())
        if data.n1.size == k and data.n0.size == k
        else 0
    )
    counts = int(np.isfinite(data.a).sum()) if data.a.size == k else 0
    return max(sizes, counts) >= ARM_MIN


def reason_text(reason: Reason, *, check: bool = True) -> str:
    """One reason as a sentence: what, the evidence and (unless ``check=False``) what to
    check in the paper. The tooltip, list, text, JSON and sheet all use this."""
    title = KIND_TITLES.get(reason.kind, reason.kind)
    return f"{title}: {reason.detail}" + (f" {reason.check}" if check else "")


#: reasons of one family share what to check; a row lists the first check of each family
_FAMILY = {"arm_risk": "arm", "arm_size": "arm", "duplicate": "duplicate"}


def flag_lines(flagged: FlaggedStudy) -> list[str]:
    """A flagged row as lines: each reason with its evidence, then what to check.

    Reasons are ordered most specific first, so the first check of each family (the arms,
    a duplicate, the statistical signs) is the one worth reading.
    """
    lines = [reason_text(r, check=False) for r in flagged.reasons]
    checks: dict[str, str] = {}
    for r in flagged.reasons:
        if r.check:
            checks.setdefault(_FAMILY.get(r.kind, "statistics"), r.check)
    if checks:
        lines.append(" ".join(checks.values()))
    return lines


def row_label(flagged: FlaggedStudy) -> str:
    """ "Hollister 2011 (row 8)": the study and its row counted from 1."""
    return f"{flagged.study or 'Unnamed study'} (row {flagged.row + 1})"


def glance_text(flags) -> str:
    """One sentence for the key-messages box: which rows to check first, and why.

    "" when no row is flagged (or the flags could not be computed).
    """
    flagged = getattr(flags, "flagged", ()) or ()
    if not flagged:
        return ""
    parts = []
    for f in flagged[:3]:
        kinds = ", ".join(dict.fromkeys(KIND_TITLES[r.kind].lower() for r in f.reasons))
        parts.append(f"{row_label(f)}: {kinds}")
    more = f"; and {len(flagged) - 3} more" if len(flagged) > 3 else ""
    return (
        "; ".join(parts)
        + more
        + ". Every result on this sheet includes these rows: check them against the paper "
        "first (evidence below)."
    )


def suspects(flags, problems=()) -> tuple[tuple[int, str, str], ...]:
    """(row, label, why) of the flagged rows not already named by an entry problem, for the
    check against the published result: when the rows do not reproduce the paper, these
    are the first rows to re-check."""
    taken = {getattr(p, "row", None) for p in problems}
    out = []
    for f in getattr(flags, "flagged", ()) or ():
        if f.row in taken:
            continue
        kinds = ", ".join(dict.fromkeys(KIND_TITLES[r.kind].lower() for r in f.reasons))
        out.append((f.row, f.study or f"Row {f.row + 1}", SUSPECT.format(kinds=kinds)))
    return tuple(out)


#: the rows-to-check API in one place (thresholds, wording and the parts re-exported)
__all__ = [
    "ARM_MIN",
    "ARM_RATIO_LIMIT",
    "ARM_RATIO_SPREAD",
    "ARM_Z_LIMIT",
    "CHECKED_WORDS",
    "COOKS_FLAG",
    "COOKS_QUANTILE",
    "DFFITS_FACTOR",
    "EXPLAIN",
    "FlaggedStudy",
    "HAT_FACTOR",
    "HEADLINE",
    "I2_DRIVER_DROP",
    "I2_DRIVER_FROM",
    "Influence",
    "KIND_TITLES",
    "MESSAGES",
    "NONE_CHECKED",
    "NONE_FOUND",
    "NotComputable",
    "OUTLIER_ALPHA",
    "ROUNDING",
    "Reason",
    "RowFlags",
    "SUSPECT",
    "SWITCH_ALL_K",
    "SWITCH_CANDIDATES",
    "TAU2_DRIVER_RATIO",
    "arm_reasons",
    "duplicate_reasons",
    "flag_lines",
    "flag_rows",
    "glance_text",
    "influence",
    "influence_measures",
    "reason_text",
    "row_label",
    "suspects",
]
