"""Cell grammar: the tokens after a label read into items (numbers, events/total,
bracketed intervals, ranges, P and SE values, weights), with a note for every liberty taken.

A number is read with the line's decimal mark, or the paste's when the line cannot settle
it; an ambiguous one ("1,105") is noted, never guessed silently.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

from lopside.intake import messages as M
from lopside.intake.numbers import POINT, TOO_LARGE, read_digits, split_list
from lopside.intake.paste.tokens import (
    _MEASURE_WORDS,
    _NOT_ESTIMABLE,
    _P_WORDS,
    _RANGE_WORDS,
    _SE_WORDS,
    _Tok,
)


@dataclass(slots=True)
class _It:
    kind: str
    v: float = 0.0
    t: str = ""
    v2: float = 0.0
    t2: str = ""
    tok: _Tok | None = None
    tok2: _Tok | None = None
    bound: str = ""
    sep: bool = False  # INTERVAL: an explicit separator stood between the limits


class _Fail(Exception):
    """A line that is not understood (caught inside this module only)."""

    def __init__(self, key: str, **fields: object) -> None:
        super().__init__(key)
        self.key = key
        self.fields = fields


@dataclass(slots=True)
class _Ctx:
    """What earlier lines told us: header level, subgroup, fallback decimal mark."""

    level: float | None = None
    level_line: int = 0
    subgroup: str | None = None
    subgroup_line: int = 0
    fallback_mark: str | None = None
    #: True when the fallback mark is the user's choice (the decimal option)
    mark_chosen: bool = False
    measure: str | None = None
    #: ambiguous numbers ("1,105") read on the current line with nothing to settle them
    undecided_now: list[str] = field(default_factory=list)


def _fmt(v: float) -> str:
    return f"{v:g}" if abs(v) >= 1e-4 or v == 0 else repr(v)


def _read_num(
    tok: _Tok, mark: str | None, notes: list[str], ctx_mark_used: list[bool]
) -> list[_It]:
    """Read a NUM token (possibly a run of comma-joined numbers) into NUM items."""
    parts = split_list(tok.body)
    bodies = parts if parts else [tok.body]
    out: list[_It] = []
    for idx, body in enumerate(bodies):
        d = read_digits(body, mark)
        if d.value is None:
            raise _Fail("bad_number", text=tok.text, why=d.reason)
        sign = tok.sign if idx == 0 else ""
        canonical = sign + d.canonical
        exp = tok.exp if idx == len(bodies) - 1 else ""
        value = float(canonical + (f"e{exp}" if exp else ""))
        if not math.isfinite(value):
            # an exponent such as 1e999 overflows: infinity must not reach a saved project
            raise _Fail("bad_number", text=tok.text, why=TOO_LARGE)
        if exp:
            canonical += f"e{exp}"
        if value == 0.0:
            value = 0.0
        if d.ambiguous:
            if mark is None:
                notes.append(M.paste_note("ambiguous_thousands", text=body, value=_fmt(value)))
                if len(ctx_mark_used) > 1:
                    ctx_mark_used[1].append(body)
            elif ctx_mark_used[0] == "chosen":
                notes.append(
                    M.paste_note("ambiguous_chosen", text=body, value=_fmt(value), mark=mark)
                )
            elif ctx_mark_used[0]:
                notes.append(
                    M.paste_note("ambiguous_from_text", text=body, value=_fmt(value), mark=mark)
                )
            else:
                notes.append(M.paste_note("ambiguous_decimal", text=body, value=_fmt(value)))
        if idx:
            out.append(_It("SEP", t=","))
        out.append(_It("NUM", value, canonical, tok=tok))
    if tok.suffix:
        notes.append(M.paste_note("footnote_letter", letter=tok.suffix, number=tok.text[:-1]))
    return out


def _read_count(tok: _Tok, mark: str | None, notes: list[str], used: list[bool]) -> list[_It]:
    """Read one side of events/total: a comma in a count is a thousands separator."""
    if "," not in tok.body:
        return _read_num(tok, mark, notes, used)
    d = read_digits(tok.body, POINT)
    if d.value is None or d.kind != "thousands":
        return _read_num(tok, mark, notes, used)
    notes.append(M.paste_note("count_thousands", text=tok.body, value=d.canonical))
    return [_It("NUM", d.value, d.canonical, tok=tok)]


def _to_items(
    toks: list[_Tok],
    mark: str | None,
    notes: list[str],
    from_text: bool | str,
    undecided: list[str] | None = None,
) -> list[_It]:
    """Read the tail tokens of a line into items, in one left-to-right pass."""
    items: list[_It] = []
    # used[0]: the mark came from other lines; used[1]: numbers read with no mark at all
    used: list = [from_text, undecided if undecided is not None else []]
    junk_words: list[str] = []
    n = len(toks)
    k = 0
    while k < n:
        t = toks[k]
        kind = t.kind
        if kind == "NUM":
            k = _num_items(toks, k, mark, notes, used, items)
            continue
        if kind == "WORD":
            k = _word_items(toks, k, mark, notes, used, items, junk_words)
            continue
        if kind == "DASH":
            items.append(_It("RANGE", t=t.text, tok=t))
        elif kind in ("COMMA", "SEMI", "COLON", "PM"):
            items.append(_It("SEP", t=t.text))
        elif kind in ("OPEN", "CLOSE"):
            items.append(_It(kind, t=t.text))
        else:
            # stray symbols are reported by the caller, with any dashes left over
            items.append(_It("SYMBOL", t=t.text))
        k += 1
    if junk_words:
        notes.append(M.paste_note("unused_words", words=" ".join(junk_words)))
    return items


def _num_items(
    toks: list[_Tok], k: int, mark: str | None, notes: list[str], used: list, items: list[_It]
) -> int:
    """Read the number at ``toks[k]`` (with a following "/n" or "%") into ``items``.

    Returns the index of the next token to read.
    """
    t = toks[k]
    n = len(toks)
    nxt = toks[k + 1] if k + 1 < n else None
    nxt2 = toks[k + 2] if k + 2 < n else None
    if (
        nxt is not None
        and nxt.kind == "SLASH"
        and nxt2 is not None
        and nxt2.kind == "NUM"
        and not t.sign
        and not nxt2.sign
    ):
        a = _read_count(t, mark, notes, used)
        b = _read_count(nxt2, mark, notes, used)
        if len(a) == 1 and len(b) == 1:
            nxt3 = toks[k + 3] if k + 3 < n else None
            if (
                a[0].v > b[0].v
                and len(nxt2.body) <= 3
                and nxt2.body.isdigit()
                and not nxt2.suffix
                and nxt3 is not None
                and nxt3.kind == "NUM"
                and len(nxt3.body) == 3
                and nxt3.body.isdigit()
                and not nxt3.sign
            ):
                # "120/1 234": more events than the total unless the space is a
                # thousands separator, so it is one
                total = nxt2.body + nxt3.body
                notes.append(
                    M.paste_note(
                        "space_thousands",
                        text=f"{nxt2.body} {nxt3.body}",
                        value=str(int(total)),
                    )
                )
                items.append(_It("FRAC", a[0].v, a[0].t, float(total), str(int(total)), t, nxt3))
                return k + 4
            items.append(_It("FRAC", a[0].v, a[0].t, b[0].v, b[0].t, t, nxt2))
            return k + 3
    if nxt is not None and nxt.kind == "PCT":
        vals = _read_num(t, mark, notes, used)
        word = toks[k + 2].text.casefold() if nxt2 is not None and nxt2.kind == "WORD" else ""
        if word in ("ci", "cl", "confidence"):
            items.append(_It("LEVEL", vals[-1].v, vals[-1].t))
            return k + 3
        items.extend(vals[:-1])
        items.append(_It("PCT", vals[-1].v, vals[-1].t))
        return k + 2
    items.extend(_read_num(t, mark, notes, used))
    return k + 1


def _word_items(
    toks: list[_Tok],
    k: int,
    mark: str | None,
    notes: list[str],
    used: list,
    items: list[_It],
    junk_words: list[str],
) -> int:
    """Read the word at ``toks[k]`` (P, SE, a range word, ...) into ``items``.

    Returns the index of the next token to read; a word that means nothing here goes to
    ``junk_words``.
    """
    t = toks[k]
    n = len(toks)
    w = t.text.casefold()
    if w in ("ci", "cl", "confidence", "interval"):
        k += 1
    elif w in _P_WORDS or w in _SE_WORDS:
        j = k + 1
        bound = ""
        while j < n and toks[j].kind in ("OP", "COLON"):
            if toks[j].text.startswith("<") or toks[j].text == "\u2264":
                bound = "<"
            elif toks[j].text.startswith(">") or toks[j].text == "\u2265":
                bound = ">"
            j += 1
        if j < n and toks[j].kind == "NUM":
            vals = _read_num(toks[j], mark, notes, used)
            kind_out = "P" if w in _P_WORDS else "SE"
            items.append(_It(kind_out, vals[0].v, vals[0].t, bound=bound, tok=toks[j]))
            items.extend(vals[1:])
            k = j + 1
        else:
            junk_words.append(t.text)
            k += 1
    elif w in _RANGE_WORDS:
        items.append(_It("RANGE", t=t.text, tok=t))
        k += 1
    elif w in _MEASURE_WORDS:
        notes.append(M.paste_note("measure_mentioned", word=t.text))
        k += 1
        while k < n and toks[k].kind in ("OP", "COLON"):
            k += 1
    elif w in _NOT_ESTIMABLE:
        items.append(_It("NOTEST", t=t.text))
        k += 1
    elif w in ("vs", "vs."):
        items.append(_It("SEP", t=t.text))
        k += 1
    else:
        junk_words.append(t.text)
        k += 1
    return k


def _groups(items: list[_It], notes: list[str]) -> list[_It]:
    """Replace each bracketed group by what it holds (an interval, one number, ...)."""
    out: list[_It] = []
    n = len(items)
    k = 0
    while k < n:
        it = items[k]
        if it.kind == "CLOSE":
            k += 1
            continue
        if it.kind != "OPEN":
            out.append(it)
            k += 1
            continue
        j = k + 1
        while j < n and items[j].kind not in ("OPEN", "CLOSE"):
            j += 1
        if j < n and items[j].kind == "OPEN":
            raise _Fail("nested_brackets")
        if j >= n:
            notes.append(M.paste_note("unclosed_bracket"))
        inner = items[k + 1 : j]
        nums = [x for x in inner if x.kind == "NUM"]
        for x in inner:
            if x.kind == "FRAC":
                out.append(x)
            elif x.kind == "PCT" and not nums:
                notes.append(M.paste_note("event_percent", value=x.t))
        if len(nums) == 1:
            out.append(_It("SINGLE", nums[0].v, nums[0].t, tok=nums[0].tok))
        elif len(nums) == 2:
            a, b = nums
            between = inner[inner.index(a) + 1 : inner.index(b)]
            has_sep = any(x.kind in ("RANGE", "SEP") for x in between)
            out.append(_It("INTERVAL", a.v, a.t, b.v, b.t, a.tok, b.tok, sep=has_sep))
        elif len(nums) > 2:
            raise _Fail("bracket_many", count=len(nums), numbers=", ".join(x.t for x in nums))
        for x in inner:
            if x.kind in ("P", "SE", "LEVEL", "NOTEST", "SYMBOL"):
                out.append(x)
            elif x.kind == "PCT" and nums:
                out.append(x)
        k = j + 1
    return out


def _ranges(items: list[_It]) -> list[_It]:
    """Turn unbracketed 'NUM to NUM' / 'NUM - NUM' into intervals."""
    out: list[_It] = []
    n = len(items)
    k = 0
    while k < n:
        it = items[k]
        if (
            it.kind == "NUM"
            and k + 2 < n
            and items[k + 1].kind == "RANGE"
            and items[k + 2].kind == "NUM"
        ):
            b = items[k + 2]
            out.append(_It("INTERVAL", it.v, it.t, b.v, b.t, it.tok, b.tok, sep=True))
            k += 3
            continue
        out.append(it)
        k += 1
    return out


def _percent_values(items: list[_It], ctx: _Ctx, notes: list[str]) -> list[_It]:
    """An estimate and limits printed as percentages ("5% (1% to 9%)").

    Read as proportions for a risk difference (5% -> 0.05) and said so; refused for
    any other measure, never stripped silently (issue 12).
    """
    pcts = [x for x in items if x.kind == "PCT"]
    if len(pcts) < 3 or sum(1 for x in items if x.kind == "NUM") >= 3:
        return items
    if ctx.measure != "RD":
        raise _Fail("percent_values", numbers=", ".join(f"{x.t}%" for x in pcts))
    out = []
    for x in items:
        if x.kind == "PCT":
            decimals = len(x.t.split(".")[1]) if "." in x.t else 0
            text = f"{x.v / 100:.{decimals + 2}f}"
            out.append(_It("NUM", float(text), text, tok=x.tok))
        else:
            out.append(x)
    notes.append(
        M.paste_note("percent_converted", text=", ".join(f"{x.t}% -> {x.v / 100:g}" for x in pcts))
    )
    return out
