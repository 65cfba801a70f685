"""Machine-checkable rules between an assessment's reading and its own numbers.

Each rule is a function ``rule(assessment, js) -> list of str`` (``js`` is the
``check --json`` object of the same assessment) returning the contradictions it finds, in
words. :func:`contradictions` runs them all. ``tests/test_contradictions.py`` runs them
over hundreds of generated reviews and expects none; a new reading adds its rule here
(append to :data:`RULES`), so the checker grows with the readings.

Pure and cheap: no statistic is computed, only compared. Layer: beside ``report`` (it
reads the JSON and the page-1 lines), above ``assessment``.
"""

from __future__ import annotations

import re
from collections.abc import Callable

from .appraise.model import DIRECTIONS, SOURCES
from .appraise.rating import (
    CANNOT_RATE,
    MIN_STUDIES,
    STRONGLY,
    SUGGESTIONS,
    UNDETECTED,
    strong_signal,
)
from .appraise.reading import NON_SIGNIFICANT, benefit_side, significance_region
from .model.review import CAUSES
from .summary import glance_section
from .words.numbers import fmt_p_eq
from .words.sentences import test_caution

Rule = Callable[[object, dict], list[str]]


def _alpha(a) -> float:
    return a.analysis.settings.test_alpha


def rating_is_a_known_word(a, js) -> list[str]:
    r = a.appraisal.rating
    return [] if r.suggested in SUGGESTIONS else [f"unknown suggestion {r.suggested!r}"]


def cannot_rate_iff_not_assessable(a, js) -> list[str]:
    r = a.appraisal.rating
    if (r.suggested == CANNOT_RATE) != (not r.assessable):
        return [f"suggested {r.suggested!r} but assessable={r.assessable}"]
    if a.analysis.k < MIN_STUDIES and r.assessable:
        return [f"{a.analysis.k} studies rated as assessable"]
    return []


def no_undetected_against_a_strong_signal(a, js) -> list[str]:
    r = a.appraisal.rating
    strong = [e for e in a.appraisal.cause("selection").evidence if strong_signal(e, _alpha(a))]
    if strong and r.suggested == UNDETECTED:
        return [f"'undetected' beside a line for bias at p < alpha: {strong[0].text!r}"]
    return []


def every_line_for_is_in_the_why_list(a, js) -> list[str]:
    r = a.appraisal.rating
    reasons = "\n".join(r.reasons)
    out = []
    for e in a.appraisal.cause("selection").evidence:
        if e.direction == "for" and (e not in r.evidence or e.text not in reasons):
            out.append(f"line for bias missing from the why list: {e.text!r}")
    return out


def strongly_suspected_needs_agreement(a, js) -> list[str]:
    r = a.appraisal.rating
    if r.suggested != STRONGLY:
        return []
    out = []
    t = a.appraisal.small_study.test
    if not (t.computed and t.signal and t.larger_in_small is not False):
        out.append("strongly suspected without the recommended test's signal")
    if a.appraisal.small_study.failed_rules:
        out.append("strongly suspected although a test condition fails")
    alt = [c.key for c in a.appraisal.causes if c.key != "selection" and c.leaning == "for"]
    if alt:
        out.append(f"strongly suspected although {alt} lean for")
    return out


def selection_model_direction_follows_its_weights(a, js) -> list[str]:
    out = []
    for e in a.appraisal.cause("selection").evidence:
        if e.source != "selection model":
            continue
        w, p = e.number("weight"), e.number("p")
        if e.direction == "for" and not (w is not None and w < 1 and p < _alpha(a)):
            out.append(f"selection model 'for' with weight {w} and p {p}")
        if e.direction == "against" and not (w is not None and w > 1):
            out.append(f"selection model 'against' with weight {w}")
    return out


def contour_direction_follows_side_and_region(a, js) -> list[str]:
    c = a.appraisal.small_study.contour
    tf = a.analysis.trim_fill
    line = next(e for e in a.appraisal.cause("selection").evidence if e.source == "contour")
    if line.direction != "for":
        return []
    filled = tuple(getattr(tf, "filled", ()) or ())
    out = []
    if c.side == benefit_side(a.analysis):
        out.append("contour 'for' with studies imputed on the side favouring the intervention")
    if any(significance_region(f.y, f.se) != NON_SIGNIFICANT for f in filled):
        out.append("contour 'for' with an imputed study outside the non-significant region")
    return out


def adjustment_counts_add_up(a, js) -> list[str]:
    adj = a.appraisal.small_study.adjustments
    n = len(adj.estimates)
    out = []
    if adj.unadjusted is not None and n and adj.towards_null + adj.away + adj.little != n:
        out.append(f"{adj.towards_null}+{adj.away}+{adj.little} moves for {n} estimates")
    if adj.crosses_null > adj.towards_null:
        out.append("more estimates cross no effect than move towards it")
    m = re.search(r"The (\d+) adjusted estimates", adj.text)
    if n > 1 and (not m or int(m.group(1)) != n):
        out.append(f"sentence counts {m.group(1) if m else '?'} estimates, rows give {n}")
    of = re.search(r"Of the (\d+): (.*?)\. A range", adj.text)
    if of:
        counted = sum(
            int(x) for x in re.findall(r"(?:^|; )(\d+) (?:move|moves|hardly)", of.group(2))
        )
        if counted != int(of.group(1)):
            out.append(f"'Of the {of.group(1)}' but the parts add to {counted}")
    return out


def weak_test_caution_is_symmetric(a, js) -> list[str]:
    t = a.appraisal.small_study.test
    if not t.computed:
        return []
    caution = test_caution(a.analysis.k)
    return [] if caution in t.text else [f"test sentence without the caution: {t.text!r}"]


def test_signal_matches_its_p(a, js) -> list[str]:
    t = a.appraisal.small_study.test
    if t.computed and t.signal != (t.pvalue < _alpha(a)):
        return [f"signal {t.signal} with p {t.pvalue}"]
    return []


def quoted_p_values_are_the_numbers(a, js) -> list[str]:
    out = []
    for e in a.appraisal.evidence:
        p = e.number("p")
        if p is not None and fmt_p_eq(p) not in e.text:
            out.append(f"line quotes a p other than {fmt_p_eq(p)}: {e.text!r}")
    return out


def evidence_items_are_well_formed(a, js) -> list[str]:
    out = []
    for e in a.appraisal.evidence:
        if e.direction not in DIRECTIONS:
            out.append(f"direction {e.direction!r}")
        if e.source not in SOURCES:
            out.append(f"source {e.source!r} not in SOURCES")
        if e.cause not in CAUSES:
            out.append(f"cause {e.cause!r}")
    return out


def json_reading_is_the_appraisal(a, js) -> list[str]:
    ap = js.get("appraisal") or {}
    out = []
    if ap.get("rating") != a.appraisal.rating.suggested:
        out.append("JSON rating differs from the appraisal")
    if ap.get("assessable") != a.appraisal.rating.assessable:
        out.append("JSON assessable differs from the appraisal")
    mine = [(e.cause, e.source, e.direction, e.text) for e in a.appraisal.evidence]
    theirs = [
        (e["cause"], e["source"], e["direction"], e["sentence"]) for e in ap.get("evidence", [])
    ]
    if mine != theirs:
        out.append("JSON evidence differs from the appraisal's")
    return out


def page_one_equals_the_json(a, js) -> list[str]:
    rows = [{"label": lab, "text": t} for lab, t in glance_section(a).rows]
    out = []
    if rows != js["appraisal"]["page_one"]:
        out.append("page-1 lines differ from JSON appraisal.page_one")
    rating_line = next(
        (r["text"] for r in rows if r["label"] == "Publication bias, suggested rating"), ""
    )
    if not rating_line.startswith(js["appraisal"]["rating"]):
        out.append(f"page-1 rating line {rating_line!r} does not start with the JSON rating")
    lines = {r["label"]: r["text"] for r in rows}
    key = js["appraisal"]["funnel"]["test"]
    test = js["tests"].get(key) if key else None
    if test and test.get("p") is not None and fmt_p_eq(test["p"]) not in lines.get("Test", ""):
        out.append(f"page-1 test line does not quote the JSON's {fmt_p_eq(test['p'])}")
    n_adj = len(js["appraisal"]["funnel"]["adjustments"]["methods"])
    m = re.search(r"The (\d+) adjusted estimates", lines.get("Adjusted estimates", ""))
    if m and int(m.group(1)) != n_adj:
        out.append(f"page 1 counts {m.group(1)} adjusted estimates, the JSON lists {n_adj}")
    k0 = js["trim_fill"]["k0"] if js.get("trim_fill") else None
    rng = js.get("trim_fill_range")
    if rng and k0 is not None and not rng["k0_low"] <= k0 <= rng["k0_high"]:
        out.append("the default trim and fill lies outside the range of settings")
    return out


def strongest_alternative_is_an_alternative(a, js) -> list[str]:
    best = a.appraisal.strongest_alternative
    if best is None:
        return []
    c, e = best
    out = []
    if c.key == "selection" or e.direction != "for" or e not in c.evidence:
        out.append(f"strongest alternative {c.key}: {e.text!r}")
    return out


RULES: list[Rule] = [
    rating_is_a_known_word,
    cannot_rate_iff_not_assessable,
    no_undetected_against_a_strong_signal,
    every_line_for_is_in_the_why_list,
    strongly_suspected_needs_agreement,
    selection_model_direction_follows_its_weights,
    contour_direction_follows_side_and_region,
    adjustment_counts_add_up,
    weak_test_caution_is_symmetric,
    test_signal_matches_its_p,
    quoted_p_values_are_the_numbers,
    evidence_items_are_well_formed,
    json_reading_is_the_appraisal,
    page_one_equals_the_json,
    strongest_alternative_is_an_alternative,
]


def contradictions(assessment, js: dict | None = None) -> list[str]:
    """Every contradiction the rules find ("rule name: what"), empty when none."""
    if js is None:
        from .report import to_json

        js = to_json(assessment)
    out = []
    for rule in RULES:
        out.extend(f"{rule.__name__}: {msg}" for msg in rule(assessment, js))
    return out
