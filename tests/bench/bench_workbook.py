"""Benchmark: the panel summary of a workbook against one appraisal sheet (a script).

Issue 18's target: the panel summary of 5 outcomes x 30 studies, built and written in all
four formats (PDF with a funnel per outcome, DOCX, XLSX, CSV), takes at most 3x the time
of one appraisal sheet of one 30-study outcome. Both start from the reviews (each
analysis is part of the timing), run interleaved in this one process, and the ratio of
the medians is printed. Invented data (tests/bench/bench_analyse.py).

    PYTHONPATH=app python tests/bench/bench_workbook.py [--repeat 5]
"""

from __future__ import annotations

import argparse
import statistics
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))

OUTCOMES = ("Mortality", "Readmission", "Adverse events", "Infection", "Stroke")


def inputs():
    from bench_analyse import invented_review

    from lopside.panel import OutcomeInput
    from lopside.settings import AnalysisSettings

    return [
        OutcomeInput(name, invented_review(30, seed=i + 1), AnalysisSettings())
        for i, name in enumerate(OUTCOMES)
    ]


def panel_all_formats(items, folder: Path) -> None:
    from lopside.panel import build_panel
    from lopside.panel.export import write_panel

    summary = build_panel("Invented workbook", items)
    for suffix in (".pdf", ".docx", ".xlsx", ".csv"):
        write_panel(summary, folder / f"panel{suffix}", date="2026-01-01")


def one_sheet(item, folder: Path) -> None:
    from lopside.assessment import assess
    from lopside.sheet import write_sheet

    write_sheet(assess(item.review, item.settings), folder / "sheet.pdf")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=5)
    args = ap.parse_args()
    items = inputs()
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        panel_all_formats(items, folder)  # warm-up: imports, fonts
        one_sheet(items[0], folder)
        panel, sheet = [], []
        for _ in range(args.repeat):  # interleaved: a shared machine's load hits both
            t0 = time.perf_counter()
            panel_all_formats(items, folder)
            panel.append(time.perf_counter() - t0)
            t0 = time.perf_counter()
            one_sheet(items[0], folder)
            sheet.append(time.perf_counter() - t0)
    p, s = statistics.median(panel), statistics.median(sheet)
    print(f"panel summary, 5 outcomes x 30 studies, 4 formats: median {p:.2f} s")
    print(f"one appraisal sheet, 30 studies:                   median {s:.2f} s")
    print(f"ratio {p / s:.2f} (target <= 3.0)")


if __name__ == "__main__":
    main()
