"""The contradiction checker over generated reviews: the reading never contradicts its numbers.

The reviews come from ``tests/contradiction_sweep.py`` (seeded; k 3 to 60, binary and
continuous, with and without injected selection, outliers, subgroups and risk-of-bias
ratings). The sweep runs in a child process with one BLAS thread, as the lopside command
does; every assessment is checked by every rule of :mod:`lopside.contradictions`, and
none may fire.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from dataclasses import replace
from pathlib import Path

import numpy as np

from contradiction_sweep import N_REVIEWS, SEED, generate_review
from lopside.assessment import assess, assessment_of
from lopside.contradictions import RULES, contradictions
from lopside.model.review import Review, ReviewDetails, StudyRow

HERE = Path(__file__).resolve().parent


def test_the_generator_covers_the_space():
    rng = np.random.default_rng(SEED)
    generated = [generate_review(rng) for _ in range(N_REVIEWS)]
    ks = [len(r.studies) for r in generated]
    assert len(generated) >= 500
    assert min(ks) <= 5 and max(ks) >= 55
    assert {r.details.measure for r in generated} == {"OR", "RR", "MD", "SMD"}
    assert any(any(s.subgroup for s in r.studies) for r in generated)
    assert any(any(s.risk_of_bias for s in r.studies) for r in generated)


def test_no_contradictions_over_generated_reviews():
    env = dict(os.environ)
    env["PYTHONPATH"] = os.pathsep.join([str(HERE.parent / "app"), str(HERE)])
    for var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
        env[var] = "1"
    out = subprocess.run(
        [sys.executable, str(HERE / "contradiction_sweep.py"), str(N_REVIEWS), str(SEED)],
        capture_output=True,
        text=True,
        env=env,
        check=False,
    )
    assert out.returncode == 0, out.stderr[-3000:]
    summary = json.loads(out.stdout)
    assert summary["reviews"] >= 500
    assert summary["k_min"] <= 5 and summary["k_max"] >= 55
    assert not summary["found"], "\n".join(summary["found"][:20])
    # the generated reviews reach several ratings, so the rules were exercised
    assert len(summary["ratings"]) >= 3, summary["ratings"]


def test_the_checker_can_fail():
    """Planted contradictions are caught (a checker that cannot fail checks nothing)."""
    from lopside.appraise.rating import UNDETECTED

    rows = [
        (-0.99, 0.34),
        (-0.38, 0.76),
        (-2.19, 0.93),
        (-2.07, 1.05),
        (-1.09, 1.46),
        (-1.57, 0.74),
    ]
    review = Review(
        details=ReviewDetails(measure="MD"),
        studies=tuple(StudyRow(study=f"T{i}", estimate=y, se=s) for i, (y, s) in enumerate(rows)),
    )
    a = assess(review)
    assert contradictions(a) == []
    bad_rating = replace(a.appraisal.rating, suggested=UNDETECTED, assessable=True, evidence=())
    bad = replace(a, appraisal=replace(a.appraisal, rating=bad_rating))
    found = contradictions(bad)
    names = {f.split(":")[0] for f in found}
    assert "no_undetected_against_a_strong_signal" in names
    assert "every_line_for_is_in_the_why_list" in names
    assert "cannot_rate_iff_not_assessable" in names
    # a selection-model line 'for' whose weights favour non-significant results
    res = a.analysis
    sel = replace(res.selection, omega=(1.0, 5.0))
    a2 = assessment_of(replace(res, selection=sel))
    line = next(e for e in a2.appraisal.evidence if e.source == "selection model")
    forged = replace(line, direction="for")
    causes = tuple(
        replace(c, evidence=tuple(forged if e is line else e for e in c.evidence))
        for c in a2.appraisal.causes
    )
    bad2 = replace(a2, appraisal=replace(a2.appraisal, causes=causes))
    assert any(
        f.startswith("selection_model_direction_follows_its_weights") for f in contradictions(bad2)
    )
    assert len(RULES) >= 10
