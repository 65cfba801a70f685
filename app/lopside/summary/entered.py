"""What went in: the review's details, the data entered and how they were read, rows that
stand out, and the settings used (for reproducibility)."""

from __future__ import annotations

from ..model.review import MEASURE_NAMES, RATIO_MEASURES
from ..stats.results import NotComputable
from ..words.numbers import MISSING, fmt_int, fmt_num, fmt_se, is_finite, plural, why_not
from ..words.sentences import spread_text
from .section import LIST_LIMIT, Section, _limit


def header_section(result, *, date: str = "") -> Section:
    """Review details: title, question, outcome, measure, appraiser, date, source note."""
    d = result.review.details
    m = result.measure
    measure = f"{MEASURE_NAMES.get(m, m)} ({m})"
    if m in RATIO_MEASURES:
        measure += ", analysed on the log scale"
    rows = [
        ("Review", d.title or "(untitled review)"),
        ("Question", d.question or "(not stated)"),
        ("Outcome", d.outcome or "(not stated)"),
        ("Effect measure", measure + (f"; units: {d.units}" if d.units else "")),
        ("Favours intervention", favours_text(d)),
        ("Appraiser", d.appraiser or "(not stated)"),
    ]
    if date:
        rows.append(("Date", date))
    notes = (d.source_note,) if d.source_note else ()
    return Section("header", "Review", tuple(rows), notes=notes)


def favours_text(details) -> str:
    """The direction of benefit and where it came from, in words (header of every output)."""
    from ..model.review import FAVOURS_SOURCES

    text = f"{'higher' if details.favours == 'higher' else 'lower'} values favour the intervention"
    source = getattr(details, "favours_source", "")
    return f"{text} ({FAVOURS_SOURCES[source]})" if source in FAVOURS_SOURCES and source else text


#: Most unread entries listed in a section (the JSON lists them all).
NOT_READ_LIMIT = 20


def not_read_label(account) -> str:
    """A label such as "2 lines not read" or "1 column, 3 places not read"."""
    words = {
        "line": ("line", "lines"),
        "text": ("text line", "text lines"),
        "cells": ("place", "places"),
        "column": ("column", "columns"),
        "row": ("row", "rows"),
        "page": ("PDF page", "PDF pages"),
    }
    counts: dict[str, int] = {}
    for n in account.not_read:
        counts[n.kind] = counts.get(n.kind, 0) + 1
    parts = [plural(c, *words.get(k, ("item", "items"))) for k, c in counts.items()]
    return ", ".join(parts) + " not read"


def intake_rows(review) -> list[tuple[str, str]]:
    """The account of the input under the entered data (text, window, sheet alike)."""
    a = getattr(review, "intake", None)
    if a is None or a.is_empty():
        return []
    rows: list[tuple[str, str]] = []
    if a.source:
        rows.append(("Read from", a.source))
    if a.measure_how:
        rows.append(("Measure", a.measure_how))
    if a.decimal_text():
        rows.append(("Decimal mark", a.decimal_text()))
    if a.not_read:
        items = [f"{n.where}: {n.text} ({n.reason})" for n in a.not_read]
        rows.append((not_read_label(a), "\n".join(_limit(items, NOT_READ_LIMIT))))
    elif a.source:
        rows.append(("Not read", "nothing: every line, cell and column was read"))
    return rows


def _route_counts(result) -> list[tuple[str, int]]:
    try:
        from ..stats.effects import ROUTE_NAMES
    except ImportError:  # pragma: no cover - effects is part of the engine
        ROUTE_NAMES = {}
    included = set(result.data.rows)
    counts: dict[str, int] = {}
    for i, d in enumerate(result.derived):
        if i not in included:
            continue
        route = getattr(d, "route", "") or ""
        counts[route] = counts.get(route, 0) + 1
    out = []
    for route, n in counts.items():
        out.append((ROUTE_NAMES.get(route, route or "other"), n))
    return out


def _problem_text(p) -> str:
    row = getattr(p, "row", None)
    study = getattr(p, "study", "") or ""
    fld = getattr(p, "field", "") or ""
    msg = getattr(p, "message", str(p))
    sev = getattr(p, "severity", "")
    where = []
    if isinstance(row, int):
        where.append(f"row {row + 1}")
    if study:
        where.append(study)
    head = ", ".join(where)
    if fld:
        head = f"{head} [{fld}]" if head else f"[{fld}]"
    sev = f"{sev}: " if sev else ""
    # messages from the row checks may already start with "Row N (label), field: "
    if msg.lower().startswith("row "):
        return f"{sev}{msg}"
    return f"{sev}{head}: {msg}" if head else f"{sev}{msg}"


def data_section(result) -> Section:
    """k, participants, spread of the SEs, how SEs were obtained, rows with problems."""
    data = result.data
    k = data.k
    n_rows = len(result.review.studies)
    rows: list[tuple[str, str]] = [
        ("Studies analysed", f"{k} of {plural(n_rows, 'row')} in the table"),
        *intake_rows(result.review),
    ]
    ns = [float(x) for x in data.n if is_finite(x)] if data.n.size == k else []
    if ns:
        known = "" if len(ns) == k else f" (known for {len(ns)} of {k} studies)"
        rows.append(("Participants", f"{fmt_int(sum(ns))}{known}"))
    else:
        rows.append(("Participants", "not entered"))
    ses = [float(x) for x in data.se if is_finite(x)]
    if ses:
        lo, hi = min(ses), max(ses)
        spread = spread_text(lo, hi)
        ratio = f"; {spread}" if spread else ""
        scale = " (log scale)" if result.measure in RATIO_MEASURES else ""
        rows.append(("Standard errors" + scale, f"{fmt_se(lo)} to {fmt_se(hi)}{ratio}"))
    routes = _route_counts(result)
    if routes:
        rows.append(("SE obtained from", "; ".join(f"{name}: {n}" for name, n in routes)))
    approx = sum(
        1
        for i, d in enumerate(result.derived)
        if i in set(data.rows) and getattr(d, "approximate", False)
    )
    if approx:
        rows.append(("Approximate SEs", f"{approx} (from a bound such as 'P < 0.05')"))
    if result.excluded:
        items = [f"{e.label}: {e.reason}" for e in result.excluded]
        rows.append(("Left out", "\n".join(_limit(items))))
    probs = list(result.problems)
    if probs:
        items = [_problem_text(p) for p in probs]
        rows.append((f"Entry checks ({len(probs)})", "\n".join(_limit(items))))
    else:
        rows.append(("Entry checks", "no problems found in the rows"))
    return Section("data", "Data entered", tuple(rows))


def row_flags_section(result) -> Section:
    """Rows that pass the entry checks but stand out from the others (stats.diagnostics)."""
    from ..stats import diagnostics as dg

    flags = getattr(result, "row_flags", None)
    if flags is None:
        return Section("row_flags", dg.HEADLINE, (("Result", "not assessed"),))
    if isinstance(flags, NotComputable):
        return Section("row_flags", dg.HEADLINE, (("Result", why_not(flags)),))
    if not flags.flagged:
        return Section(
            "row_flags", dg.HEADLINE, (("Result", flags.none_found()),), notes=flags.notes
        )
    shown = flags.flagged[:LIST_LIMIT]
    rows = [(dg.row_label(f), "\n".join(dg.flag_lines(f))) for f in shown]
    rest = flags.flagged[LIST_LIMIT:]
    if rest:  # the evidence of the first few; the others named (all of them in the JSON)
        names = [dg.row_label(f) for f in rest]
        rows.append((f"{len(rest)} more", "; ".join(_limit(names, 5 * LIST_LIMIT))))
    return Section("row_flags", dg.HEADLINE, tuple(rows), notes=(dg.EXPLAIN,) + flags.notes)


def settings_section(result, *, version: str = "") -> Section:
    """Key settings and the data fingerprint, for reproducibility."""
    s = result.settings
    if not version:
        from .. import __version__ as version
    rows = (
        ("Software", f"Lopside {version}"),
        (
            "Random effects",
            f"τ² by {s.tau2_method}" + (", Hartung-Knapp interval" if s.hksj else ""),
        ),
        (
            "Study CIs assumed",
            {"z": "normal (z)", "t": "t-based", "auto": "t when arms < 60"}.get(
                s.ci_method, s.ci_method
            ),
        ),
        ("Funnel centre", f"{s.funnel_model} effect"),
        ("Test threshold", f"p < {fmt_num(s.test_alpha, 2)}"),
        (
            "Trim and fill",
            f"estimator {s.trimfill_estimator}, side {s.trimfill_side}, trimming by "
            f"{s.trimfill_trim_model}, filled estimate by {s.trimfill_fill_model}",
        ),
        ("PET-PEESE rule", f"PET test {s.petpeese_sided}-sided at {fmt_num(s.petpeese_alpha, 2)}"),
        (
            "Selection model cut-points",
            ", ".join(
                fmt_num(c, 3)
                for c in getattr(s, "selection_cutpoints", getattr(s, "selection_cuts", ()))
            ),
        ),
        ("Data fingerprint (SHA-256)", result.fingerprint or MISSING),
    )
    return Section("settings", "Settings and reproducibility", rows)
