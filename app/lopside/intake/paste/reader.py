"""The paste reader: two passes over the lines (classify, then read in order), never raising."""

from __future__ import annotations

from dataclasses import dataclass, replace

from lopside.intake import messages as M
from lopside.intake.numbers import COMMA, POINT
from lopside.intake.paste.cells import _Ctx, _Fail, _fmt
from lopside.intake.paste.columns import _read_with_retry
from lopside.intake.paste.lines import (
    _header_details,
    _is_axis,
    _prepare,
    _Prepared,
    _skip_reason,
    _summary_word,
    published_i2_of,
)
from lopside.intake.paste.result import MAX_LINE_CHARS, LineReading, PasteResult
from lopside.model.review import MEASURE_NAMES, PublishedResult, StudyRow


def _not_understood(line_no: int, raw: str, key: str, **fields: object) -> LineReading:
    reason, advice = M.not_understood(key, **fields)
    return LineReading(line_no, raw, "not understood", reason=reason, advice=advice)


def read_pasted(text: str, measure: str | None = None, decimal: str | None = None) -> PasteResult:
    """Read study rows pasted from a forest-plot table.

    Parameters
    ----------
    text : str
        The pasted text, one study per line. Accepted per line: a label (with a year
        such as "Smith 2004" or "Smith et al., 2004a"), then any of events/total per arm
        (``12/140 20/138`` or ``12 140 20 138``), mean SD n per arm (six numbers, or
        ``5.1 (1.2) 40 4.6 (1.3) 41``), an estimate with its interval
        (``0.82 (0.61 to 1.10)``, ``0.82 [0.61, 1.10]``, ``0.82; 0.61-1.10``,
        ``−0.35 (−0.60, −0.10)``, ``0,82 (0,61 to 1,10)``, ``0.82 (95% CI 0.61-1.10)``),
        an estimate with ``SE 0.13`` or ``P = 0.03``; weights (``12.3%``) and footnote
        marks are ignored and reported. Header, total, heterogeneity and test lines are
        skipped with the reason.
    measure : str, optional
        The review's measure (one of MEASURES); used to add notes to the account
        (counts given for a hazard ratio, for instance) and to read percentages
        ("5% (1% to 9%)" is read as 0.05 for a risk difference, refused otherwise).
    decimal : {"point", "comma"}, optional
        The decimal mark the user chose, for numbers that nothing in the paste settles
        (``1,105``). Without it such numbers are read with a thousands separator and
        listed in :attr:`PasteResult.undecided`, so the caller can ask.

    Returns
    -------
    PasteResult
        Never raises, whatever the text.
    """
    if not isinstance(text, str):
        text = "" if text is None else str(text)
    ctx = _Ctx(measure=measure if measure in MEASURE_NAMES else None)
    staged, marks, evidence = _classify(text.splitlines())
    decimal_how = ""
    if decimal in (POINT, COMMA):
        ctx.fallback_mark = decimal
        ctx.mark_chosen = True
        decimal_how = "option"
    elif marks[COMMA] > marks[POINT]:
        ctx.fallback_mark = COMMA
        decimal_how = "evidence"
    elif marks[POINT] > 0:
        ctx.fallback_mark = POINT
        decimal_how = "evidence"
    undecided: list[tuple[int, str]] = []

    # pass 2: read, in order (headers and headings carry context downwards)
    rows: list[StudyRow] = []
    lines: list[LineReading] = []
    summary = _Summary()
    for idx, raw, item in staged:
        if isinstance(item, LineReading):
            lines.append(item)
            continue
        if isinstance(item, tuple):
            lines.append(_skipped(idx, raw, item, ctx, summary))  # type: ignore[arg-type]
            continue
        prep = item
        assert isinstance(prep, _Prepared)
        if prep.kind == "total":
            lines.append(_total(idx, raw, prep, ctx, summary))
            continue
        summary.after_total = False
        ctx.undecided_now = []
        try:
            row, reading = _read_with_retry(prep, ctx)
            undecided += [(idx, t) for t in dict.fromkeys(ctx.undecided_now)]
        except _Fail as fail:
            lines.append(_not_understood(idx, raw, fail.key, **fail.fields))
            continue
        except Exception as exc:  # noqa: BLE001 - the reader must never raise
            lines.append(_not_understood(idx, raw, "internal", error=type(exc).__name__))
            continue
        word = _summary_word(raw)
        if word:
            reading = _with_note(reading, M.paste_note("summary_word_study", word=word))
        rows.append(row)
        lines.append(_with_index(reading, len(rows) - 1))
    published = summary.published
    if summary.published_i2 is not None:
        if published is None:
            published = PublishedResult(model=summary.model_text, i2=summary.published_i2)
        else:
            published = replace(published, i2=summary.published_i2)
    mark = ctx.fallback_mark or ""
    if undecided and not mark:
        decimal_how = ""
    guess, why = _guess_measure(rows, summary.measure_hint)
    return PasteResult(
        tuple(rows),
        tuple(lines),
        summary.measure_hint,
        published,
        decimal_mark=mark if (mark and (decimal_how or undecided)) else "",
        decimal_how=decimal_how if mark else "",
        decimal_evidence=evidence.get(mark, "") if decimal_how == "evidence" else "",
        undecided=tuple(undecided),
        measure_guess=guess,
        measure_why=why,
    )


def _classify(
    raw_lines: list[str],
) -> tuple[list[tuple[int, str, object]], dict[str, int], dict[str, str]]:
    """Pass 1: classify and tokenise; count the decimal marks the lines settle on.

    Returns the staged lines (line number, text, and a :class:`LineReading`, a skip
    ``(key, detail)`` or a :class:`_Prepared` line), the count of lines per mark and the
    first number that settled each.
    """
    staged: list[tuple[int, str, object]] = []
    marks = {POINT: 0, COMMA: 0}
    evidence = {POINT: "", COMMA: ""}
    for idx, raw in enumerate(raw_lines, start=1):
        if not raw.strip():
            continue
        if len(raw) > MAX_LINE_CHARS:
            staged.append(
                (
                    idx,
                    raw,
                    _not_understood(idx, raw, "too_long", length=len(raw), limit=MAX_LINE_CHARS),
                )
            )
            continue
        try:
            skip = _skip_reason(raw)
            if skip is not None and skip[0] != "total":
                staged.append((idx, raw, skip))
                continue
            prep = _prepare(idx, raw)
            if skip is not None:
                prep.kind = "total"
            elif _is_axis(prep.toks):
                staged.append((idx, raw, ("axis", "")))
                continue
            if prep.mark in marks:
                marks[prep.mark] += 1
                evidence[prep.mark] = evidence[prep.mark] or prep.mark_evidence
            staged.append((idx, raw, prep))
        except Exception as exc:  # noqa: BLE001 - the reader must never raise
            staged.append(
                (idx, raw, _not_understood(idx, raw, "internal", error=type(exc).__name__))
            )
    return staged, marks, evidence


@dataclass(slots=True)
class _Summary:
    """What the skipped lines of a paste tell about the review as a whole."""

    measure_hint: str | None = None
    published: PublishedResult | None = None
    model_text: str = ""
    published_i2: float | None = None
    #: the heterogeneity line that follows the overall total is the paper's
    after_total: bool = False


def _skipped(
    idx: int, raw: str, skip: tuple[str, str], ctx: _Ctx, summary: _Summary
) -> LineReading:
    """A skipped line: its reason, and what it tells the lines below (level, subgroup)."""
    key, detail = skip
    reason = M.SKIP_REASONS[key]
    if key == "header":
        level, hint, model = _header_details(raw)
        extra = []
        if level is not None:
            ctx.level, ctx.level_line = level, idx
            extra.append(f"CI level {_fmt(level)}% noted")
        if hint is not None:
            summary.measure_hint = summary.measure_hint or hint
            extra.append(f"measure: {MEASURE_NAMES[hint]}")
        if model:
            summary.model_text = model
        if extra:
            reason += " (" + "; ".join(extra) + ")"
    elif key == "subgroup_heading":
        ctx.subgroup = str(detail).strip() or None
        ctx.subgroup_line = idx
        reason += f"; rows below get subgroup '{ctx.subgroup}'"
    if key == "subtotal":
        ctx.subgroup = None
    if key == "heterogeneity" and summary.after_total:
        i2 = published_i2_of(raw)
        if i2 is not None:
            summary.published_i2 = i2
            reason += f"; I² {_fmt(i2)}% kept to check against your rows"
    summary.after_total = key == "total" or (
        summary.after_total and key in ("heterogeneity", "total_events")
    )
    return LineReading(idx, raw, "skipped", reason=reason)


def _total(idx: int, raw: str, prep: _Prepared, ctx: _Ctx, summary: _Summary) -> LineReading:
    """A total line: skipped, its pooled result kept as the published one when it reads."""
    reason = M.SKIP_REASONS["total"]
    try:
        row, reading = _read_with_retry(prep, ctx)
        if row.estimate is not None and row.lower is not None and row.upper is not None:
            summary.published = PublishedResult(
                row.estimate, row.lower, row.upper, summary.model_text
            )
            pr = dict(reading.printed)
            reason += (
                f"; pooled {pr['estimate']} ({pr['lower']} to {pr['upper']})"
                " kept as the published result"
            )
    except Exception:  # noqa: BLE001 - a total we cannot read is still skipped
        pass
    ctx.subgroup = None
    summary.after_total = True
    return LineReading(idx, raw, "skipped", reason=reason)


def _guess_measure(rows: list[StudyRow], hint: str | None) -> tuple[str | None, str]:
    """The measure the pasted rows look like, and why in plain words (a suggestion)."""
    if hint is not None:
        return hint, M.MEASURE_WHY["header"].format(name=MEASURE_NAMES[hint])
    if not rows:
        return None, ""
    if all(r.has_counts() for r in rows):
        return "OR", M.MEASURE_WHY["counts"]
    if all(r.has_means() for r in rows):
        return "MD", M.MEASURE_WHY["means"]
    ci = [r for r in rows if None not in (r.estimate, r.lower, r.upper)]
    if not ci:
        return None, M.MEASURE_WHY["none"]
    if any(min(r.estimate, r.lower, r.upper) <= 0 for r in ci):  # type: ignore[type-var]
        return "MD", M.MEASURE_WHY["negative"]
    from lopside.intake.checks import symmetry

    log_votes = lin_votes = 0
    for r in ci:
        sym = symmetry(r.estimate, r.lower, r.upper, "OR")  # type: ignore[arg-type]
        if sym.log_ok and not sym.linear_ok:
            log_votes += 1
        elif sym.linear_ok and not sym.log_ok:
            lin_votes += 1
    if lin_votes > log_votes:
        return "MD", M.MEASURE_WHY["linear"].format(n=lin_votes, k=len(ci))
    if log_votes:
        return "OR", M.MEASURE_WHY["log"].format(n=log_votes, k=len(ci))
    return "OR", M.MEASURE_WHY["positive"]


def _with_note(reading: LineReading, note: str) -> LineReading:
    return replace(reading, account=f"{reading.account}; {note}")


def _with_index(reading: LineReading, index: int) -> LineReading:
    return replace(reading, row_index=index)


__all__ = ["LineReading", "MAX_LINE_CHARS", "PasteResult", "read_pasted"]
