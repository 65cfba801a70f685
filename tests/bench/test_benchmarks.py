"""Benchmark suite (pytest-benchmark), outside the default test run.

Run, from the repository root::

    PYTHONPATH=app python -m pytest tests/bench -m bench --benchmark-only

(add ``--benchmark-columns=min,median,rounds`` for a shorter pytest-benchmark table). At
the end a table of ratios measured in the same run is printed (tests/bench/conftest.py):

* analyse() at k = 30, 300 and 3,000 invented studies, each against the bare
  random-effects (REML) pooling of the same studies, and its growth with k;
* analyse() inside ``pooling.reuse_tau2()`` at k = 30 and 300 (each tau^2 estimated
  once per analysis), against analyse() as it is;
* leave-one-out at k = 300 batched against pooling each subset with the scalar function;
* the vectorised power simulation (10,000 replicates of two scenarios) against the
  per-replicate statsmodels loop of tests/bench/bench_power.py (run for its
  ``LOOP_REPS`` replicates and scaled linearly);
* the appraisal sheet at 14 and 120 invented studies, without and with the forest plot.

DESIGN.md section 7 gives the targets; nothing here asserts a time. The window
benchmarks are in tests/bench/bench_window.py.
"""

from __future__ import annotations

import numpy as np
import pytest
from bench_analyse import invented_review
from bench_power import LOOP_REPS, REPS, loop_egger, md_design

from lopside.analysis import analyse
from lopside.stats import pooling
from lopside.stats.sensitivity import leave_one_out

pytestmark = pytest.mark.bench

#: review sizes for analyse(), and rounds for each (the largest takes seconds)
ANALYSE_SIZES = (30, 300, 3000)
_ROUNDS = {30: 30, 300: 5, 3000: 2}
SHEET_SIZES = (14, 120)
#: sizes at which analyse() is also timed inside pooling.reuse_tau2()
REUSE_SIZES = (30, 300)
#: the statsmodels loop runs LOOP_REPS replicates; its time is scaled to REPS
POWER_LOOP_SCALE = REPS / LOOP_REPS


class _Reviews(dict):
    """k -> (invented review, its analysis), made on first use (that analysis also warms
    imports outside the timings)."""

    def __missing__(self, k: int):
        review = invented_review(k)
        self[k] = (review, analyse(review))
        return self[k]


@pytest.fixture(scope="module")
def reviews():
    """Invented binary reviews (tests/bench/bench_analyse.py) with their analyses."""
    return _Reviews()


@pytest.mark.parametrize("k", ANALYSE_SIZES)
def test_analyse(benchmark, keep, reviews, k):
    review, result = reviews[k]
    benchmark.group = f"analyse k={k}"
    out = benchmark.pedantic(analyse, args=(review,), rounds=_ROUNDS[k], iterations=1)
    keep(f"analyse-{k}")
    assert out.k == result.k == k  # the benchmark ran the full analysis of all k studies


@pytest.mark.parametrize("k", REUSE_SIZES)
def test_analyse_reusing_tau2(benchmark, keep, reviews, k):
    # what analyse() would cost if it ran inside pooling.reuse_tau2() (a proposal)
    review, result = reviews[k]

    def run():
        with pooling.reuse_tau2():
            return analyse(review)

    benchmark.group = f"analyse k={k}"
    out = benchmark.pedantic(run, rounds=_ROUNDS[k], iterations=1)
    keep(f"analyse-reuse-{k}")
    assert out.random.estimate == result.random.estimate


@pytest.mark.parametrize("k", ANALYSE_SIZES)
def test_bare_pooling(benchmark, keep, reviews, k):
    _, result = reviews[k]
    y, v = result.data.y, result.data.v
    benchmark.group = f"analyse k={k}"
    out = benchmark(pooling.random_effects, y, v, method="REML")
    keep(f"pool-{k}")
    assert out.estimate == pytest.approx(result.random_by_method["REML"].estimate, rel=1e-12)


def test_selection_block(benchmark, keep, reviews):
    # issue 20: sensitivity to selection, the four fixed-weight selection models and the
    # missing-trial scenarios (3 trials never reported), the part of analyse() they add;
    # target <= 10 % of analyse() at 30 studies (ratio below)
    from dataclasses import replace

    from lopside.analysis import _selection_block, _unreported_block
    from lopside.model.review import StudyRow

    review, _ = reviews[30]
    missing = tuple(
        StudyRow(study=f"Invented registered {i}", n=200.0 + 50 * i, reported=False)
        for i in range(3)
    )
    review = replace(review, studies=review.studies + missing)
    result = analyse(review)

    def block():
        sens, fixed_w = _selection_block(result.data, result.random, result.settings)
        return sens, fixed_w, _unreported_block(review, result.data, result.random, result.settings)

    benchmark.group = "analyse k=30"
    sens, fixed_w, unrep = benchmark.pedantic(block, rounds=30, iterations=1)
    keep("selection-block-30")
    assert sens.affirmative + sens.nonaffirmative == 30 and len(fixed_w.estimates) == 4
    assert unrep.count == 3


def _loo_by_subsets(y, v):
    """Leave-one-out the plain way (what the batch replaced): per subset the fixed-effect
    and REML random-effects pooling and Cochran's Q."""
    out = []
    for i in range(y.size):
        keep = np.arange(y.size) != i
        out.append(
            (
                pooling.fixed_effect(y[keep], v[keep]),
                pooling.random_effects(y[keep], v[keep], method="REML"),
                pooling.cochran_q(y[keep], v[keep]),
            )
        )
    return out


def test_leave_one_out_batched(benchmark, keep, reviews):
    _, result = reviews[300]
    benchmark.group = "leave-one-out k=300"
    out = benchmark.pedantic(leave_one_out, args=(result.data,), rounds=5, iterations=1)
    keep("loo-batched-300")
    assert len(out.rows) == 300


def test_leave_one_out_by_subsets(benchmark, keep, reviews):
    _, result = reviews[300]
    benchmark.group = "leave-one-out k=300"
    out = benchmark.pedantic(
        _loo_by_subsets, args=(result.data.y, result.data.v), rounds=2, iterations=1
    )
    keep("loo-loop-300")
    batched = leave_one_out(result.data)
    assert [r.estimate for _, r, _ in out] == pytest.approx(
        [r.random.estimate for r in batched.rows], rel=1e-9
    )


def test_power_vectorised(benchmark, keep):
    from lopside.stats import power

    md = md_design()
    power.simulate_power(md, test="egger", reps=10, tau2=0.0, true_effect=0.2)  # warm-up
    benchmark.group = "power"
    out = benchmark.pedantic(
        power.simulate_power,
        args=(md,),
        kwargs={"test": "egger", "reps": REPS, "tau2": 0.0, "true_effect": 0.2},
        rounds=3,
        iterations=1,
    )
    keep("power-vectorised")
    assert 0.0 <= out.type1 <= 1.0 and 0.0 <= out.power <= 1.0


def test_power_statsmodels_loop(benchmark, keep):
    md = md_design()
    loop_egger(md, 2, 0, 0.2)  # warm-up: statsmodels imports
    benchmark.group = "power"
    t1, pw = benchmark.pedantic(loop_egger, args=(md, LOOP_REPS, 1, 0.2), rounds=1, iterations=1)
    keep("power-loop")
    assert 0.0 <= t1 <= 1.0 and 0.0 <= pw <= 1.0


@pytest.mark.parametrize("forest", [False, True], ids=["three-pages", "with-forest"])
@pytest.mark.parametrize("k", SHEET_SIZES)
def test_sheet(benchmark, keep, reviews, k, forest):
    sheet = pytest.importorskip("lopside.sheet")
    _, result = reviews[k]
    sheet.sheet_bytes(result, include_forest=forest, date="2026-01-01")  # warm-up: fonts
    benchmark.group = "sheet"
    pdf = benchmark.pedantic(
        sheet.sheet_bytes,
        args=(result,),
        kwargs={"include_forest": forest, "date": "2026-01-01"},
        rounds=3,
        iterations=1,
    )
    keep(f"sheet-forest-{k}" if forest else f"sheet-{k}")
    assert pdf.startswith(b"%PDF")


@pytest.mark.loopback_only
def test_batch_throughput_one_vs_two_workers():
    """lopside batch: reviews per second on 1 and 2 local Dask workers, and the batch path
    against a plain loop over the analysis (tests/bench/bench_batch.py; ratios printed)."""
    from bench_batch import measure, report

    r = measure(n=200, k=30, rounds=2)
    print("\n" + report(r))
    assert r["reviews"] == 200  # the run completed; the ratios are read, not asserted


def test_pdf_candidate_pages_against_plain_text():
    """Candidate pages of a 60-page PDF against pdfplumber's plain text extraction
    (tests/bench/bench_pdf.py; the ratio is printed, not asserted)."""
    from bench_pdf import measure, report

    r = measure(pages=60, rounds=3)
    print("\n" + report(r))
    assert r["pages"] == 60
