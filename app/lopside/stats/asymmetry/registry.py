"""The registry: one :class:`TestSpec` line per test (the measures it suits, the data it
needs, its published source), and :func:`run_test` / :func:`run_all`, through which the
window, CLI and sheet run them.
"""

from __future__ import annotations

import numpy as np

from lopside.stats.asymmetry.base import (
    ALL_MEASURES,
    DEFAULT_ALPHA,
    REGISTRY,
    AsymmetryResult,
    TestSpec,
)
from lopside.stats.asymmetry.rank import begg
from lopside.stats.asymmetry.regression import arcsine, egger, harbord, peters, smd_modified
from lopside.stats.asymmetry.single import _name
from lopside.stats.data import StudyData
from lopside.stats.results import NotComputable

# One line per test, in the order the faces list them (the dict is declared in base.py so
# that the test families can look a test up by key without importing this module).
REGISTRY.update(
    (spec.key, spec)
    for spec in (
        TestSpec(
            "egger",
            "Egger's test",
            egger,
            ALL_MEASURES,
            "se",
            "Egger M, Davey Smith G, Schneider M, Minder C. BMJ 1997;315:629-34",
            "Do smaller studies sit further from the pooled effect than their precision allows?",
        ),
        TestSpec(
            "begg",
            "Begg's rank test",
            begg,
            ALL_MEASURES,
            "se",
            "Begg CB, Mazumdar M. Biometrics 1994;50:1088-101",
            "Do study effects rise or fall in rank with their variance?",
        ),
        TestSpec(
            "harbord",
            "Harbord's test",
            harbord,
            frozenset({"OR"}),
            "counts",
            "Harbord RM, Egger M, Sterne JAC. Stat Med 2006;25:3443-57",
            "Egger-type test built on the score statistic, for odds ratios from 2x2 counts.",
        ),
        TestSpec(
            "peters",
            "Peters' test",
            peters,
            frozenset({"OR", "RR"}),
            "counts",
            "Peters JL, Sutton AJ, Jones DR, Abrams KR, Rushton L. JAMA 2006;295:676-80",
            "Do odds ratios change with study size (1 / total sample size)?",
        ),
        TestSpec(
            "smd_modified",
            "Egger's test with modified SE",
            smd_modified,
            frozenset({"SMD"}),
            "sizes",
            "Pustejovsky JE, Rodgers MA. Res Synth Methods 2019;10:57-71",
            "Egger-type test for SMDs using a precision based on group sizes only.",
        ),
        TestSpec(
            "arcsine",
            "Arcsine test",
            arcsine,
            frozenset({"OR", "RR", "RD"}),
            "counts",
            "Rücker G, Schwarzer G, Carpenter J. Stat Med 2008;27:746-63",
            "Egger-type test on the arcsine difference, whose SE depends on group sizes only.",
        ),
    )
)


def run_test(key: str, data: StudyData, **kw) -> AsymmetryResult | NotComputable:
    """Run the registered test ``key`` on ``data``.

    Parameters
    ----------
    key : str
        A key of :data:`REGISTRY`.
    data : StudyData
    **kw
        Passed to the test function (``alpha``, ``random`` for "arcsine", ...).

    Returns
    -------
    AsymmetryResult or NotComputable

    Raises
    ------
    ValueError
        For an unknown key (a programming error, not bad data).
    """
    if key not in REGISTRY:
        raise ValueError(f"unknown asymmetry test {key!r}; known: {sorted(REGISTRY)}")
    try:
        return REGISTRY[key].function(data, **kw)
    except (ArithmeticError, IndexError, ValueError, np.linalg.LinAlgError) as exc:
        # A numerical failure in one test must not take the whole analysis down with it
        # (run_all is called outside the analysis' own safety net); the tests of
        # tests/test_edge_numerics.py check that this is not the normal path.
        return NotComputable(
            f"{_name(key)} could not be computed for these data (the numbers are too "
            f"extreme for accurate arithmetic: {type(exc).__name__})"
        )


def run_all(
    data: StudyData,
    *,
    alpha: float = DEFAULT_ALPHA,
    options: dict[str, dict] | None = None,
) -> dict[str, AsymmetryResult | NotComputable]:
    """Run every registered test; tests the data cannot support give NotComputable.

    Parameters
    ----------
    data : StudyData
    alpha : float
    options : dict, optional
        Extra keyword arguments per test key, e.g. ``{"arcsine": {"random": True}}``.

    Returns
    -------
    dict
        Registry key -> result, in registry order.
    """
    options = options or {}
    return {key: run_test(key, data, alpha=alpha, **options.get(key, {})) for key in REGISTRY}
