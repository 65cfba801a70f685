"""Throughput of ``lopside batch``: 1 against 2 local Dask workers, and the batch path's
overhead against calling the analysis in a plain loop. Ratios from one run.

    PYTHONPATH=app python tests/bench/bench_batch.py [--reviews 200] [--k 30] [--rounds 2]

Invented reviews (seeded RNG, binary counts) are written to a temporary folder. The cluster
is started and warmed before its timing; each timing is the wall time from submitting all
files to the last row back. Nothing here asserts a time.
"""

from __future__ import annotations

import argparse
import os
import statistics
import sys
import tempfile
import time
from pathlib import Path

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
APP = Path(__file__).resolve().parents[2] / "app"
os.environ["PYTHONPATH"] = os.pathsep.join(filter(None, [str(APP), os.environ.get("PYTHONPATH")]))
sys.path.insert(0, str(APP))

import numpy as np  # noqa: E402


def write_reviews(folder: Path, n: int, k: int, seed: int = 7) -> list[Path]:
    rng = np.random.default_rng(seed)
    files = []
    for i in range(n):
        lines = ["study,int_events,int_total,ctl_events,ctl_total"]
        for j in range(k):
            n1, n0 = (int(x) for x in rng.integers(30, 400, size=2))
            p0 = rng.uniform(0.05, 0.4)
            p1 = p0 * rng.uniform(0.5, 1.1)
            lines.append(f"T{j},{rng.binomial(n1, p1)},{n1},{rng.binomial(n0, p0)},{n0}")
        f = folder / f"r{i:04d}.csv"
        f.write_text("\n".join(lines) + "\n", encoding="utf-8")
        files.append(f)
    return files


def _loop(files) -> float:
    from lopside.analysis import analyse
    from lopside.appraise import appraise
    from lopside.cli_common import load_review_file
    from lopside.settings import AnalysisSettings

    t = time.perf_counter()
    for f in files:
        review, saved = load_review_file(f)
        appraise(analyse(review, AnalysisSettings.from_dict(saved)))
    return time.perf_counter() - t


def _serial_batch(files) -> float:
    from lopside.batch import BatchOptions, appraise_file

    t = time.perf_counter()
    for f in files:
        appraise_file(str(f), BatchOptions())
    return time.perf_counter() - t


def _cluster(files, workers: int, rounds: int) -> list[float]:
    from lopside.batch import BatchOptions, _Dask

    dask = _Dask(workers, None, False)
    try:
        dask.run([str(f) for f in files[: 4 * workers]], BatchOptions(), lambda rows: None)
        out = []
        for _ in range(rounds):
            t = time.perf_counter()
            dask.run([str(f) for f in files], BatchOptions(), lambda rows: None)
            out.append(time.perf_counter() - t)
        return out
    finally:
        dask.close()


def measure(n: int = 200, k: int = 30, rounds: int = 2) -> dict[str, float]:
    with tempfile.TemporaryDirectory() as tmp:
        files = write_reviews(Path(tmp), n, k)
        _loop(files[:5])  # imports and caches outside the timings
        loop, batch = [], []
        for _ in range(rounds):
            loop.append(_loop(files))
            batch.append(_serial_batch(files))
        one, two = [], []
        for _ in range(rounds):
            one += _cluster(files, 1, 1)
            two += _cluster(files, 2, 1)
    m = statistics.median
    return {
        "reviews": n,
        "k": k,
        "loop_s": m(loop),
        "batch_serial_s": m(batch),
        "overhead_ratio": m(batch) / m(loop),
        "one_worker_per_s": n / m(one),
        "two_workers_per_s": n / m(two),
        "speedup_2_vs_1": m(one) / m(two),
    }


def report(r: dict[str, float]) -> str:
    return "\n".join(
        [
            f"{r['reviews']} invented reviews of k = {r['k']} (binary counts)",
            f"  loop over analyse()+appraise(): {r['loop_s']:.2f} s; "
            f"batch path in-process: {r['batch_serial_s']:.2f} s "
            f"-> overhead {r['overhead_ratio']:.2f}x (target <= 1.2x)",
            f"  local cluster, 1 worker: {r['one_worker_per_s']:.1f} reviews/s; "
            f"2 workers: {r['two_workers_per_s']:.1f} reviews/s "
            f"-> {r['speedup_2_vs_1']:.2f}x (expected >= 1.6x on 2 cores)",
        ]
    )


if __name__ == "__main__":
    ap = argparse.ArgumentParser()
    ap.add_argument("--reviews", type=int, default=200)
    ap.add_argument("--k", type=int, default=30)
    ap.add_argument("--rounds", type=int, default=2)
    a = ap.parse_args()
    print(report(measure(a.reviews, a.k, a.rounds)))
