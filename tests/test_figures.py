"""Figure builders: geometry checked against outside definitions, not only pixels.

All study data here are INVENTED (simple formulas or a fictional drug's trials); they are
inputs to drawing code, not reference values. Expected geometry comes from:

* significance-band edges at null ± z·SE with z = Φ⁻¹(1 − p/2) from scipy.stats.norm.ppf
  (contour-enhanced funnel: common practice; Peters et al. 2008, J Clin Epidemiol 61:991);
* pseudo-95 % limits at pooled ± 1.96·SE, straight on the SE axis (Sterne & Egger 2001,
  J Clin Epidemiol 54:1046);
* the SE axis with 0 at the top and ratio measures on a log axis labelled in natural
  units (Sterne & Egger 2001);
* Egger's regression y/SE = b0 + b1/SE, i.e. y = b1 + b0·SE (Egger et al. 1997, BMJ);
* the radial plot z = y/SE against 1/SE with the fixed-effect line through the origin and
  ±2 bands (Galbraith 1988, Stat Med 7:889).
"""

from __future__ import annotations

import math
import subprocess
import sys
import textwrap
from pathlib import Path

import numpy as np
import pytest
from scipy.stats import norm

from lopside.figures.common import (
    FigureInputError,
    fit_label,
    format_effect,
    ratio_ticks,
    text_width_pt,
)
from lopside.figures.export import figure_bytes, save_figure
from lopside.figures.funnel import (
    FunnelInput,
    FunnelOptions,
    band_names,
    contour_edges,
    draw_funnel,
    funnel_figure,
    z_for_level,
)

APP = Path(__file__).resolve().parents[1] / "app"


# --------------------------------------------------------------------------------------
# invented inputs


def invented_funnel(measure="OR", k=14, with_n=True, **kw) -> FunnelInput:
    """INVENTED funnel input: SEs spread 0.08-0.7, smaller studies drift to lower effects."""
    se = np.linspace(0.08, 0.7, k)
    y = -0.3 - 0.5 * (se - 0.08) + 0.25 * np.sin(np.arange(k) * 1.7) * se
    w = 1 / se**2
    w = 100 * w / w.sum()
    pooled = float(np.sum(w * y) / np.sum(w))
    base = dict(
        measure=measure,
        y=y,
        se=se,
        labels=tuple(f"Invented {i + 1}" for i in range(k)),
        weights=w,
        n=np.round(4 / se**2) if with_n else (),
        excluded=((0.3, 0.25, "Invented X"),),
        filled=tuple((2 * pooled - y[i], se[i], f"mirror {i}") for i in (k - 1, k - 2, k - 3)),
        pooled=pooled,
        model_label="fixed effect",
        egger=(-1.1, -0.25),
        adjusted=pooled + 0.08,
        limit=pooled + 0.12,
    )
    base.update(kw)
    return FunnelInput(**base)


def _renderer(fig):
    """An Agg renderer for measuring text as drawn (the builders leave the canvas alone)."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    FigureCanvasAgg(fig)
    fig.draw_without_rendering()
    return fig.canvas.get_renderer()


def new_axes(size=(4, 4)):
    from matplotlib.figure import Figure

    fig = Figure(figsize=size)
    return fig, fig.add_subplot()


# --------------------------------------------------------------------------------------
# geometry of the funnel


@pytest.mark.parametrize("p", [0.10, 0.05, 0.01])
def test_z_for_level_matches_scipy(p):
    # z = Φ⁻¹(1 − p/2): common practice; Peters et al. 2008
    assert z_for_level(p) == pytest.approx(norm.ppf(1 - p / 2), rel=1e-12)


def test_contour_edges_function_is_null_plus_minus_z_se():
    se = np.array([0.0, 0.1, 0.5, 1.0])
    edges = contour_edges(0.0, se, (0.10, 0.05, 0.01))
    for p, (lo, hi) in edges.items():
        z = norm.ppf(1 - p / 2)
        np.testing.assert_allclose(lo, -z * se)
        np.testing.assert_allclose(hi, z * se)
    # the conventional values, from memory of any normal table: 1.645, 1.960, 2.576
    assert norm.ppf(0.95) == pytest.approx(1.645, abs=5e-4)
    assert norm.ppf(0.995) == pytest.approx(2.576, abs=5e-4)


AXIS_TO_SE = {
    "se": lambda v: v,
    "precision": lambda v: 1 / v,
    "variance": lambda v: np.sqrt(v),
}


@pytest.mark.parametrize("axis", ["se", "precision", "variance"])
def test_drawn_band_edges_lie_at_null_plus_minus_z_se(axis):
    fig, ax = new_axes()
    art = draw_funnel(ax, invented_funnel(), FunnelOptions(axis=axis))
    assert set(art["contour_edges"]) == {0.10, 0.05, 0.01}
    for p, (left, right) in art["contour_edges"].items():
        z = norm.ppf(1 - p / 2)  # Peters et al. 2008; common practice
        for line, sign in ((left, -1), (right, 1)):
            v = np.asarray(line.get_ydata(), dtype=float)
            x = np.asarray(line.get_xdata(), dtype=float)
            se = AXIS_TO_SE[axis](v)
            np.testing.assert_allclose(x, 0.0 + sign * z * se, rtol=1e-9, atol=1e-12)


def test_band_edges_follow_a_non_zero_null():
    fig, ax = new_axes()
    inp = invented_funnel(measure="MD", null=0.4)
    art = draw_funnel(ax, inp, FunnelOptions())
    left, right = art["contour_edges"][0.05]
    v = np.asarray(left.get_ydata())
    np.testing.assert_allclose(left.get_xdata(), 0.4 - norm.ppf(0.975) * v)
    np.testing.assert_allclose(right.get_xdata(), 0.4 + norm.ppf(0.975) * v)


def test_levels_are_configurable():
    fig, ax = new_axes()
    art = draw_funnel(ax, invented_funnel(), FunnelOptions(levels=(0.2, 0.001)))
    assert set(art["contour_edges"]) == {0.2, 0.001}
    left, _ = art["contour_edges"][0.001]
    np.testing.assert_allclose(
        left.get_xdata(), -norm.ppf(1 - 0.001 / 2) * np.asarray(left.get_ydata())
    )
    assert [name for name, _ in art["bands"]] == band_names((0.2, 0.001))


def test_band_names_from_not_significant_outwards():
    assert band_names((0.10, 0.05, 0.01)) == [
        "p > 0.10",
        "p 0.05\u20130.10",
        "p 0.01\u20130.05",
        "p < 0.01",
    ]


def test_pseudo_limits_at_pooled_plus_minus_196_se_and_straight_on_se_axis():
    fig, ax = new_axes()
    inp = invented_funnel()
    art = draw_funnel(ax, inp, FunnelOptions())
    left, right = art["pseudo_limits"]
    v = np.asarray(left.get_ydata(), dtype=float)
    z = norm.ppf(0.975)  # 1.96 (Sterne & Egger 2001)
    np.testing.assert_allclose(left.get_xdata(), inp.pooled - z * v)
    np.testing.assert_allclose(right.get_xdata(), inp.pooled + z * v)
    # straight: on the SE axis the line has constant slope dx/dSE = ±z
    xs = np.asarray(right.get_xdata())
    slopes = np.diff(xs) / np.diff(v)
    np.testing.assert_allclose(slopes, z)
    assert v.min() == 0.0  # from the apex at SE = 0


def test_pseudo_limits_curve_on_precision_axis():
    fig, ax = new_axes()
    inp = invented_funnel()
    art = draw_funnel(ax, inp, FunnelOptions(axis="precision"))
    left, _ = art["pseudo_limits"]
    prec = np.asarray(left.get_ydata())
    np.testing.assert_allclose(left.get_xdata(), inp.pooled - norm.ppf(0.975) / prec)
    assert np.ptp(np.diff(left.get_xdata()) / np.diff(prec)) > 0  # not a straight line


def test_se_axis_has_zero_at_the_top():
    fig, ax = new_axes()
    draw_funnel(ax, invented_funnel(), FunnelOptions(axis="se"))
    lo, hi = ax.get_ylim()
    assert lo > hi and hi == 0.0
    # the transform really puts SE = 0 above the largest SE
    top = ax.transData.transform((0, 0.0))[1]
    bottom = ax.transData.transform((0, 0.5))[1]
    assert top > bottom


def test_variance_axis_also_has_zero_at_the_top_and_precision_grows_upwards():
    fig, ax = new_axes()
    draw_funnel(ax, invented_funnel(), FunnelOptions(axis="variance"))
    lo, hi = ax.get_ylim()
    assert lo > hi == 0.0
    fig, ax = new_axes()
    draw_funnel(ax, invented_funnel(), FunnelOptions(axis="precision"))
    lo, hi = ax.get_ylim()
    assert lo < hi


@pytest.mark.parametrize("axis", ["se", "precision", "variance", "size"])
def test_every_point_is_inside_the_axes(axis):
    fig, ax = new_axes()
    art = draw_funnel(ax, invented_funnel(), FunnelOptions(axis=axis))
    x0, x1 = sorted(ax.get_xlim())
    y0, y1 = sorted(ax.get_ylim())
    collections = [*art["studies"], art["filled"], art["excluded"]]
    assert all(c is not None for c in collections)
    n_points = 0
    for c in collections:
        off = c.get_offsets()
        n_points += len(off)
        assert np.all((off[:, 0] > x0) & (off[:, 0] < x1)), axis
        assert np.all((off[:, 1] > y0) & (off[:, 1] < y1)), axis
    assert n_points == 14 + 3 + 1


def test_axis_range_includes_null_contours_and_pooled():
    fig, ax = new_axes()
    inp = invented_funnel(measure="MD", y=np.linspace(1.0, 1.4, 14), pooled=1.2, filled=())
    art = draw_funnel(ax, inp, FunnelOptions())
    x0, x1 = ax.get_xlim()
    assert x0 < 0.0 < x1  # the null, although every study is far to the right
    zmax = norm.ppf(1 - 0.01 / 2)
    se_b = art["geometry"]["se_bottom"]
    assert x0 <= -zmax * se_b and x1 >= zmax * se_b
    assert x0 < 1.2 < x1


def test_size_axis_needs_n_for_every_study():
    fig, ax = new_axes()
    with pytest.raises(FigureInputError, match="participants"):
        draw_funnel(ax, invented_funnel(with_n=False), FunnelOptions(axis="size"))


def test_size_axis_lines_use_se_from_c_over_root_n():
    fig, ax = new_axes()
    inp = invented_funnel()
    art = draw_funnel(ax, inp, FunnelOptions(axis="size"))
    c = art["geometry"]["size_constant"]
    np.testing.assert_allclose(c, np.median(inp.se * np.sqrt(inp.n)))
    left, _ = art["contour_edges"][0.05]
    n = np.asarray(left.get_ydata())
    np.testing.assert_allclose(left.get_xdata(), -norm.ppf(0.975) * c / np.sqrt(n))
    assert ax.get_yscale() == "log"


def test_egger_line_on_se_and_precision_axes():
    # y/SE = b0 + b1/SE  <=>  y = b1 + b0·SE (Egger et al. 1997)
    b0, b1 = -1.1, -0.25
    fig, ax = new_axes()
    art = draw_funnel(ax, invented_funnel(), FunnelOptions(egger_line=True))
    v = np.asarray(art["egger"].get_ydata())
    np.testing.assert_allclose(art["egger"].get_xdata(), b1 + b0 * v)
    fig, ax = new_axes()
    art = draw_funnel(ax, invented_funnel(), FunnelOptions(axis="precision", egger_line=True))
    prec = np.asarray(art["egger"].get_ydata())
    np.testing.assert_allclose(art["egger"].get_xdata(), b1 + b0 / prec)


def test_overlays_only_on_request_and_at_their_values():
    fig, ax = new_axes()
    inp = invented_funnel()
    art = draw_funnel(ax, inp, FunnelOptions())
    assert art["egger"] is None and art["adjusted"] is None and art["limit"] is None
    fig, ax = new_axes()
    art = draw_funnel(ax, inp, FunnelOptions(adjusted_line=True, limit_line=True))
    assert art["adjusted"].get_xdata()[0] == pytest.approx(inp.adjusted)
    assert art["limit"].get_xdata()[0] == pytest.approx(inp.limit)


def test_marker_area_is_proportional_to_weight():
    fig, ax = new_axes()
    inp = invented_funnel()
    art = draw_funnel(ax, inp, FunnelOptions())
    sizes = art["studies"][0].get_sizes()
    w = np.asarray(inp.weights)
    floor = sizes.min()
    above = sizes > floor * 1.0001
    assert above.sum() >= 3
    ratio = sizes[above] / w[above]
    np.testing.assert_allclose(ratio, ratio[0], rtol=1e-9)


def test_filled_points_are_hollow_and_excluded_are_crosses():
    fig, ax = new_axes()
    art = draw_funnel(ax, invented_funnel(), FunnelOptions())
    filled = art["filled"]
    assert filled.get_facecolors().size == 0 or np.all(filled.get_facecolors()[:, 3] == 0)
    assert np.all(filled.get_edgecolors()[:, 3] > 0)
    # the excluded marker is the cross path ('x'), unlike the studies' circles
    from matplotlib.markers import MarkerStyle

    ms = MarkerStyle("x")
    cross = ms.get_path().transformed(ms.get_transform())
    assert np.allclose(art["excluded"].get_paths()[0].vertices, cross.vertices)
    study_path = art["studies"][0].get_paths()[0]
    assert len(study_path.vertices) != len(cross.vertices)  # a circle, not a cross


def test_hiding_filled_and_excluded():
    fig, ax = new_axes()
    art = draw_funnel(ax, invented_funnel(), FunnelOptions(show_filled=False, show_excluded=False))
    assert art["filled"] is None and art["excluded"] is None


def test_colour_by_group_gives_one_marker_set_per_group():
    groups = tuple(["low", "high", "some concerns"][i % 3] for i in range(14))
    inp = invented_funnel(groups=groups, group_title="Risk of bias", group_kind="risk_of_bias")
    fig, ax = new_axes()
    art = draw_funnel(ax, inp, FunnelOptions(colour_by="risk_of_bias"))
    assert len(art["studies"]) == 3
    colours = {tuple(np.round(c.get_facecolors()[0][:3], 3)) for c in art["studies"]}
    assert len(colours) == 3
    texts = [t.get_text() for t in art["legend"].get_texts()]
    # ordinal order in the key whatever the table order
    assert texts.index("low risk of bias") < texts.index("some concerns")
    assert texts.index("some concerns") < texts.index("high risk of bias")


def test_no_contours_option():
    fig, ax = new_axes()
    art = draw_funnel(ax, invented_funnel(), FunnelOptions(contours=False))
    assert art["contour_edges"] == {} and art["bands"] == []


def test_bands_named_on_the_plot_or_in_the_key():
    # slide size: room to write each band's name inside it
    fig = funnel_figure(invented_funnel(), FunnelOptions(), "slide")
    art = fig.lopside_artists
    names = band_names((0.10, 0.05, 0.01))
    on_plot = [t.get_text() for t in art["band_labels"]]
    in_key = [t.get_text() for t in art["legend"].get_texts()]
    assert sorted(on_plot + [n for n in in_key if n in names]) == sorted(names)
    # key-only option: every band listed in the key
    fig = funnel_figure(invented_funnel(), FunnelOptions(band_labels="key"), "column")
    in_key = [t.get_text() for t in fig.lopside_artists["legend"].get_texts()]
    assert all(n in in_key for n in names)


def test_direct_band_labels_sit_inside_their_band():
    fig = funnel_figure(invented_funnel(), FunnelOptions(), "slide")
    art = fig.lopside_artists
    if not art["band_labels"]:
        pytest.skip("bands too narrow for direct labels at this size")
    zs = sorted(art["geometry"]["z"].values())
    bounds = [0.0, *zs, math.inf]
    se_of = AXIS_TO_SE["se"]
    names = band_names((0.10, 0.05, 0.01))
    for t in art["band_labels"]:
        x, v = t.get_position()
        zpos = abs(x) / se_of(v)
        i = names.index(t.get_text())
        assert bounds[i] < zpos < bounds[i + 1], t.get_text()


def test_labels_for_chosen_studies_do_not_overlap_each_other():
    inp = invented_funnel()
    wanted = tuple(inp.labels[:8])
    fig = funnel_figure(inp, FunnelOptions(labels=wanted), "page")
    texts = fig.lopside_artists["labels"]
    assert sorted(t.get_text() for t in texts) == sorted(wanted)
    r = _renderer(fig)
    boxes = [t.get_window_extent(r) for t in texts]
    overlaps = sum(a.overlaps(b) for i, a in enumerate(boxes) for b in boxes[i + 1 :])
    assert overlaps == 0


def test_caption_states_measure_model_and_k():
    fig = funnel_figure(invented_funnel(), FunnelOptions(), "page")
    cap = fig.lopside_artists["caption"].get_text()
    assert "Odds ratio" in cap and "fixed effect" in cap and "k = 14" in cap
    assert "3 imputed" in cap and "1 excluded" in cap


def test_bad_inputs_raise_figure_input_error():
    fig, ax = new_axes()
    with pytest.raises(FigureInputError):
        draw_funnel(ax, FunnelInput("OR", [], []))
    with pytest.raises(FigureInputError, match="Invented 2"):
        draw_funnel(ax, invented_funnel(se=np.r_[0.1, np.nan, np.linspace(0.2, 0.7, 12)]))
    with pytest.raises(FigureInputError, match="axis"):
        draw_funnel(ax, invented_funnel(), FunnelOptions(axis="sideways"))


# --------------------------------------------------------------------------------------
# log axis with natural-unit labels


def _tick_labels(fig, ax):
    fig.draw_without_rendering()
    return [(t.get_position()[0], t.get_text()) for t in ax.get_xticklabels() if t.get_text()]


@pytest.mark.parametrize("measure", ["OR", "RR", "HR"])
def test_ratio_axis_labels_are_natural_units(measure):
    fig = funnel_figure(invented_funnel(measure=measure), FunnelOptions(), "column")
    ax = fig.lopside_artists["null"].axes
    ticks = _tick_labels(fig, ax)
    assert len(ticks) >= 3
    for pos, text in ticks:
        # the label is exp(position): the axis is the log effect, labelled naturally
        assert float(text) == pytest.approx(math.exp(pos), rel=1e-3)
    assert "1" in [t for _, t in ticks]  # the null is labelled 1, not 0


def test_difference_measure_axis_is_linear_and_labelled_as_is():
    fig = funnel_figure(invented_funnel(measure="MD"), FunnelOptions(), "column")
    ax = fig.lopside_artists["null"].axes
    for pos, text in _tick_labels(fig, ax):
        assert float(text.replace("\u2212", "-")) == pytest.approx(pos, abs=1e-9)


def test_ratio_ticks_ladders():
    # doubling ladder for a moderate range
    assert ratio_ticks(math.log(0.2), math.log(5)) == [0.25, 0.5, 1.0, 2.0, 4.0]
    # 1-2-5 ladder for a wide range
    assert ratio_ticks(math.log(0.008), math.log(120)) == [0.01, 0.1, 1.0, 10.0, 100.0] or (
        3 <= len(ratio_ticks(math.log(0.008), math.log(120))) <= 7
    )
    wide = ratio_ticks(math.log(0.008), math.log(120))
    assert 1.0 in wide and all(math.log(0.008) <= math.log(t) <= math.log(120) for t in wide)
    # a narrow range gets round values, at least two of them
    narrow = ratio_ticks(math.log(0.8), math.log(1.15))
    assert len(narrow) >= 2 and all(0.8 <= t <= 1.15 for t in narrow)
    # fewer ticks on request, still containing the null
    few = ratio_ticks(math.log(0.1), math.log(10), max_ticks=3)
    assert len(few) <= 4 and 1.0 in few


def test_format_effect_natural_scale_and_minus_sign():
    assert format_effect(math.log(0.5), "OR") == "0.50"
    assert format_effect(-0.25, "MD") == "\u22120.25"
    assert format_effect(-0.001, "MD") == "0.00"  # no "−0.00"
    assert format_effect(float("nan"), "OR") == "\u2013"


def test_fit_label_keeps_the_year_and_fits():
    text = "An extremely long name of a pragmatic multicentre trial 2011"
    out = fit_label(text, 80.0, 7.0)
    assert out.endswith("\u2026 2011")
    assert text_width_pt(out, 7.0) <= 80.0
    assert fit_label("Short 2001", 80.0, 7.0) == "Short 2001"


# --------------------------------------------------------------------------------------
# forest plot


def invented_forest(k=9, groups=("Clinic", "Ward")):
    """INVENTED forest rows (fictional trials), pooled by the engine."""
    from lopside.figures.forest import ForestPooled, ForestRow, ForestSummary
    from lopside.stats.pooling import fixed_effect, random_effects

    se = np.linspace(0.12, 0.6, k)
    y = -0.3 + 0.4 * np.cos(np.arange(k) * 2.1) * se
    re = random_effects(y, se**2)
    fe = fixed_effect(y, se**2)
    g = [groups[i % len(groups)] for i in range(k)] if groups else [""] * k
    rows = [
        ForestRow(
            f"Invented trial {i + 1} {2000 + i}",
            y[i],
            y[i] - 1.96 * se[i],
            y[i] + 1.96 * se[i],
            re.weights[i],
            g[i],
        )
        for i in range(k)
    ]
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
                    sum(re.weights[i] for i in idx),
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
        "random effects (REML)",
        heterogeneity="Heterogeneity: invented",
    )
    return rows, pooled


def test_forest_text_columns_are_aligned_and_labels_fit():
    from lopside.figures.forest import ForestOptions, forest_figure

    rows, pooled = invented_forest()
    fig = forest_figure(rows, pooled, ForestOptions("OR", size="column"))
    art = fig.lopside_artists
    r = _renderer(fig)
    cols = art["layout"]["columns"]
    (x_est, w_est) = cols[0]
    # at column width the weights may give way to the plot (the squares' area shows them)
    assert len(cols) == 3 or art["layout"]["dropped"] == ["Weight"]
    dpi = fig.dpi
    est_right = []
    for texts in art["texts"]:
        for t in texts:
            bb = t.get_window_extent(r)
            if t.get_ha() == "left" and abs(t.get_position()[0] - art["layout"]["label_x"]) < 0.2:
                # a label never runs into the estimate column
                assert bb.x1 <= x_est * dpi + 1.0, t.get_text()
            if abs(t.get_position()[0] - (x_est + w_est)) < 1e-9:
                est_right.append(bb.x1)
    assert len(est_right) >= len(rows)
    assert np.ptp(est_right) < 1.0  # right-aligned to one edge (within a pixel)


def test_forest_has_subtotals_diamonds_and_prediction_interval():
    from lopside.figures.forest import ForestOptions, forest_figure

    rows, pooled = invented_forest()
    fig = forest_figure(rows, pooled, ForestOptions("OR", size="page"))
    art = fig.lopside_artists
    # two subtotal diamonds + fixed + random
    assert len(art["diamonds"]) == 4
    texts = [t.get_text() for row in art["texts"] for t in row]
    assert "Clinic" in texts and "Ward" in texts
    assert "Prediction interval" in texts
    # each diamond spans its CI and peaks at its estimate
    fixed = pooled.fixed
    xy = art["diamonds"][2].get_xy()
    assert min(xy[:, 0]) == pytest.approx(fixed.ci_low) and max(xy[:, 0]) == pytest.approx(
        fixed.ci_high
    )
    # null line at 0 on the analysis scale (OR = 1)
    assert art["null"].get_xdata()[0] == 0.0


def test_forest_favours_words_follow_the_review_direction():
    from lopside.figures.forest import ForestOptions, favours_words, forest_figure

    assert favours_words("lower", "Zentorin", "placebo") == ("favours Zentorin", "favours placebo")
    assert favours_words("higher", "Zentorin", "placebo") == ("favours placebo", "favours Zentorin")
    rows, pooled = invented_forest()
    fig = forest_figure(
        rows, pooled, ForestOptions("OR", "higher", "Zentorin", "placebo", size="page")
    )
    words = [t.get_text() for t in fig.texts if "favours" in t.get_text()]
    assert any(w.startswith("\u2190 favours placebo") for w in words)
    assert any(w.startswith("favours Zentorin") and w.endswith("\u2192") for w in words)


def test_forest_120_studies_grows_and_rows_do_not_collide():
    from lopside.figures.forest import ForestOptions, forest_figure

    rows, pooled = invented_forest(k=120, groups=())
    fig = forest_figure(rows, pooled, ForestOptions("RR", size="page"))
    small = forest_figure(*invented_forest(k=10, groups=()), ForestOptions("RR", size="page"))
    assert fig.get_size_inches()[1] > 8 * small.get_size_inches()[1] / 2
    r = _renderer(fig)
    labels = [row[0] for row in fig.lopside_artists["texts"] if row]
    boxes = [t.get_window_extent(r) for t in labels]
    for a, b in zip(boxes, boxes[1:], strict=False):
        assert not a.overlaps(b)


def test_forest_ratio_axis_natural_units():
    from lopside.figures.forest import ForestOptions, forest_figure

    rows, pooled = invented_forest()
    fig = forest_figure(rows, pooled, ForestOptions("HR", size="page"))
    ax = fig.lopside_artists["ax"]
    ticks = _tick_labels(fig, ax)
    assert ticks and all(float(t) == pytest.approx(math.exp(p), rel=1e-3) for p, t in ticks)


def test_forest_wide_intervals_are_cut_with_arrows():
    from lopside.figures.forest import ForestOptions, ForestRow, forest_figure

    rows, pooled = invented_forest(groups=())
    rows = [*rows, ForestRow("Invented huge CI", -0.2, -6.0, 5.5, 0.1)]
    fig = forest_figure(rows, pooled, ForestOptions("OR", size="page"))
    art = fig.lopside_artists
    x0, x1 = art["ax"].get_xlim()
    assert x0 > -6.0 and x1 < 5.5
    assert len(art["arrows"]) >= 2


# --------------------------------------------------------------------------------------
# companions


def test_radial_plot_geometry():
    from lopside.figures.companions import RadialInput, radial_figure

    inp = invented_funnel()
    fig = radial_figure(
        RadialInput("OR", inp.y, inp.se, fixed=-0.4, egger=(-1.1, -0.25)), egger_line=True
    )
    art = fig.lopside_artists
    off = art["points"].get_offsets()
    np.testing.assert_allclose(off[:, 0], 1 / inp.se)
    np.testing.assert_allclose(off[:, 1], inp.y / inp.se)
    x = np.asarray(art["fixed_line"].get_xdata())
    np.testing.assert_allclose(art["fixed_line"].get_ydata(), -0.4 * x)  # through the origin
    lo, hi = art["bands"]
    np.testing.assert_allclose(lo.get_ydata(), -0.4 * x - 2)  # Galbraith 1988: ±2
    np.testing.assert_allclose(hi.get_ydata(), -0.4 * x + 2)
    np.testing.assert_allclose(
        art["egger"].get_ydata(), -1.1 + -0.25 * np.asarray(art["egger"].get_xdata())
    )


def test_cumulative_plot_rows_in_given_order():
    from lopside.figures.companions import CumulativeInput, CumulativeStep, cumulative_figure

    steps = tuple(
        CumulativeStep(f"Invented {i}", -0.3 - 0.02 * i, -0.6 + 0.02 * i, -0.1 - 0.01 * i, i + 1)
        for i in range(6)
    )
    fig = cumulative_figure(CumulativeInput(steps, "OR", "fixed effect"))
    art = fig.lopside_artists
    labels = [row[0].get_text() for row in art["texts"]]
    assert labels[0] == "Invented 0" and labels[1] == "+ Invented 1"
    ys = [sq.get_offsets()[0, 1] for sq in art["squares"]]
    assert ys == sorted(ys)  # first step at the top
    xs = [sq.get_offsets()[0, 0] for sq in art["squares"]]
    np.testing.assert_allclose(xs, [s.estimate for s in steps])


# --------------------------------------------------------------------------------------
# export


@pytest.mark.parametrize("fmt", ["svg", "pdf"])
def test_two_saves_give_identical_bytes(fmt):
    fig = funnel_figure(invented_funnel(), FunnelOptions(), "column")
    a = figure_bytes(fig, fmt)
    b = figure_bytes(fig, fmt)
    fig2 = funnel_figure(invented_funnel(), FunnelOptions(), "column")
    c = figure_bytes(fig2, fmt)
    assert a == b == c
    assert b"Lopside" in a


def test_svg_keeps_text_as_text_and_png_is_300_dpi(tmp_path):
    fig = funnel_figure(invented_funnel(), FunnelOptions(), "column")
    svg = figure_bytes(fig, "svg").decode("utf-8")
    assert "<text" in svg and "Standard error" in svg
    path = tmp_path / "f.png"
    save_figure(fig, path)
    from PIL import Image

    with Image.open(path) as im:
        w, h = im.size
        dpi = im.info.get("dpi")
        software = im.info.get("Software")
    assert w == pytest.approx(fig.get_size_inches()[0] * 300, abs=2)
    assert dpi is not None and round(dpi[0]) == 300
    assert software == "Lopside"


def test_pdf_has_no_creation_date():
    fig = funnel_figure(invented_funnel(), FunnelOptions(), "column")
    pdf = figure_bytes(fig, "pdf")
    assert b"/CreationDate" not in pdf
    assert pdf.startswith(b"%PDF")


def test_sizes_are_the_documented_widths():
    from lopside.figures.style import SIZES

    assert SIZES["column"].width * 25.4 == pytest.approx(85)
    assert SIZES["page"].width * 25.4 == pytest.approx(180)
    assert SIZES["slide"].width / SIZES["slide"].height == pytest.approx(16 / 9)
    fig = funnel_figure(invented_funnel(), FunnelOptions(), "slide")
    assert tuple(fig.get_size_inches()) == pytest.approx((10, 5.625))


def test_unknown_format_is_refused(tmp_path):
    fig = funnel_figure(invented_funnel(), FunnelOptions(), "column")
    with pytest.raises(ValueError, match=r"\.png, \.svg or \.pdf"):
        save_figure(fig, tmp_path / "f.jpg")


def test_builders_leave_global_rcparams_alone():
    import matplotlib

    before = dict(matplotlib.rcParams)
    funnel_figure(invented_funnel(), FunnelOptions(), "page")
    from lopside.figures.forest import ForestOptions, forest_figure

    fig = forest_figure(*invented_forest(), ForestOptions())
    figure_bytes(fig, "svg")
    after = dict(matplotlib.rcParams)
    assert {k for k in before if before[k] != after[k]} == set()


# --------------------------------------------------------------------------------------
# no Qt, no pyplot, matplotlib only when drawing


def test_figures_import_without_qt_or_pyplot():
    code = textwrap.dedent(
        f"""
        import sys, importlib, importlib.abc
        class Block(importlib.abc.MetaPathFinder):
            def find_spec(self, name, path, target=None):
                if name.split('.')[0] in ('PySide6', 'shiboken6', 'PyQt5', 'PyQt6'):
                    raise ImportError('Qt is blocked: ' + name)
        sys.meta_path.insert(0, Block())
        sys.path.insert(0, {str(APP)!r})
        mods = ['lopside.figures', 'lopside.figures.style', 'lopside.figures.common',
                'lopside.figures.funnel', 'lopside.figures.forest', 'lopside.figures.rows',
                'lopside.figures.companions', 'lopside.figures.adaptors',
                'lopside.figures.export', 'lopside.figures.cli_plot']
        importlib.import_module('lopside.figures')
        importlib.import_module('lopside.figures.style')
        assert 'matplotlib' not in sys.modules, 'importing the package loaded matplotlib'
        for m in mods:
            importlib.import_module(m)
        import numpy as np
        from lopside.figures.funnel import FunnelInput, funnel_figure
        from lopside.figures.export import figure_bytes
        fig = funnel_figure(FunnelInput('OR', np.array([-0.2, -0.5, 0.1]), np.array([0.1, 0.3, 0.5]), pooled=-0.2))
        assert figure_bytes(fig, 'png')[:4] == b'\\x89PNG'
        bad = [k for k in sys.modules if k.startswith(('PySide6', 'shiboken6', 'PyQt'))]
        assert not bad, bad
        assert 'matplotlib.pyplot' not in sys.modules, 'pyplot was imported'
        assert not any('backend_qt' in k for k in sys.modules)
        print('ok')
        """
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
    assert out.returncode == 0, out.stderr
    assert out.stdout.strip().endswith("ok")


# --------------------------------------------------------------------------------------
# adaptors and the plot command, on the real analysis


def invented_review(with_n=True):
    """INVENTED review: a fictional drug ("Velorant") in fourteen fictional trials, counts
    per arm, smaller trials showing more benefit; one trial excluded by the appraiser."""
    from lopside.model.review import Review, ReviewDetails, StudyRow

    counts = [
        (50, 700, 64, 700),
        (38, 480, 47, 478),
        (25, 320, 33, 322),
        (20, 240, 27, 238),
        (14, 170, 21, 168),
        (10, 130, 17, 131),
        (7, 95, 14, 96),
        (6, 75, 12, 74),
        (4, 55, 10, 56),
        (3, 44, 9, 45),
        (2, 32, 8, 33),
        (2, 26, 7, 27),
        (1, 20, 6, 21),
        (9, 60, 8, 61),
    ]
    rows = []
    for i, (a, n1, c, n0) in enumerate(counts):
        rows.append(
            StudyRow(
                study=f"Invented {chr(65 + i)} {2001 + i}",
                year=2001 + i,
                int_events=a,
                int_total=n1,
                ctl_events=c,
                ctl_total=n0,
                risk_of_bias=["low", "some concerns", "high"][i % 3],
                subgroup="ward" if i % 2 else "clinic",
                exclude=(i == 13),
            )
        )
    return Review(
        details=ReviewDetails(
            title="Velorant for delirium (INVENTED test data)",
            measure="OR",
            favours="lower",
            int_label="Velorant",
            ctl_label="placebo",
            source_note="Invented for tests: fictional drug and trials.",
        ),
        studies=tuple(rows),
    )


@pytest.fixture(scope="module")
def result():
    from lopside.analysis import analyse

    return analyse(invented_review())


def test_funnel_adaptor_reads_the_result(result):
    from lopside.figures.adaptors import funnel_input_from_result

    inp = funnel_input_from_result(result, FunnelOptions(model="random", colour_by="subgroup"))
    assert inp.k == result.data.k == 13
    np.testing.assert_array_equal(inp.y, result.data.y)
    assert inp.pooled == pytest.approx(result.random.estimate)
    np.testing.assert_allclose(inp.weights, result.random.weights)
    assert inp.groups == result.data.subgroup and inp.group_title == "Subgroup"
    assert len(inp.excluded) == 1 and inp.excluded[0][2] == "Invented N 2014"
    tf = result.trim_fill
    if tf:
        assert len(inp.filled) == tf.k0
        if tf.k0:
            assert inp.adjusted == pytest.approx(tf.adjusted.estimate)
    eg = result.tests["egger"]
    if eg:
        assert inp.egger == (pytest.approx(eg.intercept), pytest.approx(eg.slope))
    fe = funnel_input_from_result(result, FunnelOptions(model="fixed"))
    assert fe.pooled == pytest.approx(result.fixed.estimate)
    assert fe.model_label == "fixed effect"
    fig = funnel_figure(fe, FunnelOptions(egger_line=True, adjusted_line=True, limit_line=True))
    assert fig.lopside_artists["studies"]


def test_funnel_adaptor_tolerates_not_computable(result):
    from dataclasses import replace

    from lopside.figures.adaptors import funnel_input_from_result
    from lopside.stats.results import NotComputable

    broken = replace(
        result,
        fixed=NotComputable("invented reason"),
        trim_fill=NotComputable("x"),
        limit=NotComputable("y"),
        tests={"egger": NotComputable("z")},
    )
    inp = funnel_input_from_result(broken, FunnelOptions(model="fixed"))
    assert inp.pooled is None and inp.filled == () and inp.egger is None and inp.limit is None
    fig = funnel_figure(inp, FunnelOptions(egger_line=True))
    assert fig.lopside_artists["pooled"] is None and fig.lopside_artists["pseudo_limits"] is None


def test_forest_adaptor_subtotals_come_from_the_engine(result):
    from lopside.figures.adaptors import forest_input_from_result
    from lopside.figures.forest import forest_figure
    from lopside.stats.pooling import random_effects

    rows, pooled, opts = forest_input_from_result(result)
    assert len(rows) == result.data.k
    # study intervals: y ± z·SE at the result's level (z from scipy)
    z = norm.ppf(0.5 + result.confidence_level / 2)
    assert rows[0].ci_low == pytest.approx(result.data.y[0] - z * result.data.se[0])
    assert opts.int_label == "Velorant" and opts.favours == "lower"
    subs = dict(pooled.subtotals)
    assert set(subs) == {"clinic", "ward"}
    for g, s in subs.items():
        mask = np.array([x == g for x in result.data.subgroup])
        part = result.data.subset(mask)
        ref = random_effects(part.y, part.v, method=result.settings.tau2_method)
        assert s.estimate == pytest.approx(ref.estimate, rel=1e-9)
        assert s.weight == pytest.approx(np.asarray(result.random.weights)[mask].sum())
    assert pooled.random.estimate == pytest.approx(result.random.estimate)
    assert pooled.random.pi_low == pytest.approx(result.random.pi.low)
    fig = forest_figure(rows, pooled, opts)
    assert len(fig.lopside_artists["diamonds"]) == 4


def test_cumulative_and_radial_adaptors(result):
    from lopside.figures.adaptors import cumulative_input_from_result, radial_input_from_result
    from lopside.figures.companions import cumulative_figure, radial_figure

    cum = cumulative_input_from_result(result, "fixed")
    assert cum is not None and len(cum.steps) == result.data.k
    assert cum.steps[-1].estimate == pytest.approx(result.fixed.estimate)
    assert [s.k for s in cum.steps] == list(range(1, result.data.k + 1))
    # most precise first
    order = np.argsort(result.data.se, kind="mergesort")
    assert cum.steps[0].label == result.data.labels[order[0]]
    cumulative_figure(cum)
    rad = radial_input_from_result(result)
    assert rad.fixed == pytest.approx(result.fixed.estimate)
    radial_figure(rad)


def _plot_args(argv):
    from lopside.cli import build_parser

    return build_parser().parse_args(["plot", *argv])


def _write_csv(path, with_n=True):
    review = invented_review()
    lines = ["study,year,int_events,int_total,ctl_events,ctl_total,risk_of_bias,subgroup,exclude"]
    for r in review.studies:
        lines.append(
            f"{r.study},{r.year},{int(r.int_events)},{int(r.int_total)},{int(r.ctl_events)},"
            f"{int(r.ctl_total)},{r.risk_of_bias},{r.subgroup},{'yes' if r.exclude else ''}"
        )
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


@pytest.mark.parametrize(
    "kind,extra,suffix",
    [
        ("funnel", ["--show-filled", "--egger-line", "--colour-by", "risk_of_bias"], ".png"),
        ("funnel", ["--axis", "precision", "--no-contours", "--labels"], ".svg"),
        ("forest", ["--size", "page"], ".pdf"),
        ("cumulative", [], ".png"),
        ("radial", ["--egger-line"], ".svg"),
    ],
)
def test_plot_command_writes_each_kind(tmp_path, capsys, kind, extra, suffix):
    from lopside.figures.cli_plot import run_plot

    csv = _write_csv(tmp_path / "invented.csv")
    out = tmp_path / f"out{suffix}"
    rc = run_plot(_plot_args([str(csv), "--kind", kind, "-o", str(out), *extra]))
    assert rc == 0, capsys.readouterr().err
    data = out.read_bytes()
    magic = {".png": b"\x89PNG", ".svg": b"<?xml", ".pdf": b"%PDF"}[suffix]
    assert data.startswith(magic)


def test_plot_command_bad_input_exits_2_with_a_message(tmp_path, capsys):
    from lopside.figures.cli_plot import run_plot

    rc = run_plot(_plot_args([str(tmp_path / "missing.csv"), "-o", str(tmp_path / "o.png")]))
    err = capsys.readouterr().err
    assert rc == 2 and "missing.csv" in err and "Traceback" not in err
    csv = _write_csv(tmp_path / "invented.csv")
    rc = run_plot(_plot_args([str(csv), "-o", str(tmp_path / "o.jpg")]))
    err = capsys.readouterr().err
    assert rc == 2 and ".png, .svg or .pdf" in err
    rc = run_plot(_plot_args([str(csv), "-o", str(tmp_path / "nofolder" / "o.png")]))
    assert rc == 2 and "does not exist" in capsys.readouterr().err


def test_plot_command_size_axis_without_n_is_bad_input(tmp_path, capsys):
    from lopside.figures.cli_plot import run_plot

    csv = tmp_path / "est.csv"
    csv.write_text(
        "study,estimate,lower,upper\nInvented A,0.8,0.6,1.1\nInvented B,0.5,0.2,1.3\n"
        "Invented C,0.7,0.4,1.2\n",
        encoding="utf-8",
    )
    rc = run_plot(
        _plot_args([str(csv), "--measure", "OR", "--axis", "size", "-o", str(tmp_path / "o.png")])
    )
    err = capsys.readouterr().err
    assert rc == 2 and "participants" in err


def test_plot_command_through_the_cli_entry_point(tmp_path):
    csv = _write_csv(tmp_path / "invented.csv")
    out = tmp_path / "f.png"
    proc = subprocess.run(
        [sys.executable, "-m", "lopside", "plot", str(csv), "--kind", "funnel", "-o", str(out)],
        capture_output=True,
        text=True,
        env={"PYTHONPATH": str(APP), "PATH": "/usr/bin:/bin", "MPLBACKEND": "Agg"},
    )
    assert proc.returncode == 0, proc.stderr
    assert out.read_bytes()[:4] == b"\x89PNG"


def test_naming_all_of_thirty_studies_puts_no_name_on_another():
    # "Name all" on a window-sized funnel: names set apart (with a leader line when far
    # from their point), text boxes overlapping by no more than a pixel of font metrics
    from matplotlib.text import Text

    rng = np.random.default_rng(30)
    se = np.linspace(0.08, 0.95, 30)
    y = -0.3 - 0.4 * se + rng.normal(0, 0.08, 30)
    labels = tuple(f"Invented trial {i + 1}" for i in range(30))
    inp = FunnelInput("OR", y, se, labels=labels, null=0.0, pooled=float(np.mean(y)))
    fig = funnel_figure(inp, FunnelOptions(labels="all"), "page")
    texts = fig.lopside_artists["labels"]
    assert sorted(t.get_text() for t in texts) == sorted(labels)
    r = _renderer(fig)
    boxes = [Text.get_window_extent(t, r).expanded(1.0, 1.0).padded(-1.0) for t in texts]
    clashes = [
        (texts[i].get_text(), texts[j].get_text())
        for i, a in enumerate(boxes)
        for j, b in enumerate(boxes[i + 1 :], i + 1)
        if a.overlaps(b)
    ]
    assert clashes == []


# ------------------------------------------------------------------ issue 13 case 4


@pytest.mark.parametrize("k", [0, 1])
@pytest.mark.parametrize("kind", ["funnel", "forest", "cumulative", "radial"])
def test_every_builder_handles_an_empty_or_one_study_review(kind, k):
    """An empty (or one-study) review gives a figure or a FigureInputError with a reason.

    The forest builder raised ZeroDivisionError (draw_rows, x range of zero width) for an
    empty review; the window kept the previous review's forest on screen.
    """
    import argparse

    from lopside.analysis import analyse
    from lopside.figures.cli_plot import build_figure
    from lopside.figures.common import FigureInputError
    from lopside.model.review import Review, ReviewDetails, StudyRow
    from lopside.settings import AnalysisSettings

    rows = tuple(
        StudyRow(study=f"Invented {i}", estimate=0.8, lower=0.6, upper=1.1) for i in range(k)
    )
    result = analyse(Review(details=ReviewDetails(measure="OR"), studies=rows), AnalysisSettings())
    try:
        fig = build_figure(result, argparse.Namespace(kind=kind, size="page"))
    except FigureInputError as exc:
        assert str(exc) and "\n" not in str(exc)
    else:
        assert fig.axes


def test_draw_rows_with_only_the_null_line_does_not_divide_by_zero():
    from lopside.figures.rows import Column, draw_rows

    fig = draw_rows([], [Column("OR")], measure="OR", size="page", caption="", footer="")
    assert fig is not None
