"""Tokens of a pasted line: one hand-written left-to-right pass (linear time), and the
small word sets the lexer and the cell grammar share.
"""

from __future__ import annotations

from dataclasses import dataclass

from lopside.intake.numbers import DASHES, MID_DOTS, split_list

_DIGITS = "0123456789"


_SIGN_BEFORE = frozenset({"OPEN", "COMMA", "SEMI", "COLON", "DASH", "OP", "PM", "SLASH"})


_SE_WORDS = frozenset({"se", "s.e.", "s.e", "sem", "se.", "stderr"})


_P_WORDS = frozenset({"p", "p-value", "pvalue"})


_RANGE_WORDS = frozenset({"to", "and"})


_MEASURE_WORDS: dict[str, str] = {
    "or": "OR",
    "aor": "OR",
    "rr": "RR",
    "hr": "HR",
    "ahr": "HR",
    "rd": "RD",
    "md": "MD",
    "wmd": "MD",
    "smd": "SMD",
}


_NOT_ESTIMABLE = frozenset({"not", "estimable", "ne", "nr", "na", "n.a.", "n.r.", "n.e."})


#: Words that may stand among the numbers without being part of the label.
_TAIL_WORDS = (
    _SE_WORDS
    | _P_WORDS
    | _RANGE_WORDS
    | frozenset(_MEASURE_WORDS)
    | _NOT_ESTIMABLE
    | {"ci", "vs", "vs.", "cl"}
)


@dataclass(slots=True)
class _Tok:
    kind: str
    text: str
    start: int
    end: int
    space: bool
    body: str = ""
    sign: str = ""
    suffix: str = ""
    exp: str = ""
    middot: bool = False


def _lex(s: str) -> list[_Tok]:
    """Split a cleaned line into tokens in one left-to-right pass."""
    toks: list[_Tok] = []
    n = len(s)
    i = 0
    space = True
    while i < n:
        ch = s[i]
        if ch.isspace():
            space = True
            i += 1
            continue
        start = i
        nxt = s[i + 1] if i + 1 < n else ""
        starts_number = ch in _DIGITS or (
            (ch == "." or ch in MID_DOTS) and nxt != "" and nxt in _DIGITS
        )
        if starts_number:
            tok, i = _lex_number(s, i, "", space)
            toks.append(tok)
        elif ch in DASHES or ch == "+":
            after = s[i + 2] if i + 2 < n else ""
            digit_next = nxt != "" and (
                nxt in _DIGITS
                or ((nxt == "." or nxt in MID_DOTS) and after != "" and after in _DIGITS)
            )
            prev = toks[-1] if toks else None
            sign_place = (
                prev is None
                or space
                or prev.kind in _SIGN_BEFORE
                or (prev.kind == "WORD" and prev.text.casefold() in _RANGE_WORDS)
            )
            if digit_next and sign_place:
                tok, i = _lex_number(s, i + 1, "-" if ch != "+" else "", space)
                tok.start = start
                tok.text = s[start:i]
                toks.append(tok)
            else:
                toks.append(_Tok("DASH" if ch != "+" else "OTHER", ch, start, i + 1, space))
                i += 1
        elif ch.isalpha():
            j = i + 1
            while j < n:
                c = s[j]
                if c.isalnum():
                    if c in _DIGITS and s[i:j].casefold() in ("to", "p", "se", "and"):
                        break
                    j += 1
                elif c in "-'\u2019&_" and j + 1 < n and s[j + 1].isalnum():
                    if c == "-" and s[j + 1] in _DIGITS and s[i:j].casefold() in _TAIL_WORDS:
                        break
                    j += 1
                elif c == "." and s[j - 1].isalpha():
                    j += 1
                else:
                    break
            toks.append(_Tok("WORD", s[i:j], start, j, space))
            i = j
        else:
            if ch in "([{":
                kind = "OPEN"
            elif ch in ")]}":
                kind = "CLOSE"
            elif ch == ",":
                kind = "COMMA"
            elif ch == ";":
                kind = "SEMI"
            elif ch == ":":
                kind = "COLON"
            elif ch == "/":
                kind = "SLASH"
            elif ch == "%":
                kind = "PCT"
            elif ch in "=<>\u2264\u2265":
                kind = "OP"
            elif ch == "\u00b1":
                kind = "PM"
            else:
                kind = "OTHER"
            j = i + 1
            if kind == "OP" and j < n and s[j] == "=":
                j += 1
            toks.append(_Tok(kind, s[i:j], start, j, space))
            i = j
        space = False
    return toks


def _expand_lists(toks: list[_Tok]) -> list[_Tok]:
    """Split numbers run together with commas ("2002,0.82,0.61") into separate tokens."""
    out: list[_Tok] = []
    for t in toks:
        parts = split_list(t.body) if t.kind == "NUM" and not t.exp else None
        if not parts:
            out.append(t)
            continue
        pos = t.start + (len(t.text) - len(t.text.lstrip("-\u2212\u2013\u2014+")))
        for idx, part in enumerate(parts):
            if idx:
                out.append(_Tok("COMMA", ",", pos, pos + 1, False))
                pos += 1
            sign = t.sign if idx == 0 else ""
            start = t.start if idx == 0 else pos
            suffix = t.suffix if idx == len(parts) - 1 else ""
            end = pos + len(part) + (len(suffix) if suffix else 0)
            text = (t.text[: pos - t.start] if idx == 0 else "") + part + suffix
            out.append(
                _Tok("NUM", text, start, end, t.space if idx == 0 else False, part, sign, suffix)
            )
            pos += len(part)
    return out


def _lex_number(s: str, i: int, sign: str, space: bool) -> tuple[_Tok, int]:
    n = len(s)
    start = i
    body: list[str] = []
    middot = False
    while i < n:
        c = s[i]
        if c in _DIGITS:
            body.append(c)
            i += 1
        elif (c in ".," or c in MID_DOTS) and i + 1 < n and s[i + 1] in _DIGITS:
            if c in MID_DOTS:
                middot = True
                body.append(".")
            else:
                body.append(c)
            i += 1
        else:
            break
    exp = ""
    suffix = ""
    if i < n and s[i] in "eE":
        j = i + 1
        esign = ""
        if j < n and (s[j] in DASHES or s[j] == "+"):
            esign = "-" if s[j] in DASHES else ""
            j += 1
        k = j
        while k < n and s[k] in _DIGITS and k - j < 3:
            k += 1
        if k > j and (k >= n or not s[k].isalnum()):
            exp = esign + s[j:k]
            i = k
    if not exp and i < n and s[i].isalpha() and (i + 1 >= n or not s[i + 1].isalnum()):
        suffix = s[i]
        i += 1
    tok = _Tok("NUM", s[start:i], start, i, space, "".join(body), sign, suffix, exp, middot)
    return tok, i
