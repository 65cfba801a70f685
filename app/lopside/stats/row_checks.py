"""Rows that look mistyped when set beside the others: implausible arm risks and sizes
(modified z-scores, Iglewicz & Hoaglin 1993) and possible duplicate rows.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from lopside.stats.data import StudyData
from lopside.stats.diagnostics_base import (
    ARM_MIN,
    ARM_RATIO_LIMIT,
    ARM_RATIO_SPREAD,
    ARM_Z_LIMIT,
    MESSAGES,
    ROUNDING,
    Reason,
    _count,
    _effect,
    _g,
    _pct,
)


def _logit_risk(events: np.ndarray, total: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Logit of the event risk with 0.5 added to each cell, and its sampling variance."""
    e = events + 0.5
    ne = total - events + 0.5
    return np.log(e / ne), 1.0 / e + 1.0 / ne


def arm_reasons(data: StudyData) -> dict[int, list[Reason]]:
    """Arms whose event risk (2x2 data) or size is far out of line with the other arms.

    Event risk: each arm is compared with the arms of the same kind (control with control,
    intervention with intervention) on the logit scale, by a robust z that allows for the
    arm's own sampling error: z = (x_i − median) / sqrt((MAD/0.6745)² + var_i). Without
    the sampling term this is the modified z-score of Iglewicz & Hoaglin (from memory);
    with it, a small arm needs a larger departure before it is flagged. Flagged when
    |z| > :data:`ARM_Z_LIMIT` and the risk lies outside the range of the other arms.

    Size (any outcome with arm sizes: 2x2 totals, or per-arm n of means and SDs): the ratio
    of the larger to the smaller arm above :data:`ARM_RATIO_LIMIT` and more than
    :data:`ARM_RATIO_SPREAD` times the median ratio of the other studies.

    Returns
    -------
    dict
        Index into ``data`` → reasons.
    """
    out: dict[int, list[Reason]] = {}
    k = data.k
    if k == 0:
        return out
    _arm_size_reasons(data, out)
    if data.a.size != k:
        return out
    a, b, c, d = data.a, data.b, data.c, data.d
    have = np.isfinite(a) & np.isfinite(b) & np.isfinite(c) & np.isfinite(d)
    idx = np.flatnonzero(have)
    if idx.size < ARM_MIN:
        return out
    for arm, ev, nonev, fld in (
        ("control", c, d, "ctl"),
        ("intervention", a, b, "int"),
    ):
        events = ev[idx]
        total = events + nonev[idx]
        ok = total > 0
        if ok.sum() < ARM_MIN:
            continue
        sel = idx[ok]
        events, total = events[ok], total[ok]
        x, var = _logit_risk(events, total)
        med = float(np.median(x))
        mad = float(np.median(np.abs(x - med)))
        scale2 = (mad / 0.6745) ** 2
        z = (x - med) / np.sqrt(scale2 + var)
        risk = events / total
        for j in np.flatnonzero(np.abs(z) > ARM_Z_LIMIT):
            others = np.delete(risk, j)
            if others.min() <= risk[j] <= others.max():
                continue
            nums = {
                "arm": arm,
                "events": int(round(events[j])),
                "total": int(round(total[j])),
                "risk": float(risk[j]),
                "others_low": float(others.min()),
                "others_high": float(others.max()),
                "others_median": float(np.median(others)),
                "robust_z": float(z[j]),
                "limit": ARM_Z_LIMIT,
            }
            detail = MESSAGES["arm_risk"].format(
                arm=arm,
                events=nums["events"],
                total=nums["total"],
                risk=_pct(risk[j]),
                lo=_pct(others.min()),
                hi=_pct(others.max()),
                median=_pct(nums["others_median"]),
                z=_g(z[j], 1),
                limit=_g(ARM_Z_LIMIT, 1),
            )
            out.setdefault(int(sel[j]), []).append(
                Reason(
                    "arm_risk",
                    detail,
                    MESSAGES["arm_risk_check"].format(arm=arm),
                    nums,
                    field=f"{fld}_total",
                )
            )
    return out


def _arm_size_reasons(data: StudyData, out: dict[int, list[Reason]]) -> None:
    """Arm sizes far out of line (2x2 totals, or per-arm sizes for continuous outcomes)."""
    k = data.k
    if data.n1.size != k or data.n0.size != k:
        return
    with np.errstate(invalid="ignore"):
        have = np.isfinite(data.n1) & np.isfinite(data.n0) & (data.n1 > 0) & (data.n0 > 0)
    counts = np.isfinite(data.a) & np.isfinite(data.c) if data.a.size == k else np.zeros(k, bool)
    if have.sum() >= ARM_MIN:
        sel = np.flatnonzero(have)
        n1, n0 = data.n1[sel], data.n0[sel]
        ratio = np.maximum(n1, n0) / np.minimum(n1, n0)
        for j in np.flatnonzero(ratio > ARM_RATIO_LIMIT):
            others = np.delete(ratio, j)
            if ratio[j] <= ARM_RATIO_SPREAD * float(np.median(others)):
                continue
            nums = {
                "n1": int(round(n1[j])),
                "n0": int(round(n0[j])),
                "ratio": float(ratio[j]),
                "others_max": float(others.max()),
                "others_median": float(np.median(others)),
                "limit": ARM_RATIO_LIMIT,
            }
            detail = MESSAGES["arm_size"].format(
                n1=nums["n1"],
                n0=nums["n0"],
                ratio=_g(ratio[j], 1),
                other_max=_g(others.max(), 1),
                other_median=_g(nums["others_median"], 1),
            )
            arm = "ctl" if n0[j] < n1[j] else "int"
            smaller = f"{arm}_total" if counts[sel[j]] else f"{arm}_n"
            out.setdefault(int(sel[j]), []).append(
                Reason("arm_size", detail, MESSAGES["arm_size_check"], nums, field=smaller)
            )


def _natural(y: np.ndarray, measure: str) -> np.ndarray:
    from ..model.review import RATIO_MEASURES

    return np.exp(y) if measure in RATIO_MEASURES else y


#: two numbers printed alike to 12 significant digits differ by less than 1e-11 of their
#: size; a wider margin only prints a few more numbers
_NEAR = 1e-10


def _near_another(x: np.ndarray) -> np.ndarray:
    """Finite entries of x with another entry within :data:`_NEAR` of their size (a
    superset of those that print alike to 12 significant digits: whatever lies between
    two such numbers in sorted order is nearer still)."""
    out = np.zeros(x.size, bool)
    fin = np.flatnonzero(np.isfinite(x))
    if fin.size < 2:
        return out
    order = fin[np.argsort(x[fin], kind="mergesort")]
    xs = x[order]
    gap = np.diff(xs)
    ok = gap <= _NEAR * np.maximum(np.abs(xs[:-1]), np.abs(xs[1:]))
    out[order[:-1][ok]] = True
    out[order[1:][ok]] = True
    return out


def duplicate_reasons(data: StudyData) -> dict[int, list[Reason]]:
    """Pairs of rows that may report the same trial twice (never merged).

    Three signs, strongest first, one reason per pair: identical 2x2 counts; identical
    estimate and standard error (hence the same CI); the same number of participants with
    estimates equal within rounding (:data:`ROUNDING`, relative above 1, on the scale the
    paper prints), for pairs where at least one row has no counts (in a simulation of
    3,000 trials with counts, 162 chance pairs had the same size and an odds ratio within
    rounding, against 28 with identical counts). Grouping by a key keeps this near O(k) for large reviews: rows with the
    same counts or the same estimate are each paired with the first of them (a group of
    three gives two pairs), rows of the same size with their neighbour in estimate order.
    """
    out: dict[int, list[Reason]] = {}
    k = data.k
    if k < 2:
        return out
    labels = data.labels if len(data.labels) == k else tuple(f"Study {i + 1}" for i in range(k))
    rows = data.rows if len(data.rows) == k else tuple(range(k))
    paired: set[tuple[int, int]] = set()

    def add(i: int, j: int, key: str, fmt: dict, nums: dict) -> None:
        pair = (min(i, j), max(i, j))
        if pair in paired:
            return
        paired.add(pair)
        for me, other in ((i, j), (j, i)):
            detail = MESSAGES[key].format(other=labels[other], other_row=rows[other] + 1, **fmt)
            out.setdefault(me, []).append(
                Reason(
                    "duplicate",
                    detail,
                    MESSAGES["duplicate_check"],
                    {"sign": key.removeprefix("duplicate_"), "other": labels[other], **nums},
                    other_row=rows[other],
                )
            )

    def groups(keys) -> list[list[int]]:
        g: dict[Any, list[int]] = {}
        for i, key in enumerate(keys):
            if key is not None:
                g.setdefault(key, []).append(i)
        return [v for v in g.values() if len(v) > 1]

    # identical counts
    if data.a.size == k:
        cells = np.column_stack([data.a, data.b, data.c, data.d])
        whole = np.isfinite(cells).all(axis=1).tolist()
        keys = [tuple(r) if ok else None for r, ok in zip(cells.tolist(), whole)]
        for members in groups(keys):
            i = members[0]
            a, b, c, d = cells[i]
            fmt = {"a": _count(a), "n1": _count(a + b), "c": _count(c), "n0": _count(c + d)}
            for j in members[1:]:
                add(i, j, "duplicate_counts", fmt, {"counts": [int(round(x)) for x in cells[i]]})
    # identical estimate and SE (12 significant digits absorb float noise only); the
    # digits are printed only for rows with a near neighbour in both (the others cannot
    # share a key), which at k = 3,000 is most of the time saved
    near = _near_another(data.y) & _near_another(data.se)
    keys = [
        (float(f"{y:.12g}"), float(f"{s:.12g}")) if ok else None
        for y, s, ok in zip(data.y.tolist(), data.se.tolist(), near.tolist())
    ]
    for members in groups(keys):
        i = members[0]
        for j in members[1:]:
            add(
                i,
                j,
                "duplicate_estimate",
                {"est": _effect(float(data.y[i]), data.measure)},
                {"y": float(data.y[i]), "se": float(data.se[i])},
            )
    # same participants, estimate within rounding (rows without counts: with counts,
    # identical tables are caught above and different tables are different trials)
    has_counts = (
        np.isfinite(data.a) & np.isfinite(data.c) if data.a.size == k else np.zeros(k, bool)
    )
    if data.n.size == k:
        nat = _natural(data.y, data.measure).tolist()
        keys = [int(round(n)) if math.isfinite(n) and n > 0 else None for n in data.n.tolist()]
        for members in groups(keys):
            # neighbours in estimate order only: many rows of one size stay O(m log m)
            members = sorted(members, key=lambda m: (nat[m], m))
            for i, j in zip(members, members[1:]):
                if has_counts[i] and has_counts[j]:
                    continue  # two different 2x2 tables: the counts say more than rounding
                ei, ej = nat[i], nat[j]
                if abs(ei - ej) > ROUNDING * max(1.0, abs(ei), abs(ej)):
                    continue
                add(
                    i,
                    j,
                    "duplicate_size",
                    {
                        "n": keys[i],
                        "est": _effect(float(data.y[i]), data.measure),
                        "other_est": _effect(float(data.y[j]), data.measure),
                    },
                    {"n": keys[i], "estimates": [ei, ej]},
                )
    return out
