"""Test PDFs made with reportlab from invented forest tables (the ground truth).

Every maker writes a PDF and returns the rows it printed, as the text a user would paste
(one study per line), so a test can compare what Lopside reads from the PDF with what it
reads from the same rows pasted as text. All trial names and numbers are invented.
"""

from __future__ import annotations

from pathlib import Path

from reportlab.lib.pagesizes import A4, landscape
from reportlab.pdfgen import canvas

#: Invented trials: label, OR, lower, upper, events/total per arm
TRIALS = [
    ("Abelard 2004", "0.62", "0.41", "0.94", (18, 120), (29, 118)),
    ("Brixton 2006", "0.81", "0.55", "1.19", (30, 210), (36, 205)),
    ("Calloway 2008", "0.47", "0.22", "1.01", (8, 64), (16, 66)),
    ("Dunmore 2009", "0.95", "0.72", "1.25", (61, 400), (64, 398)),
    ("Estover 2011", "0.70", "0.48", "1.02", (33, 180), (44, 176)),
    ("Farrowby 2013", "0.58", "0.30", "1.12", (11, 75), (18, 74)),
    ("Glenholt 2015", "1.04", "0.83", "1.30", (95, 520), (91, 515)),
    ("Harwick 2017", "0.66", "0.46", "0.95", (34, 230), (48, 228)),
]

#: Invented continuous trials: label, mean, SD, n per arm
MEAN_TRIALS = [
    ("Ivybridge 2010", (12.4, 5.1, 40), (14.9, 5.6, 42)),
    ("Jarrow 2012", (11.8, 4.7, 55), (13.0, 4.9, 53)),
    ("Kelso 2014", (10.2, 6.0, 31), (13.6, 6.2, 30)),
    ("Lydney 2016", (13.1, 5.3, 80), (13.9, 5.0, 78)),
    ("Morpeth 2018", (9.9, 4.4, 25), (12.8, 4.8, 24)),
]

FONTS = ("Helvetica", "Times-Roman")
MINUS = "\u2212"


def _text(c, x, y, s, font, size=9):
    c.setFont(font, size)
    c.drawString(x, y, s)


def ci_lines(trials=TRIALS) -> list[str]:
    return [f"{lab} {est} ({lo} to {hi})" for lab, est, lo, hi, _, _ in trials]


def single_column_or(path: Path, font: str = "Helvetica") -> list[str]:
    """A plain table: Study | OR (95% CI), a title, a total line and a footnote."""
    c = canvas.Canvas(str(path), pagesize=A4)
    _text(c, 72, 780, "Table 2. Invented trials of a fictional drug: delirium", font, 11)
    _text(c, 72, 755, "Study", font)
    _text(c, 260, 755, "OR (95% CI)", font)
    y = 738
    for lab, est, lo, hi, _, _ in TRIALS:
        _text(c, 72, y, lab, font)
        _text(c, 260, y, f"{est} ({lo} to {hi})", font)
        y -= 15
    _text(c, 72, y - 4, "Total (95% CI)", font)
    _text(c, 260, y - 4, "0.74 (0.64 to 0.86)", font)
    _text(c, 72, y - 30, "Invented data for testing; no real trials.", font, 8)
    c.showPage()
    c.save()
    return ci_lines()


def two_column_page(path: Path, font: str = "Helvetica") -> list[str]:
    """A journal page: prose in the left column, the table in the right column."""
    c = canvas.Canvas(str(path), pagesize=A4)
    prose = (
        "The invented trials below were pooled with a random effects model and the "
        "heterogeneity was moderate in this fictional example which exists only to test "
        "how lines are rebuilt from a page that is set in two columns of text."
    ).split()
    y = 780
    line: list[str] = []
    for word in prose * 4:
        line.append(word)
        if len(" ".join(line)) > 38:
            _text(c, 50, y, " ".join(line), font, 9)
            y -= 12
            line = []
    _text(c, 320, 780, "Table 1. Invented trials", font, 10)
    y = 760
    for lab, est, lo, hi, _, _ in TRIALS:
        _text(c, 320, y, lab, font)
        _text(c, 420, y, f"{est} ({lo} to {hi})", font)
        y -= 14
    c.showPage()
    c.save()
    return ci_lines()


def separate_limits(path: Path, font: str = "Helvetica") -> list[str]:
    """Estimate, lower and upper limit in three separate columns."""
    c = canvas.Canvas(str(path), pagesize=A4)
    _text(c, 72, 770, "Study", font)
    for x, h in ((250, "OR"), (310, "Lower"), (370, "Upper")):
        _text(c, x, 770, h, font)
    y = 752
    for lab, est, lo, hi, _, _ in TRIALS:
        _text(c, 72, y, lab, font)
        _text(c, 250, y, est, font)
        _text(c, 310, y, lo, font)
        _text(c, 370, y, hi, font)
        y -= 15
    c.showPage()
    c.save()
    return [f"{lab} {est} {lo} {hi}" for lab, est, lo, hi, _, _ in TRIALS]


def arm_counts(path: Path, font: str = "Helvetica") -> list[str]:
    """events/total per arm."""
    c = canvas.Canvas(str(path), pagesize=A4)
    _text(c, 72, 770, "Study", font)
    _text(c, 230, 770, "Treatment", font)
    _text(c, 330, 770, "Control", font)
    y = 752
    for lab, _, _, _, (e1, n1), (e0, n0) in TRIALS:
        _text(c, 72, y, lab, font)
        _text(c, 230, y, f"{e1}/{n1}", font)
        _text(c, 330, y, f"{e0}/{n0}", font)
        y -= 15
    c.showPage()
    c.save()
    return [f"{lab} {e1}/{n1} {e0}/{n0}" for lab, _, _, _, (e1, n1), (e0, n0) in TRIALS]


def means_sds(path: Path, font: str = "Helvetica") -> list[str]:
    """Mean, SD and n per arm in six columns."""
    c = canvas.Canvas(str(path), pagesize=A4)
    heads = ("Study", "Mean", "SD", "Total", "Mean", "SD", "Total")
    xs = (60, 200, 250, 300, 360, 410, 460)
    for x, h in zip(xs, heads):
        _text(c, x, 770, h, font)
    y = 752
    out = []
    for lab, (m1, s1, n1), (m0, s0, n0) in MEAN_TRIALS:
        cells = (lab, f"{m1}", f"{s1}", f"{n1}", f"{m0}", f"{s0}", f"{n0}")
        for x, v in zip(xs, cells):
            _text(c, x, y, v, font)
        out.append(" ".join(cells))
        y -= 15
    c.showPage()
    c.save()
    return out


def sideways_table(path: Path, font: str = "Helvetica") -> list[str]:
    """A portrait page with the table printed a quarter turn (reads bottom to top)."""
    c = canvas.Canvas(str(path), pagesize=A4)
    c.saveState()
    c.translate(300, 100)
    c.rotate(90)
    _text(c, 0, 0, "Table 3 (landscape). Invented trials", font, 10)
    y = -20
    for lab, est, lo, hi, _, _ in TRIALS:
        _text(c, 0, y, lab, font)
        _text(c, 180, y, f"{est} ({lo} to {hi})", font)
        y -= 15
    c.restoreState()
    c.showPage()
    c.save()
    return ci_lines()


def landscape_page(path: Path, font: str = "Helvetica") -> list[str]:
    """A landscape page (wide media box) with a plain table."""
    c = canvas.Canvas(str(path), pagesize=landscape(A4))
    y = 520
    for lab, est, lo, hi, _, _ in TRIALS:
        _text(c, 72, y, lab, font)
        _text(c, 400, y, f"{est} ({lo} to {hi})", font)
        y -= 15
    c.showPage()
    c.save()
    return ci_lines()


def forest_figure(path: Path, font: str = "Helvetica") -> list[str]:
    """A forest plot drawn as vectors, its numbers as text beside it, an axis below."""
    c = canvas.Canvas(str(path), pagesize=A4)
    y = 740
    for lab, est, lo, hi, _, _ in TRIALS:
        _text(c, 50, y, lab, font)
        # the drawing: a line for the CI and a square for the estimate
        c.line(200, y + 3, 320, y + 3)
        c.rect(250, y, 6, 6, fill=1)
        _text(c, 360, y, f"{est} ({lo} to {hi})", font)
        y -= 16
    c.line(200, y, 320, y)
    for x, t in ((200, "0.2"), (240, "0.5"), (260, "1"), (290, "2"), (320, "5")):
        _text(c, x, y - 12, t, font, 8)
    _text(c, 180, y - 26, "Favours drug", font, 8)
    _text(c, 280, y - 26, "Favours placebo", font, 8)
    c.showPage()
    c.save()
    return ci_lines()


def typographic(path: Path, font: str = "Helvetica") -> list[str]:
    """Unicode minus, mid-dot decimals, en dashes and raised footnote marks."""
    c = canvas.Canvas(str(path), pagesize=A4)
    rows = [
        ("Nettlecombe 2005", f"{MINUS}0\u00b735", f"{MINUS}0\u00b760", f"{MINUS}0\u00b710"),
        ("Oxwich 2007", f"{MINUS}0\u00b712", f"{MINUS}0\u00b741", "0\u00b717"),
        ("Pendine 2009", f"{MINUS}0\u00b748", f"{MINUS}0\u00b790", f"{MINUS}0\u00b706"),
        ("Quenby 2012", "0\u00b705", f"{MINUS}0\u00b722", "0\u00b732"),
        ("Rhossili 2014", f"{MINUS}0\u00b729", f"{MINUS}0\u00b755", f"{MINUS}0\u00b703"),
    ]
    y = 760
    out = []
    for i, (lab, est, lo, hi) in enumerate(rows):
        _text(c, 72, y, lab, font)
        x = 240
        _text(c, x, y, f"{est} ({lo}\u2013{hi})", font)
        if i % 2 == 0:  # a raised footnote mark after the interval
            width = c.stringWidth(f"{est} ({lo}\u2013{hi})", font, 9)
            _text(c, x + width + 1, y + 4, "a", font, 6)
        out.append(f"{lab} {est} ({lo}\u2013{hi})")
        y -= 15
    c.showPage()
    c.save()
    return out


def continued_table(path: Path, font: str = "Helvetica") -> list[str]:
    """A table that runs on to the next page (5 rows, then 3)."""
    c = canvas.Canvas(str(path), pagesize=A4)
    _text(c, 72, 780, "Table 4. Invented trials", font, 11)
    y = 760
    for i, (lab, est, lo, hi, _, _) in enumerate(TRIALS):
        if i == 5:
            _text(c, 72, 60, "(continued)", font, 8)
            c.showPage()
            _text(c, 72, 780, "Table 4 (continued)", font, 11)
            y = 760
        _text(c, 72, y, lab, font)
        _text(c, 260, y, f"{est} ({lo} to {hi})", font)
        y -= 15
    c.showPage()
    c.save()
    return ci_lines()


def many_pages(path: Path, n: int = 60, table_page: int = 37, font: str = "Helvetica") -> None:
    """A long document of prose pages with the table on one of them."""
    c = canvas.Canvas(str(path), pagesize=A4)
    words = ("invented review text for a long document used in a benchmark " * 3).split()
    for p in range(1, n + 1):
        if p == table_page:
            y = 760
            for lab, est, lo, hi, _, _ in TRIALS:
                _text(c, 72, y, lab, font)
                _text(c, 260, y, f"{est} ({lo} to {hi})", font)
                y -= 15
        else:
            y = 780
            for _ in range(45):
                _text(c, 60, y, " ".join(words[:12]), font, 9)
                y -= 15
        c.showPage()
    c.save()


def image_only(path: Path) -> None:
    """A page with a picture and no text layer (a scan)."""
    from reportlab.lib.utils import ImageReader

    try:
        from PIL import Image
    except ImportError:  # pragma: no cover
        c = canvas.Canvas(str(path), pagesize=A4)
        c.rect(100, 100, 300, 300, fill=1)
        c.showPage()
        c.save()
        return
    img = Image.new("RGB", (200, 100), "white")
    c = canvas.Canvas(str(path), pagesize=A4)
    c.drawImage(ImageReader(img), 100, 500, 200, 100)
    c.showPage()
    c.save()


def encrypted(path: Path) -> None:
    from reportlab.lib import pdfencrypt

    enc = pdfencrypt.StandardEncryption("secret", ownerPassword="owner", canPrint=0)
    c = canvas.Canvas(str(path), pagesize=A4, encrypt=enc)
    _text(c, 72, 760, "Abelard 2004 0.62 (0.41 to 0.94)", "Helvetica")
    c.showPage()
    c.save()


def pathological_page(path: Path, pieces: int = 30_000, font: str = "Helvetica") -> list[str]:
    """Three pages: the table, then a page of ``pieces`` tiny separate text objects (one
    glyph each, 1 pt high, as a figure drawn in text can be), then the table again.
    Reading the middle page takes far longer than either table page."""
    c = canvas.Canvas(str(path), pagesize=A4)
    for page in range(3):
        if page == 1:
            for i in range(pieces):
                c.setFont(font, 1)
                c.drawString(20 + (i * 7) % 550, 20 + (i * 13 % 800) + (i % 5) * 0.1, ".")
        else:
            y = 760
            for lab, est, lo, hi, _, _ in TRIALS:
                _text(c, 72, y, lab, font)
                _text(c, 260, y, f"{est} ({lo} to {hi})", font)
                y -= 15
        c.showPage()
    c.save()
    return ci_lines()
