"""Monte-Carlo power of a small-study-effect test for this review's own studies.

Design invariants
-----------------
* :func:`simulate_power` is a plain synchronous function with a ``progress(done, total)``
  callback that may cancel; only the window runs it in a worker thread.
* Nothing loops over replicates in Python. Each chunk of replicates is one
  ``(replicates, k)`` array; the tests run through the batched cores of
  :mod:`lopside.stats.asymmetry`, i.e. the very code that tests the review itself.
* The simulated review keeps this review's studies: their SEs (or group sizes and
  control-group risks when 2x2 counts are known), the pooled random-effects estimate as
  the true effect and the REML τ² as the between-study variance, unless given.
* Selection ("publication"): a study result counts as significant when its two-sided
  p < 0.05 **and** it lies on the side of the pooled effect (``selection_side="pooled"``,
  the default: publication favours significant results in the expected direction), or
  on either side (``selection_side="both"``). Significant results are always published;
  others with probability ``selection``. Each study of each replicate is redrawn until a
  result is published, by vectorised rejection sampling: each round draws
  ``TRIES_PER_ROUND`` candidates for every (replicate, study) not yet published as one
  array, takes the first published candidate with ``argmax`` over the boolean array and
  repeats for the rest (one candidate per round measured fastest, see the constant).
* Studies keep their own SE when only effects and SEs are known. With 2x2 counts the
  counts are simulated (binomial, from the group sizes and the control-group risk), so
  the SE of a log odds ratio varies with its estimate as in real trials; with SMDs and
  group sizes the SE is recomputed from each simulated g.
* Same ``seed``, ``reps`` and ``chunk`` give the same numbers.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from . import asymmetry as asy
from .applicability import recommend
from .data import StudyData
from .pooling import random_effects
from .results import NotComputable

#: Tests the simulation can run (all registered tests).
SIMULATED_TESTS: tuple[str, ...] = ("egger", "begg", "harbord", "peters", "smd_modified", "arcsine")

_Z05 = 1.959963984540054  # two-sided 0.05 normal quantile (a study's own significance)
_MAX_TRIES = 5000  # candidate draws per study before giving up (selection near 0)
# Candidates per study per round of rejection sampling. Measured (10,000 replicates,
# k = 30, selection 0.25 and 0.05): 1 was fastest for normal and count models alike,
# 2, 3, 4 and 8 were 1.2-3x slower, because a candidate draw costs more than the overhead
# of another round on the shrinking set of unpublished studies.
TRIES_PER_ROUND = 1
_BEGG_CELLS = 2_000_000  # pairwise (replicates x k x k) cells per slice for Begg's test
_MAX_TRIES_MSG = (
    "with selection this strong some studies would almost never be published (none in "
    f"{_MAX_TRIES:,} attempts); choose a larger publication probability"
)


@dataclass(frozen=True, slots=True)
class PowerResult:
    """Simulated false-alarm rate and power of one asymmetry test.

    Attributes
    ----------
    test, name : str
        Registry key and display name of the test simulated.
    reps, seed : int
        Replicates per scenario and the seed of the random generator.
    type1, type1_mcse : float
        Share of replicates without selection in which the test signals (p < alpha),
        and its Monte-Carlo standard error.
    power, power_mcse : float
        Share of replicates with selection in which the test signals, and its MC SE.
    selection : float
        Probability that a non-significant result is published.
    selection_side : str
        "pooled" or "both" (see the module notes).
    alpha : float
        Threshold of the test.
    tau2, true_effect : float
        Between-study variance and true (mean) effect used, on the analysis scale.
    k : int
        Studies per simulated review.
    simulation : str
        What was simulated, in plain words.
    failed_type1, failed_power : int
        Replicates where the test could not be computed (counted as no signal).
    options : tuple of (name, value)
        Options passed to the test (e.g. random effects for the arcsine test).
    reading : str
        One plain-language sentence.
    """

    test: str
    name: str
    reps: int
    seed: int
    type1: float
    type1_mcse: float
    power: float
    power_mcse: float
    selection: float
    selection_side: str
    alpha: float
    tau2: float
    true_effect: float
    k: int
    simulation: str
    failed_type1: int
    failed_power: int
    options: tuple[tuple[str, object], ...]
    reading: str


# --------------------------------------------------------------------------------------
# Study models: how one study's result is drawn


class _NormalModel:
    """Normal estimates around the true effect, with this review's fixed SEs."""

    fields = ("y",)

    def __init__(self, data: StudyData, mu: float, tau: float):
        self.k = data.k
        self.mu, self.tau = mu, tau
        self.se = np.asarray(data.se, dtype=float)
        k = data.k
        sm = data.se_modified
        self.sm = sm if sm.size == k and bool(np.all(np.isfinite(sm))) else None

    def describe(self, tau2: float) -> str:
        return (
            "normal estimates around the pooled effect with this review's standard errors "
            f"(between-study variance τ² = {tau2:.3g})"
        )

    def candidates(self, rng, idx, tries):
        se = self.se[idx][:, None]
        theta = self.mu + self.tau * rng.standard_normal((idx.size, tries))
        y = theta + se * rng.standard_normal((idx.size, tries))
        return {"y": y}, y / se

    def finish(self, out, m):
        sim = {"y": out["y"], "se": np.broadcast_to(self.se, (m, self.k))}
        if self.sm is not None:
            sim["sm"] = np.broadcast_to(self.sm, (m, self.k))
        return sim


class _SmdModel:
    """Hedges' g drawn with each study's group sizes; its SE recomputed from the draw.

    Var(g) ≈ 1/n1 + 1/n0 + g² / (2 (n1 + n0)) (common practice; Borenstein et al. 2009,
    from memory), so the usual SE carries the effect, as in real SMD reviews.
    """

    fields = ("y", "se")

    def __init__(self, data: StudyData, mu: float, tau: float):
        self.k = data.k
        self.mu, self.tau = mu, tau
        self.n1 = np.asarray(data.n1, dtype=float)
        self.n0 = np.asarray(data.n0, dtype=float)
        self.base = 1.0 / self.n1 + 1.0 / self.n0
        self.two_n = 2.0 * (self.n1 + self.n0)

    def describe(self, tau2: float) -> str:
        return (
            "standardised mean differences drawn with each study's group sizes, their SE "
            f"recomputed from each draw (between-study variance τ² = {tau2:.3g})"
        )

    def candidates(self, rng, idx, tries):
        base = self.base[idx][:, None]
        two_n = self.two_n[idx][:, None]
        theta = self.mu + self.tau * rng.standard_normal((idx.size, tries))
        g = theta + np.sqrt(base + theta**2 / two_n) * rng.standard_normal((idx.size, tries))
        se = np.sqrt(base + g**2 / two_n)
        return {"y": g, "se": se}, g / se

    def finish(self, out, m):
        return {
            "y": out["y"],
            "se": out["se"],
            "sm": np.broadcast_to(np.sqrt(self.base), (m, self.k)),
        }


def effect_from_counts(measure: str, a, b, c, d):
    """Effect (analysis scale), SE and usability from 2x2 counts, batched.

    When any cell of a study is zero, 0.5 is added to all four cells for the effect and
    its SE (common practice; Cochrane Handbook 5.1 section 16.9.2, from memory). Studies
    without events in either group (OR, RR) or without non-events in either group (OR)
    give no usable ratio and are marked unusable, as in the analysis of a real review.
    """
    a, b, c, d = (np.asarray(x, dtype=float) for x in (a, b, c, d))
    zero = (a == 0) | (b == 0) | (c == 0) | (d == 0)
    h = np.where(zero, 0.5, 0.0)
    ac, bc, cc, dc = a + h, b + h, c + h, d + h
    with np.errstate(divide="ignore", invalid="ignore"):
        if measure == "OR":
            y = np.log(ac * dc / (bc * cc))
            se = np.sqrt(1 / ac + 1 / bc + 1 / cc + 1 / dc)
            use = ((a + c) > 0) & ((b + d) > 0)
        elif measure == "RR":
            y = np.log(ac / (ac + bc)) - np.log(cc / (cc + dc))
            se = np.sqrt(1 / ac - 1 / (ac + bc) + 1 / cc - 1 / (cc + dc))
            use = (a + c) > 0
        elif measure == "RD":
            p1, p0 = a / (a + b), c / (c + d)
            y = p1 - p0
            var = p1 * (1 - p1) / (a + b) + p0 * (1 - p0) / (c + d)
            q1, q0 = ac / (ac + bc), cc / (cc + dc)
            var_c = q1 * (1 - q1) / (ac + bc) + q0 * (1 - q0) / (cc + dc)
            se = np.sqrt(np.where(var > 0, var, var_c))
            use = np.ones(y.shape, dtype=bool)
        else:
            raise ValueError(f"effects from counts are defined for OR, RR and RD, not {measure}")
    return y, se, use & np.isfinite(y) & np.isfinite(se) & (se > 0)


class BinomialTable:
    """Binomial(n_i, p_i) sampling by inversion of per-study CDF tables, vectorised.

    All tables sit in one increasing array (study i's CDF shifted by +i), so one
    ``searchsorted`` serves every study: x = #{j : cdf_i[j] <= u} for u ~ U(0, 1), which
    has P(x = j) = cdf_i[j] - cdf_i[j - 1] (inversion method; common practice).
    """

    def __init__(self, n, p):
        from scipy.special import bdtr

        n = np.asarray(n, dtype=np.int64)
        p = np.asarray(p, dtype=float)
        parts, offsets, start = [], [], 0
        for i, (ni, pi) in enumerate(zip(n, p, strict=True)):
            cdf = bdtr(np.arange(ni + 1), int(ni), float(pi))
            cdf[-1] = 1.0  # guard against rounding below 1, so x <= n always
            parts.append(cdf + i)
            offsets.append(start)
            start += ni + 1
        self.flat = np.concatenate(parts)
        self.offsets = np.asarray(offsets, dtype=np.int64)

    def sample(self, rng, idx, tries):
        """Draws of shape (len(idx), tries) for studies ``idx``."""
        u = rng.random((idx.size, tries)) + idx[:, None]
        x = np.searchsorted(self.flat, u, side="right") - self.offsets[idx][:, None]
        return x.astype(float)


class _CountModel:
    """2x2 counts drawn from each study's group sizes and control-group risk."""

    fields = ("a", "c", "y", "se", "use")

    def __init__(self, data: StudyData, mu: float, tau: float):
        self.k = data.k
        self.measure = data.measure
        self.mu, self.tau = mu, tau
        self.n1 = np.rint(data.a + data.b).astype(np.int64)
        self.n0 = np.rint(data.c + data.d).astype(np.int64)
        # Observed control risk, nudged off 0 and 1 so that a study with no control
        # events still simulates some (common practice for a plug-in estimate).
        self.p0 = (data.c + 0.5) / (self.n0 + 1.0)
        self.asd_var = 1.0 / (4.0 * self.n1) + 1.0 / (4.0 * self.n0)
        # Arms whose risk is the same in every draw are sampled from a CDF table (faster
        # than numpy's binomial with array parameters); with τ² > 0 the intervention
        # risk changes per draw and numpy's binomial is used.
        self.table0 = BinomialTable(self.n0, self.p0)
        self.table1 = BinomialTable(self.n1, self._p1(self.p0, mu)) if tau == 0 else None

    def describe(self, tau2: float) -> str:
        what = {"OR": "odds ratio", "RR": "risk ratio", "RD": "risk difference"}[self.measure]
        return (
            "2x2 counts drawn from each study's group sizes and control-group risk, "
            f"{what} around the pooled value (between-study variance τ² = {tau2:.3g})"
        )

    def _p1(self, p0, theta):
        if self.measure == "OR":
            return 1.0 / (1.0 + np.exp(-(np.log(p0 / (1.0 - p0)) + theta)))
        if self.measure == "RR":
            return np.minimum(p0 * np.exp(theta), 1.0)  # risks cannot exceed 1
        return np.clip(p0 + theta, 0.0, 1.0)

    def candidates(self, rng, idx, tries):
        m = idx.size
        n1 = self.n1[idx][:, None]
        n0 = self.n0[idx][:, None]
        p0 = self.p0[idx][:, None]
        if self.table1 is None:
            theta = self.mu + self.tau * rng.standard_normal((m, tries))
            a = rng.binomial(n1, self._p1(p0, theta)).astype(float)
        else:
            a = self.table1.sample(rng, idx, tries)
        c = self.table0.sample(rng, idx, tries)
        y, se, use = effect_from_counts(self.measure, a, n1 - a, c, n0 - c)
        z = np.where(use, y / np.where(use, se, 1.0), 0.0)
        return {"a": a, "c": c, "y": y, "se": se, "use": use}, z

    def finish(self, out, m):
        n1 = np.broadcast_to(self.n1, (m, self.k))
        n0 = np.broadcast_to(self.n0, (m, self.k))
        a, c = out["a"], out["c"]
        with np.errstate(divide="ignore", invalid="ignore"):
            asd = np.arcsin(np.sqrt(a / n1)) - np.arcsin(np.sqrt(c / n0))
        return {
            "y": out["y"],
            "se": out["se"],
            "use": out["use"],
            "a": a,
            "b": n1 - a,
            "c": c,
            "d": n0 - c,
            "asd": asd,
            "asd_var": np.broadcast_to(self.asd_var, (m, self.k)),
        }


def _model_for(data: StudyData, mu: float, tau: float):
    if data.measure in ("OR", "RR", "RD") and asy.needs_met("counts", data):
        return _CountModel(data, mu, tau)
    k = data.k
    if (
        data.measure == "SMD"
        and data.n1.size == k
        and data.n0.size == k
        and bool(np.all(np.isfinite(data.n1)) and np.all(np.isfinite(data.n0)))
        and bool(np.all(data.n1 > 0) and np.all(data.n0 > 0))
    ):
        return _SmdModel(data, mu, tau)
    return _NormalModel(data, mu, tau)


# --------------------------------------------------------------------------------------
# Drawing published reviews


def _draw(
    model, rng, m: int, selection: float, direction: float, tries: int = TRIES_PER_ROUND
) -> dict | None:
    """One chunk of ``m`` simulated reviews (arrays of shape (m, k)); None if unpublishable.

    ``selection >= 1`` means no selection (one draw per study). Otherwise each round draws
    ``tries`` candidates for every study not yet published, marks the published ones and
    takes the first with ``argmax``; rounds repeat for the rest.
    """
    k = model.k
    total = m * k
    study = np.tile(np.arange(k), m)
    if selection >= 1.0:
        cand, _ = model.candidates(rng, study, 1)
        out = {f: cand[f][:, 0] for f in model.fields}
    else:
        out = {}
        pending = np.arange(total)
        # expected draws per study are at most 1/selection; draw about that many at once
        used = 0
        while pending.size:
            if used >= _MAX_TRIES:
                return None
            cand, z = model.candidates(rng, study[pending], tries)
            pub = z * direction > _Z05 if direction != 0 else np.abs(z) > _Z05
            if selection > 0:
                pub |= rng.random(pub.shape) < selection
            got = pub.any(axis=1)
            first = pub.argmax(axis=1)
            rows = np.flatnonzero(got)
            for f in model.fields:
                if f not in out:
                    out[f] = np.empty(total, dtype=cand[f].dtype)
                out[f][pending[rows]] = cand[f][rows, first[rows]]
            pending = pending[~got]
            used += tries
    return model.finish({f: v.reshape(m, k) for f, v in out.items()}, m)


def simulate_reviews(
    data: StudyData,
    *,
    reps: int,
    seed: int = 20261201,
    tau2: float | None = None,
    true_effect: float | None = None,
    selection: float = 1.0,
    selection_side: str = "pooled",
) -> dict[str, np.ndarray] | NotComputable:
    """Simulated reviews like this one, as arrays of shape (reps, k).

    The building block of :func:`simulate_power`, exposed for checks and figures.

    Parameters
    ----------
    data : StudyData
    reps : int
    seed : int
    tau2, true_effect : float, optional
        Default: REML τ² and random-effects pooled estimate of ``data``.
    selection : float
        Probability that a non-significant result is published (1 = no selection).
    selection_side : {"pooled", "both"}

    Returns
    -------
    dict of ndarray or NotComputable
        Always "y" and "se"; "use" for counts; "a", "b", "c", "d", "asd", "asd_var" when
        counts were simulated; "sm" (modified SE) for SMDs with group sizes.
    """
    setup = _setup(data, tau2, true_effect, selection, selection_side)
    if isinstance(setup, NotComputable):
        return setup
    model, _, _, direction = setup
    out = _draw(model, np.random.default_rng(seed), int(reps), selection, direction)
    return NotComputable(_MAX_TRIES_MSG) if out is None else out


#: Largest group size whose events are simulated (a binomial table has n + 1 entries).
MAX_SIMULATED_ARM = 1_000_000


def _setup(data, tau2, true_effect, selection, selection_side):
    if data.k < 3:
        return NotComputable(
            f"a power simulation needs at least 3 studies; this analysis has {data.k}"
        )
    if not 0.0 <= selection <= 1.0:
        return NotComputable("the publication probability must lie between 0 and 1")
    if selection_side not in ("pooled", "both"):
        raise ValueError("selection_side must be 'pooled' or 'both'")
    if tau2 is None or true_effect is None:
        re = random_effects(data.y, data.v, method="REML")
        if isinstance(re, NotComputable):
            return re
        tau2 = re.tau2 if tau2 is None else tau2
        true_effect = re.estimate if true_effect is None else true_effect
    tau2, mu = float(tau2), float(true_effect)
    if not (math.isfinite(tau2) and tau2 >= 0 and math.isfinite(mu)):
        return NotComputable("the between-study variance and true effect must be finite")
    direction = float(np.sign(mu)) if selection_side == "pooled" else 0.0
    if data.measure in ("OR", "RR", "RD") and asy.needs_met("counts", data):
        arms = np.concatenate([data.a + data.b, data.c + data.d])
        if not (np.all(np.isfinite(arms)) and np.all(arms <= MAX_SIMULATED_ARM)):
            # counts are drawn from a table of the binomial distribution per arm, which
            # for a billion participants would not fit in memory
            return NotComputable(
                "a power simulation draws every group's events, and groups larger than "
                f"{MAX_SIMULATED_ARM:,} participants are too large for that"
            )
    return _model_for(data, mu, math.sqrt(tau2)), mu, tau2, direction


def _pvalues(key: str, sim: dict, opts: dict) -> tuple[np.ndarray, np.ndarray]:
    use = sim.get("use")
    if key == "egger":
        r = asy.egger_core(sim["y"], sim["se"], use)
    elif key == "begg":
        m, k = sim["y"].shape
        step = max(1, _BEGG_CELLS // (k * k))
        parts = [
            asy.begg_core(
                sim["y"][i : i + step],
                sim["se"][i : i + step] ** 2,
                None if use is None else use[i : i + step],
            )
            for i in range(0, m, step)
        ]
        return (
            np.concatenate([p.pvalue for p in parts]),
            np.concatenate([p.status for p in parts]),
        )
    elif key == "harbord":
        r = asy.harbord_core(sim["a"], sim["b"], sim["c"], sim["d"])
    elif key == "peters":
        r = asy.peters_core(sim["y"], sim["a"], sim["b"], sim["c"], sim["d"], use)
    elif key == "smd_modified":
        r = asy.smd_modified_core(sim["y"], sim["sm"])
    elif key == "arcsine":
        r = asy.arcsine_core(sim["asd"], sim["asd_var"], random=bool(opts.get("random", False)))
    else:  # pragma: no cover - guarded by SIMULATED_TESTS
        raise ValueError(key)
    return r.pvalue, r.status


def _pct(x: float) -> str:
    return f"{100 * x:.0f} %"


def simulate_power(
    data: StudyData,
    *,
    test: str = "recommended",
    reps: int = 10_000,
    seed: int = 20261201,
    tau2: float | None = None,
    selection: float = 0.25,
    alpha: float = asy.DEFAULT_ALPHA,
    true_effect: float | None = None,
    progress: Callable[[int, int], bool | None] | None = None,
    chunk: int = 2000,
    selection_side: str = "pooled",
    options: dict | None = None,
) -> PowerResult | NotComputable:
    """Monte-Carlo false-alarm rate and power of an asymmetry test for this review.

    Two scenarios with this review's studies: (a) no selection, giving the test's type I
    error (false-alarm) rate; (b) selection, where significant results are always
    published and the others with probability ``selection``, giving the power to detect
    that selection.

    Parameters
    ----------
    data : StudyData
    test : str
        "recommended" (see :func:`lopside.stats.applicability.recommend`) or a registry key.
    reps : int
        Replicates per scenario.
    seed : int
        Seed of the random generator.
    tau2 : float, optional
        Between-study variance (default: REML estimate of this review).
    selection : float
        Probability that a non-significant result is published (0.25 by default).
    alpha : float
        Threshold at which the test signals (0.10 by convention).
    true_effect : float, optional
        True mean effect on the analysis scale (default: the random-effects estimate).
    progress : callable, optional
        ``progress(done, total)`` after each chunk; returning ``False`` cancels.
    chunk : int
        Replicates per vectorised chunk (memory vs. call overhead).
    selection_side : {"pooled", "both"}
        Which significant results are favoured: those on the side of the pooled effect
        (default) or those on either side.
    options : dict, optional
        Options for the test (e.g. ``{"random": True}`` for "arcsine"); with
        ``test="recommended"`` the recommendation's options are used.

    Returns
    -------
    PowerResult or NotComputable
        ``NotComputable("cancelled")`` when ``progress`` returned False.
    """
    if reps < 1 or chunk < 1:
        return NotComputable("the number of replicates must be at least 1")
    if not 0.0 < alpha < 1.0:
        return NotComputable("the test threshold must lie between 0 and 1")
    setup = _setup(data, tau2, true_effect, selection, selection_side)
    if isinstance(setup, NotComputable):
        return setup
    model, mu, t2, direction = setup
    chosen = _test_for(data, test, options, t2)
    if isinstance(chosen, NotComputable):
        return chosen
    key, opts = chosen
    counts = _run(model, seed, key, opts, reps, chunk, selection, direction, alpha, progress)
    if isinstance(counts, NotComputable):
        return counts
    hits, failed = counts

    type1 = hits["type1"] / reps
    power = hits["power"] / reps
    name = asy.REGISTRY[key].name
    if key == "arcsine" and opts.get("random"):
        name = "Arcsine test (random effects)"
    reading = (
        f"With these {data.k} studies, {name} would detect this degree of selection about "
        f"{_pct(power)} of the time (when only {_pct(selection)} of non-significant results "
        f"get published); with no selection it would signal about {_pct(type1)} of the time "
        f"(nominal {_pct(alpha)})."
    )
    note = _simulation_note(model, t2, data)
    return PowerResult(
        test=key,
        name=name,
        reps=int(reps),
        seed=int(seed),
        type1=type1,
        type1_mcse=math.sqrt(type1 * (1 - type1) / reps),
        power=power,
        power_mcse=math.sqrt(power * (1 - power) / reps),
        selection=float(selection),
        selection_side=selection_side,
        alpha=float(alpha),
        tau2=t2,
        true_effect=mu,
        k=data.k,
        simulation=note,
        failed_type1=failed["type1"],
        failed_power=failed["power"],
        options=tuple(sorted(opts.items())),
        reading=reading,
    )


def _test_for(data: StudyData, test: str, options: dict | None, t2: float):
    """(registry key, options) of the test to simulate, or NotComputable when it cannot be
    simulated or these data cannot run it."""
    if test == "recommended":
        rec = recommend(data, t2)
        key, opts = rec.key, rec.kwargs()
    else:
        key, opts = test, dict(options or {})
    if key not in asy.REGISTRY:
        raise ValueError(f"unknown asymmetry test {key!r}; known: {sorted(asy.REGISTRY)}")
    if key not in SIMULATED_TESTS:
        return NotComputable(f"power simulation is not available for {asy.REGISTRY[key].name}")
    pre = asy.precheck(key, data)
    if pre is not None:
        return pre
    return key, opts


def _run(model, seed, key, opts, reps, chunk, selection, direction, alpha, progress):
    """Signals and failed fits per scenario ("type1": no selection; "power": selection),
    drawn in chunks; NotComputable when drawing fails or ``progress`` cancels."""
    rng = np.random.default_rng(seed)
    hits = {"type1": 0, "power": 0}
    failed = {"type1": 0, "power": 0}
    done = 0
    while done < reps:
        m = min(chunk, reps - done)
        for scenario, sel in (("type1", 1.0), ("power", selection)):
            sim = _draw(model, rng, m, sel, direction)
            if sim is None:
                return NotComputable(_MAX_TRIES_MSG)
            p, status = _pvalues(key, sim, opts)
            ok = status == asy.OK
            hits[scenario] += int((ok & (p < alpha)).sum())
            failed[scenario] += int((~ok).sum())
        done += m
        if progress is not None and progress(done, reps) is False:
            return NotComputable("cancelled")
    return hits, failed


def _simulation_note(model, t2: float, data: StudyData) -> str:
    """How the studies were simulated, with the caveat of a model without counts."""
    note = model.describe(t2)
    if isinstance(model, _NormalModel) and data.measure in ("OR", "RR", "SMD"):
        note += (
            "; without counts or group sizes the link between the effect and its SE is not "
            "reproduced, so false alarms may be understated"
        )
    return note
