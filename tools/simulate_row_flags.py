"""How often do the row diagnostics flag a clean review? (the numbers in DEVELOPERS.md)

Invented 2x2 reviews with nothing mistyped: 8-24 trials, 40-900 per arm (equal arms),
control risks 6-15 %, a true odds ratio of 0.8 with between-trial SD 0.15 on the log
scale. Prints how many reviews had at least one flag, by kind, and how often the paper's
own influence limits (DFFITS or Cook's distance above the chi-square(1) median) would
have flagged a study.

    PYTHONPATH=app python tools/simulate_row_flags.py [REVIEWS] [SEED]
"""

from __future__ import annotations

import collections
import sys

import numpy as np

from lopside.analysis import build_study_data
from lopside.model.review import Review, StudyRow
from lopside.stats.diagnostics import flag_rows
from lopside.stats.effects import derive_all
from lopside.stats.sensitivity import leave_one_out


def main(reviews: int = 400, seed: int = 1) -> None:
    rng = np.random.default_rng(seed)
    kinds: collections.Counter[str] = collections.Counter()
    any_flag = paper_limits = 0
    for _ in range(reviews):
        rows = []
        for i in range(int(rng.integers(8, 25))):
            n = int(rng.integers(40, 900))
            p0 = rng.uniform(0.06, 0.15)
            logit1 = np.log(p0 / (1 - p0)) + np.log(0.8) + rng.normal(0, 0.15)
            p1 = 1 / (1 + np.exp(-logit1))
            rows.append(
                StudyRow(
                    study=f"Trial {i + 1}",
                    int_events=float(rng.binomial(n, p1)),
                    int_total=float(n),
                    ctl_events=float(rng.binomial(n, p0)),
                    ctl_total=float(n),
                )
            )
        data, _ = build_study_data(Review(studies=tuple(rows)), "OR", derive_all(rows, "OR"))
        flags = flag_rows(data, leave_one_out(data))
        found = {r.kind for f in flags.flagged for r in f.reasons}
        kinds.update(found)
        any_flag += bool(found)
        inf = flags.influence
        lim = inf.limits
        paper_limits += bool(
            ((np.abs(inf.dffits) > lim["dffits"]) | (inf.cooks > lim["cooks"])).any()
        )
    print(f"{reviews} clean reviews (seed {seed}): {any_flag} with a flagged row")
    for kind, n in kinds.most_common():
        print(f"  {kind}: {n}")
    print(f"  the paper's influence limits alone would flag: {paper_limits}")


if __name__ == "__main__":
    args = [int(a) for a in sys.argv[1:3]]
    main(*args)
