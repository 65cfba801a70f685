"""Benchmark: Lopside's analysis against a user's own statsmodels/scipy script (a script).

Issue 16 compares the core stage of ``analyse()`` (effects, pooling with the chosen τ²,
heterogeneity, the recommended test, trim and fill, the funnel's contours) with what a
statistician would write by hand for the same review: a fixed-effect fit (statsmodels
WLS), DerSimonian-Laird and Paule-Mandel τ² (numpy; scipy's brentq), Egger's regression
(statsmodels OLS), Begg's rank correlation (scipy's kendalltau), a trim-and-fill loop (L0,
fixed effect) and leave-one-out (fixed effect and DerSimonian-Laird for each left-out
study). Targets: the core stage at 30 studies <= 1.0x the script; the whole analysis at
3,000 studies <= 0.5x. Both are timed in this one process, interleaved (CPU time); the
reviews are invented (tests/bench/bench_analyse.py), given as estimate and SE.

    PYTHONPATH=app python tests/bench/bench_user_script.py [--sizes 30,3000] [--repeat 15]
"""

from __future__ import annotations

import argparse
import math
import statistics
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))


def review_of(k: int, seed: int = 1):
    """An invented review of k studies, entered as log odds ratio and SE."""
    from lopside.model.review import Review, ReviewDetails, StudyRow

    rng = np.random.default_rng(seed)
    se = rng.uniform(0.08, 0.6, k)
    y = rng.normal(-0.3 - 0.4 * se, np.sqrt(se**2 + 0.02))
    rows = tuple(
        StudyRow(study=f"Invented {i + 1}", estimate=float(math.exp(a)), se=float(b))
        for i, (a, b) in enumerate(zip(y, se))
    )
    return Review(details=ReviewDetails(measure="OR"), studies=rows), y, se


def user_script(y: np.ndarray, se: np.ndarray) -> dict:
    """What a user would write with statsmodels and scipy (the comparison, not ours)."""
    import statsmodels.api as sm
    from scipy import optimize, stats

    v = se**2
    w = 1 / v
    ones = np.ones_like(y)
    fe = sm.WLS(y, ones, weights=w).fit()
    mu = float(fe.params[0])
    q = float(np.sum(w * (y - mu) ** 2))
    k = y.size
    c = w.sum() - (w**2).sum() / w.sum()
    dl = max(0.0, (q - (k - 1)) / c)

    def gen_q(t2):
        wt = 1 / (v + t2)
        m = np.sum(wt * y) / wt.sum()
        return np.sum(wt * (y - m) ** 2) - (k - 1)

    pm = optimize.brentq(gen_q, 0, 100) if gen_q(0) > 0 else 0.0
    egger = sm.OLS(y / se, sm.add_constant(1 / se)).fit()
    vstar = v - 1 / w.sum()
    begg = stats.kendalltau((y - mu) / np.sqrt(vstar), v)

    # trim and fill: L0 with the fixed-effect estimate, trimming from the right
    k0 = 0
    for _ in range(50):
        keep = np.argsort(y)[: k - k0] if k0 else np.arange(k)
        m = np.sum(w[keep] * y[keep]) / w[keep].sum()
        d = y - m
        ranks = stats.rankdata(np.abs(d))
        t = ranks[d > 0].sum()
        new = max(0, int(round((4 * t - k * (k + 1)) / (2 * k - 1))))
        if new == k0:
            break
        k0 = new
    # leave-one-out: fixed effect and DerSimonian-Laird without each study
    loo = []
    for i in range(k):
        s = np.arange(k) != i
        ws, ys = w[s], y[s]
        m = np.sum(ws * ys) / ws.sum()
        qq = np.sum(ws * (ys - m) ** 2)
        cc = ws.sum() - (ws**2).sum() / ws.sum()
        t2 = max(0.0, (qq - (k - 2)) / cc)
        wr = 1 / (v[s] + t2)
        loo.append(np.sum(wr * ys) / wr.sum())
    return {"fe": mu, "dl": dl, "pm": pm, "egger_p": egger.pvalues[0], "begg": begg, "k0": k0}


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", default="30,3000")
    ap.add_argument("--repeat", type=int, default=15)
    args = ap.parse_args()
    from lopside.analysis import analyse

    for k in (int(x) for x in args.sizes.split(",")):
        review, y, se = review_of(k)
        analyse(review, stage="core")  # warm-up: imports
        user_script(y, se)
        reps = args.repeat if k <= 300 else max(3, args.repeat // 2)
        core, full, mine = [], [], []
        for _ in range(reps):
            t = time.process_time()
            analyse(review, stage="core")
            core.append(time.process_time() - t)
            t = time.process_time()
            user_script(y, se)
            mine.append(time.process_time() - t)
            if k >= 1000 or k <= 30:
                t = time.process_time()
                analyse(review)
                full.append(time.process_time() - t)
        u = statistics.median(mine)
        line = f"k = {k:>5}: user script {u * 1000:8.1f} ms; core stage / script {statistics.median(core) / u:5.2f}"
        if full:
            line += f"; whole analysis / script {statistics.median(full) / u:5.2f}"
        print(line, flush=True)


if __name__ == "__main__":
    main()
