"""Turn an :class:`~lopside.analysis.AnalysisResult` into the JSON of the contract.

The contract keys (DESIGN.md section 3) are built explicitly; every other result is added
by a generic conversion of its frozen dataclass, so new statistics appear without code
here. Non-finite numbers become ``null``; a result that could not be computed becomes
``null`` at the contract key and its reason is listed under ``not_computable``.
"""

from __future__ import annotations

import dataclasses
import math
from typing import Any

import numpy as np

from . import __version__
from .stats.results import ConfidenceInterval, NotComputable, PooledEstimate, RowsOnDemand

#: per dataclass type: the names of the fields that plain() writes
_FIELDS: dict[type, tuple[str, ...]] = {}


def _field_names(cls: type) -> tuple[str, ...]:
    names = _FIELDS.get(cls)
    if names is None:
        names = tuple(f.name for f in dataclasses.fields(cls) if not f.name.startswith("_"))
        _FIELDS[cls] = names
    return names


def _plain_float(obj) -> float | None:
    f = float(obj)
    return f if math.isfinite(f) else None


def plain(obj: Any) -> Any:
    """JSON-ready copy of a result: dataclasses to dicts, arrays to lists, NaN to None."""
    t = type(obj)
    # the common leaf types first (a large review has millions of them)
    if t is float:
        return obj if math.isfinite(obj) else None
    if t is str or t is int or t is bool or obj is None:
        return obj
    if isinstance(obj, NotComputable):
        return {"not_computable": obj.reason}
    if isinstance(obj, ConfidenceInterval):
        return {"low": plain(obj.low), "high": plain(obj.high)}
    if dataclasses.is_dataclass(obj) and not isinstance(obj, type):
        out = {}
        for name in _field_names(t):
            value = getattr(obj, name)
            if callable(value):
                continue
            out[name] = plain(value)
        return out
    if isinstance(obj, dict):
        return {str(k): plain(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        if hasattr(obj, "_asdict"):
            return {k: plain(v) for k, v in obj._asdict().items()}
        return [plain(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return [plain(v) for v in obj.tolist()]
    if isinstance(obj, RowsOnDemand):  # a large review's rows, made now
        return [plain(v) for v in obj]
    if isinstance(obj, (np.floating, float)):
        return _plain_float(obj)
    if isinstance(obj, (np.integer,)):
        return int(obj)
    if isinstance(obj, (np.bool_,)):
        return bool(obj)
    if isinstance(obj, (str, int, bool)):
        return obj
    if callable(obj):
        return None
    return str(obj)


def _num(x) -> float | None:
    if x is None:
        return None
    try:
        f = float(x)
    except (TypeError, ValueError):
        return None
    return f if math.isfinite(f) else None


def _pooled(p: PooledEstimate | NotComputable, *, random: bool) -> dict[str, Any] | None:
    if not isinstance(p, PooledEstimate):
        return None
    d = {
        "estimate": _num(p.estimate),
        "se": _num(p.se),
        "ci_low": _num(p.ci.low),
        "ci_high": _num(p.ci.high),
        "p": _num(p.pvalue),
        "model": p.model,
    }
    if random:
        d.update(
            tau2=_num(p.tau2),
            method=p.model,
            hksj=p.hksj,
            pi_low=_num(p.pi.low) if p.pi else None,
            pi_high=_num(p.pi.high) if p.pi else None,
        )
    return d


def _get(obj, *names, default=None):
    for n in names:
        if obj is not None and hasattr(obj, n):
            return getattr(obj, n)
    return default


def _sensitivity_model(m) -> dict[str, Any]:
    if isinstance(m, NotComputable) or m is None:
        reason = getattr(m, "reason", "not run")
        return {
            "s_value": None,
            "s_value_ci": None,
            "worst_case": {"estimate": None, "ci_low": None, "ci_high": None, "reason": reason},
            "by_eta": [],
            "reason": reason,
        }
    wc = m.worst_case
    if isinstance(wc, NotComputable):
        worst = {"estimate": None, "ci_low": None, "ci_high": None, "reason": wc.reason}
    else:
        worst = {
            "estimate": _num(wc.estimate),
            "ci_low": _num(wc.ci_low),
            "ci_high": _num(wc.ci_high),
            "k": wc.k,
        }
        if wc.reason:
            worst["reason"] = wc.reason
    out: dict[str, Any] = {
        "s_value": _num(m.s_value),
        "s_value_ci": _num(m.s_value_ci),
        "worst_case": worst,
        "by_eta": [
            {
                "eta": c.eta,
                "estimate": _num(c.estimate),
                "ci_low": _num(c.ci_low),
                "ci_high": _num(c.ci_high),
                "se": _num(c.se),
                **({"df": _num(c.df)} if c.df is not None else {}),
            }
            for c in m.by_eta
        ],
        "method": m.method,
        "tau2": _num(m.tau2),
    }
    if m.s_value is None:
        out["s_value_reason"] = m.s_value_reason
    if m.s_value_ci is None:
        out["s_value_ci_reason"] = m.s_value_ci_reason
    return out


def selection_sensitivity_json(res) -> dict[str, Any]:
    """``selection_sensitivity`` of the JSON (issue 20): counts, then fixed and random."""
    if isinstance(res, NotComputable) or res is None:
        reason = getattr(res, "reason", "not run")
        return {
            "affirmative": None,
            "nonaffirmative": None,
            "reason": reason,
            "fixed": _sensitivity_model(res),
            "random": _sensitivity_model(res),
        }
    out = {
        "affirmative": res.affirmative,
        "nonaffirmative": res.nonaffirmative,
        "affirmative_rows": [r + 1 for r in res.affirmative_rows],
        "direction": res.direction,
        "rule": res.direction_rule,
        "source": "Mathur & VanderWeele 2020, JRSS C 69:1091",
        "fixed": _sensitivity_model(res.fixed),
        "random": _sensitivity_model(res.random),
    }
    if res.reason:
        out["reason"] = res.reason
    return out


def fixed_weights_json(res) -> dict[str, Any] | None:
    """Adjusted estimates under the a priori weight patterns (Vevea & Woods 2005)."""
    if isinstance(res, NotComputable) or res is None:
        return {"reason": getattr(res, "reason", "not run"), "patterns": []}
    patterns = []
    for name, e in res.by_pattern().items():
        if isinstance(e, NotComputable):
            patterns.append({"pattern": name, "estimate": None, "reason": e.reason})
        else:
            patterns.append(
                {
                    "pattern": name,
                    "estimate": _num(e.estimate),
                    "tau2": _num(e.tau2),
                    "weights": list(e.weights),
                }
            )
    return {
        "unadjusted_ml": _num(res.unadjusted),
        "unadjusted_tau2": _num(res.unadjusted_tau2),
        "direction": res.direction,
        "cutpoints_one_sided_p": list(res.cutpoints),
        "provenance": res.provenance,
        "source": "Vevea & Woods 2005, Psychol Methods 10:428",
        "patterns": patterns,
    }


def unreported_json(res) -> dict[str, Any] | None:
    """``unreported_trials`` (issue 20); None when no row is marked reported = no."""
    if res is None:
        return None
    if isinstance(res, NotComputable):
        return {"count": None, "participants": None, "scenarios": [], "reason": res.reason}
    return {
        "count": res.count,
        "participants": _num(res.participants),
        "rows": [r + 1 for r in res.rows],
        "se": [_num(s) for s in res.se],
        "rows_without_size": [r + 1 for r in res.rows_without_size],
        "se_rule": res.se_rule,
        "reported_estimate": _num(res.reported_estimate),
        "scenarios": [
            {
                "assumed": s.assumed,
                "assumed_estimate": _num(s.assumed_value),
                "estimate": _num(s.pooled.estimate),
                "ci_low": _num(s.pooled.ci.low),
                "ci_high": _num(s.pooled.ci.high),
                "tau2": _num(s.pooled.tau2),
            }
            for s in res.scenarios
        ],
    }


#: How the intervals of I² and τ² are computed (the ``method`` of their JSON objects).
I2_CI_METHOD = "Higgins & Thompson 2002 test-based interval for H, converted to I²"
TAU2_CI_METHOD = "Q-profile (Viechtbauer 2007)"
#: The two arcsine tests, each under its own key (``tests.arcsine`` is whichever ran).
ARCSINE_VARIANTS = {
    "arcsine_fixed": "fixed effect (Rücker et al. 2008, t test)",
    "arcsine_random": "random effects (Thompson & Sharp 1999, z test)",
}


def _with_method(ci, method: str):
    out = plain(ci)
    if isinstance(out, dict):
        out["method"] = method
    return out


def _begg_p_method(t) -> str:
    note = (getattr(t, "method_note", "") or "").lower()
    return "exact" if note.startswith("exact") else "normal approximation"


def appraisal_json(assessment) -> dict[str, Any]:
    """The reading: rating, whether the data allow one, and every evidence line.

    ``evidence`` is exactly what the window's Causes view and the sheet's explanations
    table show (same items, same order, same sentences); ``page_one`` is the sheet's
    first-page box, line for line.
    """
    from .summary import glance_section

    a = assessment.appraisal
    r = a.rating
    strongest = a.strongest_alternative
    ss = a.small_study
    adj = ss.adjustments
    return {
        "rating": r.suggested,
        "assessable": bool(r.assessable),
        "leaning": r.leaning,
        "reasons": list(r.reasons),
        "appraiser_rating": r.override or None,
        "appraiser_reason": r.override_reason,
        "final_rating": r.final,
        "note": r.note,
        "evidence": [e.to_dict() for e in a.evidence],
        "causes": [
            {
                "cause": c.key,
                "title": c.title,
                "leaning": c.leaning,
                "what_to_check": c.what_to_check,
                "appraiser_judgement": c.judgement,
                "appraiser_notes": c.notes,
            }
            for c in a.causes
        ],
        "strongest_alternative": None
        if strongest is None
        else {"cause": strongest[0].key, "title": strongest[0].title, **strongest[1].to_dict()},
        "funnel": {
            "contour_verdict": ss.contour.verdict,
            "k0": ss.contour.k0,
            "side": ss.contour.side,
            "test": ss.test.key or None,
            "test_p": _num(ss.test.pvalue),
            "test_signal": ss.test.signal,
            "adjustments": {
                "methods": [n for n, _e in adj.estimates],
                "estimates": [_num(e) for _n, e in adj.estimates],
                "towards_null": adj.towards_null,
                "away_from_null": adj.away,
                "hardly_move": adj.little,
                "crosses_null": adj.crosses_null,
                "moves": adj.moves,
            },
            "lines": [{"label": lab, "text": t} for lab, t in ss.lines],
        },
        "page_one": [{"label": lab, "text": t} for lab, t in glance_section(assessment).rows],
        "glossary": [{"term": t, "gloss": g} for t, g in a.glossary],
    }


def flagged_studies(result) -> list[dict[str, Any]]:
    """``flagged_studies``: each row worth checking, with every reason and its numbers.

    ``row`` counts table rows from 1; ``other_row`` (duplicates) likewise.
    """
    from .stats.diagnostics import KIND_TITLES, reason_text

    flags = getattr(result, "row_flags", None)
    if not flags or isinstance(flags, NotComputable):
        return []
    return [
        {
            "study": f.study,
            "row": f.row + 1,
            "reasons": [
                {
                    "kind": r.kind,
                    "title": KIND_TITLES.get(r.kind, r.kind),
                    "detail": r.detail,
                    "check": r.check,
                    "text": reason_text(r),
                    "field": r.field,
                    "other_row": None if r.other_row is None else r.other_row + 1,
                    "numbers": plain(r.numbers),
                }
                for r in f.reasons
            ],
        }
        for f in flags.flagged
    ]


def _influence(result) -> dict[str, Any] | None:
    flags = getattr(result, "row_flags", None)
    if isinstance(flags, NotComputable):
        return {"not_computable": flags.reason}
    inf = getattr(flags, "influence", None)
    if inf is None:
        return None
    if isinstance(inf, NotComputable):
        return {"not_computable": inf.reason}
    out = plain(inf)
    out["rows"] = [r + 1 for r in inf.rows]  # table rows counted from 1, like "studies"
    return out


def to_json(result) -> dict[str, Any]:
    """The ``check --json`` object.

    Parameters
    ----------
    result : Assessment or AnalysisResult
        An analysis alone is read through :func:`lopside.assessment.assessment_of`, so the
        JSON always carries the same appraisal the sheet prints.
    """
    from .assessment import assessment_of

    assessment = assessment_of(result)
    result = assessment.analysis
    # what could not be computed, by key, in the order the parts below are read
    nc: dict[str, str] = {}
    _note(nc, "flagged_studies", getattr(result, "row_flags", None))
    _note(nc, "pooled.fixed", result.fixed)
    _note(nc, "pooled.random", result.random)
    het = _note(nc, "heterogeneity", result.heterogeneity)
    tests_out = _tests_json(result, nc)
    tf = _note(nc, "trim_fill", result.trim_fill)
    rec = result.recommendation
    out: dict[str, Any] = {
        "lopside_version": __version__,
        "title": result.review.details.title,
        "measure": result.measure,
        "scale": "natural log" if result.is_ratio else "as entered",
        "k": result.k,
        "studies": _studies_json(result),
        "excluded": [plain(e) for e in result.excluded],
        "problems": [plain(p) for p in result.problems],
        "flagged_studies": flagged_studies(result),
        "influence": _influence(result),
        "pooled": _pooled_json(result),
        "heterogeneity": _heterogeneity_json(het),
        "reconciliation": plain(result.reconciliation),
        "tests": tests_out,
        "recommended_test": None if isinstance(rec, NotComputable) or rec is None else plain(rec),
        "applicability": [plain(r) for r in result.applicability],
        "trim_fill": None if isinstance(tf, NotComputable) else {**plain(tf), **_filled(tf)},
        "trim_fill_variants": _trim_fill_variants_json(result),
        "pet_peese": plain(result.pet_peese),
        "limit": plain(result.limit),
        "selection_model": plain(result.selection),
        "selection_sensitivity": selection_sensitivity_json(result.selection_sensitivity),
        "selection_fixed_weights": fixed_weights_json(result.selection_fixed_weights),
        "leave_one_out": plain(result.leave_one_out),
        "cumulative": plain(result.cumulative),
        "fail_safe_n": plain(result.failsafe),
        "subgroups": plain(result.subgroups),
        "meta_regression": plain(result.meta_regression),
        "power": plain(result.power) if result.power is not None else None,
        "fingerprint_sha256": result.fingerprint,
        # what was thinned or computed another way for a large review (never silent)
        "notes": list(getattr(result, "notes", ())),
        "settings": result.settings.to_dict(),
        "review_claim": _review_claim_json(result),
    }
    missing = unreported_json(result.unreported_trials)
    if missing is not None:
        out["unreported_trials"] = missing
    out["trim_fill_range"] = _trim_fill_range_json(result)
    out["published_heterogeneity"] = _published_het_json(result)
    out["appraisal"] = appraisal_json(assessment)
    out["intake"] = intake_json(result.review)
    out["not_computable"] = nc
    return out


def _note(nc: dict[str, str], key: str, value):
    """``value``, its reason kept under ``key`` in ``nc`` when it could not be computed."""
    if isinstance(value, NotComputable):
        nc[key] = value.reason
    return value


def _studies_json(result) -> list[dict[str, Any]]:
    """``studies``: every table row with its effect, SE, and how the SE was obtained."""
    included_rows = set(result.data.rows)
    return [
        {
            "row": i + 1,
            "study": row.study,
            "y": _num(d.y),
            "se": _num(d.se),
            "included": i in included_rows,
            "route": getattr(d, "route", ""),
            "how": getattr(d, "route_text", ""),
        }
        for i, (row, d) in enumerate(zip(result.review.studies, result.derived))
    ]


def _pooled_json(result) -> dict[str, Any]:
    return {
        "fixed": _pooled(result.fixed, random=False),
        "random": _pooled(result.random, random=True),
        "random_by_method": {
            m: _pooled(p, random=True) for m, p in result.random_by_method.items()
        },
        "random_hksj_by_method": {
            m: _pooled(p, random=True) for m, p in result.random_hksj_by_method.items()
        },
        "mantel_haenszel": _pooled(result.mantel_haenszel, random=False),
        "peto": _pooled(result.peto, random=False),
    }


def _heterogeneity_json(het) -> dict[str, Any] | None:
    if isinstance(het, NotComputable):
        return None
    return {
        "q": _num(het.q),
        "df": het.df,
        "p": _num(het.pvalue),
        "i2": _num(het.i2),
        "tau2": _num(het.tau2),
        "h": _num(het.h),
        "i2_ci": _with_method(het.i2_ci, I2_CI_METHOD),
        "tau2_ci": _with_method(het.tau2_ci, TAU2_CI_METHOD),
        "i2_ci_method": I2_CI_METHOD,
        "tau2_ci_method": TAU2_CI_METHOD,
        "tau2_method": het.tau2_method,
    }


def _tests_json(result, nc: dict[str, str]) -> dict[str, Any]:
    """``tests``: every test's full result with the contract's short names beside it."""
    tests_out: dict[str, Any] = {}
    for key, t in result.tests.items():
        _note(nc, f"tests.{key}", t)
        if isinstance(t, NotComputable) or t is None:
            tests_out[key] = None
            continue
        entry = plain(t)
        # the contract's short names beside the full result
        entry.setdefault("p", _num(_get(t, "pvalue")))
        if key == "egger":
            entry.update(
                intercept=_num(t.intercept),
                se=_num(t.intercept_se),
                t=_num(t.statistic),
                df=_num(t.df),
                p=_num(t.pvalue),
            )
        elif key == "begg":
            entry.update(
                tau=_num(t.statistic),
                z=_num(_get(t, "z")),
                p=_num(t.pvalue),
                p_method=_begg_p_method(t),
            )
        elif key == "arcsine":
            random = "random" in (getattr(t, "name", "") or "").lower()
            variant = "arcsine_random" if random else "arcsine_fixed"
            entry["variant"] = variant
            entry["variant_text"] = ARCSINE_VARIANTS[variant]
            tests_out[variant] = entry
        tests_out[key] = entry
    if "arcsine" in result.tests:
        for variant in ARCSINE_VARIANTS:
            tests_out.setdefault(variant, None)
    for key in ("egger", "begg", "harbord", "peters"):
        tests_out.setdefault(key, None)
    return tests_out


def _filled(tf) -> dict[str, Any]:
    """A trim-and-fill run's short fields: studies filled, side, the filled estimate."""
    adj = _get(tf, "adjusted")
    ok = isinstance(adj, PooledEstimate)
    return {
        "k0": int(tf.k0),
        "side": tf.side,
        "estimate": _num(adj.estimate) if ok else None,
        "ci_low": _num(adj.ci.low) if ok else None,
        "ci_high": _num(adj.ci.high) if ok else None,
    }


def _trim_fill_variants_json(result) -> dict[str, Any]:
    variants = {}
    for name, v in result.trim_fill_variants.items():
        if isinstance(v, NotComputable) or v is None:
            variants[name] = {"not_computable": getattr(v, "reason", "not run")}
        else:
            variants[name] = _filled(v)
    return variants


def _review_claim_json(result) -> dict[str, Any] | None:
    """What the review said about small-study effects, with Lopside's comparison."""
    from .appraise.claim import compare_claim

    comparison = compare_claim(result)
    if comparison is None:
        return None
    return {**plain(result.review.details.claim), "comparison": plain(comparison)}


def _trim_fill_range_json(result) -> dict[str, Any] | None:
    from .words.sentences import trim_fill_range

    rng = trim_fill_range(result)
    if rng is None:
        return None
    return {
        "settings": rng.n,
        "k0_low": rng.k0_low,
        "k0_high": rng.k0_high,
        "estimate_low": _num(rng.est_low),
        "estimate_high": _num(rng.est_high),
        "intervals_including_null": rng.crosses,
        "agree": rng.agree,
        "sentence": rng.text,
    }


def _published_het_json(result) -> dict[str, Any] | None:
    """The paper's I² (pasted heterogeneity line) against the rows' I², or None."""
    from .words.sentences import HET_AGREE_POINTS, heterogeneity_reconciled

    pub = result.review.details.published.i2
    het = result.heterogeneity
    if pub is None or isinstance(het, NotComputable) or _num(het.i2) is None:
        return None
    return {
        "published_i2": _num(pub),
        "computed_i2": _num(het.i2),
        "agree": abs(pub - het.i2) <= HET_AGREE_POINTS,
        "sentence": heterogeneity_reconciled(pub, het.i2),
    }


def intake_json(review) -> dict[str, Any]:
    """What happened on the way in: unread input, decimal mark, measure, direction."""
    from .summary import favours_text

    a = review.intake
    d = review.details
    return {
        "source": a.source,
        "not_read": [
            {"kind": n.kind, "where": n.where, "text": n.text, "reason": n.reason}
            for n in a.not_read
        ],
        "decimal": {
            "mark": a.decimal_mark or None,
            "how": a.decimal_how or None,
            "evidence": a.decimal_evidence or None,
        },
        "measure_how": a.measure_how,
        "favours": {"value": d.favours, "source": d.favours_source, "text": favours_text(d)},
        # where each row read came from in its file ("page 7 of review.pdf, line 12")
        "rows_at": [{"study": label, "place": place} for label, place in a.rows_at],
    }
