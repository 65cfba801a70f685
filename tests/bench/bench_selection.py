"""Benchmark: what issue 20's block adds to analyse() at 30 studies (a script, not a test).

Interleaves, in one run, the whole analyse() with each part of the block (sensitivity to
selection, the four fixed-weight selection models, the missing-trial scenarios for three
trials never reported) and prints CPU-time (thread time) ratios, which a shared, loaded
machine disturbs far less than wall time. Target: the block <= 10 % of analyse().

    PYTHONPATH=app OPENBLAS_NUM_THREADS=1 python tests/bench/bench_selection.py
"""

from __future__ import annotations

import statistics
import time
from dataclasses import replace

from bench_analyse import invented_review

from lopside.analysis import _unreported_block, analyse
from lopside.model.review import StudyRow
from lopside.stats.selection_fixed import fixed_weight_selection
from lopside.stats.selection_sensitivity import selection_sensitivity


def main(rounds: int = 100) -> None:
    review = invented_review(30)
    missing = tuple(
        StudyRow(study=f"Invented registered {i}", n=200.0 + 50 * i, reported=False)
        for i in range(3)
    )
    review = replace(review, studies=review.studies + missing)
    r = analyse(review)
    parts = {
        "analyse()": lambda: analyse(review),
        "sensitivity": lambda: selection_sensitivity(
            r.data, pooled_estimate=r.random.estimate, tau2=r.random.tau2
        ),
        "fixed weights": lambda: fixed_weight_selection(
            r.data, pooled_estimate=r.random.estimate, tau2=r.random.tau2
        ),
        "missing trials": lambda: _unreported_block(review, r.data, r.random, r.settings),
    }
    times: dict[str, list[float]] = {k: [] for k in parts}
    for _ in range(rounds):
        for key, fn in parts.items():
            t0 = time.thread_time()
            fn()
            times[key].append(time.thread_time() - t0)
    for key, t in times.items():
        print(
            f"{key:<16} CPU min {min(t) * 1e3:7.2f} ms   median {statistics.median(t) * 1e3:7.2f} ms"
        )
    whole = statistics.median(times["analyse()"])
    core = statistics.median(times["sensitivity"]) + statistics.median(times["fixed weights"])
    full = core + statistics.median(times["missing trials"])
    print(f"block without missing trials / analyse(): {core / whole:.3f}")
    print(f"block with 3 missing trials  / analyse(): {full / whole:.3f}   (target <= 0.10)")


if __name__ == "__main__":
    main()
