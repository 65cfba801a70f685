"""A thin Qt table model over the session's study table.

Design invariants
-----------------
* The model holds no data of its own: ``data()`` reads ``session.review.studies`` and the
  last analysis result (for the derived y and SE and the problems). It returns ``None``
  for roles it does not handle and never opens a dialog.
* ``setData`` turns what the user typed into an edit value and hands it to ``push`` (the
  window's undo stack). A domain error makes it return ``False``; the view tells the user.
* Row inserts/removes are bracketed from the session's "about to change"/"changed" events.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

from PySide6.QtCore import QAbstractTableModel, QModelIndex, QPersistentModelIndex, Qt
from PySide6.QtGui import QBrush, QColor, QFont

from .. import edits as ed
from ..model.review import NUMERIC_FIELDS, RATIO_MEASURES, StudyRow
from ..session import Session
from . import messages as M

#: Entry modes: what the user has in hand for each study, and the columns it needs.
ENTRY_MODES: dict[str, tuple[str, tuple[str, ...]]] = {
    "ci": ("Estimate with its CI", ("estimate", "lower", "upper")),
    "se": ("Estimate with its SE", ("estimate", "se")),
    "p": ("Estimate with its P value", ("estimate", "p")),
    "counts": ("Events and totals per arm", ("int_events", "int_total", "ctl_events", "ctl_total")),
    "means": (
        "Means and SDs per arm",
        ("int_mean", "int_sd", "int_n", "ctl_mean", "ctl_sd", "ctl_n"),
    ),
    "all": ("Every column", NUMERIC_FIELDS),
}

HEADERS: dict[str, str] = {
    "study": "Study",
    "year": "Year",
    "estimate": "Estimate",
    "lower": "CI\nlower",
    "upper": "CI\nupper",
    "level": "CI %",
    "se": "SE",
    "p": "P",
    "int_events": "Events\nint.",
    "int_total": "Total\nint.",
    "ctl_events": "Events\nctl.",
    "ctl_total": "Total\nctl.",
    "int_mean": "Mean\nint.",
    "int_sd": "SD\nint.",
    "int_n": "N\nint.",
    "ctl_mean": "Mean\nctl.",
    "ctl_sd": "SD\nctl.",
    "ctl_n": "N\nctl.",
    "n": "Total\nN",
    "risk_of_bias": "Risk of\nbias",
    "subgroup": "Subgroup",
    "exclude": "Left\nout",
    "reported": "Reported",
    "_y": "Effect\nused",
    "_se": "SE\nused",
}
DERIVED = ("_y", "_se")
_ROOT = QModelIndex()

#: Tints of this window (not figure colours: those live in lopside.figures.style).
ERROR_CELL = QColor("#F7C9C3")
WARNING_CELL = QColor("#FBE3B5")
ERROR_ROW = QColor("#FDF0EE")
WARNING_ROW = QColor("#FEF8EC")
DERIVED_CELL = QColor("#EEF1F4")
EXCLUDED_TEXT = QColor("#7B8794")


@dataclass(frozen=True, slots=True)
class CellProblem:
    """One problem shown on a cell (or on the whole row when ``field`` is empty).

    ``detail`` holds messages about the same cause that were folded into this one (the
    derivation's own account of why the row gives no effect); shown as a tooltip.
    """

    row: int
    field: str
    severity: str  # "error" | "warning"
    message: str
    detail: str = ""


def _runs(rows: list[int]):
    """(first, last) of each run of consecutive row numbers."""
    start = prev = None
    for r in rows:
        if start is None:
            start = prev = r
        elif r == prev + 1:
            prev = r
        else:
            yield start, prev
            start = prev = r
    if start is not None:
        yield start, prev


def problems_by_row(result, studies: tuple[StudyRow, ...]) -> dict[int, list[CellProblem]]:
    """Gather what the analysis says about each row, plus text kept unread.

    The analysis (row checks and effect derivation) supplies the messages; this only
    files them under their row and field for display. When a row check has already named
    what is wrong with a row, the derivation's messages for that row ("... not used",
    "no entered route gives ...") say the same thing again from the other side: they are
    folded into the check's message as one line saying the study is left out, with their
    text kept as the detail, so one cause gives one message.
    """
    out: dict[int, list[CellProblem]] = {}
    seen: set[tuple[int, str, str]] = set()

    def add(p: CellProblem) -> None:
        key = (p.row, p.field, p.message)
        if key not in seen:
            seen.add(key)
            out.setdefault(p.row, []).append(p)

    derived_msgs: dict[int, list[str]] = {}
    if result is not None:
        for p in getattr(result, "problems", ()) or ():
            row = getattr(p, "row", None)
            if row is None or not 0 <= row < len(studies):
                continue
            sev = str(getattr(p, "severity", "warning")).lower()
            sev = "error" if sev in ("error", "serious") else "warning"
            add(CellProblem(row, getattr(p, "field", "") or "", sev, str(p.message)))
        for i, d in enumerate(getattr(result, "derived", ()) or ()):
            if i < len(studies) and getattr(d, "y", None) is None:
                derived_msgs[i] = [str(m) for m in getattr(d, "problems", ()) or ()]
        # rows that pass the checks but stand out from the others (stats.diagnostics)
        from ..stats.diagnostics import reason_text

        for f in getattr(getattr(result, "row_flags", None), "flagged", ()) or ():
            if 0 <= f.row < len(studies):
                for r in f.reasons:
                    add(CellProblem(f.row, r.field, "warning", reason_text(r)))
    for i, row in enumerate(studies):
        for field, text in row.unread:
            if any(p.field == field for p in out.get(i, ())):
                continue
            hint = M.CELL_UNREAD_HINT.get(field, "a number")
            what = "a year" if field == "year" else "a value for this column"
            add(
                CellProblem(
                    i, field, "error", M.CELL_UNREAD.format(text=text, what=what, hint=hint)
                )
            )
    for i, msgs in derived_msgs.items():
        errors = [p for p in out.get(i, ()) if p.severity == "error"]
        if errors:
            # a row-level check ("nothing to analyse ...") already says the study is out;
            # else the first cell error gets that consequence added
            whole = [p for p in errors if not p.field]
            first = whole[0] if whole else errors[0]
            text = first.message if whole else f"{first.message} {M.LEFT_OUT}"
            merged = CellProblem(first.row, first.field, first.severity, text, "\n".join(msgs))
            out[i] = [merged if p is first else p for p in out[i]]
        else:
            for msg in msgs:
                add(CellProblem(i, "", "error", msg))
    return out


#: an entry longer than this many characters has its full text as the cell's tooltip
ELIDED_FROM = 6


class StudyTableModel(QAbstractTableModel):
    """Rows = studies; columns = the entry mode's fields, the derived values, and labels."""

    def __init__(self, session: Session, push: Callable[[ed.Edit], bool], parent=None) -> None:
        super().__init__(parent)
        self.session = session
        self.push = push
        self._mode = "ci"
        self._columns: tuple[str, ...] = ()
        self._result = None
        self._problems: dict[int, list[CellProblem]] = {}
        #: per row, what the last analysis showed in it (None: unknown, emit everything)
        self._row_states: list[tuple] | None = None
        self._rebuild_columns()
        session.add_listener(about_to_change=self._about, changed=self._changed)

    # ---------------------------------------------------------------- columns

    @property
    def mode(self) -> str:
        return self._mode

    def set_mode(self, mode: str) -> None:
        if mode not in ENTRY_MODES or mode == self._mode:
            return
        self.beginResetModel()
        self._mode = mode
        self._rebuild_columns()
        self.endResetModel()

    def _rebuild_columns(self) -> None:
        fields = ENTRY_MODES[self._mode][1]
        self._columns = (
            "study", "year", *fields, *DERIVED, "risk_of_bias", "subgroup", "exclude", "reported",
        )  # fmt: skip

    @property
    def columns(self) -> tuple[str, ...]:
        return self._columns

    def column_of(self, field: str) -> int:
        return self._columns.index(field) if field in self._columns else -1

    # ---------------------------------------------------------------- session events

    def _about(self, change: ed.Change) -> None:
        if change.kind == "insert":
            rows = change.rows
            if rows and rows == tuple(range(rows[0], rows[0] + len(rows))):
                self.beginInsertRows(QModelIndex(), rows[0], rows[-1])
                self._pending = "insert"
                return
        elif change.kind == "remove":
            rows = change.rows
            if rows and rows == tuple(range(rows[0], rows[0] + len(rows))):
                self.beginRemoveRows(QModelIndex(), rows[0], rows[-1])
                self._pending = "remove"
                return
        elif change.kind == "move":
            src, dst = change.rows
            if src != dst:
                # Qt's destination is the row *before which* the moved row lands
                qt_dst = dst + 1 if dst > src else dst
                if self.beginMoveRows(QModelIndex(), src, src, QModelIndex(), qt_dst):
                    self._pending = "move"
                    return
            self._pending = "row"
            return
        elif change.kind in ("row", "details", "notes", "settings"):
            self._pending = change.kind
            return
        self.beginResetModel()
        self._pending = "reset"

    def _changed(self, change: ed.Change) -> None:
        pending = getattr(self, "_pending", "reset")
        self._pending = ""
        if pending in ("insert", "remove", "move", "reset") or change.kind == "move":
            self._row_states = None  # rows moved: compare nothing with the old analysis
        if pending == "insert":
            self.endInsertRows()
        elif pending == "remove":
            self.endRemoveRows()
        elif pending == "move":
            self.endMoveRows()
        elif pending == "reset":
            self._result = None
            self._problems = {}
            self.endResetModel()
        elif pending == "row":
            for r in change.rows:
                self.dataChanged.emit(self.index(r, 0), self.index(r, self.columnCount() - 1))
            if change.kind == "move":
                lo, hi = sorted(change.rows)
                self.dataChanged.emit(self.index(lo, 0), self.index(hi, self.columnCount() - 1))
        elif pending == "details" and change.field == "measure":
            self.headerDataChanged.emit(Qt.Horizontal, 0, self.columnCount() - 1)

    def set_result(self, result) -> None:
        """Show the derived values and problems of a new analysis.

        ``dataChanged`` is emitted only for what changed: the derived cells of a row whose
        effect, SE or route changed, the whole row when its problems changed (they tint
        every cell). Emitting over the whole table made Qt ask for every cell again
        (about 1,330 ``data()`` calls per edit at 30 studies).
        """
        self._result = result
        studies = self.session.review.studies
        if result is not None and len(getattr(result, "derived", ())) != len(studies):
            result = None  # an analysis of an older table: wait for the current one
            self._result = None
        self._problems = problems_by_row(result, studies)
        old = self._row_states
        new = [self._row_state(r) for r in range(len(studies))]
        self._row_states = new
        if not (self.rowCount() and self.columnCount()):
            return
        last = self.columnCount() - 1
        if old is None or len(old) != len(new):
            self.dataChanged.emit(self.index(0, 0), self.index(self.rowCount() - 1, last))
            return
        derived_cols = [self.column_of(k) for k in DERIVED if self.column_of(k) >= 0]
        whole = [r for r in range(len(new)) if new[r][1] != old[r][1]]
        derived = [r for r in range(len(new)) if new[r][0] != old[r][0] and new[r][1] == old[r][1]]
        for lo, hi in _runs(whole):
            self.dataChanged.emit(self.index(lo, 0), self.index(hi, last))
        if derived_cols:
            c0, c1 = min(derived_cols), max(derived_cols)
            for lo, hi in _runs(derived):
                self.dataChanged.emit(self.index(lo, c0), self.index(hi, c1))

    def _row_state(self, r: int) -> tuple:
        """What the analysis shows in row r: (derived values, problems)."""
        d = self._derived(r)
        shown = None if d is None else (d.y, d.se, getattr(d, "route_text", ""))
        probs = tuple((p.field, p.severity, p.message) for p in self._problems.get(r, ()))
        return shown, probs

    def problems(self) -> dict[int, list[CellProblem]]:
        return self._problems

    # ---------------------------------------------------------------- Qt model API

    def rowCount(self, parent=_ROOT) -> int:  # noqa: N802 - Qt API
        return 0 if parent.isValid() else len(self.session.review.studies)

    def columnCount(self, parent=_ROOT) -> int:  # noqa: N802 - Qt API
        return 0 if parent.isValid() else len(self._columns)

    def headerData(self, section, orientation, role=Qt.DisplayRole):  # noqa: N802 - Qt API
        if orientation == Qt.Horizontal:
            if not 0 <= section < len(self._columns):
                return None
            key = self._columns[section]
            if role == Qt.DisplayRole:
                return self._header(key)
            if role == Qt.ToolTipRole:
                return self._header_tip(key)
            return None
        if role == Qt.DisplayRole:
            return str(section + 1)
        if role == Qt.ToolTipRole and 0 <= section < self.rowCount():
            if self.session.review.studies[section].exclude:
                return "Left out of the analysis (kept in the table)"
        return None

    def _header(self, key: str) -> str:
        measure = self.session.review.measure
        if key == "estimate":
            return measure
        if key == "_y":
            return f"log {measure}\nused" if measure in RATIO_MEASURES else f"{measure}\nused"
        return HEADERS.get(key, key)

    def _header_tip(self, key: str) -> str:
        measure = self.session.review.measure
        tips = {
            "estimate": f"The {measure} as printed in the paper (natural scale)",
            "_y": "The effect on the analysis scale, derived by Lopside (read only)",
            "_se": "The standard error Lopside derived for this study (read only)",
            "exclude": "Tick to leave the study out of the analysis; it stays in the table",
            "reported": (
                "Type 'no' for a trial known to exist (registered, presented, listed as "
                "ongoing) that never reported results; enter only its size (Total N or the "
                "arm totals). It stays out of the main analysis and feeds the missing-trial "
                "scenarios on the Adjust view"
            ),
            "level": "Confidence level of this study's interval, if not the review's",
            "p": "Two-sided P value; '<0.001' is read as a bound",
        }
        return tips.get(key, HEADERS.get(key, key).replace("\n", " "))

    def flags(self, index):
        if not index.isValid():
            return Qt.NoItemFlags
        key = self._columns[index.column()]
        base = Qt.ItemIsEnabled | Qt.ItemIsSelectable
        if key in DERIVED:
            return base
        if key == "exclude":
            return base | Qt.ItemIsUserCheckable
        return base | Qt.ItemIsEditable

    def data(self, index, role=Qt.DisplayRole):
        if not index.isValid():
            return None
        r, c = index.row(), index.column()
        studies = self.session.review.studies
        if not (0 <= r < len(studies) and 0 <= c < len(self._columns)):
            return None
        row = studies[r]
        key = self._columns[c]
        if role in (Qt.DisplayRole, Qt.EditRole):
            if key in DERIVED:
                return self._derived_text(r, key) if role == Qt.DisplayRole else None
            if key == "exclude":
                return None
            return ed.cell_text(row, key)
        if role == Qt.CheckStateRole and key == "exclude":
            return Qt.Checked if row.exclude else Qt.Unchecked
        if role == Qt.BackgroundRole:
            return self._background(r, key)
        if role == Qt.ForegroundRole and row.exclude:
            return QBrush(EXCLUDED_TEXT)
        if role == Qt.FontRole and row.exclude:
            f = QFont()
            f.setItalic(True)
            return f
        if role == Qt.ToolTipRole:
            return self._tooltip(r, key)
        if role == Qt.TextAlignmentRole and key not in ("study", "risk_of_bias", "subgroup"):
            return int(Qt.AlignRight | Qt.AlignVCenter)
        if role == Qt.AccessibleTextRole:
            text = self._derived_text(r, key) if key in DERIVED else ed.cell_text(row, key)
            return f"{self._header(key).replace(chr(10), ' ')}: {text or 'blank'}"
        return None

    def _derived(self, r: int):
        res = self._result
        if res is None or r >= len(res.derived):
            return None
        return res.derived[r]

    def _derived_text(self, r: int, key: str) -> str:
        d = self._derived(r)
        if d is None:
            return ""
        v = d.y if key == "_y" else d.se
        return "" if v is None else f"{v:.4g}"

    def _cell_problems(self, r: int, key: str) -> list[CellProblem]:
        return [p for p in self._problems.get(r, ()) if p.field == key]

    def _background(self, r: int, key: str):
        probs = self._problems.get(r)
        if probs:
            cell = self._cell_problems(r, key)
            if cell:
                return QBrush(
                    ERROR_CELL if any(p.severity == "error" for p in cell) else WARNING_CELL
                )
            if key in DERIVED:
                return QBrush(DERIVED_CELL)
            return QBrush(ERROR_ROW if any(p.severity == "error" for p in probs) else WARNING_ROW)
        if key in DERIVED:
            return QBrush(DERIVED_CELL)
        return None

    def _tooltip(self, r: int, key: str):
        lines = [p.message for p in self._cell_problems(r, key)]
        lines += [p.detail for p in self._cell_problems(r, key) if p.detail]
        if key in DERIVED:
            d = self._derived(r)
            if d is not None and getattr(d, "route_text", ""):
                lines.append(d.route_text)
            lines += [p.message for p in self._problems.get(r, ()) if not p.field]
        if not lines and r in self._problems and key == "study":
            lines = [p.message for p in self._problems[r]]
        if not lines and key == "study":
            row = self.session.review.studies[r]
            return row.study or None  # the full label, where the column elides it
        if not lines and key not in DERIVED:
            text = ed.cell_text(self.session.review.studies[r], key)
            # the full entry, where a narrow column may cut it ("0.5628…")
            return text if len(text) > ELIDED_FROM else None
        return "\n".join(lines) if lines else None

    def setData(self, index, value, role=Qt.EditRole):  # noqa: N802 - Qt API
        if not index.isValid():
            return False
        key = self._columns[index.column()]
        r = index.row()
        if key in DERIVED:
            return False
        if key == "exclude":
            if role != Qt.CheckStateRole:
                return False
            checked = value in (Qt.Checked, Qt.Checked.value, 2, True)
            return self.push(ed.SetExclude(r, checked))
        if role != Qt.EditRole:
            return False
        text = "" if value is None else str(value)
        if text == ed.cell_text(self.session.review.studies[r], key):
            return True  # nothing changed: no undo step
        return self.push(ed.SetCell(r, key, text))


def persistent(model: StudyTableModel, row: int, field: str) -> QPersistentModelIndex:
    return QPersistentModelIndex(model.index(row, model.column_of(field)))
