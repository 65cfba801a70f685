"""Finding the candidate pages of a 60-page PDF against pdfplumber's own plain text
extraction of the same pages (ratio from one run; target <= 2x).

    PYTHONPATH=app:tests python tests/bench/bench_pdf.py [--pages 60] [--rounds 3]

The PDF is made with reportlab (tests/pdf_makers.py: prose pages, the invented table on one).
"""

from __future__ import annotations

import argparse
import statistics
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path[:0] = [str(ROOT / "app"), str(ROOT / "tests")]

import pdf_makers as M  # noqa: E402


def plain_text(path: Path) -> float:
    import pdfplumber

    t = time.perf_counter()
    with pdfplumber.open(path) as pdf:
        for page in pdf.pages:
            page.extract_text()
            page.close()
    return time.perf_counter() - t


def candidates(path: Path) -> float:
    from lopside.intake.pdf import read_pdf

    t = time.perf_counter()
    doc = read_pdf(path)
    doc.ranked()
    return time.perf_counter() - t


def measure(pages: int = 60, rounds: int = 3) -> dict[str, float]:
    with tempfile.TemporaryDirectory() as tmp:
        pdf = Path(tmp) / "long.pdf"
        M.many_pages(pdf, n=pages, table_page=pages // 2)
        plain_text(pdf)
        candidates(pdf)  # imports outside the timings
        a, b = [], []
        for _ in range(rounds):  # interleaved
            a.append(plain_text(pdf))
            b.append(candidates(pdf))
    return {
        "pages": pages,
        "plain_s": statistics.median(a),
        "candidates_s": statistics.median(b),
        "ratio": statistics.median(b) / statistics.median(a),
    }


def report(r: dict[str, float]) -> str:
    return (
        f"{r['pages']}-page PDF: pdfplumber plain text {r['plain_s']:.2f} s; "
        f"Lopside candidate pages {r['candidates_s']:.2f} s -> {r['ratio']:.2f}x (target <= 2x)"
    )


if __name__ == "__main__":
    ap = argparse.ArgumentParser()
    ap.add_argument("--pages", type=int, default=60)
    ap.add_argument("--rounds", type=int, default=3)
    a = ap.parse_args()
    print(report(measure(a.pages, a.rounds)))
