"""The funnel's marker classes differ in colour for every kind of colour vision, and in shape.

Simulation: Machado, Oliveira & Fernandes (2009) matrices at severity 1.0 (from memory;
each row of a dichromacy matrix sums to 1, which keeps white white, checked below), via
tools/palette_cvd.py; distances are CIELAB ΔE*ab (CIE 1976; about 2.3 is a just
noticeable difference, common practice).
"""

from __future__ import annotations

import itertools
import sys
from pathlib import Path

import numpy as np
import pytest

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tools"))

import palette_cvd as cvd  # noqa: E402

#: classes that can appear on one funnel: plain studies, or studies by risk of bias;
#: imputed and excluded studies with either
TOGETHER = (
    ("study", "imputed by trim and fill", "excluded"),
    (
        "risk of bias: low",
        "risk of bias: some concerns",
        "risk of bias: high",
        "risk of bias: not stated",
        "imputed by trim and fill",
        "excluded",
    ),
)


def test_simulation_matrices_keep_white_white():
    for name, m in cvd.SIMULATIONS.items():
        np.testing.assert_allclose(m.sum(axis=1), 1.0, atol=2e-6, err_msg=name)


@pytest.mark.parametrize("group", TOGETHER)
def test_marker_classes_shown_together_differ_in_shape_and_colour(group):
    classes = cvd.marker_classes()
    for a, b in itertools.combinations(group, 2):
        (ca, ma), (cb, mb) = classes[a], classes[b]
        assert ma != mb, f"{a} and {b} share the marker {ma!r}"
        for vision in cvd.SIMULATIONS:
            assert cvd.delta_e(ca, cb, vision) >= 10.0, (a, b, vision)


def test_imputed_and_high_risk_of_bias_are_far_apart_for_every_vision():
    # they shared one vermilion before (issue 17): now a clear difference in every vision
    classes = cvd.marker_classes()
    imputed, high = classes["imputed by trim and fill"][0], classes["risk of bias: high"][0]
    for vision in cvd.SIMULATIONS:
        assert cvd.delta_e(imputed, high, vision) >= 30.0, vision
