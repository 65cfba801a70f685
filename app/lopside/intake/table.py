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
* The file is read into cells by :mod:`.table_files` (CSV, XLSX, limits) and each cell
  by :mod:`.table_cells`; this module matches the header, reads the rows and writes CSV.
* :func:`write_table_csv` writes text cells that start with ``= + - @`` (or a tab or a
  carriage return) with a leading quote, so that a spreadsheet shows them as text
  instead of running them; numbers are written as numbers. :func:`read_table` removes
  such a quote again.
"""

from __future__ import annotations

import csv
import io
import os
import re
import tempfile
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path

from lopside.intake import messages as M
from lopside.intake.checks import WARNING, Problem
from lopside.intake.errors import IntakeError
from lopside.intake.numbers import decide_decimal_mark, number_body, parse_number, read_digits
from lopside.intake.table_cells import (
    FORMULA_STARTS,
    _CellOut,
    _normalise_name,
    _read_cell,
    _unquote,
    spreadsheet_safe,
    unquote_formula,
)
from lopside.intake.table_files import (
    MAX_ROW_CELLS,
    MAX_TABLE_BYTES,
    MAX_TABLE_CELLS,
    MAX_TABLE_ROWS,
    MAX_TABLE_STUDIES,
    MAX_XLSX_UNPACKED,
    _Cell,
    _is_blank,
    _read_csv,
    _read_xlsx,
    _Sheet,
)
from lopside.model.review import NUMERIC_FIELDS, TABLE_COLUMNS, IntakeAccount, NotRead, StudyRow

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


def _header_row(
    path: Path, grid: list, notes: list[str], not_read: list[NotRead]
) -> tuple[int, str]:
    """Index of the header row in ``grid``, after any "# ..." comment rows; and the
    direction a "# favours: lower/higher" line names ("" for none)."""
    favours = ""
    for i, (number, r) in enumerate(grid):
        if not any(not _is_blank(c.value) for c in r):
            continue
        text = _comment(r)
        if text is None:
            return i, favours
        m = _FAVOURS_LINE.match(text)
        if m:
            favours = m.group(1).casefold()
            notes.append(M.table_message("note_favours_line", row=number, favours=favours))
        else:
            not_read.append(NotRead("row", f"row {number}", text, M.table_message("comment_row")))
    raise IntakeError(M.table_message("empty"), path=path)


@dataclass(slots=True)
class _Columns:
    """What the header row says: field by column number, and the columns it does not know."""

    by_col: dict[int, str]
    unknown: list[str]
    unknown_at: dict[int, str]
    favours_col: int | None
    measure_hint: str | None
    width: int


def _header_columns(path: Path, header_number: int, header: list, notes: list[str]) -> _Columns:
    """Match the header's names to the table's fields (any case, any order, aliases)."""
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
    return _Columns(columns, unknown, unknown_at, favours_col, measure_hint, len(header))


def _file_decimal_mark(
    data_rows: list, columns: dict[int, str], decimal: str | None, notes: list[str]
):
    """The decimal mark for the whole file, decided once from the numeric cells that are
    text: (the decision, the mark or None, how it was settled)."""
    bodies: list[str] = []
    for _, cells in data_rows:
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
    return decision, mark, decimal_how


@dataclass(slots=True)
class _Read:
    """What the data rows of a table have given so far."""

    notes: list[str]
    not_read: list[NotRead]
    rows: list[StudyRow] = field(default_factory=list)
    numbers: list[int] = field(default_factory=list)
    printed_all: list[tuple[tuple[str, str], ...]] = field(default_factory=list)
    problems: list[Problem] = field(default_factory=list)
    undecided: list[tuple[int, str]] = field(default_factory=list)
    favours_seen: dict[str, int] = field(default_factory=dict)
    unknown_with_data: dict[str, list[str]] = field(default_factory=dict)
    blank_rows: int = 0


def _read_data_row(
    path: Path,
    number: int,
    cells: list,
    cols: _Columns,
    mark: str | None,
    measure: str | None,
    out: _Read,
) -> None:
    """Read one data row of the table into ``out`` (a row, or a blank row counted)."""
    columns, not_read = cols.by_col, out.not_read
    if all(_is_blank(c.value) for c in cells):
        out.blank_rows += 1
        return
    values: dict[str, object] = {}
    unread: list[tuple[str, str]] = []
    printed: list[tuple[str, str]] = []
    row_problems: list[tuple[str, str, str]] = []  # (field, severity, message)
    cells_out = _CellOut(values, unread, printed, row_problems, out.notes)
    for col, name in columns.items():
        cell = cells[col - 1] if col - 1 < len(cells) else _Cell(None)
        _read_cell(cell, name, number, mark, cells_out, measure)
        if mark is None and isinstance(cell.value, str) and name in NUMERIC_FIELDS:
            body = number_body(_unquote(cell.value.strip())[0])
            if read_digits(body).ambiguous:
                out.undecided.append((number, cell.value.strip()))
    if cols.favours_col is not None and cols.favours_col - 1 < len(cells):
        fv = cells[cols.favours_col - 1].value
        if not _is_blank(fv):
            word = str(fv).strip().casefold()
            if word in ("lower", "higher"):
                out.favours_seen.setdefault(word, number)
            else:
                not_read.append(
                    NotRead(
                        "cells",
                        f"row {number}, column 'favours'",
                        str(fv),
                        M.table_message("favours_value"),
                    )
                )
    for col, given in cols.unknown_at.items():
        if col - 1 < len(cells) and not _is_blank(cells[col - 1].value):
            out.unknown_with_data.setdefault(given, []).append(str(cells[col - 1].value))
    for fld, text in unread:
        not_read.append(
            NotRead("cells", f"row {number}, column '{fld}'", text, M.table_message("not_used"))
        )
    extra = [c for c in cells[cols.width :] if not _is_blank(c.value)]
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
        for i, c in enumerate(cells[: cols.width], start=1)
        if i not in columns and not _is_blank(c.value)
    ]
    if not values and not unread and not row_problems:
        if not extra and not unknown_data:
            out.blank_rows += 1
            return
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
    index = len(out.rows)
    out.rows.append(row)
    out.numbers.append(number)
    out.printed_all.append(tuple(printed))
    for fld, severity, message in row_problems:
        where = f"{path.name} row {number}" + (f" ({row.study})" if row.study else "")
        where += f", {fld}: " if fld else ": "
        out.problems.append(Problem(index, row.study, fld, severity, where + message, "table"))


def _favours(path: Path, favours: str, favours_seen: dict[str, int]) -> str:
    """The one direction the "# favours" line and the favours column agree on."""
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
    return favours


def _rows_from_sheet(
    path: Path, sheet: _Sheet, measure: str | None = None, decimal: str | None = None
) -> TableResult:
    notes = list(sheet.notes)
    grid = sheet.rows
    not_read: list[NotRead] = []
    header_at, favours = _header_row(path, grid, notes, not_read)
    header_number, header = grid[header_at]
    cols = _header_columns(path, header_number, header, notes)
    columns = cols.by_col
    data_rows = grid[header_at + 1 :]
    decision, mark, decimal_how = _file_decimal_mark(data_rows, columns, decimal, notes)

    out = _Read(notes, not_read)
    for number, cells in data_rows:
        _read_data_row(path, number, cells, cols, mark, measure, out)
    if out.blank_rows:
        notes.append(M.table_message("note_blank_rows", count=out.blank_rows))
    for given, values_seen in out.unknown_with_data.items():
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
    favours = _favours(path, favours, out.favours_seen)
    return TableResult(
        str(path),
        sheet.kind,
        tuple(out.rows),
        tuple(out.numbers),
        tuple(out.problems),
        tuple(notes),
        tuple(columns[c] for c in sorted(columns)),
        tuple(cols.unknown),
        tuple(out.printed_all),
        mark or "",
        tuple(not_read),
        decimal_how if mark else "",
        decision.evidence if decimal_how == "evidence" else "",
        tuple(out.undecided),
        favours,
        cols.measure_hint,
    )


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
    "MAX_ROW_CELLS",
    "MAX_TABLE_BYTES",
    "MAX_TABLE_CELLS",
    "MAX_TABLE_ROWS",
    "MAX_TABLE_STUDIES",
    "MAX_XLSX_UNPACKED",
    "TableResult",
    "read_table",
    "spreadsheet_safe",
    "unquote_formula",
    "write_table_csv",
]
