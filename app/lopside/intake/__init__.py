"""Intake: getting study rows in — pasted forest-table text, CSV/XLSX tables — and checking them.

No Qt here, and nothing heavy is imported at module load (openpyxl is imported only when
an XLSX file is read), so the window can import this package at start-up.
"""

from lopside.intake.checks import Problem, check_row, check_rows
from lopside.intake.errors import IntakeError
from lopside.intake.paste import LineReading, PasteResult, read_pasted
from lopside.intake.table import TableResult, read_table, write_table_csv

__all__ = [
    "IntakeError",
    "LineReading",
    "PasteResult",
    "Problem",
    "TableResult",
    "check_row",
    "check_rows",
    "read_pasted",
    "read_table",
    "write_table_csv",
]
