"""The funnel updated in place draws what a fresh drawing of the same data draws.

The window follows an edit by moving the artists it has (``update_funnel``) instead of
building the figure again. The check is the one any cache needs (common practice): the
in-place result rendered on Agg is pixel-for-pixel the fresh drawing of the new data at
the same axes position; when the new data need other artists, ``update_funnel`` says so.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest

pytest.importorskip("matplotlib")

from lopside.figures.funnel import (  # noqa: E402
    FunnelInput,
    FunnelOptions,
    draw_funnel,
    update_funnel,
)

POSITION = (0.12, 0.3, 0.8, 0.62)


def _input(shift: float = 0.0, **kw) -> FunnelInput:
    """INVENTED studies: small ones with larger effects; ``shift`` edits study 1."""
    k = 14
    se = np.linspace(0.08, 0.7, k)
    y = -0.2 - 0.6 * se + 0.1 * np.sin(np.arange(k) * 1.7)
    y[0] += shift
    w = 1 / se**2
    pooled = float((w * y).sum() / w.sum())
    base = dict(
        measure="OR",
        y=y,
        se=se,
        labels=tuple(f"Invented {i + 1}" for i in range(k)),
        groups=tuple(("low", "high")[i % 2] for i in range(k)),
        group_title="Risk of bias",
        group_kind="risk_of_bias",
        n=np.round(4.0 / se**2),
        filled=((0.35 - shift, 0.5, "filled 1"), (0.42, 0.62, "filled 2")),
        excluded=((-1.4, 0.55, "Invented left out"),),
        pooled=pooled,
        model_label="fixed effect",
        egger=(-0.9 + shift, -0.1),
        adjusted=pooled + 0.1 + shift,
        limit=pooled + 0.15,
    )
    base.update(kw)
    return FunnelInput(**base)


def _figure():
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=(6.4, 5.2), dpi=100, layout="constrained")
    FigureCanvasAgg(fig)
    ax = fig.add_subplot()
    ax.set_position(POSITION)
    return fig, ax


def _drawn(inp, opts):
    fig, ax = _figure()
    art = draw_funnel(ax, inp, opts, size="page")
    fig.set_layout_engine("none")
    return fig, ax, art


def _pixels(fig) -> np.ndarray:
    fig.canvas.draw()
    return np.asarray(fig.canvas.buffer_rgba()).copy()


OPTION_SETS = [
    FunnelOptions(),
    FunnelOptions(axis="precision", colour_by="risk_of_bias", egger_line=True),
    FunnelOptions(axis="variance", adjusted_line=True, limit_line=True, labels="all"),
    FunnelOptions(axis="size", band_labels="key", legend="inside"),
    FunnelOptions(contours=False, pseudo_limits=False, caption=False),
]


@pytest.mark.parametrize("opts", OPTION_SETS, ids=range(len(OPTION_SETS)))
def test_an_update_in_place_draws_what_a_fresh_drawing_draws(opts):
    old, new = _input(0.0), _input(0.12)
    fresh, _, _ = _drawn(new, opts)
    fig, ax, art = _drawn(old, opts)
    before = _pixels(fig)
    studies = list(art["studies"])
    assert update_funnel(ax, art, new, opts, size="page")
    after = _pixels(fig)
    assert not np.array_equal(before, after), "the edit must move something"
    assert np.array_equal(after, _pixels(fresh))
    # the same artists, moved
    assert art["studies"] == studies and all(a.axes is ax for a in studies)


def test_an_update_that_needs_other_artists_says_so():
    opts = FunnelOptions(colour_by="risk_of_bias")
    fig, ax, art = _drawn(_input(), opts)
    # trim and fill now imputes nothing: the hollow markers and their key entry go
    assert not update_funnel(ax, art, _input(filled=()), opts, size="page")
    fig, ax, art = _drawn(_input(), opts)
    # a third risk-of-bias level: another marker set and key entry
    groups = ("low", "high", "unclear") + _input().groups[3:]
    assert not update_funnel(ax, art, _input(groups=groups), opts, size="page")
    fig, ax, art = _drawn(_input(), opts)
    assert not update_funnel(ax, art, _input(), replace(opts, egger_line=True), size="page")


def test_the_key_prints_the_new_pooled_value():
    opts = FunnelOptions()
    fig, ax, art = _drawn(_input(), opts)
    new = _input(0.5)
    assert update_funnel(ax, art, new, opts, size="page")
    words = [t.get_text() for t in art["legend"].get_texts()]
    fresh = [t.get_text() for t in _drawn(new, opts)[2]["legend"].get_texts()]
    assert words == fresh
    assert any(w.startswith("pooled (fixed effect): ") for w in words)
