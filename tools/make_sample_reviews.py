"""Write the invented demo reviews in sample_reviews/ (run once; the files are committed).

Every scenario, drug, trial name and number here is invented for demonstration. The data
are drawn from a seeded random generator with small-study effects or subgroup differences
built in on purpose, so the demo has something to show. They describe no real trial.

Run: PYTHONPATH=app python tools/make_sample_reviews.py  (all files)
     PYTHONPATH=app python -c "import sys; sys.path.insert(0, 'tools');
         import make_sample_reviews as m; m.write_workbook()"   (the workbook only)

The four one-outcome projects were written in format 1, before workbooks; they are kept
so, as the files every test of migration opens (a rerun writes them as format 2).
"""

from __future__ import annotations

import math
from dataclasses import replace
from pathlib import Path

import numpy as np

from lopside.intake.table import write_table_csv
from lopside.model.project_file import save, save_workbook
from lopside.model.review import PublishedResult, Review, ReviewDetails, StudyRow
from lopside.model.workbook import Outcome, Workbook

OUT = Path(__file__).resolve().parents[1] / "sample_reviews"
INVENTED = (
    "INVENTED DEMO DATA: a fictional review with fictional trials, made up to show how "
    "Lopside works. It describes no real drug, trial or patient."
)
SURNAMES = [
    "Arkwright",
    "Belhaven",
    "Carrow",
    "Dunmore",
    "Elstree",
    "Fenwick",
    "Garrod",
    "Holloway",
    "Ingleby",
    "Jarrow",
    "Kestle",
    "Lindqvist",
    "Marchetti",
    "Nakamura-Ellis",
    "Okonjo",
    "Pellew",
    "Quarrie",
    "Rosendahl",
    "Szabo",
    "Treharne",
    "Uddin",
    "Vasquez-Mora",
    "Whitlow",
    "Yardley",
]


def _r(x: float, nd: int = 2) -> float:
    return float(f"{x:.{nd}f}")


def delirium_review(rng: np.random.Generator) -> Review:
    """Binary outcome, 16 trials, small trials show larger benefit (small-study effects)."""
    sizes = [1820, 1410, 960, 620, 480, 400, 300, 240, 200, 160, 130, 110, 90, 80, 64, 50]
    rows = []
    for i, n_total in enumerate(sizes):
        n1 = n_total // 2
        n0 = n_total - n1
        base = rng.uniform(0.18, 0.30)
        # true log OR of -0.15 in large trials, drifting towards -0.9 in the smallest ones
        log_or = -0.15 - 0.75 * (1 - math.log(n_total / 50) / math.log(1820 / 50))
        odds1 = base / (1 - base) * math.exp(log_or)
        p1 = odds1 / (1 + odds1)
        a = int(rng.binomial(n1, p1))
        c = int(rng.binomial(n0, base))
        rob = "low" if n_total >= 400 else ("some concerns" if n_total >= 150 else "high")
        year = 2004 + (15 - i) // 2 + int(rng.integers(0, 3))
        rows.append(
            StudyRow(
                study=f"{SURNAMES[i]} {year}",
                year=year,
                int_events=a,
                int_total=n1,
                ctl_events=c,
                ctl_total=n0,
                risk_of_bias=rob,
                subgroup="cardiac surgery" if i % 3 == 0 else "non-cardiac surgery",
            )
        )
    rows[9] = rows[9].with_values(study=rows[9].study.replace(" ", " (pilot) "))
    return Review(
        details=ReviewDetails(
            title="Vantoprine for the prevention of postoperative delirium in older adults",
            question="In adults aged 65 or over having major surgery, does perioperative "
            "vantoprine reduce delirium within 7 days compared with placebo?",
            outcome="Delirium within 7 days of surgery",
            measure="OR",
            favours="lower",
            int_label="vantoprine",
            ctl_label="placebo",
            source_note=INVENTED,
        ),
        studies=tuple(rows),
    )


def rehab_review(rng: np.random.Generator) -> Review:
    """Continuous outcome (MD), heterogeneity explained by the supervised/home subgroup."""
    rows = []
    for i in range(12):
        supervised = i % 2 == 0
        true_md = -12.0 if supervised else -4.0
        n1 = int(rng.integers(25, 140))
        n0 = n1 + int(rng.integers(-6, 7))
        sd1 = rng.uniform(14, 22)
        sd0 = rng.uniform(14, 22)
        m0 = rng.uniform(48, 62)
        m1 = m0 + true_md + rng.normal(0, math.sqrt(sd1**2 / n1 + sd0**2 / n0))
        year = 2009 + i
        rows.append(
            StudyRow(
                study=f"{SURNAMES[(i + 5) % len(SURNAMES)]} {year}",
                year=year,
                int_mean=_r(m1, 1),
                int_sd=_r(sd1, 1),
                int_n=n1,
                ctl_mean=_r(m0, 1),
                ctl_sd=_r(sd0, 1),
                ctl_n=n0,
                subgroup="supervised" if supervised else "home-based",
                risk_of_bias="low" if i % 4 else "some concerns",
            )
        )
    return Review(
        details=ReviewDetails(
            title="Graded walking programmes for chronic knee pain",
            question="In adults with chronic knee pain, does a 12-week graded walking "
            "programme reduce pain (0-100 scale) compared with usual care?",
            outcome="Pain score at 12 weeks (0-100, lower is better)",
            measure="MD",
            favours="lower",
            int_label="walking programme",
            ctl_label="usual care",
            source_note=INVENTED,
        ),
        studies=tuple(rows),
    )


def relapse_review(rng: np.random.Generator) -> Review:
    """Time-to-event outcome given only as hazard ratios with 95% CIs."""
    rows = []
    for i in range(11):
        events = int(rng.integers(30, 420))
        se = 2.0 / math.sqrt(events)
        true = -0.22 + (0.0 if events > 150 else -0.25)
        log_hr = rng.normal(true, se)
        hr, lo, hi = (math.exp(x) for x in (log_hr, log_hr - 1.96 * se, log_hr + 1.96 * se))
        year = 2011 + i
        rows.append(
            StudyRow(
                study=f"TRIAL-{chr(65 + i)}{year % 100:02d} ({SURNAMES[(i + 11) % 24]})",
                year=year,
                estimate=_r(hr),
                lower=_r(lo),
                upper=_r(hi),
            )
        )
    return Review(
        details=ReviewDetails(
            title="Maintenance orvelimab after first remission of a fictional autoimmune condition",
            question="Does maintenance orvelimab delay relapse compared with observation?",
            outcome="Time to first relapse",
            measure="HR",
            favours="lower",
            int_label="orvelimab",
            ctl_label="observation",
            source_note=INVENTED,
        ),
        studies=tuple(rows),
    )


def small_review(rng: np.random.Generator) -> Review:
    """Fewer than 10 studies (risk ratio from counts)."""
    rows = []
    sizes = [420, 260, 180, 120, 96, 70, 48]
    for i, n in enumerate(sizes):
        n1 = n // 2
        n0 = n - n1
        p0 = rng.uniform(0.25, 0.4)
        p1 = p0 * 0.8
        rows.append(
            StudyRow(
                study=f"{SURNAMES[(i + 17) % 24]} {2015 + i}",
                year=2015 + i,
                int_events=int(rng.binomial(n1, p1)),
                int_total=n1,
                ctl_events=int(rng.binomial(n0, p0)),
                ctl_total=n0,
            )
        )
    return Review(
        details=ReviewDetails(
            title="Silvered wound dressings for surgical site infection after caesarean birth",
            question="Do silvered dressings reduce surgical site infection within 30 days "
            "compared with plain dressings?",
            outcome="Surgical site infection within 30 days",
            measure="RR",
            favours="lower",
            int_label="silvered dressing",
            ctl_label="plain dressing",
            source_note=INVENTED,
        ),
        studies=tuple(rows),
    )


def with_published(review: Review, model: str) -> Review:
    """Attach a 'published' pooled result: our own pooled estimate, rounded as a paper would."""
    from lopside.analysis import analyse

    res = analyse(review)
    pooled = res.random if "random" in model else res.mantel_haenszel or res.fixed
    f = math.exp if review.measure in ("OR", "RR", "HR") else (lambda x: x)
    nd = 2 if review.measure in ("OR", "RR", "HR") else 1
    pub = PublishedResult(
        estimate=_r(f(pooled.estimate), nd),
        lower=_r(f(pooled.ci.low), nd),
        upper=_r(f(pooled.ci.high), nd),
        model=model,
    )
    return review.with_details(published=pub)


def pasted_text(review: Review) -> str:
    """The HR review as a reader would copy it from a PDF forest table (weights, totals)."""
    from lopside.analysis import analyse

    res = analyse(review)
    het = res.heterogeneity
    lines = ["Trial\tHazard ratio (95% CI)\tWeight"]
    for s, w in zip(review.studies, res.random.weights):
        lines.append(f"{s.study}  {s.estimate:.2f} ({s.lower:.2f}\u2013{s.upper:.2f})  {w:.1f}%")
    pub = review.details.published
    lines.append(
        f"Total (95% CI)  {pub.estimate:.2f} ({pub.lower:.2f}\u2013{pub.upper:.2f})  100.0%"
    )
    lines.append(f"Heterogeneity across trials: I\u00b2 = {het.i2:.0f}%, P = {het.pvalue:.2f}")
    return "\n".join(lines) + "\n"


HF_TITLE = "Caldremide added to usual care in acute heart failure"
HF_QUESTION = (
    "In adults admitted with acute heart failure, does caldremide added to usual care "
    "improve outcomes at 90 days compared with usual care alone?"
)


def _hf_trials(rng: np.random.Generator, k: int) -> list[tuple[str, int, int, str]]:
    """(name, year, size, risk of bias) of the invented trials, largest first."""
    sizes = sorted(int(x) for x in np.exp(rng.uniform(math.log(60), math.log(2400), k)))
    trials = []
    for i, n in enumerate(reversed(sizes)):
        year = 2008 + int(rng.integers(0, 16))
        rob = "low" if n >= 500 else ("some concerns" if n >= 150 else "high")
        trials.append((f"CALD-{i + 1:02d} ({SURNAMES[(i * 7) % 24]})", year, n, rob))
    return trials


def _binary_outcome(rng, trials, base, log_or, small_extra, name, measure, favours=""):
    rows = []
    for study, year, n, rob in trials:
        n1, n0 = n // 2, n - n // 2
        shift = small_extra * (1 - math.log(n / 60) / math.log(2400 / 60))
        odds1 = base / (1 - base) * math.exp(log_or + shift)
        a = int(rng.binomial(n1, odds1 / (1 + odds1)))
        c = int(rng.binomial(n0, base))
        rows.append(
            StudyRow(
                study=study,
                year=year,
                int_events=a,
                int_total=n1,
                ctl_events=c,
                ctl_total=n0,
                risk_of_bias=rob,
            )
        )
    return ReviewDetails(outcome=name, measure=measure, favours=favours or "lower"), rows


def _continuous_outcome(rng, trials, true, sd, name, measure, favours, units=""):
    rows = []
    for study, year, n, rob in trials:
        n1, n0 = n // 2, n - n // 2
        m0 = rng.uniform(0.8, 1.2) * 300 if units == "m" else rng.uniform(45, 60)
        diff = true * sd + rng.normal(0, sd * math.sqrt(1 / n1 + 1 / n0))
        rows.append(
            StudyRow(
                study=study,
                year=year,
                int_mean=_r(m0 + diff, 1),
                int_sd=_r(sd * rng.uniform(0.9, 1.1), 1),
                int_n=n1,
                ctl_mean=_r(m0, 1),
                ctl_sd=_r(sd * rng.uniform(0.9, 1.1), 1),
                ctl_n=n0,
                risk_of_bias=rob,
            )
        )
    details = ReviewDetails(outcome=name, measure=measure, favours=favours, units=units)
    return details, rows


def heart_failure_workbook(rng: np.random.Generator) -> Workbook:
    """Five outcomes of one invented review, as a guideline panel would rate them.

    Mortality has small-study effects built in; readmission has none; the walk test
    favours higher values and has units; quality of life has fewer than 10 trials;
    serious adverse events are rare. The trials are shared between outcomes (each outcome
    uses the trials that reported it), as in a real review.
    """
    trials = _hf_trials(rng, 20)
    parts = [
        _binary_outcome(
            rng, trials[:18], 0.14, -0.08, -0.7, "All-cause mortality at 90 days", "OR"
        ),
        _binary_outcome(
            rng, trials[1:15], 0.30, -0.18, 0.0, "Readmission for heart failure at 90 days", "RR"
        ),
        _continuous_outcome(
            rng,
            trials[2:13],
            0.25,
            80.0,
            "Six-minute walk distance at 90 days",
            "MD",
            "higher",
            "m",
        ),
        _continuous_outcome(
            rng, trials[4:12], 0.20, 15.0, "Quality of life at 90 days", "SMD", "higher"
        ),
        _binary_outcome(rng, trials[:16], 0.03, 0.10, 0.0, "Serious adverse events", "OR"),
    ]
    outcomes = []
    for details, rows in parts:
        review = Review(
            details=replace(
                details,
                title=HF_TITLE,
                question=HF_QUESTION,
                int_label="caldremide",
                ctl_label="usual care",
                source_note=INVENTED,
            ),
            studies=tuple(rows),
        )
        model = (
            "random effects"
            if details.measure in ("MD", "SMD")
            else "Mantel-Haenszel, fixed effect"
        )
        outcomes.append(Outcome(with_published(review, model), {}))
    return Workbook(tuple(outcomes))


def write_workbook() -> None:
    """Only the workbook (its own seed: the other files are not touched)."""
    save_workbook(
        heart_failure_workbook(np.random.default_rng(20261202)),
        OUT / "heart_failure_workbook.lopside",
    )


def main() -> None:
    rng = np.random.default_rng(20261201)
    OUT.mkdir(exist_ok=True)
    d = with_published(delirium_review(rng), "Mantel-Haenszel, fixed effect")
    save(d, OUT / "delirium_vantoprine.lopside")
    write_table_csv(d.studies, OUT / "delirium_vantoprine.csv")
    r = with_published(rehab_review(rng), "random effects")
    save(r, OUT / "knee_pain_walking.lopside")
    h = with_published(relapse_review(rng), "random effects")
    save(h, OUT / "relapse_orvelimab.lopside")
    (OUT / "relapse_orvelimab.txt").write_text(pasted_text(h), encoding="utf-8")
    s = with_published(small_review(rng), "random effects")
    save(s, OUT / "wound_dressings_small.lopside")
    write_workbook()
    print("wrote", sorted(p.name for p in OUT.iterdir()))


if __name__ == "__main__":
    main()
