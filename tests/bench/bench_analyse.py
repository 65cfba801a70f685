"""Benchmark: the whole analyse() at k = 30, 300 and 3,000 (a script, not a test).

Compares, in one run, the full analysis with the bare inverse-variance pooling of the same
data (the ratio says what the rest of the analysis costs) and prints the growth with k.

    PYTHONPATH=app python tests/bench/bench_analyse.py
"""

from __future__ import annotations

import statistics
import time

import numpy as np

from lopside.analysis import analyse
from lopside.model.review import Review, ReviewDetails, StudyRow
from lopside.stats import pooling


def invented_review(k: int, seed: int = 1) -> Review:
    rng = np.random.default_rng(seed)
    rows = []
    for i in range(k):
        n = int(rng.integers(40, 1200))
        n1 = n // 2
        p0 = rng.uniform(0.1, 0.4)
        odds = p0 / (1 - p0) * np.exp(rng.normal(-0.3, 0.2))
        p1 = odds / (1 + odds)
        rows.append(
            StudyRow(
                study=f"Invented {i + 1}",
                int_events=int(rng.binomial(n1, p1)),
                int_total=n1,
                ctl_events=int(rng.binomial(n - n1, p0)),
                ctl_total=n - n1,
                risk_of_bias=("low", "some concerns", "high")[i % 3],
            )
        )
    return Review(details=ReviewDetails(title=f"invented k={k}", measure="OR"), studies=tuple(rows))


def best_of(fn, repeat: int) -> tuple[float, float]:
    """(best, median) wall time of ``repeat`` calls."""
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return min(times), statistics.median(times)


def main() -> None:
    print(f"{'k':>6} {'analyse best':>14} {'median':>10} {'bare RE pool':>14} {'ratio':>8}")
    prev = None
    for k, rep in ((30, 30), (300, 5), (3000, 2)):
        review = invented_review(k)
        res = analyse(review)  # warm caches and imports
        y, v = res.data.y, res.data.v
        best, med = best_of(lambda review=review: analyse(review), rep)
        bare, _ = best_of(lambda y=y, v=v: pooling.random_effects(y, v), max(rep, 20))
        growth = "" if prev is None else f"  x{best / prev:.1f} for x10 studies"
        print(
            f"{k:>6} {best * 1e3:>11.1f} ms {med * 1e3:>7.1f} ms {bare * 1e3:>11.2f} ms "
            f"{best / bare:>8.0f}{growth}"
        )
        prev = best


if __name__ == "__main__":
    main()
