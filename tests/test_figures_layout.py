"""Forest and cumulative plots laid out for their width; units; how-to-read captions.

External checks: tick labels and texts are measured as drawn by matplotlib's Agg renderer
(``get_window_extent``), not by our own width estimate, so the checks cannot agree with
the layout code by construction. The data are INVENTED (fictional trials).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

pytest.importorskip("matplotlib")

from lopside.figures.common import (  # noqa: E402
    READ_CUMULATIVE,
    READ_RADIAL,
    effect_axis_label,
    ratio_ticks,
)
from lopside.figures.forest import (  # noqa: E402
    ForestOptions,
    ForestPooled,
    ForestRow,
    ForestSummary,
    forest_figure,
)

LONG = ["Nakamura-Ellis", "Westerberg-Oduya", "Marchetti-Fontaine", "Okonjo-Abernathy"]
TAILS = ["PROTECT-ELDERLY", "pilot", "multicentre extension", "A"]


def thirty_long(measure="OR"):
    """INVENTED: thirty fictional trials with long names, CIs reaching 0.03 and 15."""
    rng = np.random.default_rng(7)
    rows = []
    for i in range(30):
        se = 0.1 + 0.9 * rng.random()
        y = -0.3 - 0.8 * se + rng.normal(0, se)
        if i == 3:
            y, se = -1.9, 0.8  # CI down to about 0.03 (OR)
        rows.append(
            ForestRow(f"{LONG[i % 4]} {TAILS[i % 4]} {1995 + i}", y, y - 1.96 * se, y + 1.96 * se)
        )
    pooled = ForestPooled(
        fixed=ForestSummary("Fixed effect", -0.45, -0.55, -0.35),
        random=ForestSummary("Random effects", -0.48, -0.62, -0.34, pi_low=-0.9, pi_high=-0.05),
    )
    return rows, pooled


def _renderer(fig):
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    FigureCanvasAgg(fig)
    fig.draw_without_rendering()
    return fig.canvas.get_renderer()


def _tick_boxes(ax, r):
    labels = [t for t in ax.get_xticklabels() if t.get_text() and t.get_visible()]
    return [(t.get_text(), t.get_window_extent(r)) for t in labels]


@pytest.mark.parametrize("size", ["column", "page", "slide"])
def test_forest_ticks_both_sides_of_one_and_never_run_together(size):
    rows, pooled = thirty_long()
    fig = forest_figure(rows, pooled, ForestOptions("OR", size=size))
    r = _renderer(fig)
    ax = fig.lopside_artists["ax"]
    boxes = _tick_boxes(ax, r)
    values = [float(t) for t, _ in boxes]
    assert any(v < 1 for v in values) and any(v > 1 for v in values), values
    for (ta, a), (tb, b) in zip(boxes, boxes[1:]):
        assert a.x1 < b.x0, f"tick labels {ta!r} and {tb!r} overlap"


def test_ratio_ticks_refuse_labels_that_would_touch():
    lo, hi = math.log(0.03), math.log(5)

    def never(_values):
        return False

    # with room for everything, the ladder has ticks either side of 1
    ticks = ratio_ticks(lo, hi)
    assert min(ticks) < 1 < max(ticks)
    # with no room, still at most two ticks (the ends), never a crowded ladder
    assert len(ratio_ticks(lo, hi, fits=never)) <= 2


def test_forest_plot_column_gets_a_fair_share_and_labels_are_whole_at_page_size():
    rows, pooled = thirty_long()
    fig = forest_figure(rows, pooled, ForestOptions("OR", size="page"))
    lay = fig.lopside_artists["layout"]
    W = fig.get_size_inches()[0]
    p0, p1 = lay["plot"]
    assert (p1 - p0) >= 0.36 * W
    texts = [t.get_text() for row in fig.lopside_artists["texts"] for t in row]
    for row in rows:
        # every name is printed in full (on one or two lines), none cut with an ellipsis
        assert row.label in [t.replace("\n", " ") for t in texts], row.label
    r = _renderer(fig)
    for row in fig.lopside_artists["texts"]:
        for t in row:
            if t.get_position()[0] == lay["label_x"] or t.get_ha() == "left":
                bb = t.get_window_extent(r)
                if "\u2026" not in t.get_text() and t.get_text() in [x.label for x in rows]:
                    assert bb.x1 <= lay["columns"][0][0] * fig.dpi + 1


def test_forest_at_column_size_gives_the_plot_a_third_and_keeps_the_year():
    rows, pooled = thirty_long()
    fig = forest_figure(rows, pooled, ForestOptions("OR", size="column"))
    lay = fig.lopside_artists["layout"]
    W = fig.get_size_inches()[0]
    p0, p1 = lay["plot"]
    assert (p1 - p0) >= 0.33 * W  # was about 20 % before the layout was sized from text
    texts = [t.get_text() for row in fig.lopside_artists["texts"] for t in row]
    for row in rows:
        year = row.label.rsplit(" ", 1)[1]
        assert any(t.endswith(year) for t in texts), row.label  # years tell reports apart


def test_forest_is_laid_out_for_a_given_width():
    rows, pooled = thirty_long()
    for width in (4.0, 5.5, 9.0):
        fig = forest_figure(rows, pooled, ForestOptions("OR", size="page", width=width))
        assert fig.get_size_inches()[0] == pytest.approx(width)
        r = _renderer(fig)
        # nothing drawn beyond the figure's right edge
        right = fig.get_size_inches()[0] * fig.dpi
        for t in fig.texts:
            assert t.get_window_extent(r).x1 <= right + 1, t.get_text()


def _favours_texts(fig):
    r = _renderer(fig)
    out = {}
    for t in fig.texts:
        s = t.get_text()
        if "favours" in s:
            out["left" if s.startswith("\u2190") else "right"] = (s, t.get_window_extent(r))
    return out


@pytest.mark.parametrize("favours", ["lower", "higher"])
@pytest.mark.parametrize("size", ["column", "page"])
def test_favours_captions_on_their_own_side_of_the_null(favours, size):
    from lopside.figures.companions import CumulativeInput, CumulativeStep, cumulative_figure

    rows, pooled = thirty_long()
    figs = [
        forest_figure(rows, pooled, ForestOptions("OR", favours, "zelparin", "placebo", size=size)),
        # every step below the null: the null sits at the right end of the plot
        cumulative_figure(
            CumulativeInput(
                tuple(
                    CumulativeStep(f"Trial {i}", -0.3 - 0.01 * i, -0.5, -0.1, i + 1)
                    for i in range(8)
                ),
                "OR",
                "fixed effect",
                favours=favours,
                int_label="zelparin",
                ctl_label="placebo",
            ),
            size=size,
        ),
    ]
    for fig in figs:
        words = _favours_texts(fig)
        (ls, lb), (rs, rb) = words["left"], words["right"]
        arm_left = "zelparin" if favours == "lower" else "placebo"
        assert arm_left in ls and arm_left not in rs
        ax = fig.lopside_artists["ax"]
        null_px = ax.transData.transform((0.0, 0.0))[0]
        # the left phrase starts left of the null and the right phrase ends right of it,
        # and the left phrase is not to the right of the right one
        assert lb.x0 < null_px < rb.x1 or null_px >= ax.bbox.x1 - 1
        assert lb.x0 < rb.x0 and lb.x1 <= rb.x1
        assert lb.x0 >= ax.bbox.x0 - 1 or lb.x1 <= null_px + 1


def test_units_on_mean_difference_axes_only():
    assert effect_axis_label("MD", "mmHg") == "Mean difference (mmHg)"
    assert effect_axis_label("MD", "") == "Mean difference"
    assert effect_axis_label("OR", "mmHg") == "Odds ratio (log spacing)"
    assert effect_axis_label("SMD", "points") == "Standardised mean difference"
    rows = [ForestRow(f"Trial {i}", -2.0 + i, -5.0 + i, 1.0 + i) for i in range(4)]
    pooled = ForestPooled(fixed=ForestSummary("Fixed effect", -0.5, -2.0, 1.0))
    fig = forest_figure(rows, pooled, ForestOptions("MD", units="mmHg", size="page"))
    assert fig.lopside_artists["ax"].get_xlabel() == "Mean difference (mmHg)"


def test_funnel_axis_carries_the_units():
    from lopside.figures.funnel import FunnelInput, FunnelOptions, funnel_figure

    inp = FunnelInput("MD", y=np.array([-3.0, -1.0, 0.5, -2.0]), se=np.array([1, 1.5, 2, 0.7]))
    inp = FunnelInput(**{**{f: getattr(inp, f) for f in inp.__slots__}, "units": "mmHg"})
    fig = funnel_figure(inp, FunnelOptions(), "column")
    assert "(mmHg)" in fig.axes[0].get_xlabel()


def test_how_to_read_lines_under_radial_and_cumulative():
    from lopside.figures.companions import (
        CumulativeInput,
        CumulativeStep,
        RadialInput,
        cumulative_figure,
        radial_figure,
    )

    rad = radial_figure(
        RadialInput("OR", y=np.array([-0.5, -0.2, -0.9, 0.1]), se=np.array([0.2, 0.1, 0.4, 0.3]))
    )
    line = rad.lopside_artists["how_to_read"].get_text().replace("\n", " ")
    assert line == READ_RADIAL
    cum = cumulative_figure(
        CumulativeInput(
            tuple(CumulativeStep(f"T{i}", -0.2, -0.4, 0.0, i + 1) for i in range(3)), "OR"
        )
    )
    texts = " ".join(t.get_text().replace("\n", " ") for t in cum.texts)
    assert READ_CUMULATIVE in texts


def test_plot_command_draws_forest_and_cumulative_at_page_width_by_default(tmp_path):
    """`lopside plot --kind forest` with no --size: the 180 mm page width, 30 long names."""
    from PIL import Image

    from lopside.cli import main
    from lopside.figures.style import SIZES
    from lopside.model import project_file
    from lopside.model.review import Review, ReviewDetails, StudyRow

    rows, _pooled = thirty_long()
    studies = tuple(
        StudyRow(
            study=r.label,
            estimate=round(math.exp(r.estimate), 3),
            lower=round(math.exp(r.ci_low), 3),
            upper=round(math.exp(r.ci_high), 3),
        )
        for r in rows
    )
    path = tmp_path / "thirty.lopside"
    project_file.save(
        Review(details=ReviewDetails(title="Invented", measure="OR"), studies=studies), path
    )
    for kind, size in (("forest", "page"), ("cumulative", "page"), ("funnel", "column")):
        out = tmp_path / f"{kind}.png"
        assert main(["plot", str(path), "--kind", kind, "-o", str(out)]) == 0
        with Image.open(out) as im:
            dpi = im.info.get("dpi", (300, 300))[0]
            assert im.size[0] / dpi == pytest.approx(SIZES[size].width, rel=0.02), kind


def test_a_wrapped_cumulative_label_keeps_its_plus_with_the_name():
    from lopside.figures.rows import Row, _wrap_label

    r = _wrap_label(Row("point", label="+ Nakamura-Ellis multicentre 2005"), 60.0, 8.5)
    assert r.label.split("\n")[0].startswith("+ Nakamura")


@pytest.mark.parametrize("width", [4.2, 5.5, 7.0])
def test_linear_ticks_of_a_narrow_cumulative_plot_never_touch(width):
    from lopside.figures.companions import CumulativeInput, CumulativeStep, cumulative_figure

    steps = tuple(
        CumulativeStep(
            f"Trial {i} 20{10 + i}", -3.2 - 0.35 * i, -8.0 + 0.1 * i, 1.6 - 0.6 * i, i + 1
        )
        for i in range(12)
    )
    fig = cumulative_figure(CumulativeInput(steps, "MD"), size="page", width=width)
    r = _renderer(fig)
    boxes = _tick_boxes(fig.lopside_artists["ax"], r)
    assert len(boxes) >= 2
    for (ta, a), (tb, b) in zip(boxes, boxes[1:]):
        assert b.x0 - a.x1 >= 2, f"tick labels {ta!r} and {tb!r} touch"


@pytest.mark.parametrize("size", ["column", "page", "slide"])
def test_a_funnel_figure_is_drawn_at_its_settled_layout_without_another_pass(size):
    """funnel_figure settles the layout once and then fixes the axes; a constrained-layout
    pass at each save would move nothing (a set position takes the axes out of the
    layout), so the figure comes without a layout engine. The check: the same figure with
    constrained layout switched back on saves to the very same SVG and PNG bytes, and the
    axes is where the settling put it."""
    from lopside.analysis import analyse
    from lopside.figures.adaptors import funnel_input_from_result
    from lopside.figures.export import figure_bytes
    from lopside.figures.funnel import FunnelOptions, funnel_figure
    from test_window import invented_review

    result = analyse(invented_review())
    opts = FunnelOptions(colour_by="risk_of_bias")
    fig = funnel_figure(funnel_input_from_result(result, opts), opts, size=size)
    from matplotlib.layout_engine import ConstrainedLayoutEngine

    # "none" leaves matplotlib's placeholder, whose pass does nothing
    assert not isinstance(fig.get_layout_engine(), ConstrainedLayoutEngine)
    before = fig.axes[0].get_position().bounds
    fixed = figure_bytes(fig, "svg"), figure_bytes(fig, "png")
    fig.set_layout_engine("constrained")
    assert (figure_bytes(fig, "svg"), figure_bytes(fig, "png")) == fixed
    assert fig.axes[0].get_position().bounds == before
