"""Applicability rules and test choice against the published guidance.

Rules: Ioannidis & Trikalinos 2007 (CMAJ 176:1091) — at least 10 studies, ratio of the
largest to smallest within-study variance above 4, I² < 50 % with non-significant
heterogeneity, at least one study significant on its own; Sterne et al. 2011 (BMJ
343:d4002) and Cochrane Handbook 5.1 section 10.4.3.1 for the choice of test by measure
(methods.md 7.1 and 7.4; details of the 2011 wording from memory).
"""

from __future__ import annotations

import numpy as np
import pytest

from lopside.stats import asymmetry as asy
from lopside.stats.applicability import Recommendation, applicability, recommend
from lopside.stats.data import StudyData


def rules_by_key(rules):
    return {r.rule: r for r in rules}


def md_data(k, se, y=None):
    se = np.asarray(se, dtype=float)
    y = np.zeros(k) if y is None else np.asarray(y, dtype=float)
    return StudyData.from_arrays("MD", y, se)


def test_rules_report_their_numbers():
    # 14 studies, variances from 0.01 to 0.25 (ratio 25), one study with z = 3 (p < 0.05).
    se = np.linspace(0.1, 0.5, 14)
    y = np.zeros(14)
    y[0] = 0.3  # z = 3.0
    r = rules_by_key(applicability(md_data(14, se, y), 35.0, 0.21))
    assert r["min_studies"].met is True
    assert r["min_studies"].detail == "14 studies (at least 10 advised)"
    assert r["variance_ratio"].met is True
    assert r["variance_ratio"].detail.startswith("largest within-study variance is 25.0 times")
    assert r["heterogeneity"].met is True
    assert r["heterogeneity"].detail.startswith("I² = 35 %, heterogeneity p = 0.21")
    assert r["significant_study"].met is True
    assert r["significant_study"].detail == "1 of 14 studies have p < 0.05 on their own"
    assert [x.rule for x in applicability(md_data(14, se, y), 35.0, 0.21)] == [
        "min_studies",
        "variance_ratio",
        "heterogeneity",
        "significant_study",
    ]


def test_rule_boundaries():
    # Ioannidis & Trikalinos 2007: ">= 10 studies", "ratio > 4", "I² < 50 %", and
    # heterogeneity "not significant" at the conventional 0.10 (p >= 0.10 passes).
    se = np.r_[np.full(9, 0.1), 0.2]  # variance ratio exactly 4
    r = rules_by_key(applicability(md_data(10, se), 50.0, 0.5))
    assert r["min_studies"].met is True
    assert r["variance_ratio"].met is False
    assert r["heterogeneity"].met is False  # I² = 50 is not below 50
    assert r["significant_study"].met is False  # all effects zero
    r = rules_by_key(applicability(md_data(9, np.linspace(0.1, 0.3, 9)), 10.0, 0.10))
    assert r["min_studies"].met is False
    assert r["heterogeneity"].met is True  # p = 0.10 is not significant at 0.10
    r = rules_by_key(applicability(md_data(9, np.linspace(0.1, 0.3, 9)), 10.0, 0.0999))
    assert r["heterogeneity"].met is False
    r = rules_by_key(
        applicability(md_data(9, np.linspace(0.1, 0.3, 9)), 10.0, 0.06, alpha_het=0.05)
    )
    assert r["heterogeneity"].met is True


def test_significance_uses_two_sided_normal_p():
    # z = 1.95 is not significant, z = 1.97 is (two-sided 0.05 quantile 1.95996; scipy
    # stats.norm.ppf(0.975)).
    se = np.full(3, 1.0)
    r = rules_by_key(applicability(md_data(3, se, [1.95, -1.95, 0.0]), 0.0, 1.0))
    assert r["significant_study"].met is False
    r = rules_by_key(applicability(md_data(3, se, [1.95, -1.97, 0.0]), 0.0, 1.0))
    assert r["significant_study"].met is True


def test_rules_not_assessable_are_none():
    r = rules_by_key(applicability(md_data(1, [0.2]), None, None))
    assert r["variance_ratio"].met is None
    assert r["heterogeneity"].met is None
    assert r["heterogeneity"].detail == "heterogeneity could not be estimated"
    r = rules_by_key(applicability(md_data(5, np.linspace(0.1, 0.3, 5)), float("nan"), 0.3))
    assert r["heterogeneity"].met is None


def binary(measure="OR", counts=True):
    n = np.linspace(40, 400, 12)
    a = np.rint(0.3 * n / 2)
    c = np.rint(0.2 * n / 2)
    y = np.log(a * (n / 2 - c) / ((n / 2 - a) * c))
    se = np.sqrt(1 / a + 1 / (n / 2 - a) + 1 / c + 1 / (n / 2 - c))
    if not counts:
        return StudyData.from_arrays(measure, y, se)
    return StudyData.from_arrays(
        measure, y, se, a=a, b=n / 2 - a, c=c, d=n / 2 - c, n1=n / 2, n0=n / 2, n=n
    )


def test_recommend_md_is_egger():
    # Sterne et al. 2011: continuous outcome with mean differences -> Egger's test.
    rec = recommend(md_data(12, np.linspace(0.1, 0.5, 12)), 0.0)
    assert isinstance(rec, Recommendation)
    assert (rec.key, rec.exploratory) == ("egger", False)


def test_recommend_or_with_counts_is_harbord_then_peters():
    # Sterne et al. 2011 / Handbook 5.1 10.4.3.1: OR -> Harbord, Peters (or arcsine).
    rec = recommend(binary(), 0.02)
    assert (rec.key, rec.exploratory) == ("harbord", False)
    assert rec.alternatives[0] == "peters"
    assert rec.options == ()


def test_recommend_or_with_large_tau2_is_random_effects_arcsine():
    # Sterne et al. 2011: with τ² > 0.1 only the arcsine test with random effects had been
    # shown to work reasonably well (wording from memory, methods.md 3.6).
    rec = recommend(binary(), 0.15)
    assert rec.key == "arcsine" and rec.kwargs() == {"random": True}
    assert "τ² = 0.15" in rec.reason
    assert set(rec.alternatives) == {"harbord", "peters"}
    res = asy.run_test(rec.key, binary(), **rec.kwargs())
    assert res.df is None  # the random-effects version (z test) was run
    # exactly 0.1 is not "above 0.1"
    assert recommend(binary(), 0.1).key == "harbord"


def test_recommend_or_without_counts_is_exploratory_egger():
    rec = recommend(binary(counts=False), 0.0)
    assert (rec.key, rec.exploratory) == ("egger", True)
    assert "2x2 counts" in rec.reason


def test_recommend_smd_with_and_without_group_sizes():
    # Pustejovsky & Rodgers 2019: modified SE for SMDs; without sizes only exploratory Egger.
    n = np.linspace(20, 200, 12)
    se = np.sqrt(2 / n)
    with_sizes = StudyData.from_arrays("SMD", np.zeros(12), se, n1=n, n0=n)
    assert recommend(with_sizes, 0.0).key == "smd_modified"
    assert recommend(with_sizes, 0.0).exploratory is False
    rec = recommend(StudyData.from_arrays("SMD", np.zeros(12), se), 0.0)
    assert (rec.key, rec.exploratory) == ("egger", True)


@pytest.mark.parametrize("measure", ["RR", "RD", "HR"])
def test_recommend_other_measures_is_exploratory_egger(measure):
    # Sterne et al. 2011: test performance not established for RR, RD (and HR).
    data = binary(measure) if measure != "HR" else binary("HR", counts=False)
    rec = recommend(data, 0.0)
    assert (rec.key, rec.exploratory) == ("egger", True)
    assert "not been established" in rec.reason
    for alt in rec.alternatives:  # alternatives must be runnable on these data
        assert isinstance(asy.run_test(alt, data), asy.AsymmetryResult)
