"""One analysis: a review and settings in, one immutable result out.

Design invariant: every statistic shown anywhere (window, CLI text, JSON, PDF sheet) is
read from the :class:`AnalysisResult` returned by :func:`analyse`. Nothing downstream
computes a statistic of its own.
"""

from __future__ import annotations

import hashlib
import json
import math
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np

from .model.review import BINARY_MEASURES, RATIO_MEASURES, Review
from .settings import AnalysisSettings
from .stats.data import StudyData
from .stats.results import CORE_PENDING, NotComputable, PooledEstimate, is_pending

# the arrays of the included studies (re-exported: callers import them from here)
from .study_arrays import UNREPORTED_REASON as UNREPORTED_REASON
from .study_arrays import ExcludedStudy, build_study_data


@dataclass(frozen=True, slots=True, eq=False)
class AnalysisResult:
    """Everything Lopside knows about one review under one set of settings.

    Fields hold frozen results from :mod:`lopside.stats` or :class:`NotComputable`
    with the reason. ``derived`` and ``problems`` cover every table row (in table order);
    ``data`` holds only the studies that enter the analysis.
    """

    review: Review
    settings: AnalysisSettings
    measure: str
    confidence_level: float
    derived: tuple[Any, ...]
    problems: tuple[Any, ...]
    data: StudyData
    excluded: tuple[ExcludedStudy, ...]
    fixed: PooledEstimate | NotComputable
    random: PooledEstimate | NotComputable
    random_by_method: dict[str, PooledEstimate | NotComputable]
    random_hksj_by_method: dict[str, PooledEstimate | NotComputable]
    mantel_haenszel: PooledEstimate | NotComputable
    peto: PooledEstimate | NotComputable
    heterogeneity: Any
    reconciliation: Any
    tests: dict[str, Any]
    recommendation: Any
    applicability: tuple[Any, ...]
    trim_fill: Any
    pet_peese: Any
    limit: Any
    selection: Any
    leave_one_out: Any
    cumulative: Any
    failsafe: Any
    subgroups: dict[str, Any]
    meta_regression: dict[str, Any]
    #: trim and fill under other estimator/model choices, keyed "L0, trim FE, fill RE" etc.
    trim_fill_variants: dict[str, Any] = field(default_factory=dict)
    power: Any = None
    #: how strong selection would have to be (Mathur & VanderWeele 2020)
    selection_sensitivity: Any = None
    #: adjusted estimates under a priori selection weights (Vevea & Woods 2005)
    selection_fixed_weights: Any = None
    #: trials known to be missing (reported = no): pooled estimate had they reported
    #: (None when the table has no such row)
    unreported_trials: Any = None
    #: rows worth checking against the paper (stats.diagnostics.RowFlags): implausible
    #: arms, outliers and influential studies, heterogeneity drivers, possible duplicates
    row_flags: Any = None
    notes: tuple[str, ...] = field(default_factory=tuple)
    #: "full", or "core" while only the core stage is ready (effects, pooling,
    #: heterogeneity, tests, trim and fill); the other fields then say CORE_PENDING
    stage: str = "full"
    #: the fingerprint once computed, with the review and measure it was computed for
    _fingerprint_memo: list = field(default_factory=list, init=False, repr=False)

    @property
    def k(self) -> int:
        return self.data.k

    @property
    def fingerprint(self) -> str:
        """SHA-256 of the entered study data and measure (:func:`fingerprint`), computed
        when an output first asks for it: an edit in the window does not pay for it (about
        10 ms at 3,000 studies)."""
        memo = self._fingerprint_memo
        entry = memo[0] if memo else None
        if entry is None or entry[0] is not self.review or entry[1] != self.measure:
            entry = (self.review, self.measure, fingerprint(self.review, self.measure))
            memo[:] = [entry]
        return entry[2]

    @property
    def is_ratio(self) -> bool:
        return self.measure in RATIO_MEASURES

    @property
    def excluded_points(self) -> tuple[tuple[float, float, str], ...]:
        return tuple(
            (e.y, e.se, e.label) for e in self.excluded if e.y is not None and e.se is not None
        )

    def recommended_test(self):
        rec = self.recommendation
        if isinstance(rec, NotComputable) or rec is None:
            return rec
        return self.tests.get(rec.key)


def fingerprint(review: Review, measure: str) -> str:
    """SHA-256 of the entered study data and measure (for the sheet's footer)."""
    payload = json.dumps(
        {"measure": measure, "studies": [s.to_dict() for s in review.studies]},
        sort_keys=True,
        ensure_ascii=True,
        default=str,
    )
    return hashlib.sha256(payload.encode("ascii")).hexdigest()


def _published_on_scale(review: Review, measure: str):
    p = review.details.published
    if not p.is_complete():
        return None
    vals = (p.estimate, p.lower, p.upper)
    if measure in RATIO_MEASURES:
        if min(vals) <= 0:
            return None
        return tuple(math.log(v) for v in vals)
    return tuple(float(v) for v in vals)


def _leave_one_out_estimates(data: StudyData, model_key: str, measure: str):
    """(row, label, estimate without that study) under one model, for the reconciliation."""
    from .stats import binary
    from .stats import pooling as pl
    from .stats.sensitivity import LARGE_K

    key = model_key.removesuffix("+HKSJ")
    if data.k > LARGE_K and key in ("FE-IV", *pl.TAU2_METHODS):
        # many studies: running sums in O(k) memory, as the leave-one-out analysis (whose
        # note says so), not a k x k mask
        fixed, random, _ = pl.leave_one_out_large(
            data.y, data.v, method="DL" if key == "FE-IV" else key
        )
        results = fixed if key == "FE-IV" else random
        return [
            (data.rows[i], data.labels[i], r.estimate if r else float("nan"))
            for i, r in enumerate(results)
        ]
    keep = ~np.eye(data.k, dtype=bool)
    if key == "FE-IV":
        results = pl.fixed_effect_batch(data.y, data.v, keep, with_weights=False)
    elif key in pl.TAU2_METHODS:
        results = pl.random_effects_batch(data.y, data.v, keep, method=key, with_weights=False)
    else:
        results = []
        for i in range(data.k):
            sub = data.subset(keep[i])
            if key == "MH":
                results.append(binary.mantel_haenszel(sub.a, sub.b, sub.c, sub.d, measure))
            else:
                results.append(binary.peto(sub.a, sub.b, sub.c, sub.d))
    return [
        (data.rows[i], data.labels[i], r.estimate if r else float("nan"))
        for i, r in enumerate(results)
    ]


def _flagged_rows(review: Review, problems) -> tuple[tuple[int, str], ...]:
    """Rows with an entry problem, in table order, once each."""
    seen: dict[int, str] = {}
    for p in problems:
        row = getattr(p, "row", None)
        if isinstance(row, int) and 0 <= row < len(review.studies) and row not in seen:
            seen[row] = review.studies[row].study or f"Row {row + 1}"
    return tuple(sorted(seen.items()))


def _safe(fn, *args, **kw):
    """Run one statistic; an unexpected numerical failure becomes NotComputable, not a crash."""
    try:
        return fn(*args, **kw)
    except (ValueError, ArithmeticError, IndexError, np.linalg.LinAlgError):
        return NotComputable(
            "could not be computed for these data (the numbers are too extreme or too few "
            "for reliable arithmetic)"
        )


def _selection_block(data: StudyData, random, settings: AnalysisSettings):
    """Sensitivity to selection and the fixed-weight selection models, both read off the
    main random-effects estimate (its side defines "affirmative"; its τ² is held fixed)."""
    from .stats.selection_fixed import fixed_weight_selection
    from .stats.selection_sensitivity import DEFAULT_ETAS, selection_sensitivity

    if not isinstance(random, PooledEstimate):
        why = NotComputable("needs the random-effects pooled estimate, which is not available")
        return why, why
    etas = DEFAULT_ETAS
    extra = settings.selection_eta
    if extra is not None and math.isfinite(extra) and extra >= 1:
        etas = (*DEFAULT_ETAS, float(extra))
    sens = _safe(
        selection_sensitivity,
        data,
        pooled_estimate=random.estimate,
        tau2=random.tau2,
        etas=etas,
    )
    fixed_w = _safe(fixed_weight_selection, data, pooled_estimate=random.estimate, tau2=random.tau2)
    return sens, fixed_w


def _unreported_block(review: Review, data: StudyData, random, settings: AnalysisSettings):
    """Scenarios for the trials marked as never reported (None when there are none)."""
    rows = [i for i, r in enumerate(review.studies) if not r.reported]
    if not rows:
        return None
    from .stats.unreported import sizes_of, unreported_trials

    with_size = [i for i in rows if sizes_of([review.studies[i]])]
    if not with_size:
        return NotComputable(
            f"{len(rows)} trial(s) marked as never reported, but none has its size entered"
        )
    if not isinstance(random, PooledEstimate):
        return NotComputable("needs the random-effects pooled estimate, which is not available")
    return _safe(
        unreported_trials,
        data,
        sizes_of([review.studies[i] for i in with_size]),
        tuple(with_size),
        random,
        tau2_method=settings.tau2_method,
        rows_without_size=tuple(i for i in rows if i not in with_size),
    )


class AnalysisCancelled(Exception):
    """Raised by :func:`analyse` when its ``progress`` callback returned False."""


#: the stages :func:`analyse` reports to its ``progress`` callback, in order
STAGES: tuple[str, ...] = (
    "reading the study rows",
    "pooling",
    "small-study tests",
    "trim and fill",
    "leave one out",
    "cumulative analysis",
    "other adjustments",
    "subgroups",
    "power simulation",
)


def _stage(progress, name: str) -> None:
    """Tell ``progress`` a stage starts; stop the analysis when it answers False."""
    if progress is not None and progress(name, STAGES.index(name), len(STAGES)) is False:
        raise AnalysisCancelled(name)


def analyse(
    review: Review,
    settings: AnalysisSettings | None = None,
    *,
    with_power: bool = False,
    power_progress=None,
    progress=None,
    stage: str = "full",
    core: AnalysisResult | None = None,
) -> AnalysisResult:
    """Analyse a review: derive effects, pool, test, adjust; return one frozen result.

    ``progress(stage, index, total)``, if given, is called as each stage of
    :data:`STAGES` starts; returning False cancels the analysis
    (:class:`AnalysisCancelled` is raised).

    ``stage="core"`` stops after effects, pooling, heterogeneity, the tests and trim and
    fill (what the funnel and the first numbers need); the other results are
    ``NotComputable(CORE_PENDING)`` and ``result.stage`` is "core". ``core``, a core
    result of the same review and settings, lets the full stage reuse its objects.
    """
    from .stats import pooling

    # one analysis asks for the tau^2 of the same studies many times: estimate each once
    with pooling.reuse_tau2():
        return _analyse(
            review,
            settings,
            with_power=with_power,
            power_progress=power_progress,
            progress=progress,
            stage=stage,
            core=core,
        )


#: pooled results are reported at 95 % whatever the paper's study CIs used
CONFIDENCE_LEVEL = 0.95


def _analyse(
    review, settings, *, with_power, power_progress, progress=None, stage="full", core=None
) -> AnalysisResult:
    settings = settings or AnalysisSettings()
    measure = settings.measure or review.details.measure
    if core is None:
        base = _core_stage(review, settings, measure, progress)
    else:
        # the full stage after a core stage of the same inputs: the same objects, so that
        # views showing only core numbers (the funnel) need not redraw
        base = _core_again(core, review, settings, measure)
    if stage == "core":
        return base
    # the full result is the core stage's (one construction of the shared fields) with the
    # rest filled in
    base = replace(
        base,
        tests=_other_tests(base.data, settings, base.tests),
        **_pool_by_method(base.data, settings, base.confidence_level, base.random),
    )
    rest = _full_stage(review, settings, base, with_power, power_progress, progress)
    return replace(base, stage="full", **rest)


def _core_again(core: AnalysisResult, review, settings, measure) -> AnalysisResult:
    """The core result of an earlier core stage of the same inputs, around these inputs."""
    return replace(core, review=review, settings=settings, measure=measure)


def _core_stage(review, settings, measure, progress) -> AnalysisResult:
    """Effects, pooling, heterogeneity, the tests and trim and fill: what the funnel and
    the first numbers need."""
    from .stats import pooling as pl

    conf = CONFIDENCE_LEVEL
    _stage(progress, "reading the study rows")
    derived, problems, data, excluded = _read_rows(review, settings, measure)
    _stage(progress, "pooling")
    fixed, random = _pool(data, settings, conf)
    by_method, hksj_by_method = _pending_by_method(settings, random).values()
    mh, peto = _pool_counts(data, measure, conf)
    het = _safe(
        pl.heterogeneity, data.y, data.v, tau2_method=settings.tau2_method, confidence_level=conf
    )
    _stage(progress, "small-study tests")
    recommendation, tests, rules = _small_study_tests(data, settings, random, het)
    _stage(progress, "trim and fill")
    s = settings
    trim_fill = _trim_fill(
        data, s, s.trimfill_estimator, s.trimfill_trim_model, s.trimfill_fill_model
    )
    return _core_result(
        review,
        settings,
        measure=measure,
        confidence_level=conf,
        derived=tuple(derived),
        problems=tuple(problems),
        data=data,
        excluded=excluded,
        fixed=fixed,
        random=random,
        random_by_method=by_method,
        random_hksj_by_method=hksj_by_method,
        mantel_haenszel=mh,
        peto=peto,
        heterogeneity=het,
        tests=tests,
        recommendation=recommendation,
        applicability=_rules_tuple(rules),
        trim_fill=trim_fill,
    )


def _read_rows(review, settings, measure):
    """Each row's effect and SE, the entry checks, and the arrays the statistics read."""
    from .intake.checks import check_rows
    from .stats.derived_rows import shared_columns
    from .stats.effects import derive_all

    level = review.details.ci_level
    # the three read the same fields: one reader for this analysis
    with shared_columns(review.studies):
        derived = derive_all(
            review.studies,
            measure,
            ci_level=level,
            ci_method=settings.ci_method,
            smd_correction=settings.smd_correction,
        )
        problems = check_rows(
            review.studies, measure, level, places=review.intake.places(review.studies)
        )
        data, excluded = build_study_data(review, measure, derived)
    return derived, problems, data, excluded


def _pool(data, settings, conf):
    """Fixed effect and the chosen random-effects model (the core stage's pooling)."""
    from .stats import pooling as pl

    y, v = data.y, data.v
    fixed = _safe(pl.fixed_effect, y, v, confidence_level=conf)
    random = _safe(
        pl.random_effects,
        y,
        v,
        method=settings.tau2_method,
        hksj=settings.hksj,
        confidence_level=conf,
    )
    return fixed, random


def _pending_by_method(settings, random) -> dict[str, dict[str, Any]]:
    """The by-estimator tables of the core stage: the chosen model, the others pending."""
    from .stats.pooling import TAU2_METHODS

    pending = NotComputable(CORE_PENDING)
    by_method: dict[str, Any] = {m: pending for m in TAU2_METHODS}
    hksj_by_method = dict(by_method)
    (hksj_by_method if settings.hksj else by_method)[settings.tau2_method] = random
    return {"random_by_method": by_method, "random_hksj_by_method": hksj_by_method}


def _pool_by_method(data, settings, conf, random) -> dict[str, dict[str, Any]]:
    """Random effects by every τ² estimator, with and without HKSJ (the full stage's
    comparison); the chosen model is the core stage's object."""
    from .stats import pooling as pl

    y, v = data.y, data.v
    tables: dict[str, dict[str, Any]] = {}
    for name, hksj in (("random_by_method", False), ("random_hksj_by_method", True)):
        tables[name] = {
            m: random
            if (m, hksj) == (settings.tau2_method, settings.hksj)
            else _safe(pl.random_effects, y, v, method=m, hksj=hksj, confidence_level=conf)
            for m in pl.TAU2_METHODS
        }
    return tables


def _pool_counts(data, measure, conf):
    """Mantel-Haenszel and Peto, where the 2x2 counts allow them."""
    from .stats import binary

    if measure in BINARY_MEASURES and data.has_counts():
        mh = _safe(
            binary.mantel_haenszel,
            data.a,
            data.b,
            data.c,
            data.d,
            measure,
            confidence_level=conf,
        )
    else:
        mh = NotComputable("Mantel-Haenszel pooling needs 2x2 counts for every study")
    if measure == "OR" and data.has_counts():
        peto = _safe(binary.peto, data.a, data.b, data.c, data.d, confidence_level=conf)
    else:
        peto = NotComputable("Peto pooling needs 2x2 counts and the odds ratio")
    return mh, peto


#: the tests the core stage runs beside the recommended one: the funnel draws its line
CORE_TESTS = ("egger",)


def _small_study_tests(data, settings, random, het):
    """The recommended test (and those the funnel draws), the other registered tests
    pending, and the conditions for reading them."""
    from .stats import applicability, asymmetry

    tau2 = random.tau2 if isinstance(random, PooledEstimate) else 0.0
    recommendation = _safe(applicability.recommend, data, tau2)
    # the recommended test runs with the options it was recommended with (e.g. the arcsine
    # test with random effects when tau^2 is large: Sterne et al. 2011)
    options = {}
    if recommendation and not isinstance(recommendation, NotComputable):
        options[recommendation.key] = recommendation.kwargs()
    now = set(CORE_TESTS) | set(options)
    pending = NotComputable(CORE_PENDING)
    tests = {
        key: asymmetry.run_test(key, data, alpha=settings.test_alpha, **options.get(key, {}))
        if key in now
        else pending
        for key in asymmetry.REGISTRY
    }
    if isinstance(het, NotComputable):
        rules = _safe(applicability.applicability, data, None, None)
    else:
        rules = _safe(applicability.applicability, data, het.i2, het.pvalue)
    return recommendation, tests, rules


def _other_tests(data, settings, tests) -> dict[str, Any]:
    """The registered tests the core stage left pending (the full stage's part), in
    registry order."""
    from .stats import asymmetry

    return {
        key: asymmetry.run_test(key, data, alpha=settings.test_alpha) if is_pending(t) else t
        for key, t in tests.items()
    }


def _trim_fill(data, settings, estimator, trim_model, fill_model):
    from .stats import adjust

    return _safe(
        adjust.trim_and_fill,
        data,
        estimator=estimator,
        side=settings.trimfill_side,
        trim_model=trim_model,
        fill_model=fill_model,
        tau2_method=settings.tau2_method,
    )


def _full_stage(review, settings, base, with_power, power_progress, progress) -> dict[str, Any]:
    """The rest of the analysis, as the fields of the full result."""
    from .stats import adjust, sensitivity
    from .stats.adjust_selection import selection_fit_note
    from .stats.adjust_trimfill import trim_fill_fit_notes
    from .stats.diagnostics import flag_rows

    data = base.data
    variants = _trim_fill_variants(data, settings, base.trim_fill)
    _stage(progress, "leave one out")
    loo = _safe(sensitivity.leave_one_out, data, tau2_method=settings.tau2_method)
    _stage(progress, "cumulative analysis")
    cumulative = _safe(sensitivity.cumulative, data, tau2_method=settings.tau2_method)
    row_flags = _safe(flag_rows, data, loo)
    recon = _reconciliation(review, base, row_flags)
    _stage(progress, "other adjustments")
    pet_peese = _safe(
        adjust.pet_peese, data, alpha=settings.petpeese_alpha, sided=settings.petpeese_sided
    )
    limit = _safe(adjust.limit_meta_analysis, data, tau2_method=settings.tau2_method)
    selection = _safe(adjust.selection_model, data, cutpoints=settings.selection_cutpoints)
    failsafe = _safe(sensitivity.fail_safe_n, data, trivial=settings.orwin_trivial)
    sel_sens, sel_fixed = _selection_block(data, base.random, settings)
    missing = _unreported_block(review, data, base.random, settings)
    _stage(progress, "subgroups")
    subgroups, meta_reg = _moderators(data, settings)
    power = _power(data, settings, power_progress, progress) if with_power else None
    # work thinned or done another way for a large review is said in the result (DESIGN 8)
    thinned = (getattr(loo, "note", ""), getattr(cumulative, "note", ""))
    trim_fill = trim_fill_fit_notes((base.trim_fill, *variants.values()))
    notes = tuple(n for n in (*thinned, *trim_fill, selection_fit_note(selection)) if n)
    return dict(
        reconciliation=recon,
        trim_fill_variants=variants,
        pet_peese=pet_peese,
        limit=limit,
        selection=selection,
        leave_one_out=loo,
        cumulative=cumulative,
        failsafe=failsafe,
        subgroups=subgroups,
        meta_regression=meta_reg,
        power=power,
        selection_sensitivity=sel_sens,
        selection_fixed_weights=sel_fixed,
        unreported_trials=missing,
        row_flags=row_flags,
        notes=notes,
    )


def _trim_fill_variants(data, settings, trim_fill) -> dict[str, Any]:
    """Trim and fill depends on its choices (Peters et al. 2007): show the other usual ones."""
    variants: dict[str, Any] = {}
    s = settings
    chosen = (s.trimfill_estimator, s.trimfill_trim_model, s.trimfill_fill_model)
    for est in ("L0", "R0"):
        for trim_m, fill_m in (("FE", "FE"), ("FE", "RE"), ("RE", "RE")):
            key = f"{est}, trim {trim_m}, fill {fill_m}"
            if (est, trim_m, fill_m) == chosen:
                variants[key] = trim_fill  # already run
            else:
                variants[key] = _trim_fill(data, settings, est, trim_m, fill_m)
    return variants


def _reconciliation(review, base: AnalysisResult, row_flags):
    """The entered rows pooled by every model against the review's published result."""
    from .stats.diagnostics import suspects
    from .stats.reconcile import reconcile

    measure, data = base.measure, base.data
    published = _published_on_scale(review, measure)
    if published is None:
        return NotComputable("no published pooled result with its CI was entered")
    models: dict[str, Any] = {"FE-IV": base.fixed, "MH": base.mantel_haenszel, "Peto": base.peto}
    models.update(base.random_by_method)
    models.update({f"{m}+HKSJ": r for m, r in base.random_hksj_by_method.items()})
    return _safe(
        reconcile,
        models,
        published,
        ratio=measure in RATIO_MEASURES,
        published_model=review.details.published.model,
        loo=lambda key: _leave_one_out_estimates(data, key, measure),
        flagged=_flagged_rows(review, base.problems) + suspects(row_flags, base.problems),
    )


def _moderators(data, settings) -> tuple[dict[str, Any], dict[str, Any]]:
    """Subgroup analyses and meta-regressions with the SE, by each grouping with 2+ levels."""
    from .stats import moderators

    subgroups: dict[str, Any] = {}
    meta_reg: dict[str, Any] = {}
    for by in ("risk_of_bias", "subgroup"):
        labels = getattr(data, by)
        if len({x for x in labels if x}) >= 2:
            subgroups[by] = _safe(
                moderators.subgroup_analysis, data, by=by, tau2_method=settings.tau2_method
            )
            meta_reg[by] = _safe(moderators.meta_regression, data, by)
    return subgroups, meta_reg


def _power(data, settings, power_progress, progress):
    """Monte-Carlo power of the recommended test for these SEs."""
    from .stats.power import simulate_power

    _stage(progress, "power simulation")
    return _safe(
        simulate_power,
        data,
        test="recommended",
        reps=settings.power_reps,
        seed=settings.power_seed,
        selection=settings.power_selection,
        alpha=settings.test_alpha,
        progress=power_progress,
    )


def _rules_tuple(rules) -> tuple:
    if isinstance(rules, NotComputable):
        return ()
    return tuple(rules)


def _core_result(review, settings, **core: Any) -> AnalysisResult:
    """The core stage: what the first redraw needs; the rest says it is being updated."""
    pending = NotComputable(CORE_PENDING)
    return AnalysisResult(
        review=review,
        settings=settings,
        **core,
        reconciliation=pending,
        trim_fill_variants={},
        pet_peese=pending,
        limit=pending,
        selection=pending,
        leave_one_out=pending,
        cumulative=pending,
        failsafe=pending,
        subgroups={},
        meta_regression={},
        power=None,
        selection_sensitivity=pending,
        selection_fixed_weights=pending,
        unreported_trials=pending if any(not r.reported for r in review.studies) else None,
        stage="core",
    )
