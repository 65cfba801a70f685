"""When an asymmetry test is worth reading, and which test suits the review.

Design invariants
-----------------
* :func:`applicability` states each published rule with its numbers; it never decides for
  the user. A rule that cannot be assessed has ``met=None`` and says why.
* :func:`recommend` picks the test by outcome measure and the data available, and keeps
  the reason in plain words, with the source, so the sheet can print it.
* Rules: Ioannidis & Trikalinos 2007 (CMAJ 176:1091) and Sterne et al. 2011 (BMJ
  343:d4002) / Cochrane Handbook 5.1 section 10.4.3.1 (methods.md 7.1 and 7.4).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .asymmetry import REGISTRY, needs_met
from .data import StudyData

#: at least this many studies (Sterne et al. 2011; Ioannidis & Trikalinos 2007)
MIN_STUDIES = 10
#: largest / smallest within-study variance must exceed this (Ioannidis & Trikalinos 2007)
MIN_VARIANCE_RATIO = 4.0
#: I² must be below this, in percent (Ioannidis & Trikalinos 2007)
MAX_I2 = 50.0
#: two-sided level at which a single study counts as significant (Ioannidis & Trikalinos)
STUDY_ALPHA = 0.05
#: tau² on the log odds ratio scale above which only the random-effects arcsine test was
#: shown to work reasonably (Sterne et al. 2011; Handbook 5.1 10.4.3.1; from memory)
OR_TAU2_LIMIT = 0.1

_Z_STUDY = 1.959963984540054  # two-sided 0.05 normal quantile


@dataclass(frozen=True, slots=True)
class Rule:
    """One applicability rule.

    Attributes
    ----------
    rule : str
        Key ("min_studies", "variance_ratio", "heterogeneity", "significant_study").
    title : str
        The rule in plain words.
    met : bool or None
        None when the rule cannot be assessed with these data.
    detail : str
        The numbers behind the verdict ("14 studies (at least 10 advised)").
    """

    rule: str
    title: str
    met: bool | None
    detail: str


@dataclass(frozen=True, slots=True)
class Recommendation:
    """The test suggested for this review.

    Attributes
    ----------
    key : str
        Registry key of the primary test.
    reason : str
        Why, in plain words, with the source.
    exploratory : bool
        True when the test's behaviour for this measure is not established, so a result
        should be read as exploratory only.
    alternatives : tuple of str
        Other registry keys worth showing beside the primary test.
    options : tuple of (name, value)
        Keyword options for the primary test (e.g. ``(("random", True),)``).
    """

    key: str
    reason: str
    exploratory: bool
    alternatives: tuple[str, ...] = ()
    options: tuple[tuple[str, object], ...] = ()

    def kwargs(self) -> dict[str, object]:
        """``options`` as a dict, ready to pass to :func:`~lopside.stats.asymmetry.run_test`."""
        return dict(self.options)


def _pct(x: float) -> str:
    return f"{x:.0f} %" if x >= 1 or x == 0 else f"{x:.1f} %"


def _p(x: float) -> str:
    return "< 0.001" if x < 0.001 else f"{x:.3f}" if x < 0.01 else f"{x:.2f}"


def _finite(x) -> bool:
    return x is not None and isinstance(x, (int, float)) and math.isfinite(x)


def applicability(
    data: StudyData,
    heterogeneity_i2: float | None,
    heterogeneity_p: float | None,
    *,
    alpha_het: float = 0.10,
) -> tuple[Rule, ...]:
    """The conditions under which a funnel-asymmetry test is meaningful.

    Ioannidis & Trikalinos 2007 (CMAJ): at least 10 studies; ratio of the largest to the
    smallest within-study variance above 4; I² below 50 % and no significant
    heterogeneity; at least one study significant on its own (two-sided p < 0.05 from
    z = y/se). Sterne et al. 2011 (BMJ) repeat the first three.

    Parameters
    ----------
    data : StudyData
    heterogeneity_i2 : float or None
        I² in percent (None when not available).
    heterogeneity_p : float or None
        p-value of Cochran's Q.
    alpha_het : float
        Level at which heterogeneity counts as significant (0.10 by convention).

    Returns
    -------
    tuple of Rule
    """
    k = data.k
    rules = [
        Rule(
            "min_studies",
            f"At least {MIN_STUDIES} studies",
            k >= MIN_STUDIES,
            f"{k} {'study' if k == 1 else 'studies'} (at least {MIN_STUDIES} advised)",
        )
    ]

    v = data.v[np.isfinite(data.v) & (data.v > 0)] if k else np.empty(0)
    if v.size >= 2:
        ratio = float(v.max() / v.min())
        rules.append(
            Rule(
                "variance_ratio",
                "Studies differ enough in size",
                ratio > MIN_VARIANCE_RATIO,
                f"largest within-study variance is {ratio:.1f} times the smallest "
                f"(more than {MIN_VARIANCE_RATIO:g} advised)",
            )
        )
    else:
        rules.append(
            Rule(
                "variance_ratio",
                "Studies differ enough in size",
                None,
                "needs at least two studies with a standard error",
            )
        )

    title = "Little heterogeneity between studies"
    if _finite(heterogeneity_i2) and _finite(heterogeneity_p):
        i2, hp = float(heterogeneity_i2), float(heterogeneity_p)
        rules.append(
            Rule(
                "heterogeneity",
                title,
                i2 < MAX_I2 and hp >= alpha_het,
                f"I² = {_pct(i2)}, heterogeneity p = {_p(hp)} (I² below {MAX_I2:g} % and "
                f"p at least {alpha_het:.2f} advised)",
            )
        )
    else:
        rules.append(Rule("heterogeneity", title, None, "heterogeneity could not be estimated"))

    ok = np.isfinite(data.y) & np.isfinite(data.se) & (data.se > 0) if k else np.empty(0, bool)
    if ok.any():
        n_sig = int((np.abs(data.y[ok] / data.se[ok]) > _Z_STUDY).sum())
        rules.append(
            Rule(
                "significant_study",
                "At least one study significant on its own",
                n_sig >= 1,
                f"{n_sig} of {int(ok.sum())} studies have p < {STUDY_ALPHA:g} on their own",
            )
        )
    else:
        rules.append(
            Rule(
                "significant_study",
                "At least one study significant on its own",
                None,
                "no study has a usable effect and standard error",
            )
        )
    return tuple(rules)


_NOT_ESTABLISHED = (
    "how well asymmetry tests work for {what} has not been established (Sterne et al. "
    "2011), so read Egger's test as exploratory"
)


def recommend(data: StudyData, tau2: float | None) -> Recommendation:
    """Suggest an asymmetry test for this review (Sterne et al. 2011; Handbook 5.1 10.4.3.1).

    MD: Egger's test. OR with 2x2 counts: Harbord's test, Peters' test as alternative;
    when τ² on the log odds ratio scale exceeds 0.1, the random-effects arcsine test.
    OR without counts: Egger's test, exploratory. SMD with group sizes: Egger's test with
    the modified SE (Pustejovsky & Rodgers 2019). RR, RD, HR and SMD without sizes:
    Egger's test, exploratory.

    Parameters
    ----------
    data : StudyData
    tau2 : float or None
        Between-study variance on the analysis scale (None when not estimated).

    Returns
    -------
    Recommendation
    """
    m = data.measure
    counts = needs_met(REGISTRY["harbord"].needs, data)
    if m == "MD":
        return Recommendation(
            "egger",
            "for mean differences Egger's test is the usual choice (Sterne et al. 2011)",
            False,
        )
    if m == "OR" and counts:
        if _finite(tau2) and tau2 > OR_TAU2_LIMIT:
            return Recommendation(
                "arcsine",
                f"between-study variance is large (τ² = {tau2:.2f} on the log odds ratio "
                f"scale, above {OR_TAU2_LIMIT:g}); only the arcsine test with random "
                "effects had been shown to work reasonably well then (Sterne et al. 2011; "
                "Rücker et al. 2008)",
                False,
                ("harbord", "peters"),
                (("random", True),),
            )
        return Recommendation(
            "harbord",
            "for odds ratios with 2x2 counts, Harbord's test avoids the false alarms "
            "Egger's test gives when effects are large or events are few (Harbord et al. "
            "2006; Sterne et al. 2011)",
            False,
            ("peters", "arcsine"),
        )
    if m == "OR":
        return Recommendation(
            "egger",
            "without 2x2 counts the tests designed for odds ratios cannot be run; Egger's "
            "test on log odds ratios can give false alarms when effects are large or "
            "events are few (Harbord et al. 2006; Peters et al. 2006), so read it as "
            "exploratory",
            True,
        )
    if m == "SMD" and needs_met(REGISTRY["smd_modified"].needs, data):
        return Recommendation(
            "smd_modified",
            "for standardised mean differences the usual SE depends on the effect itself; "
            "Egger's test with a precision based on group sizes keeps false alarms near "
            "the nominal rate (Pustejovsky & Rodgers 2019)",
            False,
        )
    if m == "SMD":
        what = "standardised mean differences without group sizes"
        alts: tuple[str, ...] = ()
    elif m == "RR":
        what = "risk ratios"
        alts = ("peters", "arcsine") if counts else ()
    elif m == "RD":
        what = "risk differences"
        alts = ("arcsine",) if counts else ()
    elif m == "HR":
        what = "hazard ratios"
        alts = ()
    else:
        what = f"the measure {m!r}"
        alts = ()
    return Recommendation("egger", _NOT_ESTABLISHED.format(what=what), True, alts)
