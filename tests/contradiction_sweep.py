"""Generated reviews for the contradiction checker (run as a script by the test).

``python tests/contradiction_sweep.py [N] [SEED]`` assesses N invented reviews with one
BLAS thread (as the lopside command runs; numpy's threads cost more than they save on
arrays this small) and prints a JSON summary: the contradictions found, the ratings
reached and the number of reviews.

Reviews are invented by a seeded generator: k from 3 to 60, binary (odds ratios and risk
ratios from 2x2 counts) and continuous (mean differences and SMDs from means and SDs),
with and without injected selection (non-significant results dropped with a
probability), outliers, a subgroup feature with a real difference, and risk-of-bias
ratings.
"""

from __future__ import annotations

import json
import math
import os
import sys
from dataclasses import replace

for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import numpy as np  # noqa: E402

from lopside.model.review import Review, ReviewDetails, StudyRow  # noqa: E402

N_REVIEWS = 500
SEED = 20261202


def _binary_row(rng, i, lor, n_arm, p0, measure):
    odds0 = p0 / (1 - p0)
    odds1 = odds0 * math.exp(lor)
    p1 = odds1 / (1 + odds1)
    e1 = int(rng.binomial(n_arm, p1))
    e0 = int(rng.binomial(n_arm, p0))
    return StudyRow(
        study=f"Trial {i + 1}", int_events=e1, int_total=n_arm, ctl_events=e0, ctl_total=n_arm
    )


def _continuous_row(rng, i, md, n_arm, measure):
    sd = 10.0
    m1 = 50.0 + md * (sd if measure == "SMD" else 1.0) + rng.normal(0, sd / math.sqrt(n_arm))
    m0 = 50.0 + rng.normal(0, sd / math.sqrt(n_arm))
    s1 = sd * math.sqrt(rng.chisquare(n_arm - 1) / (n_arm - 1))
    s0 = sd * math.sqrt(rng.chisquare(n_arm - 1) / (n_arm - 1))
    return StudyRow(
        study=f"Trial {i + 1}",
        int_mean=round(m1, 2),
        int_sd=round(s1, 2),
        int_n=n_arm,
        ctl_mean=round(m0, 2),
        ctl_sd=round(s0, 2),
        ctl_n=n_arm,
    )


def generate_review(rng) -> Review:
    """One invented review (see the module docstring for what varies)."""
    measure = str(rng.choice(["OR", "RR", "MD", "SMD"]))
    # most reviews are small, as in practice; the largest still reach 60 studies
    k_target = 3 + int(57 * rng.random() ** 2)
    select = rng.random() < 0.4  # inject selection on significance
    outlier = rng.random() < 0.2
    subgroups = rng.random() < 0.3
    rob = rng.random() < 0.3
    favours = str(rng.choice(["lower", "higher"]))
    true = float(rng.normal(-0.3, 0.3))
    tau = float(rng.choice([0.0, 0.1, 0.3]))
    rows = []
    i = 0
    tries = 0
    while len(rows) < k_target and tries < 4 * k_target:
        tries += 1
        n_arm = int(rng.integers(10, 400))
        group = "clinic" if (subgroups and rng.random() < 0.5) else "hospital"
        theta = true + rng.normal(0, tau) + (0.4 if group == "clinic" else 0.0)
        if outlier and len(rows) == 0:
            theta += 2.0
        if measure in ("OR", "RR"):
            row = _binary_row(rng, i, theta, n_arm, float(rng.uniform(0.1, 0.5)), measure)
            se_guess = 2.0 / math.sqrt(n_arm * 0.3)
        else:
            row = _continuous_row(rng, i, theta, max(n_arm // 4, 5), measure)
            se_guess = math.sqrt(2.0 / max(n_arm // 4, 5)) * (1.0 if measure == "SMD" else 10.0)
        if select:
            z = abs(theta / se_guess)
            if z < 1.96 and rng.random() < 0.7:
                continue  # a non-significant result left unpublished
        extra = {}
        if subgroups:
            extra["subgroup"] = group
        if rob:
            small = n_arm < 120
            extra["risk_of_bias"] = "high" if (small and rng.random() < 0.7) else "low"
        rows.append(replace(row, **extra))
        i += 1
    if len(rows) < 3:
        rows += [
            _continuous_row(rng, 90 + j, true, 30, "MD")
            if measure in ("MD", "SMD")
            else _binary_row(rng, 90 + j, true, 80, 0.3, measure)
            for j in range(3 - len(rows))
        ]
    return Review(
        details=ReviewDetails(
            title="invented review for the contradiction checker",
            measure=measure,
            favours=favours,
        ),
        studies=tuple(rows),
    )


def sweep(n: int = N_REVIEWS, seed: int = SEED) -> dict:
    """Assess ``n`` generated reviews and check each against every rule."""
    from lopside.assessment import assess
    from lopside.contradictions import contradictions
    from lopside.report import to_json

    rng = np.random.default_rng(seed)
    found: list[str] = []
    ratings: dict[str, int] = {}
    ks = []
    for i in range(n):
        review = generate_review(rng)
        a = assess(review)
        ks.append(a.analysis.k)
        r = a.appraisal.rating.suggested
        ratings[r] = ratings.get(r, 0) + 1
        for c in contradictions(a, to_json(a)):
            found.append(f"review {i} (k={a.analysis.k}, {review.details.measure}): {c}")
    return {"reviews": n, "found": found, "ratings": ratings, "k_min": min(ks), "k_max": max(ks)}


if __name__ == "__main__":
    args = [int(x) for x in sys.argv[1:3]]
    json.dump(sweep(*args), sys.stdout)
