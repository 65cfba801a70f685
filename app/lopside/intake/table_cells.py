"""Reading one cell of a study table: numbers (with the file's decimal mark), years,
yes/no flags and text; formula-like text quoted on the way out and unquoted on the way in.
A cell that cannot be read is never dropped: its text is kept as unread with a problem.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass

from lopside.intake import messages as M
from lopside.intake.checks import ERROR
from lopside.intake.numbers import parse_number
from lopside.intake.table_files import _Cell, _is_blank
from lopside.model.review import NUMERIC_FIELDS

#: Text that a spreadsheet would treat as a formula if written plainly (also after leading
#: spaces; U+2212 is the minus sign some spreadsheets take for "-").
FORMULA_STARTS: tuple[str, ...] = ("=", "+", "-", "\u2212", "@", "\t", "\r")


_XLSX_ERRORS = frozenset(
    {"#DIV/0!", "#N/A", "#NAME?", "#NULL!", "#NUM!", "#REF!", "#VALUE!", "#GETTING_DATA"}
)


_YES = frozenset({"yes", "y", "true", "1", "x", "excluded", "exclude"})


#: words for the ``reported`` column (a trial that never reported its results is "no")
_REPORTED_YES = frozenset({"yes", "y", "true", "1", "reported"})


_REPORTED_NO = frozenset({"no", "n", "false", "0", "not reported", "unreported", "missing"})


_NO = frozenset({"no", "n", "false", "0", "", "included", "include"})


_YEAR_RE = re.compile(r"((?:1[89]|20)[0-9]{2})([a-z]?)")


# -- helpers --------------------------------------------------------------------------


def _normalise_name(name: object) -> str:
    text = "" if name is None else str(name)
    text = text.replace("\ufeff", "").strip().strip('"').strip()
    return re.sub(r"[\s\-]+", "_", text.casefold())


def _formula_like(text: str) -> bool:
    """True when a spreadsheet could run ``text`` as a formula (also after leading spaces)."""
    return text.startswith(FORMULA_STARTS) or text.lstrip(" ").startswith(FORMULA_STARTS)


def _quoted_formula(text: str) -> bool:
    """True for quotes followed by a formula start ("'=x", "''+y"): one quote is ours."""
    rest = text.lstrip("'")
    return len(rest) < len(text) and rest[:1] != "" and _formula_like(rest)


def spreadsheet_safe(text: str) -> str:
    """``text`` as a cell no spreadsheet will run: formula-like text gets a leading quote.

    The one rule every CSV/XLSX/DOCX writer uses (DESIGN.md section 8, rule 4);
    :func:`unquote_formula` gives back exactly what was written through it.
    """
    if _formula_like(text) or _quoted_formula(text):
        return "'" + text
    return text


def unquote_formula(text: str) -> str:
    """The inverse of :func:`spreadsheet_safe`."""
    return _unquote(text)[0]


def _unquote(text: str) -> tuple[str, bool]:
    """Remove the quote that :func:`write_table_csv` puts before formula-like text."""
    if _quoted_formula(text):
        return text[1:], True
    return text, False


@dataclass(slots=True)
class _CellOut:
    """Where the cells of one row go: values by field, what could not be read (field,
    text), numbers as printed, problems (field, severity, message) and notes for the file."""

    values: dict[str, object]
    unread: list[tuple[str, str]]
    printed: list[tuple[str, str]]
    problems: list[tuple[str, str, str]]
    notes: list[str]


def _read_cell(
    cell: _Cell, name: str, number: int, mark: str | None, out: _CellOut, measure: str | None = None
) -> None:
    """Read one cell of field ``name`` (spreadsheet row ``number``) into ``out``."""
    values, unread, problems, notes = out.values, out.unread, out.problems, out.notes
    value = cell.value
    if cell.formula is not None and value is None:
        unread.append((name, cell.formula))
        problems.append(
            (name, ERROR, M.table_message("formula_no_value", cell=cell.coordinate or name))
        )
        return
    if _is_blank(value):
        return
    if isinstance(value, str):
        # the quote first: the text after it may be only a tab or a CR, which strip()
        # would remove and leave the quote behind
        text, unquoted = _unquote(value)
        text = text.strip()
        if unquoted:
            notes.append(M.table_message("note_quote_removed", row=number, field=name))
        if text in _XLSX_ERRORS:
            unread.append((name, text))
            problems.append(
                (
                    name,
                    ERROR,
                    M.table_message("error_value", cell=cell.coordinate or name, value=text),
                )
            )
            return
    else:
        text = ""

    if name in NUMERIC_FIELDS:
        _read_number_cell(cell, text, name, number, mark, measure, out)
    elif name == "year":
        _read_year_cell(value, text, number, out)
    elif name == "reported":
        _read_yes_no_cell(name, value, text, _REPORTED_YES, _REPORTED_NO, out)
    elif name == "exclude":
        _read_yes_no_cell(name, value, text, _YES, _NO, out)
    else:
        # text columns
        shown = text if isinstance(value, str) else _plain(value)
        if name == "risk_of_bias":
            shown = shown.casefold()
        values[name] = shown


def _read_number_cell(
    cell: _Cell,
    text: str,
    name: str,
    number: int,
    mark: str | None,
    measure: str | None,
    out: _CellOut,
) -> None:
    """A numeric field: a spreadsheet number as it is, text read with the file's mark."""
    values, unread, printed = out.values, out.unread, out.printed
    problems, notes = out.problems, out.notes
    value = cell.value
    if isinstance(value, bool):
        unread.append((name, str(value)))
        problems.append((name, ERROR, M.table_message("unread_cell", text=value, what="a number")))
    elif isinstance(value, (int, float)):
        v = float(value)
        if v != v or v in (float("inf"), float("-inf")):
            unread.append((name, str(value)))
            problems.append(
                (name, ERROR, M.table_message("unread_cell", text=value, what="a number"))
            )
            return
        values[name] = v
        if cell.decimals is not None:
            printed.append((name, f"{v:.{cell.decimals}f}"))
    elif isinstance(value, str):
        reading = parse_number(text, mark)
        if reading.ok and reading.percent and name != "level":
            # a "%" is a unit: converted where it has a meaning, refused elsewhere
            if measure == "RD" and name in ("estimate", "lower", "upper"):
                decimals = reading.decimals or 0
                as_text = f"{reading.value / 100:.{decimals + 2}f}"
                values[name] = float(as_text)
                printed.append((name, as_text))
                notes.append(
                    M.table_message(
                        "note_percent", row=number, field=name, text=text, value=as_text
                    )
                )
            else:
                unread.append((name, text))
                problems.append((name, ERROR, M.table_message("percent_cell", text=text)))
            return
        if reading.ok:
            values[name] = reading.value
            printed.append((name, reading.canonical))
            for note in reading.notes:
                if note not in ("decimal comma",):
                    notes.append(M.table_message("note_cell", row=number, field=name, note=note))
        elif not reading.blank:
            unread.append((name, text))
            problems.append(
                (name, ERROR, M.table_message("unread_cell", text=text, what="a number"))
            )
        elif reading.notes:
            notes.append(
                M.table_message("note_cell", row=number, field=name, note=reading.notes[0])
            )
    else:
        unread.append((name, str(value)))
        problems.append((name, ERROR, M.table_message("unread_cell", text=value, what="a number")))


def _read_year_cell(
    value: object,
    text: str,
    number: int,
    out: _CellOut,
) -> None:
    """The year: a whole number from 1800 to 2099, or "2004a" (the letter noted)."""
    values, unread, problems, notes = out.values, out.unread, out.problems, out.notes
    if isinstance(value, bool):
        year_text = str(value)
    elif isinstance(value, (int, float)):
        # a cached value can be infinite (an overflowing formula): int() would raise
        if math.isfinite(value) and float(value) == int(value) and 1800 <= int(value) <= 2099:
            values["year"] = int(value)
            return
        year_text = str(value)
    else:
        year_text = text if isinstance(value, str) else str(value)
    m = _YEAR_RE.fullmatch(year_text.strip().casefold())
    if m:
        values["year"] = int(m.group(1))
        if m.group(2):
            notes.append(
                M.table_message("note_year_suffix", row=number, text=year_text, year=m.group(1))
            )
        return
    as_number = parse_number(year_text)
    if as_number.ok and as_number.value == int(as_number.value) and 1800 <= as_number.value < 2100:
        values["year"] = int(as_number.value)
        return
    unread.append(("year", year_text))
    problems.append(("year", ERROR, M.table_message("unread_cell", text=year_text, what="a year")))


def _read_yes_no_cell(
    name: str,
    value: object,
    text: str,
    yes: frozenset[str],
    no: frozenset[str],
    out: _CellOut,
) -> None:
    """A yes/no column (``reported``, ``exclude``): a boolean, 0 or 1, or one of the words."""
    values, unread, problems = out.values, out.unread, out.problems
    if isinstance(value, bool):
        values[name] = value
        return
    token = (text if isinstance(value, str) else str(value)).strip().casefold()
    if isinstance(value, (int, float)) and float(value) in (0.0, 1.0):
        values[name] = float(value) == 1.0
    elif token in yes:
        values[name] = True
    elif token in no:
        values[name] = False
    else:
        shown = text if isinstance(value, str) else str(value)
        unread.append((name, shown))
        problems.append((name, ERROR, M.table_message("unread_cell", text=shown, what="yes or no")))


def _plain(value: object) -> str:
    if isinstance(value, float) and math.isfinite(value) and value == int(value):
        return str(int(value))
    return str(value)
