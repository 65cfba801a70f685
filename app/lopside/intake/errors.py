"""The one exception the intake readers raise: a file that cannot be read as a study table.

Bad *cells* never raise: they are kept in ``StudyRow.unread`` and reported as problems.
:class:`IntakeError` is for a file as a whole (missing, not a table, no column names...)
or a row the reader cannot get through; its message names the file, and the
spreadsheet row and field where they are known, so the user can go straight there.
"""

from __future__ import annotations

from pathlib import Path


class IntakeError(ValueError):
    """A study table that cannot be read, with a message for the user.

    Parameters
    ----------
    message : str
        What is wrong and what to do, in plain words.
    path : str or Path, optional
        The file being read.
    row : int, optional
        Spreadsheet row number (1-based, the header is row 1 in a plain table).
    field : str, optional
        Column name, where one is to blame.
    """

    def __init__(
        self,
        message: str,
        *,
        path: str | Path | None = None,
        row: int | None = None,
        field: str | None = None,
    ) -> None:
        self.message = message
        self.path = None if path is None else str(path)
        self.row = row
        self.field = field
        super().__init__(self.__str__())

    def __str__(self) -> str:
        where = []
        if self.path is not None:
            where.append(Path(self.path).name)
        if self.row is not None:
            where.append(f"row {self.row}")
        if self.field is not None:
            where.append(f"column '{self.field}'")
        prefix = ", ".join(where)
        return f"{prefix}: {self.message}" if prefix else self.message
