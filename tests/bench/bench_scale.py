"""Benchmark: `lopside check --json` on large invented tables (a script, not a test).

Writes invented study tables (2x2 counts, odds ratios) of k = 1,000 ... 20,000 studies,
runs the command in a fresh process under ``/usr/bin/time -v`` for the wall time and peak
memory (maximum resident set size), interleaving the code under test with another
checkout when ``--before`` is given, and prints the median of the repeats and the growth
exponent log(t_k / t_1000) / log(k / 1000).

    PYTHONPATH=app python tests/bench/bench_scale.py                     # this checkout
    PYTHONPATH=app python tests/bench/bench_scale.py --before /work/main/app \\
        --before-max-k 3000                                              # side by side

The old code needs minutes and gigabytes at 20,000 studies: ``--before-max-k`` keeps it to
the sizes a shared machine can afford.
"""

from __future__ import annotations

import argparse
import math
import os
import re
import statistics
import subprocess
import sys
import tempfile
from pathlib import Path

HERE = Path(__file__).resolve().parent
APP = HERE.parents[1] / "app"


def write_tables(folder: Path, sizes) -> dict[int, Path]:
    sys.path.insert(0, str(HERE))
    from bench_analyse import invented_review

    from lopside.intake.table import write_table_csv

    out = {}
    for k in sizes:
        path = folder / f"invented_{k}.csv"
        if not path.exists():
            write_table_csv(invented_review(k).studies, path)
        out[k] = path
    return out


def run_once(app: str, table: Path) -> tuple[float, float]:
    """(wall seconds, peak RSS in MB) of one `lopside check --json` run."""
    env = dict(os.environ, PYTHONPATH=app, OPENBLAS_NUM_THREADS="1")
    cmd = ["/usr/bin/time", "-v", sys.executable, "-m", "lopside", "check", "--json", "--quiet"]
    cmd += ["--measure", "OR", str(table)]
    proc = subprocess.run(cmd, env=env, capture_output=True, text=True, check=False)
    if proc.returncode != 0 and "--quiet" in proc.stderr:  # an old checkout without --quiet
        cmd.remove("--quiet")
        proc = subprocess.run(cmd, env=env, capture_output=True, text=True, check=False)
    wall = re.search(r"Elapsed \(wall clock\) time \(h:mm:ss or m:ss\): (\S+)", proc.stderr)
    rss = re.search(r"Maximum resident set size \(kbytes\): (\d+)", proc.stderr)
    if proc.returncode != 0 or not wall or not rss:
        raise SystemExit(f"run failed ({proc.returncode}): {proc.stderr[-800:]}")
    parts = [float(x) for x in wall.group(1).split(":")]
    seconds = sum(p * 60**i for i, p in enumerate(reversed(parts)))
    return seconds, int(rss.group(1)) / 1024.0


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--sizes", default="1000,3000,10000,20000")
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--before", help="app/ folder of another checkout to run side by side")
    ap.add_argument("--before-max-k", type=int, default=3000)
    ap.add_argument("--folder", default=os.path.join(tempfile.gettempdir(), "lopside-bench"))
    args = ap.parse_args()
    sizes = [int(s) for s in args.sizes.split(",")]
    folder = Path(args.folder)
    folder.mkdir(parents=True, exist_ok=True)
    tables = write_tables(folder, sizes)
    results: dict[tuple[str, int], list[tuple[float, float]]] = {}
    for _ in range(args.repeat):
        for k in sizes:
            runs = [("now", str(APP))]
            if args.before and k <= args.before_max_k:
                runs.append(("before", args.before))
            for name, app in runs:
                results.setdefault((name, k), []).append(run_once(app, tables[k]))
    print(f"{'k':>7} {'code':>7} {'wall s (median)':>16} {'peak MB':>9} {'exponent':>9}")
    base: dict[str, float] = {}
    for k in sizes:
        for name in ("now", "before"):
            runs = results.get((name, k))
            if not runs:
                continue
            wall = statistics.median(r[0] for r in runs)
            rss = max(r[1] for r in runs)
            base.setdefault(name, wall)
            expo = ""
            if k != sizes[0]:
                expo = f"{math.log(wall / base[name]) / math.log(k / sizes[0]):.2f}"
            print(f"{k:>7} {name:>7} {wall:>16.2f} {rss:>9.0f} {expo:>9}")
        now, before = results.get(("now", k)), results.get(("before", k))
        if now and before:
            ratio = statistics.median(r[0] for r in now) / statistics.median(r[0] for r in before)
            print(f"{'':>7} {'ratio':>7} {ratio:>16.2f}")


if __name__ == "__main__":
    main()
