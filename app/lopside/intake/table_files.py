"""Reading a table file into a sheet of cells: CSV (encoding and delimiter found, not
assumed) and XLSX (read-only, cached values, formulas never run), each within the limits
that keep a hostile or mistaken file from exhausting memory or time.
"""

from __future__ import annotations

import csv
import io
import re
import stat
from dataclasses import dataclass
from pathlib import Path

from lopside.intake import messages as M
from lopside.intake.errors import IntakeError

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


_MERGE_RE = re.compile(rb'<mergeCell ref="([A-Z]{1,3}[0-9]{1,7}:[A-Z]{1,3}[0-9]{1,7})"')


_DELIMITER_NAMES = {",": "commas", ";": "semicolons", "\t": "tabs"}


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


def _is_blank(value: object) -> bool:
    return value is None or (isinstance(value, str) and not value.strip())
