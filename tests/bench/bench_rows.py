"""Benchmark: reading the rows (``_read_rows``: effects, row checks, the arrays) with the
batch paths against the one-row path, for 3,000 rows of each entry route (a script).

Issue 16: rows entered as an estimate with its CI (read off a forest plot), with its SE,
or as means and SDs are derived and checked over arrays (lopside/stats/derived_rows.py,
lopside/intake/clean_rows.py). Here the same review is read both ways in one process,
interleaved (CPU time): as it is, and with the batch paths switched off so that every row
goes one by one, as before. Both ways must give the same result (checked, not timed).
The reviews are invented (seeded RNG); the intervals are printed to two decimals.

    PYTHONPATH=app python tests/bench/bench_rows.py [--k 3000] [--repeat 7]
"""

from __future__ import annotations

import argparse
import math
import statistics
import sys
import time
from contextlib import ExitStack
from pathlib import Path
from unittest import mock

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[2] / "app"))


def invented_review(k: int, route: str, seed: int = 16):
    """An invented review of k studies entered by one route ("ci", "se" or "means")."""
    from lopside.model.review import Review, ReviewDetails, StudyRow

    rng = np.random.default_rng(seed)
    se = rng.uniform(0.08, 0.6, k)
    y = rng.normal(-0.3 - 0.4 * se, np.sqrt(se**2 + 0.02))
    rows = []
    for i in range(k):
        name = f"Invented {i + 1}"
        if route == "ci":
            e, lo, hi = (
                round(math.exp(v), 2) for v in (y[i], y[i] - 1.96 * se[i], y[i] + 1.96 * se[i])
            )
            rows.append(StudyRow(study=name, estimate=e, lower=lo, upper=hi))
        elif route == "se":
            rows.append(StudyRow(study=name, estimate=math.exp(y[i]), se=float(se[i])))
        else:
            n1, n0 = (int(x) for x in rng.integers(10, 300, 2))
            rows.append(
                StudyRow(
                    study=name,
                    int_mean=round(float(rng.normal(12, 3)), 1),
                    int_sd=round(float(rng.uniform(2, 6)), 1),
                    int_n=n1,
                    ctl_mean=round(float(rng.normal(12, 3)), 1),
                    ctl_sd=round(float(rng.uniform(2, 6)), 1),
                    ctl_n=n0,
                )
            )
    measure = "SMD" if route == "means" else "OR"
    return Review(details=ReviewDetails(measure=measure), studies=tuple(rows)), measure


def one_row_only() -> ExitStack:
    """Switch the batch paths off: every row is derived and checked one by one."""
    from lopside.intake import checks
    from lopside.stats import effects

    stack = ExitStack()
    stack.enter_context(
        mock.patch.object(effects, "derive_batch", lambda rows, m, **kw: [None] * len(rows))
    )
    for name in ("clean_count_rows", "clean_estimate_rows", "clean_means_rows"):
        stack.enter_context(
            mock.patch.object(checks, name, lambda rows, *a, **kw: [False] * len(rows))
        )
    return stack


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--k", type=int, default=3000)
    ap.add_argument("--repeat", type=int, default=7)
    args = ap.parse_args()
    from lopside.analysis import _read_rows
    from lopside.settings import AnalysisSettings
    from lopside.stats.derived_batch import derive_batch

    settings = AnalysisSettings()
    for route in ("ci", "se", "means"):
        review, measure = invented_review(args.k, route)
        fast_share = sum(d is not None for d in derive_batch(review.studies, measure)) / args.k
        batch = _read_rows(review, settings, measure)
        with one_row_only():
            one = _read_rows(review, settings, measure)
        same = batch[:2] == one[:2] and np.array_equal(batch[2].y, one[2].y)
        assert same and np.array_equal(batch[2].v, one[2].v), "the two paths differ"
        fast, slow = [], []
        for _ in range(args.repeat):
            t = time.process_time()
            _read_rows(review, settings, measure)
            fast.append(time.process_time() - t)
            with one_row_only():
                t = time.process_time()
                _read_rows(review, settings, measure)
                slow.append(time.process_time() - t)
        f, s = statistics.median(fast), statistics.median(slow)
        print(
            f"{args.k} rows as {route:>5} ({measure}, {fast_share:.0%} on the batch path): "
            f"one by one {s * 1000:7.1f} ms, batch {f * 1000:6.1f} ms; "
            f"batch / one by one {f / s:5.2f}",
            flush=True,
        )


if __name__ == "__main__":
    main()
