"""Small-study-effect (funnel-asymmetry) tests, each registered once.

Design invariants
-----------------
* A test is one public function ``f(data, *, alpha=0.10, **options)`` returning an
  :class:`AsymmetryResult` or :class:`~lopside.stats.results.NotComputable`, plus one
  :data:`REGISTRY` line naming the measures it suits, the data it needs and its published
  source. The window, CLI and sheet discover tests from the registry only.
* The arithmetic of every test lives in a batched ``*_core`` function that works on arrays
  whose last axis is the studies. The single-review path calls it with shape ``(k,)`` and
  the power simulation (:mod:`lopside.stats.power`) with shape ``(replicates, k)``, so both
  run exactly the same code. A study is set aside by giving it weight 0 (``use`` False).
* Regression tests estimate the residual variance from the data (multiplicative
  dispersion) and use a t test on k - 2 degrees of freedom (methods.md section 3); the
  Thompson-Sharp random-effects variant fixes the dispersion at 1 and uses a z test.
* Bad data never raise: they give ``NotComputable`` with a plain reason.

Layout: :mod:`.base` (thresholds, messages, result types, the registry dict),
:mod:`.regression` (Egger, Egger WLS, Harbord, Peters, SMD modified SE, arcsine),
:mod:`.rank` (Begg), :mod:`.single` (the single-review path: needs, reasons, results),
:mod:`.registry` (one line per test; :func:`run_test`, :func:`run_all`). This package
re-exports their public names, so ``lopside.stats.asymmetry`` is the one name to import.

Formulas: /work/shared/methods.md sections 3.1-3.9.
"""

from __future__ import annotations

from lopside.stats.asymmetry.base import (
    ALL_MEASURES,
    BEGG_EXACT_MAX,
    DEFAULT_ALPHA,
    EXACT_FIT,
    MSG_BEGG_FLAT,
    MSG_EGGER_DISAGREE,
    MSG_EXACT_FIT,
    MSG_NEEDS_COUNTS,
    MSG_NEEDS_SIZES,
    MSG_NUMERIC,
    MSG_SINGULAR,
    MSG_TOO_FEW,
    MSG_WRONG_MEASURE,
    NUMERIC,
    OK,
    REGISTRY,
    SINGULAR,
    TOO_FEW,
    AsymmetryResult,
    LineFit,
    TestArrays,
    TestSpec,
)
from lopside.stats.asymmetry.rank import begg, begg_core, kendall_exact_cdf
from lopside.stats.asymmetry.registry import run_all, run_test
from lopside.stats.asymmetry.regression import (
    arcsine,
    arcsine_arrays,
    arcsine_core,
    egger,
    egger_core,
    egger_wls,
    egger_wls_core,
    fit_line,
    harbord,
    harbord_cells,
    harbord_core,
    peters,
    peters_core,
    smd_modified,
    smd_modified_core,
)
from lopside.stats.asymmetry.single import format_p, needs_met, precheck

__all__ = [
    "ALL_MEASURES",
    "AsymmetryResult",
    "BEGG_EXACT_MAX",
    "DEFAULT_ALPHA",
    "EXACT_FIT",
    "LineFit",
    "MSG_BEGG_FLAT",
    "MSG_EGGER_DISAGREE",
    "MSG_EXACT_FIT",
    "MSG_NEEDS_COUNTS",
    "MSG_NEEDS_SIZES",
    "MSG_NUMERIC",
    "MSG_SINGULAR",
    "MSG_TOO_FEW",
    "MSG_WRONG_MEASURE",
    "NUMERIC",
    "OK",
    "REGISTRY",
    "SINGULAR",
    "TOO_FEW",
    "TestArrays",
    "TestSpec",
    "arcsine",
    "arcsine_arrays",
    "arcsine_core",
    "begg",
    "begg_core",
    "egger",
    "egger_core",
    "egger_wls",
    "egger_wls_core",
    "fit_line",
    "format_p",
    "harbord",
    "harbord_cells",
    "harbord_core",
    "kendall_exact_cdf",
    "needs_met",
    "peters",
    "peters_core",
    "precheck",
    "run_all",
    "run_test",
    "smd_modified",
    "smd_modified_core",
]
