"""Plumbing for the benchmark suite: timings kept per run, ratios printed at the end.

Each benchmark in tests/bench/test_benchmarks.py files its pytest-benchmark statistics
under a key with :func:`keep`; after the run, :func:`pytest_terminal_summary` prints the
ratios between timings taken in this same run (the machine may be shared, so absolute
times vary from run to run; ratios much less). Nothing here asserts a timing.
"""

from __future__ import annotations

import os

import pytest

#: key -> {"min": s, "median": s, "rounds": n} for the benchmarks run in this session
RESULTS: dict[str, dict[str, float]] = {}


@pytest.fixture
def keep(benchmark):
    """keep(key): file the statistics of the benchmark just run under ``key``."""

    def _keep(key: str) -> None:
        s = benchmark.stats.stats
        RESULTS[key] = {"min": s.min, "median": s.median, "rounds": s.rounds}

    return _keep


def _ratio_rows() -> list[tuple[str, str, float | None]]:
    """(what, how, ratio of medians) for every pair of timings present."""
    from test_benchmarks import ANALYSE_SIZES, POWER_LOOP_SCALE, REUSE_SIZES, SHEET_SIZES

    def ratio(a: str, b: str, scale: float = 1.0) -> float | None:
        if a in RESULTS and b in RESULTS:
            return scale * RESULTS[a]["median"] / RESULTS[b]["median"]
        return None

    rows = []
    for k in ANALYSE_SIZES:
        rows.append(
            (
                f"analyse(), k = {k:,}",
                "/ bare REML pooling of the same studies",
                ratio(f"analyse-{k}", f"pool-{k}"),
            )
        )
    for small, big in zip(ANALYSE_SIZES[:-1], ANALYSE_SIZES[1:]):
        rows.append(
            (
                f"analyse() growth, k {small:,} -> {big:,}",
                f"(x{big // small} studies)",
                ratio(f"analyse-{big}", f"analyse-{small}"),
            )
        )
    for k in REUSE_SIZES:
        rows.append(
            (
                f"analyse(), k = {k:,}",
                "as it is / inside pooling.reuse_tau2()",
                ratio(f"analyse-{k}", f"analyse-reuse-{k}"),
            )
        )
    rows.append(
        (
            "selection block (+ fixed weights, missing), k = 30",
            "/ the whole analyse() (target <= 0.10)",
            ratio("selection-block-30", "analyse-30"),
        )
    )
    rows.append(
        (
            "leave-one-out, k = 300",
            "per-subset scalar loop / batched",
            ratio("loo-loop-300", "loo-batched-300"),
        )
    )
    rows.append(
        (
            "power, 10,000 replicates x 2 scenarios",
            "statsmodels loop (scaled) / vectorised",
            ratio("power-loop", "power-vectorised", POWER_LOOP_SCALE),
        )
    )
    small, big = SHEET_SIZES
    rows.append(
        (
            f"sheet growth, {small} -> {big} studies",
            "(3 pages)",
            ratio(f"sheet-{big}", f"sheet-{small}"),
        )
    )
    rows.append(
        (
            f"sheet growth with forest, {small} -> {big}",
            "(forest pages added)",
            ratio(f"sheet-forest-{big}", f"sheet-forest-{small}"),
        )
    )
    return [r for r in rows if r[2] is not None]


def pytest_terminal_summary(terminalreporter):
    if not RESULTS:
        return
    tr = terminalreporter
    tr.section("Lopside benchmarks: medians and ratios from this run")
    threads = os.environ.get("OPENBLAS_NUM_THREADS", "not set")
    tr.write_line(f"(OPENBLAS_NUM_THREADS = {threads}; no timing is asserted)")
    for key, s in RESULTS.items():
        tr.write_line(
            f"  {key:<24} median {s['median'] * 1e3:11.2f} ms   min {s['min'] * 1e3:11.2f} ms"
            f"   rounds {int(s['rounds'])}"
        )
    tr.write_line("")
    for what, how, value in _ratio_rows():
        fmt = ".3f" if value < 1 else ".1f"
        tr.write_line(f"  {what:<42} {how:<42} {value:10{fmt}}")
