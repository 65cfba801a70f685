"""The PDF appraisal sheet: A4, page counts, searchable text with the result's numbers.

Reviews here are invented with a seeded generator, for testing only.
"""

from __future__ import annotations

import math
import re

import numpy as np
import pytest

pypdf = pytest.importorskip("pypdf")

from lopside import CAUTION, __version__  # noqa: E402
from lopside.analysis import analyse  # noqa: E402
from lopside.model.review import (  # noqa: E402
    AppraisalNotes,
    PublishedResult,
    Review,
    ReviewDetails,
    StudyRow,
)
from lopside.sheet import sheet_bytes, write_sheet  # noqa: E402
from lopside.sheet.build import build_sheet  # noqa: E402
from lopside.sheet.figures import FOREST_ROWS_PER_PAGE  # noqa: E402
from lopside.summary import fmt_ci, fmt_effect, fmt_p, fmt_pct  # noqa: E402

A4 = (595.2756, 841.8898)  # points: 210 x 297 mm (ISO 216)
DATE = "2026-05-01"
LONG_LABEL = (
    "Östergård–Müller multicentre randomised trial of perioperative care in very elderly "
    "patients 2019"
)


def invented_review(k: int, seed: int, *, rob: bool = True) -> Review:
    """Invented 2x2 trials with a built-in small-study effect (testing only)."""
    rng = np.random.default_rng(seed)
    rows = []
    for i in range(k):
        n = int(rng.integers(40, 900))
        n1, n0 = n // 2, n - n // 2
        lor = -0.2 - 0.8 * (1 - math.log(n / 40) / math.log(900 / 40))
        o1 = 0.25 / 0.75 * math.exp(lor)
        a = int(rng.binomial(n1, o1 / (1 + o1)))
        c = int(rng.binomial(n0, 0.25))
        label = LONG_LABEL if i == 2 else f"Invented trial {i + 1} {2000 + i % 20}"
        rows.append(
            StudyRow(
                study=label,
                int_events=a,
                int_total=n1,
                ctl_events=c,
                ctl_total=n0,
                risk_of_bias=("high" if n < 300 else "low") if rob else None,
            )
        )
    details = ReviewDetails(
        title=f"Invented review of {k} trials (testing only)",
        question="Does invented drug Zelvatrine reduce delirium after surgery?",
        outcome="Delirium within 7 days",
        measure="OR",
        appraiser="Test Appraiser",
        published=PublishedResult(0.71, 0.60, 0.84, "random effects"),
        source_note="INVENTED DATA for testing.",
    )
    return Review(details=details, studies=tuple(rows))


def text_of(pdf: bytes) -> list[str]:
    import io

    reader = pypdf.PdfReader(io.BytesIO(pdf))
    return [p.extract_text() or "" for p in reader.pages]


def flat(s: str) -> str:
    return " ".join(s.split())


@pytest.fixture(scope="module")
def r14():
    return analyse(invented_review(14, 11))


@pytest.fixture(scope="module")
def r120():
    return analyse(invented_review(120, 12))


@pytest.fixture(scope="module")
def sheet14(r14):
    return build_sheet(r14, date=DATE)


@pytest.fixture(scope="module")
def sheet120(r120):
    return build_sheet(r120, date=DATE)


# --------------------------------------------------------------------------------------
# Paper and pages


@pytest.mark.parametrize("name", ["sheet14", "sheet120"])
def test_pages_are_a4_and_the_main_sheet_is_three_pages(name, request):
    b = request.getfixturevalue(name)
    reader = pypdf.PdfReader(__import__("io").BytesIO(b.pdf))
    assert len(reader.pages) == 3 == b.pages
    for page in reader.pages:
        w, h = float(page.mediabox.width), float(page.mediabox.height)
        assert w == pytest.approx(A4[0], abs=0.01) and h == pytest.approx(A4[1], abs=0.01)
    # the layout fitted without shrinking text noticeably
    assert max(b.shrink) <= 1.10, b.shrink


def test_forest_pages_follow_the_main_sheet(r14, r120):
    b14 = build_sheet(r14, date=DATE, include_forest=True)
    assert b14.pages == 4 and b14.forest_pages == 1
    b120 = build_sheet(r120, date=DATE, include_forest=True)
    assert b120.forest_pages == math.ceil(120 / FOREST_ROWS_PER_PAGE) == 3
    assert b120.pages == 6
    pages = text_of(b120.pdf)
    assert len(pages) == 6
    assert "page 6 of 6" in pages[-1]
    forest_text = flat(" ".join(pages[3:]))
    assert "Forest plot (part 1 of 3)" in forest_text
    assert "studies 1–40 of 120" in forest_text  # 120 studies shared evenly over 3 pages
    assert "studies 81–120 of 120" in forest_text
    # every study is named on the forest pages, the long accented label included
    for i in (1, 60, 120):
        assert f"Invented trial {i} " in forest_text
    assert "Östergård" in forest_text


# --------------------------------------------------------------------------------------
# Words and numbers


def test_sheet_contains_each_section_and_the_caution(sheet14):
    pages = text_of(sheet14.pdf)
    text = flat(" ".join(pages))
    for title in (
        "Small-study effects: appraisal sheet",
        "Data entered",
        "Check against the published result",
        "Pooled results",
        "Heterogeneity",
        "The funnel plot and what it shows",
        "Tests for small-study effects",
        "Can the tests be trusted here?",
        "Sensitivity of the estimate to small-study effects",
        "Why might the funnel lean? Explanations side by side",
        "Publication bias: suggested rating",
        "Settings and reproducibility",
    ):
        assert title in text, title
    assert flat(CAUTION) in text
    for i, page in enumerate(pages, start=1):
        # caution and reproducibility footer on every page
        assert flat(CAUTION) in flat(page)
        assert f"page {i} of 3" in page
        assert f"Lopside {__version__}" in page
        assert DATE in page


def test_page_two_carries_how_strong_selection_would_have_to_be(r14, sheet14):
    # issue 20: the selection table and the η curve are on page 2 (the page stays within
    # its shrink limit: test_pages_are_a4_and_the_main_sheet_is_three_pages)
    from lopside.summary import fmt_effect_ci, selection_strength_brief

    page2 = flat(text_of(sheet14.pdf)[1])
    assert "How strong would selection have to be?" in page2
    brief = selection_strength_brief(r14)
    worst = dict(brief.rows)["Worst case"]
    assert flat(worst) in page2
    model = r14.selection_sensitivity.random
    wc = model.worst_case
    assert worst == fmt_effect_ci(wc.estimate, wc.ci_low, wc.ci_high, r14.measure)
    # the curve's axis title is drawn as text under the funnel
    assert "times more likely a result significant in favour" in page2
    assert "recalled from memory" in page2


def test_sheet_prints_the_results_numbers_as_formatted_by_the_summary(r14, sheet14):
    text = flat(" ".join(text_of(sheet14.pdf)))
    m = r14.measure
    fx, rnd = r14.fixed, r14.random
    assert f"{fmt_effect(fx.estimate, m)} {fmt_ci(fx.ci.low, fx.ci.high, m)}" in text
    assert f"{fmt_effect(rnd.estimate, m)} {fmt_ci(rnd.ci.low, rnd.ci.high, m)}" in text
    assert fmt_ci(rnd.pi.low, rnd.pi.high, m) in text
    rec = r14.tests[r14.recommendation.key]
    assert f"{fmt_p(rec.pvalue)}" in text
    assert f"I² {fmt_pct(r14.heterogeneity.i2)}" in text
    tf = r14.trim_fill
    assert f"{tf.k0} studies filled on the {tf.side}" in text
    assert fmt_effect(tf.adjusted.estimate, m) in text


def test_mantel_haenszel_odds_ratio_matches_statsmodels(r14, sheet14):
    sm = pytest.importorskip("statsmodels.stats.contingency_tables")
    tables = [
        np.array(
            [[s.int_events, s.int_total - s.int_events], [s.ctl_events, s.ctl_total - s.ctl_events]]
        )
        for s in r14.review.studies
    ]
    # statsmodels StratifiedTable: Mantel-Haenszel pooled odds ratio (an outside reference)
    or_mh = sm.StratifiedTable(tables).oddsratio_pooled
    row = re.search(
        r"Fixed effect \(Mantel-Haenszel\) (\S+) (\S+ to \S+)", flat(" ".join(text_of(sheet14.pdf)))
    )
    assert row is not None
    assert row.group(1) == fmt_effect(math.log(or_mh), "OR")


def test_unicode_symbols_extract_as_themselves(sheet14):
    text = " ".join(text_of(sheet14.pdf))
    for ch in ("τ²", "I²", "\u2212", "☐", "Östergård"):
        assert ch in text, ch


def test_fingerprint_in_full_in_settings_and_short_in_every_footer(r14, sheet14):
    pages = text_of(sheet14.pdf)
    fp = r14.fingerprint
    assert len(fp) == 64
    assert fp in flat(pages[2])
    for page in pages:
        assert f"SHA-256 {fp[:12]}…" in page


def test_the_appraisers_override_is_printed(r14):
    notes = AppraisalNotes(
        rating_override="strongly suspected", rating_reason="registry search: 5 unreported trials"
    )
    from dataclasses import replace

    res = replace(r14, review=r14.review.with_notes(notes))
    text = flat(" ".join(text_of(sheet_bytes(res, date=DATE))))
    assert "appraiser's rating: strongly suspected" in text
    assert "registry search: 5 unreported trials" in text


# --------------------------------------------------------------------------------------
# Files, fonts and reproducibility


def test_metadata_fonts_and_reproducible_bytes(r14, sheet14):
    import io

    again = sheet_bytes(r14, date=DATE)
    assert again == sheet14.pdf  # same analysis, same date: same bytes
    reader = pypdf.PdfReader(io.BytesIO(sheet14.pdf))
    meta = reader.metadata
    assert meta.author == "Lopside"
    assert "Invented review of 14 trials" in meta.title
    assert r14.fingerprint in meta["/Keywords"]
    fonts = set()
    for page in reader.pages:
        for f in page["/Resources"]["/Font"].values():
            font = f.get_object()
            fonts.add(str(font["/BaseFont"]))
            if "/FontDescriptor" in font:  # simple TrueType font (reportlab's subsets)
                desc = font["/FontDescriptor"]
            else:  # composite font
                desc = font["/DescendantFonts"][0].get_object()["/FontDescriptor"]
            assert "/FontFile2" in desc.get_object(), font["/BaseFont"]  # embedded TrueType
    assert all("DejaVuSans" in f for f in fonts), fonts


def test_write_sheet_writes_the_file(tmp_path, r14):
    out = tmp_path / "sheet.pdf"
    write_sheet(r14, out, include_forest=False, date=DATE)
    data = out.read_bytes()
    assert data.startswith(b"%PDF")
    assert len(text_of(data)) == 3
    assert not [p for p in tmp_path.iterdir() if p.name != "sheet.pdf"]  # no temp file left


def test_figures_are_drawn_as_vector_text_without_the_svg_detour(r14, monkeypatch):
    # the funnel is drawn straight onto the page (lopside.sheet.vector): no SVG is written
    # or parsed, no image is embedded, and its labels extract as text (pdfminer-style
    # extraction by pypdf, an outside reader)
    import io

    import svglib.svglib

    from lopside.figures import export

    def refuse(*_a, **_k):
        raise AssertionError("the sheet took the SVG path")

    monkeypatch.setattr(svglib.svglib, "svg2rlg", refuse)
    real = export.figure_bytes
    monkeypatch.setattr(
        export,
        "figure_bytes",
        lambda fig, fmt, **kw: refuse() if fmt == "svg" else real(fig, fmt, **kw),
    )
    pdf = sheet_bytes(r14, date=DATE)
    page2 = flat(text_of(pdf)[1])
    for words in (
        "Standard error",
        "Odds ratio (log spacing)",
        "pooled (fixed effect)",
        "p < 0.01",
    ):
        assert words in page2, words
    reader = pypdf.PdfReader(io.BytesIO(pdf))
    xobjects = reader.pages[1]["/Resources"].get("/XObject") or {}
    assert not any(x.get_object()["/Subtype"] == "/Image" for x in xobjects.values())


@pytest.mark.parametrize("fixture", ["r14", "r120"])
def test_paragraphs_kept_by_width_give_the_same_sheet_as_reportlabs_own(
    fixture, request, monkeypatch
):
    """The sheet's paragraphs remember their line breaks per width (issue 16: tables wrap
    each cell several times); the PDF must be byte for byte the one reportlab's own
    Paragraph gives (the reference: reportlab.platypus.Paragraph, unmodified)."""
    from reportlab.platypus import Paragraph

    from lopside.sheet import layout

    result = request.getfixturevalue(fixture)
    kept = sheet_bytes(result, date="2026-01-01")
    monkeypatch.setattr(layout, "paragraph_class", lambda: Paragraph)
    plain = sheet_bytes(result, date="2026-01-01")
    assert kept == plain
