"""Column inference: which items of a study line are the estimate and its interval, SE or
P, and which are the arms' counts or means and the weights; then the study row and the
plain-English account of how it was read.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from lopside.intake import messages as M
from lopside.intake.numbers import COMMA, POINT
from lopside.intake.paste.cells import (
    _Ctx,
    _Fail,
    _fmt,
    _groups,
    _It,
    _percent_values,
    _ranges,
    _to_items,
)
from lopside.intake.paste.lines import _NUMBERED_LABEL_WORDS, _YEAR_RE, _Prepared
from lopside.intake.paste.result import LineReading
from lopside.intake.paste.tokens import _Tok
from lopside.model.review import MEASURE_NAMES, StudyRow


def _is_count(it: _It) -> bool:
    return it.kind == "NUM" and it.v >= 0 and it.v == int(it.v) and "." not in it.t


def _fit_block(seq: list[_It], start: int) -> tuple[str, int] | None:
    """A data block (counts or means) at ``seq[start:]``: (kind, length) or None."""
    rest = seq[start:]
    if len(rest) >= 2 and rest[0].kind == "FRAC" and rest[1].kind == "FRAC":
        return "counts_frac", 2
    if len(rest) >= 6 and [x.kind for x in rest[:6]] == [
        "NUM",
        "SINGLE",
        "NUM",
        "NUM",
        "SINGLE",
        "NUM",
    ]:
        if _is_count(rest[2]) and _is_count(rest[5]) and rest[1].v >= 0 and rest[4].v >= 0:
            return "means_bracket", 6
    if len(rest) >= 6 and all(x.kind == "NUM" for x in rest[:6]):
        if _is_count(rest[2]) and _is_count(rest[5]) and rest[1].v >= 0 and rest[4].v >= 0:
            # six integers that are also a valid 2x2-with-extras would be odd; means win
            return "means", 6
    if len(rest) >= 4 and all(_is_count(x) for x in rest[:4]):
        return "counts4", 4
    return None


def _is_ci3(seq: list[_It], i: int) -> bool:
    if i + 3 > len(seq) or any(x.kind != "NUM" for x in seq[i : i + 3]):
        return False
    e, lo, hi = seq[i].v, seq[i + 1].v, seq[i + 2].v
    return lo < hi and lo <= e <= hi


def _is_weight(it: _It) -> bool:
    return it.kind == "NUM" and 0 < it.v <= 100 and it.v != int(it.v) and not it.t.startswith("-")


def _fit(seq: list[_It], want_ci3: bool) -> dict[str, object] | None:
    """Cover ``seq`` with [block] [weight] [ci3] [weight]; the first full cover wins."""
    n = len(seq)
    block_options: list[tuple[str, int] | None] = [None]
    b = _fit_block(seq, 0)
    if b is not None:
        block_options.insert(0, b)
    for block in block_options:
        i = block[1] if block else 0
        for w1 in (False, True):
            j = i
            if w1:
                if j < n and _is_weight(seq[j]):
                    j += 1
                else:
                    continue
            for ci in (True, False) if want_ci3 else (False,):
                k = j
                if ci:
                    if _is_ci3(seq, k):
                        k += 3
                    else:
                        continue
                for w2 in (False, True):
                    m = k
                    if w2:
                        if m < n and _is_weight(seq[m]) and (ci or (not w1 and block)):
                            m += 1
                        else:
                            continue
                    if m == n and (block or ci):
                        return {
                            "block": block,
                            "weights": [seq[x] for x in range(i, j)]
                            + [seq[x] for x in range(k, m)],
                            "ci3": seq[j : j + 3] if ci else None,
                        }
    return None


@dataclass(slots=True)
class _Found:
    """What a study line has been read as so far: values and their printed text by field,
    the routes ("ci", "se", ...) and where the estimate and what goes with it stand."""

    values: dict[str, float] = field(default_factory=dict)
    printed: dict[str, str] = field(default_factory=dict)
    routes: list[str] = field(default_factory=list)
    est_idx: int | None = None
    end_idx: int = 0


def _study_items(
    prep: _Prepared, ctx: _Ctx, label_end: int, notes: list[str]
) -> tuple[str, list[_Tok], str | None, list[_It]]:
    """The label, the tail tokens, the decimal mark used and the tail read into items."""
    toks = prep.toks
    label = ""
    if label_end > 0:
        label = prep.cleaned[: toks[label_end - 1].end].strip().rstrip(",;:").strip()
    tail = toks[label_end:]
    if not any(t.kind == "NUM" for t in tail):
        raise _Fail("no_numbers")
    if prep.mark == "mixed":
        raise _Fail("mixed_marks", point=prep.mark_evidence, comma=prep.mark_counter)
    mark = prep.mark if prep.mark in (POINT, COMMA) else None
    from_text: bool | str = False
    if mark is None and ctx.fallback_mark is not None:
        mark = ctx.fallback_mark
        # "chosen": the user said; True: the other lines of the paste settled it
        from_text = "chosen" if ctx.mark_chosen else True
    items = _to_items(tail, mark, notes, from_text, ctx.undecided_now)
    items = _percent_values(items, ctx, notes)
    items = _groups(items, notes)
    items = _ranges(items)
    return label, tail, mark, items


def _estimate_and_spread(items: list[_It], found: _Found, notes: list[str]) -> str | None:
    """Find the estimate with its interval, SE and/or P; returns the P bound ("<", ">")."""
    intervals = [i for i, x in enumerate(items) if x.kind == "INTERVAL"]
    if len(intervals) > 1:
        raise _Fail("two_intervals", count=len(intervals))
    values, printed, routes = found.values, found.printed, found.routes
    p_item = next((x for x in items if x.kind == "P"), None)
    se_item = next((x for x in items if x.kind == "SE"), None)

    def before(idx: int) -> int | None:
        j = idx - 1
        while j >= 0 and items[j].kind in ("SEP", "LEVEL"):
            j -= 1
        return j if j >= 0 and items[j].kind == "NUM" else None

    if intervals:
        ii = intervals[0]
        iv = items[ii]
        e = before(ii)
        if e is None:
            raise _Fail("interval_without_estimate", lower=iv.t, upper=iv.t2)
        lo_v, lo_t, hi_v, hi_t = iv.v, iv.t, iv.v2, iv.t2
        if not iv.sep and iv.tok2 is not None and iv.tok2.sign and iv.tok2.space:
            # "(0.61 -1.10)": the dash may be a range dash typed with a space before it
            if lo_v > hi_v:
                hi_v, hi_t = -hi_v, hi_t.lstrip("-")
                notes.append(
                    M.paste_note("dash_flipped", text=iv.tok2.text, lower=lo_t, upper=hi_t)
                )
            else:
                notes.append(
                    M.paste_note("dash_sign_doubt", lower=lo_t, upper=hi_t, number=hi_t.lstrip("-"))
                )
        found.est_idx = e
        found.end_idx = ii + 1
        values.update(estimate=items[e].v, lower=lo_v, upper=hi_v)
        printed.update(estimate=items[e].t, lower=lo_t, upper=hi_t)
        routes.append("ci")
    if se_item is not None:
        _attach(items, found, se_item, "se", "se_without_estimate", before)
    p_bound = None
    if p_item is not None:
        _attach(items, found, p_item, "p", "p_without_estimate", before)
        p_bound = p_item.bound or None
    return p_bound


def _attach(items: list[_It], found: _Found, it: _It, name: str, fail: str, before) -> None:
    """An SE or P value (``name``) with its estimate: the one already found, else the
    number just before it."""
    idx = items.index(it)
    e = before(idx) if found.est_idx is None else found.est_idx
    if e is None:
        raise _Fail(fail)
    if found.est_idx is None:
        found.est_idx = e
        found.values["estimate"] = items[e].v
        found.printed["estimate"] = items[e].t
    found.end_idx = max(found.end_idx, idx + 1)
    found.values[name] = it.v
    found.printed[name] = it.t
    found.routes.append(name)


_DATA_KINDS = ("NUM", "FRAC", "SINGLE")


def _fit_around_estimate(
    items: list[_It],
    found: _Found,
    notes: list[str],
    label: str,
    prep: _Prepared,
    label_end: int,
    allow_retry: bool,
) -> dict[str, object]:
    """With the estimate found: the numbers before it are a data block and weights."""
    toks = prep.toks
    pre = [x for x in items[: found.est_idx] if x.kind in _DATA_KINDS]
    post = [x for x in items[found.end_idx :] if x.kind in _DATA_KINDS]
    fit = _fit(pre, want_ci3=False) if pre else {"block": None, "weights": [], "ci3": None}
    if fit is None:
        fit = {"block": None, "weights": [], "ci3": None}
        if len(pre) == 1 and _is_count(pre[0]):
            absorbed = allow_retry and _label_takes_number(label, prep)
            if absorbed and label_end < len(toks) and toks[label_end] is pre[0].tok:
                raise _Retry()
            found.values["n"] = pre[0].v
            found.printed["n"] = pre[0].t
            notes.append(M.paste_note("n_from_single", value=pre[0].t))
        else:
            if allow_retry and label and pre and _label_takes_number(label, prep):
                if label_end < len(toks) and toks[label_end] is pre[0].tok:
                    raise _Retry()
            notes.append(M.paste_note("unused_before", numbers=" ".join(_show(x) for x in pre)))
    if post:
        notes.append(M.paste_note("unused_after", numbers=" ".join(_show(x) for x in post)))
    return fit


def _fit_whole_line(
    items: list[_It],
    found: _Found,
    notes: list[str],
    label: str,
    prep: _Prepared,
    label_end: int,
    allow_retry: bool,
) -> dict[str, object]:
    """No estimate marked: the line's numbers are a data block, weights and maybe three
    numbers that are an estimate with its limits."""
    toks = prep.toks
    seq = [x for x in items if x.kind in _DATA_KINDS]
    fit = _fit(seq, want_ci3=True)
    if fit is None:
        if (
            allow_retry
            and label
            and seq
            and seq[0].tok is not None
            and label_end < len(toks)
            and toks[label_end] is seq[0].tok
            and _is_count(seq[0])
            and _label_takes_number(label, prep)
        ):
            raise _Retry()
        if len(seq) == 2 and seq[0].kind == "NUM" and seq[1].kind == "SINGLE":
            raise _Fail("single_bracket", estimate=seq[0].t, value=seq[1].t)
        if len(seq) == 1 and seq[0].kind == "NUM":
            raise _Fail("one_number", number=seq[0].t)
        if len(seq) == 2 and all(x.kind == "NUM" for x in seq):
            raise _Fail("two_numbers", numbers=" ".join(x.t for x in seq))
        nums = " ".join(_show(x) for x in seq)
        raise _Fail("no_fit", count=len(seq), numbers=nums)
    ci3 = fit["ci3"]
    if ci3:
        e, lo, hi = ci3  # type: ignore[misc]
        found.values.update(estimate=e.v, lower=lo.v, upper=hi.v)
        found.printed.update(estimate=e.t, lower=lo.t, upper=hi.t)
        found.routes.append("ci")
        notes.append(M.paste_note("three_numbers"))
    return fit


def _read_block(items: list[_It], found: _Found, block: tuple[str, int] | None) -> None:
    """The arms' counts or means from the data block the fit found."""
    if not block:
        return
    values, printed, routes = found.values, found.printed, found.routes
    kind = block[0]
    pre_seq = (
        [x for x in items[: found.est_idx] if x.kind in _DATA_KINDS]
        if found.est_idx is not None
        else [x for x in items if x.kind in _DATA_KINDS]
    )
    b = pre_seq[: block[1]]
    if kind == "counts_frac":
        values.update(int_events=b[0].v, int_total=b[0].v2, ctl_events=b[1].v, ctl_total=b[1].v2)
        printed.update(int_events=b[0].t, int_total=b[0].t2, ctl_events=b[1].t, ctl_total=b[1].t2)
        routes.append("counts")
    elif kind == "counts4":
        names = ("int_events", "int_total", "ctl_events", "ctl_total")
        for nm, x in zip(names, b, strict=True):
            values[nm] = x.v
            printed[nm] = x.t
        routes.append("counts")
    else:
        names = ("int_mean", "int_sd", "int_n", "ctl_mean", "ctl_sd", "ctl_n")
        for nm, x in zip(names, b, strict=True):
            values[nm] = x.v
            printed[nm] = x.t
        routes.append("means")


def _context_notes(
    prep: _Prepared,
    ctx: _Ctx,
    routes: list[str],
    mark: str | None,
    tail: list[_Tok],
    notes: list[str],
) -> None:
    """Notes on what the line owes to its context: arms order, the review's measure, the
    decimal mark, footnotes and thousands spaces."""
    if "counts" in routes or "means" in routes:
        notes.append(M.paste_note("arms_order"))
    measure = ctx.measure
    if measure:
        from lopside.model.review import BINARY_MEASURES, CONTINUOUS_MEASURES

        if "counts" in routes and measure not in BINARY_MEASURES:
            notes.append(
                M.paste_note("counts_not_for_measure", measure_name=MEASURE_NAMES[measure])
            )
        if "means" in routes and measure not in CONTINUOUS_MEASURES:
            notes.append(M.paste_note("means_not_for_measure", measure_name=MEASURE_NAMES[measure]))

    if mark == COMMA:
        notes.append(M.paste_note("decimal_comma"))
    if any(t.middot for t in tail if t.kind == "NUM"):
        notes.append(M.paste_note("mid_dot"))
    if prep.footnotes:
        notes.append(M.paste_note("footnote", marks=" ".join(prep.footnotes)))
    if prep.thousands_space:
        notes.append(M.paste_note("thousands_space"))


def _label_and_year(
    prep: _Prepared, ctx: _Ctx, label: str, label_end: int, notes: list[str]
) -> tuple[str, int | None]:
    """The study label (or "Line N" when there is none) and the year it names."""
    toks = prep.toks
    year = None
    if label:
        years = _YEAR_RE.findall(label)
        if years:
            year = int(years[-1])
    else:
        label = f"Line {prep.line_no}"
        notes.append(M.paste_note("no_label", label=label))
    if label_end > 0 and prep.label_end < label_end:
        notes.append(
            M.paste_note(
                "label_number",
                number=prep.cleaned[toks[prep.label_end].start : toks[label_end - 1].end],
            )
        )
    if ctx.subgroup is not None:
        notes.append(
            M.paste_note("subgroup_from_heading", subgroup=ctx.subgroup, line=ctx.subgroup_line)
        )
    return label, year


def _read_study(
    prep: _Prepared, ctx: _Ctx, label_end: int, allow_retry: bool = True
) -> tuple[StudyRow, LineReading]:
    notes: list[str] = []
    label, tail, mark, items = _study_items(prep, ctx, label_end, notes)
    found = _Found()
    level = None
    for x in items:
        if x.kind == "LEVEL":
            level = x.v
    p_bound = _estimate_and_spread(items, found, notes)
    routes, printed = found.routes, found.printed
    weights = [x.t for x in items if x.kind == "PCT"]
    fit_line = _fit_around_estimate if found.est_idx is not None else _fit_whole_line
    fit = fit_line(items, found, notes, label, prep, label_end, allow_retry)
    _read_block(items, found, fit["block"])  # type: ignore[arg-type]
    for w in fit["weights"]:  # type: ignore[attr-defined]
        notes.append(M.paste_note("weight_no_percent", value=w.t))
    for w in weights:
        notes.insert(0, M.paste_note("weight", weight=w))
    stray = [x.t for x in items if x.kind in ("RANGE", "SYMBOL")]
    if stray:
        notes.append(M.paste_note("ignored_symbols", symbols=" ".join(stray)))
    if any(x.kind == "NOTEST" for x in items):
        notes.append(M.paste_note("not_estimable"))
    if not routes:
        raise _Fail("no_fit", count=0, numbers="")

    # level: printed on the line, else from the header
    if level is None and ctx.level is not None and "ci" in routes:
        level = ctx.level
        notes.append(M.paste_note("level_from_header", level=_fmt(level), line=ctx.level_line))
    _context_notes(prep, ctx, routes, mark, tail, notes)
    label, year = _label_and_year(prep, ctx, label, label_end, notes)

    row = StudyRow(
        study=label,
        year=year,
        level=level if "ci" in routes else None,
        p_bound=p_bound,
        subgroup=ctx.subgroup,
        **found.values,  # type: ignore[arg-type]
    )
    route = "+".join(r for r in ("ci", "se", "p", "counts", "means") if r in routes)
    account = "read as " + _describe(row, routes, printed)
    if notes:
        account += "; " + "; ".join(dict.fromkeys(notes))
    reading = LineReading(
        prep.line_no,
        prep.raw,
        "study",
        route=route,
        account=account,
        printed=tuple(printed.items()),
        decimal_mark=mark or "",
    )
    return row, reading


class _Retry(Exception):
    """Read the line again with one more token in the label ("Trial 2")."""


def _label_takes_number(label: str, prep: _Prepared) -> bool:
    words = label.casefold().split()
    return bool(words) and not prep.year_absorbed and words[-1] in _NUMBERED_LABEL_WORDS


def _show(x: _It) -> str:
    if x.kind == "FRAC":
        return f"{x.t}/{x.t2}"
    if x.kind == "SINGLE":
        return f"({x.t})"
    return x.t


def _describe(row: StudyRow, routes: list[str], printed: dict[str, str]) -> str:
    parts = []
    p = printed
    if "ci" in routes:
        lvl = f"{_fmt(row.level)}% CI" if row.level is not None else "CI"
        parts.append(f"estimate {p['estimate']} with {lvl} {p['lower']} to {p['upper']}")
    if "se" in routes:
        if "ci" in routes:
            parts.append(f"SE {p['se']}")
        else:
            parts.append(f"estimate {p['estimate']} with SE {p['se']}")
    if "p" in routes:
        op = row.p_bound or "="
        if "ci" in routes or "se" in routes:
            parts.append(f"P {op} {p['p']}")
        else:
            parts.append(f"estimate {p['estimate']} with P {op} {p['p']}")
    if "counts" in routes:
        parts.append(
            f"events {p['int_events']}/{p['int_total']} (intervention) and "
            f"{p['ctl_events']}/{p['ctl_total']} (control)"
        )
    if "means" in routes:
        parts.append(
            f"mean {p['int_mean']} (SD {p['int_sd']}, n {p['int_n']}) (intervention) and "
            f"mean {p['ctl_mean']} (SD {p['ctl_sd']}, n {p['ctl_n']}) (control)"
        )
    head = f"'{row.study}'"
    if row.year is not None:
        head += f" ({row.year})"
    return head + ": " + "; ".join(parts)


def _read_with_retry(prep: _Prepared, ctx: _Ctx) -> tuple[StudyRow, LineReading]:
    """Read a study line; a label such as "Trial 2" may take one following number."""
    try:
        return _read_study(prep, ctx, prep.label_end)
    except _Retry:
        return _read_study(prep, ctx, prep.label_end + 1, allow_retry=False)
