"""Image regression tests of the pure figure builders.

Each case renders one builder at 72 dpi (small files) with Lopside's fixed style and the
DejaVu Sans that ships with matplotlib, and compares it with the committed PNG in
``tests/baseline_images/`` using ``matplotlib.testing.compare.compare_images`` (RMS
tolerance below). Inputs are INVENTED (simple formulas, fictional trial names).

To regenerate the baselines after an intended change of look, run

    LOPSIDE_REGEN_BASELINES=1 PYTHONPATH=app python -m pytest tests/test_figures_images.py

then LOOK at every PNG in tests/baseline_images/ before committing them.
"""

from __future__ import annotations

import os
from pathlib import Path

import matplotlib
import numpy as np
import pytest

from lopside.figures.export import save_figure

BASELINE = Path(__file__).resolve().parent / "baseline_images"
REGEN = os.environ.get("LOPSIDE_REGEN_BASELINES") == "1"
DPI = 72
#: RMS difference allowed (0-255 scale): absorbs FreeType/antialiasing differences only
TOL = 3.0


def _funnel_input(**kw):
    from lopside.figures.funnel import FunnelInput

    k = 16
    se = np.linspace(0.09, 0.62, k)
    y = -0.35 - 0.7 * (se - 0.09) + 0.3 * np.sin(np.arange(k) * 2.3) * se
    w = 1 / se**2
    w = 100 * w / w.sum()
    pooled = float(np.sum(w * y) / np.sum(w))
    rob = tuple(["low", "some concerns", "high", "low"][i % 4] for i in range(k))
    base = dict(
        measure="OR",
        y=y,
        se=se,
        labels=tuple(f"Invented {i + 1}" for i in range(k)),
        weights=w,
        groups=rob,
        group_title="Risk of bias",
        group_kind="risk_of_bias",
        n=np.round(4 / se**2),
        excluded=((0.35, 0.3, "Invented X"),),
        filled=tuple((2 * pooled - y[i], se[i], f"mirror {i}") for i in (k - 1, k - 3, k - 5)),
        pooled=pooled,
        model_label="fixed effect",
        egger=(-1.4, -0.2),
        adjusted=pooled + 0.07,
    )
    base.update(kw)
    return FunnelInput(**base)


def _forest(k, groups):
    from lopside.figures.forest import ForestOptions, ForestPooled, ForestRow, ForestSummary
    from lopside.stats.pooling import fixed_effect, random_effects

    se = 0.1 + 0.55 * (np.arange(k) % 11) / 10
    y = -0.25 + 0.45 * np.cos(np.arange(k) * 1.9) * se
    re = random_effects(y, se**2)
    fe = fixed_effect(y, se**2)
    names = ("Heron", "Kestrel", "Alder", "Osprey", "Linden", "Marram")
    g = [groups[i % len(groups)] for i in range(k)] if groups else [""] * k
    rows = [
        ForestRow(
            f"{names[i % 6]}-{i + 1} {1995 + i % 28}",
            y[i],
            y[i] - 1.96 * se[i],
            y[i] + 1.96 * se[i],
            re.weights[i],
            g[i],
        )
        for i in range(k)
    ]
    if k > 2:
        r2 = rows[2]
        rows[2] = ForestRow(
            "A very long invented name of a pragmatic multicentre trial 2011",
            r2.estimate,
            r2.ci_low,
            r2.ci_high,
            r2.weight,
            r2.group,
        )
    subs = []
    for gg in groups or ():
        idx = [i for i in range(k) if g[i] == gg]
        r = random_effects(y[idx], se[idx] ** 2)
        subs.append(
            (
                gg,
                ForestSummary(
                    f"Subtotal (k = {len(idx)})",
                    r.estimate,
                    *r.ci,
                    float(sum(re.weights[i] for i in idx)),
                    len(idx),
                ),
            )
        )
    pooled = ForestPooled(
        ForestSummary("Fixed effect", fe.estimate, *fe.ci, k=k),
        ForestSummary(
            "Random effects", re.estimate, *re.ci, k=k, pi_low=re.pi[0], pi_high=re.pi[1]
        ),
        tuple(subs),
        "random effects (REML)" if groups else "",
        heterogeneity="Heterogeneity: invented data",
    )
    return rows, pooled, ForestOptions


def case_funnel_contours_filled():
    from lopside.figures.funnel import FunnelOptions, funnel_figure

    return funnel_figure(
        _funnel_input(),
        FunnelOptions(colour_by="risk_of_bias", egger_line=True, adjusted_line=True),
        "column",
    )


def case_funnel_precision():
    from lopside.figures.funnel import FunnelOptions, funnel_figure

    return funnel_figure(_funnel_input(groups=()), FunnelOptions(axis="precision"), "column")


def case_forest_subgroups():
    from lopside.figures.forest import forest_figure

    rows, pooled, ForestOptions = _forest(11, ("Community", "Hospital"))
    return forest_figure(
        rows,
        pooled,
        ForestOptions(
            "OR", "lower", "Zentorin", "placebo", size="page", weight_model="random effects (REML)"
        ),
    )


def case_forest_120():
    from lopside.figures.forest import forest_figure

    rows, pooled, ForestOptions = _forest(120, ())
    return forest_figure(
        rows, pooled, ForestOptions("RR", "lower", "early dosing", "usual care", size="page")
    )


CASES = {
    "funnel_contours_filled": case_funnel_contours_filled,
    "funnel_precision": case_funnel_precision,
    "forest_subgroups": case_forest_subgroups,
    "forest_120": case_forest_120,
}


@pytest.mark.parametrize("name", sorted(CASES))
def test_image_matches_baseline(name, tmp_path):
    from matplotlib.testing.compare import compare_images

    # hinting off: glyph shapes then depend less on the FreeType build
    with matplotlib.rc_context({"text.hinting": "none"}):
        fig = CASES[name]()
        actual = tmp_path / f"{name}.png"
        save_figure(fig, actual, dpi=DPI)
    expected = BASELINE / f"{name}.png"
    if REGEN:
        BASELINE.mkdir(exist_ok=True)
        expected.write_bytes(actual.read_bytes())
        pytest.skip(f"baseline written: {expected}")
    assert expected.exists(), (
        f"no baseline {expected.name}; generate with LOPSIDE_REGEN_BASELINES=1 (see module doc)"
    )
    diff = compare_images(str(expected), str(actual), tol=TOL)
    assert diff is None, diff
