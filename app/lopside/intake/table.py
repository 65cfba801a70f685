"""Reading and writing study tables (CSV and XLSX) with the DESIGN.md section 3 columns.

Design invariants
-----------------
* Header names are matched case-insensitively in any order ("Int events" and
  "INT_EVENTS" both mean ``int_events``); blank cells are missing values; columns we do
  not know are reported and ignored.
* A cell that cannot be read is never dropped: its text goes into ``StudyRow.unread``
  and a :class:`~lopside.intake.checks.Problem` names the spreadsheet row and column.
* :class:`~lopside.intake.errors.IntakeError` is raised only for a file that cannot be
  read as a table at all (missing, not CSV/XLSX, no column names, broken quoting...).
* XLSX files are opened read-only with cached values: formulas are never run. A formula
  cell without a saved result is reported and its formula text kept.
* Numbers follow :mod:`lopside.intake.numbers`; the decimal mark is decided once per file
  from the cells themselves and reported.
* :func:`write_table_csv` writes text cells that start with ``= + - @`` (or a tab or a
  carriage return) with a leading quote, so that a spreadsheet shows them as text
  instead of running them; numbers are written as numbers. :func:`read_table` removes
  such a quote again.
"""

from __future__ import annotations

import csv
import io
import math
import os
import re
import stat
import tempfile
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path

from lopside.intake import messages as M
from lopside.intake.checks import ERROR, WARNING, Problem
from lopside.intake.errors import IntakeError
from lopside.intake.numbers import decide_decimal_mark, number_body, parse_number, read_digits
from lopside.model.review import (
    NUMERIC_FIELDS,
    TABLE_COLUMNS,
    IntakeAccount,
    NotRead,
    StudyRow,
)

#: Limits that keep a hostile or mistaken file from exhausting memory or time.
MAX_TABLE_BYTES = 50 * 1024 * 1024
#: total unpacked size of an XLSX (a zip bomb unpacks to gigabytes)
MAX_XLSX_UNPACKED = 400 * 1024 * 1024
#: the most studies a review holds (as in the project file)
MAX_TABLE_STUDIES = 20_000
#: rows read in all, blank ones included
MAX_TABLE_ROWS = 50_000
#: cells in one row (a study table has some twenty columns; a spreadsheet at most 16,384)
MAX_ROW_CELLS = 16_384
#: cells in all
MAX_TABLE_CELLS = 4_000_000

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
_MERGE_RE = re.compile(rb'<mergeCell ref="([A-Z]{1,3}[0-9]{1,7}:[A-Z]{1,3}[0-9]{1,7})"')
_DELIMITER_NAMES = {",": "commas", ";": "semicolons", "\t": "tabs"}
_PLAIN_NUMBER = re.compile(r"-?[0-9]+(?:\.[0-9]+)?")


@dataclass(frozen=True, slots=True)
class TableResult:
    """What was read from a study table.

    ``row_numbers[i]`` is the spreadsheet row of ``rows[i]`` (the header row is row 1
    when it is the first row). ``problems`` are cells that could not be read (their
    ``row`` is the index into ``rows``; the message names the spreadsheet row).
    ``printed[i]`` maps fields of ``rows[i]`` to numbers as printed, for the rounding
    tolerance of the row checks. ``notes`` says what was decided on the way (encoding,
    delimiter, decimal mark, columns ignored, formulas, merged cells).
    """

    path: str
    kind: str
    rows: tuple[StudyRow, ...]
    row_numbers: tuple[int, ...]
    problems: tuple[Problem, ...]
    notes: tuple[str, ...]
    columns: tuple[str, ...]
    unknown_columns: tuple[str, ...]
    printed: tuple[tuple[tuple[str, str], ...], ...]
    decimal_mark: str
    #: what was not read (unused columns with data, extra cells, unreadable cells)
    not_read: tuple[NotRead, ...] = ()
    #: "evidence" (a cell such as 0,82 settled it), "option" (the caller chose) or ""
    decimal_how: str = ""
    decimal_evidence: str = ""
    #: (spreadsheet row, text) of numbers nothing settled the decimal mark of ("1,105")
    undecided: tuple[tuple[int, str], ...] = ()
    #: "lower"/"higher" from a favours column or a "# favours: higher" line, else ""
    favours: str = ""
    #: a measure named by a column ("OR" for a column called "or"), else None
    measure_hint: str | None = None

    def intake_account(self, measure_how: str = "") -> IntakeAccount:
        """What this table adds to a review's intake account."""
        return IntakeAccount(
            source=Path(self.path).name,
            not_read=self.not_read,
            decimal_mark=self.decimal_mark,
            decimal_how=self.decimal_how if self.decimal_mark else "",
            decimal_evidence=self.decimal_evidence,
            measure_how=measure_how,
            rows_at=tuple(
                (r.study, f"spreadsheet row {n}") for r, n in zip(self.rows, self.row_numbers)
            ),
        )

    def printed_dicts(self) -> list[dict[str, str]]:
        """``printed`` as one dict per row (the form :func:`check_rows` takes)."""
        return [dict(p) for p in self.printed]

    def account(self) -> str:
        """A readable summary: what was read, what was decided, what needs fixing."""
        name = Path(self.path).name
        out = [f"{name}: {len(self.rows)} stud{'y' if len(self.rows) == 1 else 'ies'} read."]
        out += [f"- {n}" for n in self.notes]
        out += [f"! {p.message}" for p in self.problems]
        return "\n".join(out)


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
class _Cell:
    """One cell as found in the file, before reading."""

    value: object  # str, int, float, bool, None, or other (dates...)
    coordinate: str = ""
    decimals: int | None = None  # from an XLSX number format such as 0.00
    formula: str | None = None  # XLSX formula text when the cell holds one


@dataclass(slots=True)
class _Sheet:
    """Rows of cells with their spreadsheet row numbers, and what the file told us."""

    rows: list[tuple[int, list[_Cell]]]
    notes: list[str]
    problems_by_cell: dict[str, str]
    kind: str


# -- CSV ------------------------------------------------------------------------------


def _decode(data: bytes, notes: list[str]) -> str:
    if data.startswith(b"\xef\xbb\xbf"):
        notes.append(M.table_message("note_bom"))
        data = data[3:]
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError:
        pass
    try:
        text = data.decode("cp1252")
        notes.append(M.table_message("note_encoding", encoding="Windows-1252 (cp1252)"))
        return text
    except UnicodeDecodeError:
        notes.append(M.table_message("note_encoding", encoding="Latin-1 (ISO-8859-1)"))
        return data.decode("latin-1")


def _sniff_delimiter(text: str) -> str:
    """The delimiter of the header line: the most frequent of , ; tab outside quotes."""
    first = ""
    for line in text.splitlines():
        if line.strip():
            first = line
            break
    counts = {",": 0, ";": 0, "\t": 0}
    quoted = False
    for ch in first:
        if ch == '"':
            quoted = not quoted
        elif not quoted and ch in counts:
            counts[ch] += 1
    best = max(counts, key=lambda d: (counts[d], d == ","))
    return best if counts[best] else ","


def _check_file(path: Path) -> int:
    """Refuse what is not a regular file, or is too large; return the size in bytes."""
    try:
        info = path.stat()
    except OSError as exc:
        raise IntakeError(
            M.table_message("unreadable", error=exc.strerror or exc), path=path
        ) from exc
    if not stat.S_ISREG(info.st_mode):
        # a folder, a pipe or a device: reading /dev/zero or a FIFO would never end
        raise IntakeError(M.table_message("not_a_file"), path=path)
    if info.st_size > MAX_TABLE_BYTES:
        raise IntakeError(
            M.table_message("too_big", limit=f"{MAX_TABLE_BYTES / 2**20:.0f}"),
            path=path,
        )
    return info.st_size


def _check_rows(path: Path, number: int, cells: int, studies: int, total: int) -> None:
    """Stop reading a table with more (or wider) rows than a study table can have.

    ``number`` is the spreadsheet row, ``cells`` its width, ``studies`` the rows with
    content so far (header included) and ``total`` the cells so far.
    """
    if cells > MAX_ROW_CELLS:
        raise IntakeError(
            M.table_message("too_many_cells", count=cells, limit=MAX_ROW_CELLS),
            path=path,
            row=number,
        )
    if number > MAX_TABLE_ROWS:
        raise IntakeError(M.table_message("too_many_rows", limit=MAX_TABLE_ROWS), path=path)
    if studies > MAX_TABLE_STUDIES + 1:
        raise IntakeError(
            M.table_message("too_many_studies", limit=MAX_TABLE_STUDIES), path=path, row=number
        )
    if total > MAX_TABLE_CELLS:
        raise IntakeError(
            M.table_message("too_many_cells_total", limit=MAX_TABLE_CELLS), path=path, row=number
        )


def _read_csv(path: Path) -> _Sheet:
    notes: list[str] = []
    _check_file(path)
    try:
        data = path.read_bytes()
    except OSError as exc:
        raise IntakeError(
            M.table_message("unreadable", error=exc.strerror or exc), path=path
        ) from exc
    text = _decode(data, notes)
    if not text.strip():
        raise IntakeError(M.table_message("empty"), path=path)
    delimiter = _sniff_delimiter(text)
    notes.append(M.table_message("note_delimiter", name=_DELIMITER_NAMES[delimiter]))
    reader = csv.reader(io.StringIO(text, newline=""), delimiter=delimiter)
    rows: list[tuple[int, list[_Cell]]] = []
    number = 0
    filled = 0  # rows with content (the header counts: hence MAX_TABLE_STUDIES + 1)
    total = 0
    while True:
        try:
            record = next(reader)
        except StopIteration:
            break
        except csv.Error as exc:
            raise IntakeError(
                M.table_message("csv_error", error=exc), path=path, row=number + 1
            ) from exc
        number += 1
        if any(v.strip() for v in record):
            filled += 1
        total += len(record)
        _check_rows(path, number, len(record), filled, total)
        rows.append((number, [_Cell(v, "") for v in record]))
    return _Sheet(rows, notes, {}, "csv")


# -- XLSX -----------------------------------------------------------------------------


def _format_decimals(fmt: object) -> int | None:
    if not isinstance(fmt, str):
        return None
    m = re.search(r"0\.(0+)", fmt)
    if m:
        return len(m.group(1))
    if re.fullmatch(r"[#,]*0", fmt):
        return 0
    return None


def _merged_ranges(path: Path, sheet_path: str | None) -> list[str]:
    """Merged-cell ranges of a sheet, from its XML (read-only sheets do not give them)."""
    import zipfile

    if not sheet_path:
        return []
    try:
        with zipfile.ZipFile(path) as zf:
            data = zf.read(sheet_path.lstrip("/"))
    except (KeyError, OSError, zipfile.BadZipFile):
        return []
    return [m.decode("ascii") for m in _MERGE_RE.findall(data)]


def _check_unpacked(path: Path) -> None:
    """Refuse a workbook whose parts unpack to more than :data:`MAX_XLSX_UNPACKED`."""
    import zipfile

    try:
        with zipfile.ZipFile(path) as zf:
            total = sum(max(0, i.file_size) for i in zf.infolist())
    except (OSError, zipfile.BadZipFile, ValueError) as exc:
        raise IntakeError(M.table_message("bad_xlsx", error=type(exc).__name__), path=path) from exc
    if total > MAX_XLSX_UNPACKED:
        raise IntakeError(
            M.table_message(
                "xlsx_too_big", size=f"{total / 1e6:.0f}", limit=f"{MAX_XLSX_UNPACKED / 1e6:.0f}"
            ),
            path=path,
        )


def _read_xlsx(path: Path) -> _Sheet:
    try:
        import openpyxl
        from openpyxl.utils.cell import get_column_letter, range_boundaries
    except ImportError as exc:  # pragma: no cover - openpyxl is a declared dependency
        raise IntakeError(
            M.table_message("bad_xlsx", error="openpyxl is missing"), path=path
        ) from exc
    notes: list[str] = []
    _check_file(path)
    _check_unpacked(path)
    try:
        wb_values = openpyxl.load_workbook(path, read_only=True, data_only=True)
        wb_formulas = openpyxl.load_workbook(path, read_only=True, data_only=False)
    except Exception as exc:  # noqa: BLE001 - any failure means "not a readable workbook"
        raise IntakeError(M.table_message("bad_xlsx", error=type(exc).__name__), path=path) from exc
    try:
        if not wb_values.worksheets:
            raise IntakeError(M.table_message("empty"), path=path)
        ws = wb_values.worksheets[0]
        wsf = wb_formulas.worksheets[0]
        if len(wb_values.worksheets) > 1:
            notes.append(
                M.table_message("note_sheet", title=ws.title, count=len(wb_values.worksheets))
            )
        grid: list[tuple[int, list[_Cell]]] = []
        formula_rows = wsf.iter_rows(min_row=1, values_only=True)
        n_formulas = 0
        filled = total = 0
        rows_iter = ws.iter_rows(min_row=1)
        number = 0
        while True:
            # the sheet XML is parsed while iterating: a damaged or hostile sheet (bad
            # XML, entity declarations...) fails here, after the workbook opened
            try:
                cells = next(rows_iter, None)
                if cells is None:
                    break
                formulas = next(formula_rows, ())
            except Exception as exc:  # noqa: BLE001 - any failure means "not readable"
                raise IntakeError(
                    M.table_message("bad_xlsx", error=type(exc).__name__), path=path
                ) from exc
            number += 1
            if any(not _is_blank(getattr(c, "value", None)) for c in cells):
                filled += 1
            total += len(cells)
            _check_rows(path, number, len(cells), filled, total)
            row: list[_Cell] = []
            for col, cell in enumerate(cells, start=1):
                value = getattr(cell, "value", None)
                coordinate = f"{get_column_letter(col)}{number}"
                fcell = formulas[col - 1] if col - 1 < len(formulas) else None
                formula = None
                if isinstance(fcell, str) and fcell.startswith("="):
                    formula = fcell
                elif fcell is not None and type(fcell).__name__ in (
                    "ArrayFormula",
                    "DataTableFormula",
                ):
                    formula = str(getattr(fcell, "text", fcell))
                if formula is not None:
                    n_formulas += 1
                decimals = _format_decimals(getattr(cell, "number_format", None))
                row.append(_Cell(value, coordinate, decimals, formula))
            grid.append((number, row))
        merged = _merged_ranges(path, getattr(ws, "_worksheet_path", None))
    finally:
        wb_values.close()
        wb_formulas.close()
    if n_formulas:
        with_values = sum(
            1 for _, r in grid for c in r if c.formula is not None and c.value is not None
        )
        if with_values:
            notes.append(M.table_message("note_formulas", count=with_values))
    # merged cells: the value sits in the top-left cell; give it to every row of the range
    by_number = {n: r for n, r in grid}
    for ref in merged:
        min_col, min_row, max_col, max_row = range_boundaries(ref)
        top = by_number.get(min_row)
        if top is None or min_col - 1 >= len(top):
            continue
        value = top[min_col - 1].value
        if max_col > min_col:
            notes.append(M.table_message("note_merged_across", ref=ref))
        if max_row > min_row and value is not None:
            for r in range(min_row + 1, max_row + 1):
                cells = by_number.get(r)
                if cells is None:
                    continue
                while len(cells) < min_col:
                    cells.append(_Cell(None))
                cells[min_col - 1].value = value
            notes.append(M.table_message("note_merged", ref=ref, value=value))
    return _Sheet(grid, notes, {}, "xlsx")


# -- rows -----------------------------------------------------------------------------


def _is_blank(value: object) -> bool:
    return value is None or (isinstance(value, str) and not value.strip())


#: Other names for the table's columns (normalised: lower case, "_" for spaces and dashes).
COLUMN_ALIASES: dict[str, str] = {
    "lower_ci": "lower",
    "ci_lower": "lower",
    "lower_limit": "lower",
    "lcl": "lower",
    "lci": "lower",
    "lower_95%_ci": "lower",
    "upper_ci": "upper",
    "ci_upper": "upper",
    "upper_limit": "upper",
    "ucl": "upper",
    "uci": "upper",
    "upper_95%_ci": "upper",
    "std_err": "se",
    "standard_error": "se",
}
#: A column named after a measure holds the estimates (and names the measure).
MEASURE_COLUMNS: dict[str, str] = {
    "or": "OR",
    "odds_ratio": "OR",
    "rr": "RR",
    "risk_ratio": "RR",
    "hr": "HR",
    "hazard_ratio": "HR",
    "rd": "RD",
    "risk_difference": "RD",
    "md": "MD",
    "mean_difference": "MD",
    "smd": "SMD",
}
#: A column (or a first "# favours: higher" line) saying which direction favours the
#: intervention; the same value on every row.
FAVOURS_COLUMN = "favours"
_FAVOURS_LINE = re.compile(r"#\s*favou?rs\s*[:=]?\s*(lower|higher)\b", re.IGNORECASE)


def read_table(
    path: str | os.PathLike[str], measure: str | None = None, decimal: str | None = None
) -> TableResult:
    """Read a CSV or XLSX study table.

    Parameters
    ----------
    path : str or path-like
        A ``.csv``/``.tsv`` file (comma, semicolon or tab separated; UTF-8 with or
        without BOM, else Windows-1252/Latin-1) or an ``.xlsx`` workbook (first sheet).

    measure : str, optional
        The review's measure, for cells printed with a "%": for a risk difference
        ``5%`` is read as 0.05; for any other measure such a cell is kept as unread
        text with a message (a "%" is never stripped silently).
    decimal : {"point", "comma"}, optional
        The decimal mark the user chose, for numbers nothing in the file settles.

    Returns
    -------
    TableResult

    Raises
    ------
    IntakeError
        When the file cannot be read as a table at all; the message names the file and,
        where known, the spreadsheet row and column.
    """
    p = Path(path)
    if not p.exists():
        raise IntakeError(M.table_message("missing_file"), path=p)
    suffix = p.suffix.casefold()
    if suffix in (".csv", ".tsv"):
        sheet = _read_csv(p)
    elif suffix in (".xlsx", ".xlsm"):
        sheet = _read_xlsx(p)
    else:
        raise IntakeError(M.table_message("unsupported", suffix=p.suffix or "(none)"), path=p)
    return _rows_from_sheet(p, sheet, measure, decimal)


def _comment(cells: list[_Cell]) -> str | None:
    """The text of a comment row ("# ..." in its first cell), else None."""
    first = next((c.value for c in cells if not _is_blank(c.value)), None)
    if isinstance(first, str) and first.strip().startswith("#"):
        return ", ".join(str(c.value).strip() for c in cells if not _is_blank(c.value))
    return None


def _rows_from_sheet(
    path: Path, sheet: _Sheet, measure: str | None = None, decimal: str | None = None
) -> TableResult:
    notes = list(sheet.notes)
    grid = sheet.rows
    favours = ""
    not_read: list[NotRead] = []
    header_at = None
    for i, (number, r) in enumerate(grid):
        if not any(not _is_blank(c.value) for c in r):
            continue
        text = _comment(r)
        if text is None:
            header_at = i
            break
        m = _FAVOURS_LINE.match(text)
        if m:
            favours = m.group(1).casefold()
            notes.append(M.table_message("note_favours_line", row=number, favours=favours))
        else:
            not_read.append(NotRead("row", f"row {number}", text, M.table_message("comment_row")))
    if header_at is None:
        raise IntakeError(M.table_message("empty"), path=path)
    header_number, header = grid[header_at]
    known = set(TABLE_COLUMNS)
    columns: dict[int, str] = {}
    unknown: list[str] = []
    unknown_at: dict[int, str] = {}
    first_at: dict[str, int] = {}
    favours_col: int | None = None
    measure_hint: str | None = None
    for col, cell in enumerate(header, start=1):
        given = "" if cell.value is None else str(cell.value)
        name = _normalise_name(given)
        if not name:
            continue
        if name == FAVOURS_COLUMN:
            favours_col = col
            continue
        if name in MEASURE_COLUMNS and "estimate" not in first_at:
            measure_hint = measure_hint or MEASURE_COLUMNS[name]
            name = "estimate"
        name = COLUMN_ALIASES.get(name, name)
        if name in known:
            if name in first_at:
                raise IntakeError(
                    M.table_message(
                        "duplicate_column", name=name, first=first_at[name], second=col
                    ),
                    path=path,
                    row=header_number,
                    field=name,
                )
            first_at[name] = col
            columns[col] = name
            if given.strip().replace("\ufeff", "").casefold() != name:
                notes.append(M.table_message("note_renamed_column", given=given.strip(), name=name))
        else:
            unknown.append(given.strip())
            unknown_at[col] = given.strip()
    if not columns:
        raise IntakeError(
            M.table_message(
                "no_known_columns",
                names=", ".join(repr(u) for u in unknown) or "none",
                expected=", ".join(TABLE_COLUMNS),
            ),
            path=path,
            row=header_number,
        )
    if unknown:
        notes.append(M.table_message("note_unknown_columns", names=", ".join(unknown)))
    n_header = len(header)

    # decide the decimal mark once for the file, from the numeric cells that are text
    bodies: list[str] = []
    for _, cells in grid[header_at + 1 :]:
        for col, name in columns.items():
            if name in NUMERIC_FIELDS and col - 1 < len(cells):
                v = cells[col - 1].value
                if isinstance(v, str) and v.strip():
                    bodies.append(number_body(_unquote(v.strip())[0]))
    decision = decide_decimal_mark(bodies)
    mark: str | None = decision.settled
    decimal_how = "evidence" if mark else ""
    if mark is None and decimal in ("point", "comma"):
        mark, decimal_how = decimal, "option"
        notes.append(M.table_message("note_decimal_option", mark=mark))
    if decision.mark == "mixed":
        notes.append(
            M.table_message("note_decimal_mixed", point=decision.evidence, comma=decision.counter)
        )
    elif mark is not None and decimal_how == "evidence":
        notes.append(M.table_message("note_decimal", mark=mark, evidence=decision.evidence))
    undecided: list[tuple[int, str]] = []
    favours_seen: dict[str, int] = {}

    rows: list[StudyRow] = []
    unknown_with_data: dict[str, list[str]] = {}
    numbers: list[int] = []
    printed_all: list[tuple[tuple[str, str], ...]] = []
    problems: list[Problem] = []
    blank_rows = 0
    for number, cells in grid[header_at + 1 :]:
        if all(_is_blank(c.value) for c in cells):
            blank_rows += 1
            continue
        values: dict[str, object] = {}
        unread: list[tuple[str, str]] = []
        printed: list[tuple[str, str]] = []
        row_problems: list[tuple[str, str, str]] = []  # (field, severity, message)
        for col, name in columns.items():
            cell = cells[col - 1] if col - 1 < len(cells) else _Cell(None)
            _read_cell(
                cell, name, number, mark, values, unread, printed, row_problems, notes, measure
            )
            if mark is None and isinstance(cell.value, str) and name in NUMERIC_FIELDS:
                body = number_body(_unquote(cell.value.strip())[0])
                if read_digits(body).ambiguous:
                    undecided.append((number, cell.value.strip()))
        if favours_col is not None and favours_col - 1 < len(cells):
            fv = cells[favours_col - 1].value
            if not _is_blank(fv):
                word = str(fv).strip().casefold()
                if word in ("lower", "higher"):
                    favours_seen.setdefault(word, number)
                else:
                    not_read.append(
                        NotRead(
                            "cells",
                            f"row {number}, column 'favours'",
                            str(fv),
                            M.table_message("favours_value"),
                        )
                    )
        for col, given in unknown_at.items():
            if col - 1 < len(cells) and not _is_blank(cells[col - 1].value):
                unknown_with_data.setdefault(given, []).append(str(cells[col - 1].value))
        for fld, text in unread:
            not_read.append(
                NotRead("cells", f"row {number}, column '{fld}'", text, M.table_message("not_used"))
            )
        extra = [c for c in cells[n_header:] if not _is_blank(c.value)]
        if extra:
            not_read.append(
                NotRead(
                    "cells",
                    f"row {number}",
                    ", ".join(str(c.value) for c in extra),
                    M.table_message("extra_reason", count=len(extra)),
                )
            )
        unknown_data = [
            c
            for i, c in enumerate(cells[:n_header], start=1)
            if i not in columns and not _is_blank(c.value)
        ]
        if not values and not unread and not row_problems:
            if not extra and not unknown_data:
                blank_rows += 1
                continue
        if extra:
            row_problems.append(
                (
                    "",
                    WARNING,
                    M.table_message(
                        "extra_cells",
                        count=len(extra),
                        cells="', '".join(str(c.value) for c in extra),
                    ),
                )
            )
        row = StudyRow(unread=tuple(unread), **values)  # type: ignore[arg-type]
        index = len(rows)
        rows.append(row)
        numbers.append(number)
        printed_all.append(tuple(printed))
        for fld, severity, message in row_problems:
            where = f"{path.name} row {number}" + (f" ({row.study})" if row.study else "")
            where += f", {fld}: " if fld else ": "
            problems.append(Problem(index, row.study, fld, severity, where + message, "table"))
    if blank_rows:
        notes.append(M.table_message("note_blank_rows", count=blank_rows))
    for given, values_seen in unknown_with_data.items():
        shown = ", ".join(values_seen[:3]) + (", ..." if len(values_seen) > 3 else "")
        not_read.insert(
            0,
            NotRead(
                "column",
                f"column '{given}'",
                shown,
                M.table_message("unknown_column_reason", count=len(values_seen)),
            ),
        )
    if len(favours_seen) > 1:
        raise IntakeError(
            M.table_message("favours_mixed", rows=", ".join(str(r) for r in favours_seen.values())),
            path=path,
            field=FAVOURS_COLUMN,
        )
    if favours_seen:
        col_favours = next(iter(favours_seen))
        if favours and favours != col_favours:
            raise IntakeError(
                M.table_message(
                    "favours_mixed",
                    rows=f"the '# favours' line and row {favours_seen[col_favours]}",
                ),
                path=path,
                field=FAVOURS_COLUMN,
            )
        favours = col_favours
    return TableResult(
        str(path),
        sheet.kind,
        tuple(rows),
        tuple(numbers),
        tuple(problems),
        tuple(notes),
        tuple(columns[c] for c in sorted(columns)),
        tuple(unknown),
        tuple(printed_all),
        mark or "",
        tuple(not_read),
        decimal_how if mark else "",
        decision.evidence if decimal_how == "evidence" else "",
        tuple(undecided),
        favours,
        measure_hint,
    )


def _read_cell(
    cell: _Cell,
    name: str,
    number: int,
    mark: str | None,
    values: dict[str, object],
    unread: list[tuple[str, str]],
    printed: list[tuple[str, str]],
    problems: list[tuple[str, str, str]],
    notes: list[str],
    measure: str | None = None,
) -> None:
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
        if isinstance(value, bool):
            unread.append((name, str(value)))
            problems.append(
                (name, ERROR, M.table_message("unread_cell", text=value, what="a number"))
            )
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
                        notes.append(
                            M.table_message("note_cell", row=number, field=name, note=note)
                        )
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
            problems.append(
                (name, ERROR, M.table_message("unread_cell", text=value, what="a number"))
            )
        return
    if name == "year":
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
        if (
            as_number.ok
            and as_number.value == int(as_number.value)
            and 1800 <= as_number.value < 2100
        ):
            values["year"] = int(as_number.value)
            return
        unread.append(("year", year_text))
        problems.append(
            ("year", ERROR, M.table_message("unread_cell", text=year_text, what="a year"))
        )
        return
    if name == "reported":
        if isinstance(value, bool):
            values["reported"] = value
            return
        token = (text if isinstance(value, str) else str(value)).strip().casefold()
        if isinstance(value, (int, float)) and float(value) in (0.0, 1.0):
            values["reported"] = float(value) == 1.0
        elif token in _REPORTED_YES:
            values["reported"] = True
        elif token in _REPORTED_NO:
            values["reported"] = False
        else:
            shown = text if isinstance(value, str) else str(value)
            unread.append(("reported", shown))
            problems.append(
                ("reported", ERROR, M.table_message("unread_cell", text=shown, what="yes or no"))
            )
        return
    if name == "exclude":
        if isinstance(value, bool):
            values["exclude"] = value
            return
        token = (text if isinstance(value, str) else str(value)).strip().casefold()
        if isinstance(value, (int, float)) and float(value) in (0.0, 1.0):
            values["exclude"] = float(value) == 1.0
            return
        if token in _YES:
            values["exclude"] = True
        elif token in _NO:
            values["exclude"] = False
        else:
            shown = text if isinstance(value, str) else str(value)
            unread.append(("exclude", shown))
            problems.append(
                ("exclude", ERROR, M.table_message("unread_cell", text=shown, what="yes or no"))
            )
        return
    # text columns
    shown = text if isinstance(value, str) else _plain(value)
    if name == "risk_of_bias":
        shown = shown.casefold()
    values[name] = shown


def _plain(value: object) -> str:
    if isinstance(value, float) and math.isfinite(value) and value == int(value):
        return str(int(value))
    return str(value)


# -- writing --------------------------------------------------------------------------


def _neutralise(text: str) -> str:
    """Quote text a spreadsheet would run as a formula (=, +, -, @, tab, CR first).

    Text that already looks quoted ("'=x", typed so) gets a second quote, so that
    :func:`read_table`, which removes one, gives back exactly what was typed.
    """
    return spreadsheet_safe(text)


def _number_text(value: float) -> str:
    if value == int(value) and abs(value) < 1e15:
        return str(int(value))
    return repr(float(value))


def write_table_csv(
    rows: Iterable[StudyRow],
    path: str | os.PathLike[str],
    *,
    printed: Sequence[Mapping[str, str]] | None = None,
) -> None:
    """Write study rows as a CSV study table (DESIGN.md section 3 columns).

    Parameters
    ----------
    rows : iterable of StudyRow
    path : str or path-like
        Written atomically (a temporary file in the same folder, then renamed).
    printed : sequence of mappings, optional
        Numbers as printed per row (keeps "1.10" rather than "1.1").

    Notes
    -----
    Text cells starting with ``= + - @`` (or tab/CR) get a leading single quote so a
    spreadsheet does not run them; numbers (including negative ones) are written as
    plain numbers. Unread text kept in ``StudyRow.unread`` is written in its column,
    so nothing typed is lost. The file is UTF-8 with a byte-order mark, which common
    spreadsheet programs need to show accented labels correctly.
    """
    target = Path(path)
    buffer = io.StringIO(newline="")
    writer = csv.writer(buffer, lineterminator="\r\n")
    writer.writerow(TABLE_COLUMNS)
    for i, row in enumerate(rows):
        pr = printed[i] if printed is not None and i < len(printed) else {}
        unread = row.unread_dict()
        out: list[str] = []
        for name in TABLE_COLUMNS:
            value = getattr(row, name)
            if name in NUMERIC_FIELDS:
                if value is None:
                    out.append(_neutralise(unread.get(name, "")))
                else:
                    # printed text is used only when it is a plain number that reads back
                    # as the value, so that every numeric cell is a bare number literal
                    # (never a footnoted or signed text a spreadsheet might parse)
                    text = pr.get(name, "")
                    ok = bool(_PLAIN_NUMBER.fullmatch(text)) and parse_number(text).value == value
                    out.append(text if ok else _number_text(value))
            elif name == "year":
                out.append(str(value) if value is not None else _neutralise(unread.get("year", "")))
            elif name == "exclude":
                out.append("yes" if value else _neutralise(unread.get("exclude", "")))
            elif name == "reported":
                out.append("no" if not value else _neutralise(unread.get("reported", "")))
            else:
                out.append(_neutralise(value or ""))
        writer.writerow(out)
    data = buffer.getvalue().encode("utf-8-sig")
    fd, tmp = tempfile.mkstemp(prefix=".lopside-", suffix=".csv", dir=target.parent or ".")
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
        os.replace(tmp, target)
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise


__all__ = [
    "FORMULA_STARTS",
    "TableResult",
    "read_table",
    "spreadsheet_safe",
    "unquote_formula",
    "write_table_csv",
]
