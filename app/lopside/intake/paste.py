"""Reading study rows pasted from a forest-plot table in a PDF or a web page.

Design invariants
-----------------
* One study per line. Every non-blank line ends up in :attr:`PasteResult.lines` as a
  study, as skipped (with the reason) or as not understood (with the reason and what to
  do): nothing is dropped silently. Blank lines are passed over.
* The reader never raises. A line that still trips it is reported as not understood
  (reason "internal"); the property-based tests check that this never happens.
* Time is linear in the length of the text: each line is scanned by hand-written loops,
  the few regular expressions are anchored and cannot backtrack badly, and a line longer
  than :data:`MAX_LINE_CHARS` is reported, not read.
* Reading is token-based, not column-based, because PDF viewers collapse column gaps
  into single spaces; a tab, where one survives, only marks the end of the label.
* Values are stored as printed (natural scale): an odds ratio of 0.82 stays 0.82.
  The first arm of a pair is the intervention arm, as forest tables print it.
* The decimal mark is decided per line from the numbers on it (``0,82`` can only be a
  decimal comma). A line whose numbers could be read either way (``1,234``) follows
  the other lines of the paste; with nothing to go on, the comma is a thousands mark.
"""

from __future__ import annotations

import math
import re
import unicodedata
from dataclasses import dataclass, field, replace

from lopside.intake import messages as M
from lopside.intake.numbers import (
    COMMA,
    DASHES,
    MID_DOTS,
    POINT,
    TOO_LARGE,
    clean_text,
    decide_decimal_mark,
    read_digits,
    split_list,
)
from lopside.model.review import (
    MEASURE_NAMES,
    IntakeAccount,
    NotRead,
    PublishedResult,
    StudyRow,
)

#: Lines longer than this are reported and not read (a forest-table row is ~40-200 chars).
MAX_LINE_CHARS = 2000

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
#: A label ending in one of these takes a following number as part of itself ("Trial 2").
_NUMBERED_LABEL_WORDS = frozenset(
    {
        "study",
        "trial",
        "cohort",
        "site",
        "centre",
        "center",
        "part",
        "experiment",
        "sample",
        "arm",
        "group",
        "phase",
        "wave",
        "stage",
        "no",
        "no.",
        "number",
        "series",
    }
)

_HEADER_WORDS = frozenset(
    {
        "study",
        "studies",
        "subgroup",
        "author",
        "authors",
        "year",
        "trial",
        "events",
        "event",
        "total",
        "mean",
        "sd",
        "se",
        "weight",
        "ratio",
        "difference",
        "ci",
        "m-h",
        "iv",
        "iv,",
        "random",
        "fixed",
        "experimental",
        "control",
        "intervention",
        "placebo",
        "treatment",
        "comparator",
        "estimate",
        "odds",
        "risk",
        "hazard",
        "std.",
        "log",
        "n",
        "participants",
        "patients",
        "cases",
        "bias",
        "effect",
        "lower",
        "upper",
        "confidence",
        "interval",
        "or",
        "rr",
        "hr",
        "md",
        "smd",
        "rd",
        "peto",
        "exposed",
        "unexposed",
    }
)
_YEAR_RE = re.compile(r"(?<![0-9])((?:19|20)[0-9][0-9])(?![0-9])")
_WORD_RE = re.compile(r"[a-z][a-z.\-]*")
_LEVEL_RE = re.compile(r"(\d{2}(?:\.\d{1,2})?)\s?%\s?(?:ci|cl|confidence)")
_LEVEL_STRIP_RE = re.compile(r"\d{2}(?:\.\d{1,2})?\s?%\s?(?:ci|cl|confidence)")
_HEADING_RE = re.compile(r"(\d{1,2}(?:\.\d{1,3}){1,3})\s+(\S.*)")
_TOTAL_RE = re.compile(
    r"(?:(sub[- ]?totals?)|(total events)|(totals?)|(overall)|(pooled)|(summary)"
    r"|((?:random|fixed|common)[- ]effects?(?: model)?)|((?:re|fe) model))\b"
)
_HET_RE = re.compile(
    r"(?:(heterogeneity)|(prediction interval)"
    r"|((?:tau|chi|i|h)(?:\^?2|-?squared?)?\s*[=:<>])|(q\s*[=:(])|(df\s*=))"
)
#: what may follow "Total (" on a summary line
_SUMMARY_BRACKET_RE = re.compile(
    r"(?:\d{2}(?:\.\d{1,2})?\s?%|ci\b|cl\b|fixed|random|common|m-h|mh\b|iv\b|peto"
    r"|inverse|fe\b|re\b|model|95|99|90)"
)
#: a heterogeneity statistic with its value at the start of a line ("Tau² = 0.04")
_HET_STAT_RE = re.compile(
    r"(?:tau|chi|i|h|q)(?:\^?2|-?squared?)?\s*(?:\(\s*(?:df\s*=\s*)?\d+\s*\))?"
    r"\s*[=:<>]\s*[-\u2212]?[0-9.]"
)
_HET_WORD_RE = re.compile(r"(?:heterogeneity|prediction interval|(?:tau|chi|i|h|q)\b)")
_DECIMAL_RE = re.compile(r"\d[.,\u00b7]\d")
_FRACTION_RE = re.compile(r"\d\s*/\s*\d")
_TEST_RE = re.compile(r"(?:tests? (?:for|of)\b|overall effect\b)")
_CAPTION_RE = re.compile(
    r"(?:favou?rs?\b|footnotes?\b|notes?:|figure\b|fig\.|analysis \d|comparison \d"
    r"|outcome \d|risk of bias legend)"
)
_MEASURE_PHRASES: tuple[tuple[str, str], ...] = (
    ("std. mean difference", "SMD"),
    ("standardised mean difference", "SMD"),
    ("standardized mean difference", "SMD"),
    ("odds ratio", "OR"),
    ("risk ratio", "RR"),
    ("relative risk", "RR"),
    ("hazard ratio", "HR"),
    ("risk difference", "RD"),
    ("mean difference", "MD"),
)
_MODEL_RE = re.compile(r"((?:m-h|iv|peto|inverse variance)\s*,\s*(?:random|fixed))")
_LOG_TICKS = frozenset(
    {
        0.001,
        0.002,
        0.005,
        0.01,
        0.02,
        0.05,
        0.1,
        0.2,
        0.25,
        0.5,
        1.0,
        2.0,
        4.0,
        5.0,
        10.0,
        20.0,
        50.0,
        100.0,
        200.0,
        500.0,
        1000.0,
    }
)


# -- results --------------------------------------------------------------------------


@dataclass(frozen=True, slots=True)
class LineReading:
    """How one non-blank pasted line was read.

    ``status`` is ``"study"``, ``"skipped"`` or ``"not understood"``. ``route`` names
    what was read, joined by "+": ``"ci"``, ``"se"``, ``"p"``, ``"counts"``, ``"means"``
    (e.g. ``"ci+counts"``); it is empty for lines that are not studies. ``account`` is
    the plain-English reading; ``reason``/``advice`` explain a skipped or not-understood
    line. ``printed`` keeps each number as printed (canonical, "." decimal) so that the
    row checks can allow for the printed decimals.
    """

    line_no: int
    text: str
    status: str
    route: str = ""
    account: str = ""
    reason: str = ""
    advice: str = ""
    row_index: int | None = None
    printed: tuple[tuple[str, str], ...] = ()
    #: decimal mark used on the line: "point", "comma" or "" (no decimals on it)
    decimal_mark: str = ""


@dataclass(frozen=True, slots=True)
class PasteResult:
    """Everything read from a paste: the study rows and an account of every line."""

    rows: tuple[StudyRow, ...]
    lines: tuple[LineReading, ...]
    #: measure named in a header line ("Odds Ratio M-H, Random, 95% CI" -> "OR")
    measure_hint: str | None = None
    #: the pooled result from the last "Total" line, if it printed one
    published: PublishedResult | None = None
    #: decimal mark the paste settled on ("point", "comma"; "" when nothing needed it)
    decimal_mark: str = ""
    #: how: "evidence" (a number such as 0,82), "option" (the caller said), "" (none)
    decimal_how: str = ""
    #: the number that settled it
    decimal_evidence: str = ""
    #: (line, number) read with nothing to settle the decimal mark ("1,105" as 1105)
    undecided: tuple[tuple[int, str], ...] = ()
    #: the measure the rows look like, and why (a suggestion for the user to confirm)
    measure_guess: str | None = None
    measure_why: str = ""

    @property
    def studies(self) -> tuple[LineReading, ...]:
        return tuple(r for r in self.lines if r.status == "study")

    @property
    def skipped(self) -> tuple[LineReading, ...]:
        return tuple(r for r in self.lines if r.status == "skipped")

    @property
    def not_understood(self) -> tuple[LineReading, ...]:
        return tuple(r for r in self.lines if r.status == "not understood")

    def not_read(self) -> tuple[NotRead, ...]:
        """Lines that were not read, for the review's intake account."""
        no_numbers = M.not_understood("no_numbers")[0]
        # a line with no numbers after its label is listed, but is not study-looking
        return tuple(
            NotRead(
                "text" if r.reason == no_numbers else "line",
                f"line {r.line_no}",
                r.text.strip(),
                r.reason,
            )
            for r in self.not_understood
        )

    def intake_account(self, source: str, measure_how: str = "") -> IntakeAccount:
        """What this paste adds to a review's intake account."""
        return IntakeAccount(
            source=source,
            not_read=self.not_read(),
            decimal_mark=self.decimal_mark,
            decimal_how=self.decimal_how,
            decimal_evidence=self.decimal_evidence,
            measure_how=measure_how,
            rows_at=tuple(
                (self.rows[r.row_index].study, f"{source} line {r.line_no}")
                for r in self.studies
                if r.row_index is not None
            ),
        )

    def printed(self, row_index: int) -> dict[str, str]:
        """The numbers of row ``row_index`` as printed (field -> text)."""
        for r in self.lines:
            if r.row_index == row_index:
                return dict(r.printed)
        return {}

    def account(self) -> str:
        """A readable multi-line summary: counts first, then one line per pasted line."""
        n_study, n_skip, n_nu = len(self.studies), len(self.skipped), len(self.not_understood)
        out = [
            f"{n_study} stud{'y' if n_study == 1 else 'ies'} read, {n_skip} line(s) skipped, "
            f"{n_nu} line(s) not understood."
        ]
        if self.measure_hint:
            out.append(f"The header names the measure: {MEASURE_NAMES[self.measure_hint]}.")
        if self.published is not None:
            p = self.published
            out.append(f"Published pooled result: {p.estimate:g} ({p.lower:g} to {p.upper:g}).")
        for r in self.lines:
            text = r.text if len(r.text) <= 80 else r.text[:77] + "..."
            if r.status == "study":
                out.append(f"Line {r.line_no}: {r.account}   [{text.strip()}]")
            elif r.status == "skipped":
                out.append(f"Line {r.line_no}: skipped, {r.reason}.   [{text.strip()}]")
            else:
                out.append(
                    f"Line {r.line_no}: NOT UNDERSTOOD: {r.reason}. {r.advice}   [{text.strip()}]"
                )
        return "\n".join(out)


# -- tokens ---------------------------------------------------------------------------


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


# -- line classification ------------------------------------------------------------


@dataclass(slots=True)
class _Prepared:
    """A line cleaned, tokenised and split into label and tail (pass 1)."""

    line_no: int
    raw: str
    cleaned: str
    footnotes: tuple[str, ...]
    thousands_space: bool
    toks: list[_Tok]
    label_end: int  # index into toks of the first tail token
    year_absorbed: bool
    mark: str  # decision for the line: point/comma/mixed/undecided
    mark_evidence: str
    mark_counter: str
    kind: str = "study"  # "study" | "total" (a total line read for the published result)


def _summary_shape(rest: str) -> bool:
    """True when what follows a summary word has the shape of a summary line.

    A summary line has the word alone as its label, or followed by "(95% CI)", "(fixed",
    "(random", a colon, or its numbers straight away. A year or more words after it make
    a study label ("TOTAL 2015", "Overall Survival Trial"): a trial acronym is not a
    pooled result.
    """
    rest = rest.strip()
    if not rest or rest[0] in ":=":
        return True
    if rest[0] in "([":
        return bool(_SUMMARY_BRACKET_RE.match(rest[1:].lstrip()))
    m = re.match(r"[-\u2212+]?[0-9.,\u00b7]+", rest)
    if m:
        return not _YEAR_RE.fullmatch(m.group(0))
    return False


def _summary_word(raw: str) -> str:
    """The summary/caption word a study label starts with ("" for none), for the account."""
    low = unicodedata.normalize("NFKC", raw).casefold().strip().lstrip("\u2022-*\u00b7 \t")
    for rx in (_TOTAL_RE, _HET_WORD_RE, _TEST_RE, _CAPTION_RE):
        m = rx.match(low)
        if m:
            return (
                unicodedata.normalize("NFKC", raw)
                .strip()
                .lstrip("\u2022-*\u00b7 \t")[: m.end()]
                .strip()
            )
    return ""


def _looks_like_data(low: str) -> bool:
    """An estimate with its interval, or events/totals: numbers a study line carries."""
    return len(_DECIMAL_RE.findall(low)) >= 3 or len(_FRACTION_RE.findall(low)) >= 2


def _skip_reason(raw: str) -> tuple[str, str] | None:
    """Header, total, heterogeneity, caption or heading: (reason key, detail) or None.

    Summary, heterogeneity, test and caption lines are recognised by their shape, never by
    a leading word alone (issue 12): "TOTAL 2015 0.98 (0.86 to 1.11)" is a trial.
    """
    low = unicodedata.normalize("NFKC", raw).casefold().strip()
    low = low.lstrip("\u2022-*\u00b7 \t")
    if not low:
        return None
    m = _TOTAL_RE.match(low)
    if m and _summary_shape(low[m.end() :]):
        if m.group(1):
            return "subtotal", ""
        if m.group(2):
            return "total_events", ""
        return "total", ""
    if (
        low.startswith(("heterogeneity", "prediction interval"))
        or _HET_STAT_RE.match(low)
        or ("heterogeneity" in low and not _looks_like_data(low))
    ):
        return "heterogeneity", ""
    if (_TEST_RE.match(low) or "test for overall effect" in low) and re.search(r"[=<>]", low):
        return "test", ""
    if _CAPTION_RE.match(low) and not _looks_like_data(low):
        return "caption", ""
    m = _HEADING_RE.fullmatch(low)
    if m and re.search(r"[a-z]", m.group(2)) and not re.search(r"\d[.,\u00b7]\d|/", m.group(2)):
        return "subgroup_heading", unicodedata.normalize("NFKC", raw).strip()[len(m.group(1)) :]
    stripped = _LEVEL_STRIP_RE.sub(" ", low)
    if not any(c.isdigit() for c in stripped):
        words = set(_WORD_RE.findall(stripped))
        if len(words & _HEADER_WORDS) >= 2 or (words & _HEADER_WORDS and stripped != low):
            return "header", ""
    return None


def _header_details(raw: str) -> tuple[float | None, str | None, str]:
    """CI level, measure and model named in a header line."""
    low = unicodedata.normalize("NFKC", raw).casefold()
    level = None
    m = _LEVEL_RE.search(low)
    if m:
        level = float(m.group(1))
    measure = None
    for phrase, code in _MEASURE_PHRASES:
        if phrase in low:
            measure = code
            break
    mm = _MODEL_RE.search(low)
    model = ""
    if mm:
        model = unicodedata.normalize("NFKC", raw)[mm.start(1) : mm.end(1)]
    return level, measure, model


def _is_axis(toks: list[_Tok]) -> bool:
    """A row of tick labels such as '0.01 0.1 1 10 100' or '-2 -1 0 1 2'."""
    if len(toks) < 3 or any(t.kind != "NUM" or t.suffix or t.exp for t in toks):
        return False
    values = []
    for t in toks:
        d = read_digits(t.body, POINT)
        if d.value is None:
            return False
        values.append(-d.value if t.sign else d.value)
    if values != sorted(values) or len(set(values)) != len(values):
        return False
    if all(v in _LOG_TICKS for v in values) and 1.0 in values:
        return True
    steps = {round(b - a, 9) for a, b in zip(values, values[1:], strict=False)}
    return len(steps) == 1 and 0.0 in values and values[0] == -values[-1]


def _year_of(tok: _Tok) -> int | None:
    if tok.kind != "NUM" or tok.sign or tok.exp or len(tok.body) != 4 or not tok.body.isdigit():
        return None
    y = int(tok.body)
    return y if 1900 <= y <= 2099 else None


def _split_label(toks: list[_Tok], tab_at: int | None) -> tuple[int, bool]:
    """Index of the first tail token, and whether a year token was moved into the label."""
    n = len(toks)
    if tab_at is not None:
        end = 0
        while end < n and toks[end].start < tab_at:
            end += 1
    else:
        strong = n
        for i, t in enumerate(toks):
            if t.kind == "NUM" and (
                "." in t.body
                or "," in t.body
                or (i + 1 < n and toks[i + 1].kind in ("SLASH", "PCT"))
            ):
                strong = i
                break
        last_word = -1
        limit = strong if strong < n else n
        for i in range(limit):
            t = toks[i]
            if t.kind == "WORD" and t.text.casefold() not in _TAIL_WORDS:
                last_word = i
        end = last_word + 1
    absorbed = False
    # a label with an open bracket takes its closing bracket: "TRIAL-A11 (Hale)"
    depth = sum(1 if t.kind == "OPEN" else -1 for t in toks[:end] if t.kind in ("OPEN", "CLOSE"))
    while depth > 0 and end < n and toks[end].kind == "CLOSE":
        end += 1
        depth -= 1
    if end > 0:
        k = end
        if k < n and toks[k].kind == "COMMA":
            k += 1
        if k < n and _year_of(toks[k]) is not None:
            end = k + 1
            absorbed = True
        elif (
            k + 2 < n
            and toks[k].kind == "OPEN"
            and _year_of(toks[k + 1]) is not None
            and toks[k + 2].kind == "CLOSE"
        ):
            end = k + 3
            absorbed = True
    return end, absorbed


def _prepare(line_no: int, raw: str) -> _Prepared:
    cleaned = clean_text(raw)
    s = cleaned.text
    toks = _expand_lists(_lex(s))
    tab_at = None
    if "\t" in s:
        first = s.split("\t", 1)[0]
        if any(c.isalpha() for c in first):
            tab_at = len(first)
    end, absorbed = _split_label(toks, tab_at)
    bodies: list[str] = []
    for t in toks[end:]:
        if t.kind == "NUM":
            parts = split_list(t.body)
            bodies.extend(parts if parts else [t.body])
    decision = decide_decimal_mark(bodies)
    return _Prepared(
        line_no,
        raw,
        s,
        cleaned.footnotes,
        cleaned.thousands_spaces,
        toks,
        end,
        absorbed,
        decision.mark,
        decision.evidence,
        decision.counter,
    )


# -- items (tokens with numbers read) -------------------------------------------------


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
                        items.append(
                            _It("FRAC", a[0].v, a[0].t, float(total), str(int(total)), t, nxt3)
                        )
                        k += 4
                        continue
                    items.append(_It("FRAC", a[0].v, a[0].t, b[0].v, b[0].t, t, nxt2))
                    k += 3
                    continue
            if nxt is not None and nxt.kind == "PCT":
                vals = _read_num(t, mark, notes, used)
                word = (
                    toks[k + 2].text.casefold() if nxt2 is not None and nxt2.kind == "WORD" else ""
                )
                if word in ("ci", "cl", "confidence"):
                    items.append(_It("LEVEL", vals[-1].v, vals[-1].t))
                    k += 3
                    continue
                items.extend(vals[:-1])
                items.append(_It("PCT", vals[-1].v, vals[-1].t))
                k += 2
                continue
            items.extend(_read_num(t, mark, notes, used))
            k += 1
            continue
        if kind == "WORD":
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


def _read_study(
    prep: _Prepared, ctx: _Ctx, label_end: int, allow_retry: bool = True
) -> tuple[StudyRow, LineReading]:
    notes: list[str] = []
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

    intervals = [i for i, x in enumerate(items) if x.kind == "INTERVAL"]
    if len(intervals) > 1:
        raise _Fail("two_intervals", count=len(intervals))
    values: dict[str, float] = {}
    printed: dict[str, str] = {}
    routes: list[str] = []
    est_idx: int | None = None
    end_idx = 0
    level = None
    p_item = next((x for x in items if x.kind == "P"), None)
    se_item = next((x for x in items if x.kind == "SE"), None)
    for x in items:
        if x.kind == "LEVEL":
            level = x.v

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
        est_idx = e
        end_idx = ii + 1
        values.update(estimate=items[e].v, lower=lo_v, upper=hi_v)
        printed.update(estimate=items[e].t, lower=lo_t, upper=hi_t)
        routes.append("ci")
    if se_item is not None:
        si = items.index(se_item)
        e = before(si) if est_idx is None else est_idx
        if e is None:
            raise _Fail("se_without_estimate")
        if est_idx is None:
            est_idx = e
            values["estimate"] = items[e].v
            printed["estimate"] = items[e].t
        end_idx = max(end_idx, si + 1)
        values["se"] = se_item.v
        printed["se"] = se_item.t
        routes.append("se")
    p_bound = None
    if p_item is not None:
        pi = items.index(p_item)
        e = before(pi) if est_idx is None else est_idx
        if e is None:
            raise _Fail("p_without_estimate")
        if est_idx is None:
            est_idx = e
            values["estimate"] = items[e].v
            printed["estimate"] = items[e].t
        end_idx = max(end_idx, pi + 1)
        values["p"] = p_item.v
        printed["p"] = p_item.t
        p_bound = p_item.bound or None
        routes.append("p")

    data_kinds = ("NUM", "FRAC", "SINGLE")
    weights: list[str] = []
    if est_idx is not None:
        pre = [x for x in items[:est_idx] if x.kind in data_kinds]
        post = [x for x in items[end_idx:] if x.kind in data_kinds]
        weights += [x.t for x in items if x.kind == "PCT"]
        fit = _fit(pre, want_ci3=False) if pre else {"block": None, "weights": [], "ci3": None}
        if fit is None:
            fit = {"block": None, "weights": [], "ci3": None}
            if len(pre) == 1 and _is_count(pre[0]):
                absorbed = allow_retry and _label_takes_number(label, prep)
                if absorbed and label_end < len(toks) and toks[label_end] is pre[0].tok:
                    raise _Retry()
                values["n"] = pre[0].v
                printed["n"] = pre[0].t
                notes.append(M.paste_note("n_from_single", value=pre[0].t))
            else:
                if allow_retry and label and pre and _label_takes_number(label, prep):
                    if label_end < len(toks) and toks[label_end] is pre[0].tok:
                        raise _Retry()
                notes.append(M.paste_note("unused_before", numbers=" ".join(_show(x) for x in pre)))
        if post:
            notes.append(M.paste_note("unused_after", numbers=" ".join(_show(x) for x in post)))
    else:
        seq = [x for x in items if x.kind in data_kinds]
        weights += [x.t for x in items if x.kind == "PCT"]
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
            values.update(estimate=e.v, lower=lo.v, upper=hi.v)
            printed.update(estimate=e.t, lower=lo.t, upper=hi.t)
            routes.append("ci")
            notes.append(M.paste_note("three_numbers"))
    block = fit["block"]  # type: ignore[index]
    if block:
        kind = block[0]  # type: ignore[index]
        pre_seq = (
            [x for x in items[:est_idx] if x.kind in data_kinds]
            if est_idx is not None
            else [x for x in items if x.kind in data_kinds]
        )
        b = pre_seq[: block[1]]  # type: ignore[index]
        if kind == "counts_frac":
            values.update(
                int_events=b[0].v, int_total=b[0].v2, ctl_events=b[1].v, ctl_total=b[1].v2
            )
            printed.update(
                int_events=b[0].t, int_total=b[0].t2, ctl_events=b[1].t, ctl_total=b[1].t2
            )
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
    for w in fit["weights"]:  # type: ignore[index]
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

    row = StudyRow(
        study=label,
        year=year,
        level=level if "ci" in routes else None,
        p_bound=p_bound,
        subgroup=ctx.subgroup,
        **values,  # type: ignore[arg-type]
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


# -- the reader -----------------------------------------------------------------------


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
    raw_lines = text.splitlines()

    # pass 1: classify and tokenise; collect the decimal marks the lines settle on
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
    measure_hint: str | None = None
    published: PublishedResult | None = None
    model_text = ""
    published_i2: float | None = None
    after_total = False  # the heterogeneity line that follows the overall total is the paper's
    for idx, raw, item in staged:
        if isinstance(item, LineReading):
            lines.append(item)
            continue
        if isinstance(item, tuple):
            key, detail = item  # type: ignore[misc]
            reason = M.SKIP_REASONS[key]
            if key == "header":
                level, hint, model = _header_details(raw)
                extra = []
                if level is not None:
                    ctx.level, ctx.level_line = level, idx
                    extra.append(f"CI level {_fmt(level)}% noted")
                if hint is not None:
                    measure_hint = measure_hint or hint
                    extra.append(f"measure: {MEASURE_NAMES[hint]}")
                if model:
                    model_text = model
                if extra:
                    reason += " (" + "; ".join(extra) + ")"
            elif key == "subgroup_heading":
                ctx.subgroup = str(detail).strip() or None
                ctx.subgroup_line = idx
                reason += f"; rows below get subgroup '{ctx.subgroup}'"
            if key == "subtotal":
                ctx.subgroup = None
            if key == "heterogeneity" and after_total:
                i2 = published_i2_of(raw)
                if i2 is not None:
                    published_i2 = i2
                    reason += f"; I² {_fmt(i2)}% kept to check against your rows"
            after_total = key == "total" or (
                after_total and key in ("heterogeneity", "total_events")
            )
            lines.append(LineReading(idx, raw, "skipped", reason=reason))
            continue
        prep = item
        assert isinstance(prep, _Prepared)
        if prep.kind == "total":
            reason = M.SKIP_REASONS["total"]
            try:
                row, reading = _read_with_retry(prep, ctx)
                if row.estimate is not None and row.lower is not None and row.upper is not None:
                    published = PublishedResult(row.estimate, row.lower, row.upper, model_text)
                    pr = dict(reading.printed)
                    reason += (
                        f"; pooled {pr['estimate']} ({pr['lower']} to {pr['upper']})"
                        " kept as the published result"
                    )
            except Exception:  # noqa: BLE001 - a total we cannot read is still skipped
                pass
            ctx.subgroup = None
            after_total = True
            lines.append(LineReading(idx, raw, "skipped", reason=reason))
            continue
        after_total = False
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
    if published_i2 is not None:
        if published is None:
            published = PublishedResult(model=model_text, i2=published_i2)
        else:
            published = replace(published, i2=published_i2)
    mark = ctx.fallback_mark or ""
    if undecided and not mark:
        decimal_how = ""
    guess, why = _guess_measure(rows, measure_hint)
    return PasteResult(
        tuple(rows),
        tuple(lines),
        measure_hint,
        published,
        decimal_mark=mark if (mark and (decimal_how or undecided)) else "",
        decimal_how=decimal_how if mark else "",
        decimal_evidence=evidence.get(mark, "") if decimal_how == "evidence" else "",
        undecided=tuple(undecided),
        measure_guess=guess,
        measure_why=why,
    )


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
    from dataclasses import replace

    return replace(reading, account=f"{reading.account}; {note}")


_I2_RE = re.compile(r"\bi\s*(?:\u00b2|\^?2|-?squared)\s*[=:]\s*(\d{1,3}(?:[.,]\d+)?)\s*%")


def published_i2_of(raw: str) -> float | None:
    """I² as printed on a heterogeneity line ("...; I² = 37%"), in percent, or None."""
    low = unicodedata.normalize("NFKC", raw).casefold()
    m = _I2_RE.search(low)
    if not m:
        return None
    v = float(m.group(1).replace(",", "."))
    return v if 0.0 <= v <= 100.0 else None


def _with_index(reading: LineReading, index: int) -> LineReading:
    from dataclasses import replace

    return replace(reading, row_index=index)


def _read_with_retry(prep: _Prepared, ctx: _Ctx) -> tuple[StudyRow, LineReading]:
    """Read a study line; a label such as "Trial 2" may take one following number."""
    try:
        return _read_study(prep, ctx, prep.label_end)
    except _Retry:
        return _read_study(prep, ctx, prep.label_end + 1, allow_retry=False)


__all__ = ["LineReading", "MAX_LINE_CHARS", "PasteResult", "read_pasted"]
