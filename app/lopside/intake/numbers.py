"""Reading numbers as they come out of PDFs, web pages and spreadsheets.

Design invariants
-----------------
* Footnote marks (superscripts, ``* † ‡ § ¶ ‖``, a letter glued after a number) are
  removed *before* NFKC normalisation, because NFKC turns ``0.70¹`` into ``0.701``.
* Minus signs come in many shapes (U+2212, en/em dash, figure dash, hyphen): each is a
  sign only where a sign can stand (before a digit, at the start or after a space or
  an opening bracket); elsewhere it is a range dash. The paste reader decides that
  from the characters around it; a single cell here can only hold a sign.
* The decimal mark is decided from the data: ``0,82`` can only be a decimal comma,
  ``0.82`` only a decimal point, while ``1,234`` / ``1.234`` could be either a decimal
  or a thousands separator. Such ambiguous numbers follow the decision taken from
  the other numbers on the same line (or in the same file); with nothing to go on
  they are read with a thousands separator, and the reading says so.
* Nothing here raises on bad text: a failed reading carries the reason.
* Every function runs in time linear in the length of its input (no backtracking
  regular expressions on unbounded input).
"""

from __future__ import annotations

import math
import re
import unicodedata
from collections.abc import Iterable
from dataclasses import dataclass

#: Characters that are a minus sign where a sign can stand (and a range dash elsewhere).
DASHES: frozenset[str] = frozenset("-\u2010\u2011\u2012\u2013\u2014\u2015\u2212\ufe63\uff0d")
#: Characters some journals use as the decimal point ("0·70").
MID_DOTS: frozenset[str] = frozenset("\u00b7\u2219\u22c5")
#: Footnote marks removed wherever they stand.
FOOTNOTE_MARKS: frozenset[str] = frozenset("*\u2020\u2021\u00a7\u00b6\u2016\u2051\u204e")
#: Spaces used as thousands separators in typeset numbers ("1 234").
THIN_SPACES: frozenset[str] = frozenset("\u00a0\u2009\u202f\u2007")

#: Cell texts that mean "not reported" (read as blank, and said so).
MISSING_WORDS: frozenset[str] = frozenset(
    {"na", "n/a", "n.a.", "nr", "n.r.", "ne", "not reported", "not estimable", "."}
    | set(DASHES)
    | {d * 2 for d in DASHES}
)

_SUPERSCRIPT_DIGITS = {
    "\u2070": "0",
    "\u00b9": "1",
    "\u00b2": "2",
    "\u00b3": "3",
    "\u2074": "4",
    "\u2075": "5",
    "\u2076": "6",
    "\u2077": "7",
    "\u2078": "8",
    "\u2079": "9",
}
_SUPERSCRIPT_MINUS = "\u207b"
_ASCII_DIGITS = "0123456789"


def _is_script(ch: str) -> bool:
    """True for superscript/subscript characters (what NFKC would fold into plain ones)."""
    if ch.isascii():
        return False
    return unicodedata.decomposition(ch).startswith(("<super>", "<sub>"))


def _power_of_ten(text: str) -> str:
    """Turn ``1.2×10⁻⁵`` into ``1.2e-5`` so that stripping superscripts cannot mangle it.

    A hand-written scan (not a regex) so that it stays linear on any input.
    """
    if "10" not in text:
        return text
    out: list[str] = []
    i = 0
    n = len(text)
    while i < n:
        ch = text[i]
        if ch in "\u00d7xX" and out and out[-1].isdigit():
            j = i + 1
            while j < n and text[j] == " ":
                j += 1
            if text.startswith("10", j):
                k = j + 2
                exp: list[str] = []
                if k < n and text[k] in (_SUPERSCRIPT_MINUS, "\u207a"):
                    exp.append("-" if text[k] == _SUPERSCRIPT_MINUS else "")
                    k += 1
                digits_start = k
                while k < n and text[k] in _SUPERSCRIPT_DIGITS:
                    exp.append(_SUPERSCRIPT_DIGITS[text[k]])
                    k += 1
                if k > digits_start:
                    # remove spaces typed between the mantissa and the multiplication sign
                    while out and out[-1] == " ":
                        out.pop()
                    out.append("e" + "".join(exp))
                    i = k
                    continue
        out.append(ch)
        i += 1
    return "".join(out)


@dataclass(frozen=True, slots=True)
class Cleaned:
    """Text made ready for reading, and what was done to it."""

    text: str
    #: footnote marks that were removed (as they were printed)
    footnotes: tuple[str, ...] = ()
    #: True where a thin/no-break space between digit groups was taken as a thousands mark
    thousands_spaces: bool = False


def clean_text(text: str) -> Cleaned:
    """Remove footnote marks, join typeset thousands groups, then NFKC-normalise.

    Parameters
    ----------
    text : str
        A line or a cell as pasted.

    Returns
    -------
    Cleaned
        The text ready for tokenising, and the marks removed. Letters glued to a number
        (``0.82a``) are left for the caller, who knows whether the number is a year.
    """
    text = _power_of_ten(text)
    marks: list[str] = []
    out: list[str] = []
    joined = False
    n = len(text)
    for i, ch in enumerate(text):
        if ch in FOOTNOTE_MARKS or _is_script(ch):
            marks.append(ch)
            continue
        if ch in THIN_SPACES:
            # A thin or no-break space between a digit and exactly three digits is a
            # thousands separator ("1 234"); anywhere else it is a space.
            if out and out[-1] in _ASCII_DIGITS:
                group = text[i + 1 : i + 4]
                after = text[i + 4] if i + 4 < n else ""
                if (
                    len(group) == 3
                    and all(c in _ASCII_DIGITS for c in group)
                    and (after == "" or after not in _ASCII_DIGITS)
                ):
                    joined = True
                    continue
            out.append(" ")
            continue
        out.append(ch)
    cleaned = unicodedata.normalize("NFKC", "".join(out))
    return Cleaned(cleaned, tuple(marks), joined)


# -- the digits of one number ---------------------------------------------------------

#: A number body: digits with internal "." or "," (both may appear), no sign.
_BODY = re.compile(r"[0-9]*(?:[.,][0-9]+)*")
_AMBIG_COMMA = re.compile(r"[1-9][0-9]{0,2},[0-9]{3}")
_AMBIG_POINT = re.compile(r"[1-9][0-9]{0,2}\.[0-9]{3}")
_THOUSANDS_COMMA = re.compile(r"[0-9]{1,3}(?:,[0-9]{3})+")
_THOUSANDS_POINT = re.compile(r"[0-9]{1,3}(?:\.[0-9]{3})+")
_COMMA_THEN_POINT = re.compile(r"[0-9]{1,3}(?:,[0-9]{3})+\.[0-9]+")
_POINT_THEN_COMMA = re.compile(r"[0-9]{1,3}(?:\.[0-9]{3})+,[0-9]+")
_PLAIN_POINT = re.compile(r"[0-9]+(?:\.[0-9]+)?")

#: Decimal marks a reading can settle on.
POINT = "point"
COMMA = "comma"


def mark_evidence(body: str) -> str | None:
    """What a number body says about the decimal mark: ``"point"``, ``"comma"`` or None.

    ``0.82`` says point, ``0,82`` says comma; ``1,234``, ``1.234`` and plain integers say
    nothing (they read either way). ``1,234.5`` says point and ``1.234,5`` says comma.
    """
    has_point = "." in body
    has_comma = "," in body
    if has_point and has_comma:
        if _COMMA_THEN_POINT.fullmatch(body):
            return POINT
        if _POINT_THEN_COMMA.fullmatch(body):
            return COMMA
        return None
    if has_comma:
        if body.count(",") == 1 and not _AMBIG_COMMA.fullmatch(body):
            return COMMA
        return None
    if has_point:
        if body.count(".") == 1 and not _AMBIG_POINT.fullmatch(body):
            return POINT
        return None
    return None


@dataclass(frozen=True, slots=True)
class Digits:
    """A sign-free number body read with a given decimal mark."""

    value: float | None
    #: the number written with "." as the decimal mark and no separators ("1234.5")
    canonical: str = ""
    #: digits after the decimal mark as printed (0 for integers)
    decimals: int = 0
    #: "int", "decimal", "thousands" (a separator was removed) or "" when unread
    kind: str = ""
    #: True where the body could be read two ways and ``mark`` settled it
    ambiguous: bool = False
    reason: str = ""


def read_digits(body: str, mark: str | None = None) -> Digits:
    """Read a sign-free number body such as ``0,82``, ``1,234.5`` or ``.82``.

    Parameters
    ----------
    body : str
        Digits with ``.``/``,`` marks (mid-dots already turned into ``.``).
    mark : {"point", "comma", None}
        The decimal mark decided for the line or file; it only settles ambiguous bodies
        (``1,234``). ``None`` reads them with a thousands separator.
    """
    if not body or not _BODY.fullmatch(body) or not any(c.isdigit() for c in body):
        return Digits(None, reason="not a number")
    if body[0] in ".,":
        body = "0" + body
    has_point = "." in body
    has_comma = "," in body
    if not has_point and not has_comma:
        return _finite(Digits(float(body), body.lstrip("0") or "0", 0, "int"))
    if has_point and has_comma:
        if _COMMA_THEN_POINT.fullmatch(body):
            whole, frac = body.replace(",", "").split(".")
            return _decimal(whole, frac, "thousands")
        if _POINT_THEN_COMMA.fullmatch(body):
            whole, frac = body.replace(".", "").split(",")
            return _decimal(whole, frac, "thousands")
        return Digits(None, reason="mixes '.' and ',' in a way that is not a number")
    sep = "," if has_comma else "."
    if body.count(sep) == 1:
        whole, frac = body.split(sep)
        ambiguous = bool((_AMBIG_COMMA if has_comma else _AMBIG_POINT).fullmatch(body))
        if not ambiguous:
            return _decimal(whole, frac, "decimal")
        # 1,234 or 1.234: a decimal if the line's mark is this separator, else thousands.
        as_decimal = (mark == COMMA) if has_comma else (mark != COMMA)
        if as_decimal:
            return _decimal(whole, frac, "decimal", ambiguous=True)
        return _finite(Digits(float(whole + frac), whole + frac, 0, "thousands", ambiguous=True))
    pattern = _THOUSANDS_COMMA if has_comma else _THOUSANDS_POINT
    if pattern.fullmatch(body):
        digits = body.replace(sep, "")
        return _finite(Digits(float(digits), digits.lstrip("0") or "0", 0, "thousands"))
    return Digits(None, reason=f"has more than one '{sep}' but is not a thousands-grouped number")


def _decimal(whole: str, frac: str, kind: str, *, ambiguous: bool = False) -> Digits:
    whole = whole.lstrip("0") or "0"
    canonical = f"{whole}.{frac}"
    return _finite(Digits(float(canonical), canonical, len(frac), kind, ambiguous))


#: Why a number is refused when it is beyond the range of floating point (about 1.8e308).
TOO_LARGE = "too large to be used as a number"


def _finite(d: Digits) -> Digits:
    """Refuse a reading that overflowed to infinity (a 400-digit number, say).

    Infinity would pass into a saved project, which could then not be opened again.
    """
    if d.value is not None and not math.isfinite(d.value):
        return Digits(None, reason=TOO_LARGE)
    return d


def split_list(body: str) -> list[str] | None:
    """Split ``0.61,1.10`` (numbers run together with commas) into its parts.

    Only bodies that cannot be a single number are split, and only when every part is
    a plain point-decimal number or integer. Returns None when the body is not such a list.
    """
    if "," not in body or mark_evidence(body) is not None or read_digits(body).value is not None:
        return None
    parts = body.split(",")
    if len(parts) < 2 or not all(_PLAIN_POINT.fullmatch(p) for p in parts):
        return None
    return parts


# -- single cells ---------------------------------------------------------------------


@dataclass(frozen=True, slots=True)
class NumberReading:
    """The reading of one cell or token.

    ``value`` is None when the text is blank (``blank`` True) or could not be read
    (``reason`` says why). ``canonical`` is the number as printed, with "." as the
    decimal mark and no separators or footnotes, so that the printed decimals survive.
    """

    text: str
    value: float | None = None
    canonical: str = ""
    decimals: int | None = None
    blank: bool = False
    reason: str = ""
    #: True when a trailing "%" was removed
    percent: bool = False
    #: True where the text could be read two ways and the decimal mark settled it
    ambiguous: bool = False
    #: plain-English notes on what was done ("footnote mark '†' removed", ...)
    notes: tuple[str, ...] = ()

    @property
    def ok(self) -> bool:
        return self.value is not None


_CELL_SPACE_THOUSANDS = re.compile(r"[0-9]{1,3}(?: [0-9]{3})+(?:[.,][0-9]+)?")
_EXPONENT = re.compile(r"([0-9.,]*[0-9])[eE]([+-]?[0-9]{1,3})")


def parse_number(text: str | None, decimal: str | None = None) -> NumberReading:
    """Read one cell as a number, the way a careful person would.

    Parameters
    ----------
    text : str or None
        The cell text, e.g. ``"−0.35"``, ``"0·70¹"``, ``"0,82"``, ``"1 234"``, ``"0.82a"``,
        ``"12.3%"``, ``"1.2×10⁻⁵"``.
    decimal : {"point", "comma", None}
        The decimal mark decided for the file; it settles ``1,234``-like text only.

    Returns
    -------
    NumberReading
        Never raises. ``value`` is None with ``blank=True`` for empty text, or with a
        ``reason`` for text that is not a number.
    """
    if text is None:
        return NumberReading("", blank=True)
    original = text
    cleaned = clean_text(text)
    notes: list[str] = []
    if cleaned.footnotes:
        notes.append(f"footnote mark {' '.join(repr(m) for m in cleaned.footnotes)} removed")
    s = cleaned.text.strip()
    if not s:
        if cleaned.footnotes:
            return NumberReading(original, reason="only a footnote mark, no number")
        return NumberReading(original, blank=True)
    if s.casefold() in MISSING_WORDS:
        return NumberReading(original, blank=True, notes=(f"'{s}' read as not reported",))
    percent = False
    if s.endswith("%"):
        percent = True
        s = s[:-1].rstrip()
        if not s:
            return NumberReading(original, reason="a percent sign without a number")
    sign = ""
    if s[0] in DASHES:
        if s[0] != "-":
            notes.append(f"'{s[0]}' read as a minus sign")
        sign = "-"
        s = s[1:].lstrip()
    elif s[0] == "+":
        s = s[1:].lstrip()
    # a single lower-case letter glued after the digits is a footnote ("0.82a")
    if len(s) >= 2 and s[-1].isalpha() and s[-1].islower() and s[-2].isdigit():
        notes.append(f"footnote letter '{s[-1]}' removed")
        s = s[:-1]
    for dot in MID_DOTS:
        if dot in s:
            s = s.replace(dot, ".")
            notes.append("mid-dot read as a decimal point")
    if " " in s:
        if _CELL_SPACE_THOUSANDS.fullmatch(s):
            s = s.replace(" ", "")
            notes.append("spaces read as thousands separators")
        else:
            return NumberReading(original, reason="has a space inside it", notes=tuple(notes))
    if cleaned.thousands_spaces:
        notes.append("spaces read as thousands separators")
    exponent = ""
    m = _EXPONENT.fullmatch(s)
    if m:
        s, exponent = m.group(1), m.group(2)
    digits = read_digits(s, decimal)
    if digits.value is None:
        return NumberReading(original, reason=digits.reason, notes=tuple(notes))
    canonical = sign + digits.canonical
    value = float(canonical + (f"e{exponent}" if exponent else ""))
    if not math.isfinite(value):
        return NumberReading(original, reason=TOO_LARGE, notes=tuple(notes))
    if exponent:
        canonical = f"{canonical}e{exponent}"
    if value == 0.0:
        value = 0.0  # no negative zero
    if digits.kind == "thousands":
        notes.append(f"'{s}' read as {digits.canonical} (thousands separator)")
    elif digits.kind == "decimal" and "," in s:
        notes.append("decimal comma")
    return NumberReading(
        original,
        value,
        canonical,
        digits.decimals,
        percent=percent,
        ambiguous=digits.ambiguous,
        notes=tuple(notes),
    )


def shown_decimals(value: float) -> int | None:
    """Decimals a stored value shows (0.5 -> 1, 0.823 -> 3, 5.0 -> 0; None in exponent
    form or not finite)."""
    r = repr(float(value))
    if "e" in r or "inf" in r or "nan" in r:
        return None
    return len((r.split(".")[1] if "." in r else "").rstrip("0"))


def interval_decimals(
    values: tuple[float, float, float], texts: tuple[str | None, str | None, str | None]
) -> tuple[int, int, int]:
    """Decimals printed for an estimate and its two limits (the rounding tolerance of the
    interval checks).

    Each printed text counts where the reader kept it (:func:`count_decimals`). When none
    of the three was kept (a typed, saved or scripted row), the row is read as a whole: a
    forest table prints an estimate and its limits to the same decimals, so when all three
    show at most one decimal ("0.9 (0.6 to 1.4)"; "5 (2 to 8)") that is taken as the
    printed precision. A row printed to two decimals whose three values all end in 0
    ("0.90 (0.60 to 1.40)") is then read with the wider tolerance: about one row in a
    thousand, against a false "check for a typo" on every row of a paper that prints one
    decimal, which two assumed decimals gave (seen on 2026-12-03 with OR 0.9 (0.6 to
    1.4): symmetric on the log scale within one decimal, not within two).
    """
    if any(texts):
        return tuple(count_decimals(t, v) for t, v in zip(texts, values, strict=True))  # type: ignore[return-value]
    shown = [shown_decimals(v) for v in values]
    if all(d is not None for d in shown) and max(shown) < 2:  # type: ignore[type-var]
        d = max(shown)  # type: ignore[type-var]
        return d, d, d
    return tuple(count_decimals(None, v) for v in values)  # type: ignore[return-value]


def count_decimals(text: str | None, value: float | None = None, default: int = 2) -> int:
    """Number of decimals printed, for the rounding tolerance of the row checks.

    Parameters
    ----------
    text : str or None
        The number as printed (or its canonical form). Counted when readable.
    value : float or None
        Used when no text is available. A stored float cannot tell ``0.5`` from
        ``0.50``, so ``default`` is assumed, unless the value itself shows more decimals
        (up to 6: a typed 0.823 had at least three).
    default : int
        The usual two decimals of forest tables.
    """
    if text:
        reading = parse_number(text)
        if reading.ok and reading.decimals is not None and "e" not in reading.canonical:
            return reading.decimals
    if value is not None:
        r = repr(float(value))
        if "e" in r or "inf" in r or "nan" in r:
            return default
        frac = (r.split(".")[1] if "." in r else "").rstrip("0")
        return len(frac) if default < len(frac) <= 6 else default
    return default


@dataclass(frozen=True, slots=True)
class DecimalDecision:
    """The decimal mark decided for a line or a file, and the evidence for it."""

    #: "point", "comma", "mixed" (both seen) or "undecided" (nothing settles it)
    mark: str
    #: a number that settled it, for the account ("0,82")
    evidence: str = ""
    #: a number that contradicts it (for "mixed")
    counter: str = ""

    @property
    def settled(self) -> str | None:
        """``"point"``/``"comma"`` when decided, else None."""
        return self.mark if self.mark in (POINT, COMMA) else None


def decide_decimal_mark(bodies: Iterable[str]) -> DecimalDecision:
    """Decide the decimal mark from the number bodies of one line or file.

    Parameters
    ----------
    bodies : iterable of str
        Sign-free number bodies (mid-dots already read as points).
    """
    point = comma = ""
    for body in bodies:
        ev = mark_evidence(body)
        if ev == POINT and not point:
            point = body
        elif ev == COMMA and not comma:
            comma = body
        if point and comma:
            return DecimalDecision("mixed", point, comma)
    if comma:
        return DecimalDecision(COMMA, comma)
    if point:
        return DecimalDecision(POINT, point)
    return DecimalDecision("undecided")


def number_body(text: str) -> str:
    """The sign-free body of a cell for :func:`decide_decimal_mark` (best effort)."""
    s = clean_text(text).text.strip().rstrip("%").strip()
    if s and (s[0] in DASHES or s[0] == "+"):
        s = s[1:]
    for dot in MID_DOTS:
        s = s.replace(dot, ".")
    s = s.replace(" ", "")
    if len(s) >= 2 and s[-1].isalpha() and s[-2].isdigit():
        s = s[:-1]
    return s
