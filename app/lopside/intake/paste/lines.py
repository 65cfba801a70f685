"""Line classification: is a pasted line a study, a header, a total, a heterogeneity or
test line, a caption, a subgroup heading or an axis? And where does its label end?

Summary, heterogeneity, test and caption lines are recognised by their shape, never by a
leading word alone ("TOTAL 2015 0.98 (0.86 to 1.11)" is a trial).
"""

from __future__ import annotations

import re
import unicodedata
from dataclasses import dataclass

from lopside.intake.numbers import POINT, clean_text, decide_decimal_mark, read_digits, split_list
from lopside.intake.paste.tokens import _TAIL_WORDS, _expand_lists, _lex, _Tok

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


_I2_RE = re.compile(r"\bi\s*(?:\u00b2|\^?2|-?squared)\s*[=:]\s*(\d{1,3}(?:[.,]\d+)?)\s*%")


def published_i2_of(raw: str) -> float | None:
    """I² as printed on a heterogeneity line ("...; I² = 37%"), in percent, or None."""
    low = unicodedata.normalize("NFKC", raw).casefold()
    m = _I2_RE.search(low)
    if not m:
        return None
    v = float(m.group(1).replace(",", "."))
    return v if 0.0 <= v <= 100.0 else None
