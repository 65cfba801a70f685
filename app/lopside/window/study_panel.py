"""The study-table panel: entry mode, the table, row buttons and the problems list."""

from __future__ import annotations

import math

from PySide6.QtCore import QItemSelectionModel, Qt, QTimer, Signal
from PySide6.QtGui import QKeySequence
from PySide6.QtWidgets import (
    QAbstractItemView,
    QComboBox,
    QHeaderView,
    QLabel,
    QLineEdit,
    QListWidget,
    QListWidgetItem,
    QStyledItemDelegate,
    QTableView,
    QToolButton,
    QVBoxLayout,
    QWidget,
)

from .. import edits as ed
from ..model.review import RISK_OF_BIAS_LEVELS, StudyRow
from ..session import Session
from . import messages as M
from .flow import FlowLayout, labelled
from .table_model import ENTRY_MODES, StudyTableModel

#: (minimum, maximum) width in pixels of a column sized to its content; the columns
#: named in ELASTIC give up width (down to their minimum, then elided in the middle with
#: the full text as tooltip) so that the table fits its panel without scrolling sideways
COLUMN_LIMITS = {
    "study": (96, 260),
    "year": (40, 56),
    "risk_of_bias": (64, 118),
    "subgroup": (56, 130),
    "exclude": (34, 46),
    "reported": (40, 72),
}
DEFAULT_LIMITS = (40, 84)
ELASTIC = ("subgroup", "risk_of_bias", "study")
#: most problems listed at once before the list scrolls
PROBLEM_LINES = 4


def _shrinkable(box: QComboBox, chars: int) -> None:
    """Let a pick list be narrower than its longest item (it elides; the popup does not)."""
    box.setSizeAdjustPolicy(QComboBox.AdjustToMinimumContentsLengthWithIcon)
    box.setMinimumContentsLength(chars)


def _typed_in(editor) -> bool:
    """Has the user typed into this open editor? (then a refresh must not overwrite it)"""
    line = editor if isinstance(editor, QLineEdit) else getattr(editor, "lineEdit", None)
    if callable(line):
        line = line()
    return isinstance(line, QLineEdit) and line.isModified()


class KeepTypingDelegate(QStyledItemDelegate):
    """The plain cell editor, but a table refresh never resets text being typed.

    When the analysis finishes in the background the model announces that its rows
    changed, and Qt would then reload every open editor from the model, throwing away the
    keystrokes typed so far.
    """

    def setEditorData(self, editor, index):  # noqa: N802 - Qt API
        if _typed_in(editor):
            return
        super().setEditorData(editor, index)


class NameDelegate(KeepTypingDelegate):
    """The study column: a long name loses its middle, so its year stays in view. Every
    other column loses its end (the table's mode), so a number keeps its leading digits
    ("0.5628…", never "0.56…2289", which reads as another number). The full text is the
    cell's tooltip. Only this column pays for a Python call per painted cell."""

    def initStyleOption(self, option, index):  # noqa: N802 - Qt API
        super().initStyleOption(option, index)
        option.textElideMode = Qt.ElideMiddle


class PickListDelegate(QStyledItemDelegate):
    """An editable pick list: risk-of-bias levels, or the subgroups already in the table."""

    def __init__(self, choices, parent=None) -> None:
        super().__init__(parent)
        self._choices = choices

    def createEditor(self, parent, option, index):  # noqa: N802 - Qt API
        box = QComboBox(parent)
        box.setEditable(True)
        box.addItem("")
        for c in self._choices():
            box.addItem(c)
        box.setAccessibleName("Pick or type a value")
        return box

    def setEditorData(self, editor, index):  # noqa: N802 - Qt API
        if _typed_in(editor):  # a refresh must not overwrite what is being typed
            return
        editor.setCurrentText(index.data(Qt.EditRole) or "")

    def setModelData(self, editor, model, index):  # noqa: N802 - Qt API
        model.setData(index, editor.currentText(), Qt.EditRole)


class StudyTableView(QTableView):
    """The table, with the keyboard habits of a spreadsheet."""

    paste_requested = Signal()
    delete_cells_requested = Signal()
    resized = Signal()

    def resizeEvent(self, event) -> None:  # noqa: N802 - Qt API
        super().resizeEvent(event)
        if event.oldSize().width() != event.size().width():
            self.resized.emit()

    def keyPressEvent(self, event) -> None:  # noqa: N802 - Qt API
        if event.matches(QKeySequence.Paste):
            self.paste_requested.emit()
            return
        if (
            event.key() in (Qt.Key_Delete, Qt.Key_Backspace)
            and self.state() != QAbstractItemView.State.EditingState
        ):
            self.delete_cells_requested.emit()
            return
        if (
            event.key() in (Qt.Key_Return, Qt.Key_Enter)
            and self.state() != QAbstractItemView.State.EditingState
        ):
            idx = self.currentIndex()
            if idx.isValid() and (idx.flags() & Qt.ItemIsEditable):
                self.edit(idx)
                return
        super().keyPressEvent(event)


class StudyPanel(QWidget):
    """Everything for entering and checking the study rows."""

    selection_changed = Signal(tuple)
    mode_changed = Signal(str)
    measure_chosen = Signal(str)

    def __init__(self, session: Session, stack, parent=None) -> None:
        super().__init__(parent)
        self.session = session
        self.stack = stack
        self.model = StudyTableModel(session, stack.push_edit, self)
        self._cell_widths: dict[tuple[int, int], int] = {}  # (row, column) -> pixels
        self._cell_font = None
        lay = QVBoxLayout(self)
        lay.setContentsMargins(4, 4, 4, 4)

        # the controls wrap onto a second line in a narrow panel instead of setting the
        # window's minimum width (see flow.py)
        top = FlowLayout(h_spacing=10)
        self.mode_box = QComboBox()
        for key, (text, _fields) in ENTRY_MODES.items():
            self.mode_box.addItem(text, key)
        self.mode_box.setAccessibleName("What you have for each study")
        self.mode_box.setToolTip("Show the columns for the data you have in hand")
        _shrinkable(self.mode_box, 22)
        top.addWidget(labelled("Data &in hand:", self.mode_box))
        from .details_form import measure_combo

        self.measure_box = measure_combo()
        self.measure_box.setToolTip("The effect measure of the review (also in Review details)")
        _shrinkable(self.measure_box, 14)
        top.addWidget(labelled("&Measure:", self.measure_box))
        lay.addLayout(top)

        buttons = FlowLayout(h_spacing=4)
        self.buttons: dict[str, QToolButton] = {}
        for key, text, tip in (
            ("add", "&Add row", "Add an empty row below the current one (Ctrl+Shift+N)"),
            ("duplicate", "D&uplicate", "Copy the selected rows (Ctrl+D)"),
            ("delete", "Dele&te rows", "Delete the selected rows (Ctrl+Shift+Del)"),
            ("up", "Move up", "Move the current row up (Ctrl+Shift+Up)"),
            ("down", "Move down", "Move the current row down (Ctrl+Shift+Down)"),
            ("exclude", "&Leave out / bring back", "Leave the selected studies out (Ctrl+E)"),
            ("paste", "Paste from pape&r\u2026", "Paste rows from a paper's forest table"),
        ):
            b = QToolButton()
            b.setText(text)
            b.setToolTip(tip)
            b.setAccessibleName(text.replace("&", ""))
            b.setToolButtonStyle(Qt.ToolButtonTextOnly)
            buttons.addWidget(b)
            self.buttons[key] = b
        lay.addLayout(buttons)

        self.table = StudyTableView()
        self.table.setItemDelegate(KeepTypingDelegate(self.table))
        self.table.setModel(self.model)
        self.table.setAccessibleName("Study table")
        self.table.setSelectionBehavior(QAbstractItemView.SelectItems)
        self.table.setSelectionMode(QAbstractItemView.ExtendedSelection)
        self.table.setEditTriggers(
            QAbstractItemView.DoubleClicked
            | QAbstractItemView.EditKeyPressed
            | QAbstractItemView.AnyKeyPressed
        )
        self.table.setTabKeyNavigation(True)
        self.table.setAlternatingRowColors(False)
        # numbers and levels lose their end; names their middle (NameDelegate)
        self.table.setTextElideMode(Qt.ElideRight)
        self.table.setWordWrap(False)
        self.table.setMinimumSize(200, 120)
        self.table.verticalHeader().setDefaultSectionSize(24)
        self.table.horizontalHeader().setSectionResizeMode(QHeaderView.Interactive)
        self.table.horizontalHeader().setStretchLastSection(False)
        self.table.horizontalHeader().setMinimumSectionSize(28)
        self.table.resized.connect(self.fit_columns)
        self.table.verticalScrollBar().rangeChanged.connect(lambda *_a: self.fit_columns())
        rob = PickListDelegate(lambda: RISK_OF_BIAS_LEVELS, self.table)
        sub = PickListDelegate(self._subgroups, self.table)
        self._delegates = (rob, sub, NameDelegate(self.table))
        lay.addWidget(self.table, 1)

        # one line when the table is clean; a short list (scrolling) when it is not
        self.problems_title = QLabel("Problems in the table")
        lay.addWidget(self.problems_title)
        self.problems = QListWidget()
        self.problems.setAccessibleName("Problems in the study table")
        self.problems.setWordWrap(True)
        self.problems.setVisible(False)
        lay.addWidget(self.problems)

        self.mode_box.currentIndexChanged.connect(self._mode_picked)
        self.measure_box.activated.connect(
            lambda _i: self.measure_chosen.emit(self.measure_box.currentData())
        )
        self.problems.itemActivated.connect(self._go_to_problem)
        self.problems.itemClicked.connect(self._go_to_problem)
        self.table.selectionModel().selectionChanged.connect(self._selection)
        # content widths of the cells, measured once per text: fit_columns re-reads only
        # the cells the model announced as changed (a full re-read called data() ~900
        # times per edit at 30 studies)
        self.model.dataChanged.connect(self._forget_cell_widths)
        for sig in (
            self.model.modelReset,
            self.model.rowsInserted,
            self.model.rowsRemoved,
            self.model.rowsMoved,
            self.model.layoutChanged,
            self.model.columnsInserted,
            self.model.columnsRemoved,
        ):
            sig.connect(self._forget_all_cell_widths)
        self.model.modelReset.connect(self._after_reset)
        self.b = self.buttons
        self.b["add"].clicked.connect(self.add_row)
        self.b["duplicate"].clicked.connect(self.duplicate_rows)
        self.b["delete"].clicked.connect(self.delete_rows)
        self.b["up"].clicked.connect(lambda: self.move_current(-1))
        self.b["down"].clicked.connect(lambda: self.move_current(+1))
        self.b["exclude"].clicked.connect(self.toggle_exclude)
        self._apply_delegates()
        self.refresh_measure()

    # ---------------------------------------------------------------- modes and columns

    def _mode_picked(self, _i: int) -> None:
        self.set_mode(self.mode_box.currentData())

    def set_mode(self, mode: str) -> None:
        if mode not in ENTRY_MODES:
            return
        i = self.mode_box.findData(mode)
        if i != self.mode_box.currentIndex():
            self.mode_box.blockSignals(True)
            self.mode_box.setCurrentIndex(i)
            self.mode_box.blockSignals(False)
        self.model.set_mode(mode)
        self._apply_delegates()
        self.mode_changed.emit(mode)

    def suggest_mode(self) -> None:
        """Pick the entry mode that matches the rows entered (after open or paste)."""
        rows = self.session.review.studies
        if not rows:
            return
        counts = sum(r.has_counts() for r in rows)
        means = sum(r.has_means() for r in rows)
        ci = sum(r.lower is not None and r.upper is not None for r in rows)
        se = sum(r.se is not None for r in rows)
        p = sum(r.p is not None for r in rows)
        best = max((counts, "counts"), (means, "means"), (ci, "ci"), (se, "se"), (p, "p"))
        kinds = sum(x > 0 for x in (counts, means, ci, se, p))
        self.set_mode("all" if kinds > 1 and best[0] < len(rows) else best[1])

    def _apply_delegates(self) -> None:
        rob, sub, name = self._delegates
        for c in range(self.model.columnCount()):
            self.table.setItemDelegateForColumn(c, None)
        for field, dlg in (("risk_of_bias", rob), ("subgroup", sub), ("study", name)):
            c = self.model.column_of(field)
            if c >= 0:
                self.table.setItemDelegateForColumn(c, dlg)
        self.fit_columns()

    def fit_columns(self) -> None:
        """Size each column to its header and content, then fit them all to the panel.

        Content is measured with the table's font; the elastic columns (names, subgroup,
        risk of bias) shrink towards their minimum when the rest does not leave room.
        """
        h = self.table.horizontalHeader()
        fm = self.table.fontMetrics()
        hfm = h.fontMetrics()
        m = self.model
        n_rows = m.rowCount()
        font = self.table.font().key()
        if font != self._cell_font:
            self._cell_widths.clear()
            self._cell_font = font
        known = self._cell_widths
        want: list[int] = []
        for c, key in enumerate(m.columns):
            lo, hi = COLUMN_LIMITS.get(key, DEFAULT_LIMITS)
            header = str(m.headerData(c, Qt.Horizontal) or "")
            w = max(hfm.horizontalAdvance(part) for part in header.split("\n")) + 10
            for r in range(n_rows):
                cw = known.get((r, c))
                if cw is None:
                    text = m.data(m.index(r, c), Qt.DisplayRole)
                    cw = known[(r, c)] = fm.horizontalAdvance(str(text)) + 10 if text else 0
                w = max(w, cw)
            want.append(max(lo, min(hi, w)))
        # a vertical scroll bar may come and go as rows are added: keep its room
        avail = self.table.viewport().width() - 2
        vbar = self.table.verticalScrollBar()
        rows_h = n_rows * self.table.verticalHeader().defaultSectionSize()
        if not vbar.isVisible() and rows_h > self.table.viewport().height():
            avail -= vbar.sizeHint().width()  # about to appear
        if avail > 50:
            over = sum(want) - avail
            cols = [(m.column_of(k), COLUMN_LIMITS[k][0]) for k in ELASTIC]
            slack = {c: want[c] - lo for c, lo in cols if c >= 0 and want[c] > lo}
            total = sum(slack.values())
            # shrink only when that makes the table fit: if it must scroll sideways
            # anyway (a narrow panel at 125 %), the names keep their full width
            if 0 < over <= total:
                # each elastic column gives in proportion to what it has above its minimum
                share = min(1.0, over / total)
                for c, extra in slack.items():
                    want[c] -= min(extra, math.ceil(extra * share))
        for c, w in enumerate(want):
            h.resizeSection(c, w)

    def _forget_cell_widths(self, top_left, bottom_right, *_roles) -> None:
        for r in range(top_left.row(), bottom_right.row() + 1):
            for c in range(top_left.column(), bottom_right.column() + 1):
                self._cell_widths.pop((r, c), None)

    def _forget_all_cell_widths(self, *_args) -> None:
        self._cell_widths.clear()

    def _subgroups(self):
        return sorted({r.subgroup for r in self.session.review.studies if r.subgroup})

    def _after_reset(self) -> None:
        self._apply_delegates()
        # the view lays its header out again after a reset: size the columns after that
        QTimer.singleShot(0, self.fit_columns)

    def refresh_measure(self) -> None:
        i = self.measure_box.findData(self.session.review.measure)
        if i >= 0 and i != self.measure_box.currentIndex():
            self.measure_box.blockSignals(True)
            self.measure_box.setCurrentIndex(i)
            self.measure_box.blockSignals(False)

    # ---------------------------------------------------------------- results and problems

    def show_result(self, result) -> None:
        self.model.set_result(result)
        self.problems.clear()
        probs = self.model.problems()
        studies = self.session.review.studies
        n = 0
        # input that never became a row comes first: it is in no row to click on
        for nr in self.session.review.intake.not_read:
            item = QListWidgetItem(f"\u2716 Not read, {nr.where}: {nr.text}  ({nr.reason})")
            item.setData(Qt.UserRole, None)
            item.setToolTip(M.NOT_READ_TIP)
            self.problems.addItem(item)
            n += 1
        for r in sorted(probs):
            for p in probs[r]:
                label = studies[r].study or f"Row {r + 1}"
                where = f"Row {r + 1} ({label})" + (
                    f", {p.field.replace('_', ' ')}" if p.field else ""
                )
                mark = "\u2716" if p.severity == "error" else "\u26a0"
                # the row checks already name the row and field; other messages get both
                text = p.message if p.message.startswith("Row ") else f"{where}: {p.message}"
                item = QListWidgetItem(f"{mark} {text}")
                if p.detail:
                    item.setToolTip(p.detail)
                item.setData(Qt.UserRole, (r, p.field))
                self.problems.addItem(item)
                n += 1
        self.problems_title.setText(
            f"Problems in the table ({n}):" if n else "Problems in the table: none found"
        )
        self.problems.setVisible(n > 0)
        if n:
            lines = min(n, PROBLEM_LINES)
            row_h = self.problems.sizeHintForRow(0) if self.problems.count() else 20
            self.problems.setFixedHeight(min(lines * max(row_h, 18) + 6, 6 + PROBLEM_LINES * 40))
        self.fit_columns()

    def _go_to_problem(self, item: QListWidgetItem) -> None:
        if item.data(Qt.UserRole) is None:
            return  # a line that was not read: it has no row
        row, field = item.data(Qt.UserRole)
        col = self.model.column_of(field) if field else 0
        if field and col < 0:
            self.set_mode("all")
            col = self.model.column_of(field)
        self.select_row(row, col=max(col, 0))
        self.table.setFocus(Qt.OtherFocusReason)

    # ---------------------------------------------------------------- selection

    def selected_rows(self) -> tuple[int, ...]:
        rows = {i.row() for i in self.table.selectionModel().selectedIndexes()}
        cur = self.table.currentIndex()
        if not rows and cur.isValid():
            rows = {cur.row()}
        return tuple(sorted(rows))

    def _selection(self, *_args) -> None:
        self.selection_changed.emit(self.selected_rows())

    def select_row(self, row: int, col: int = 0) -> None:
        if not 0 <= row < self.model.rowCount():
            return
        idx = self.model.index(row, col)
        sm = self.table.selectionModel()
        sm.setCurrentIndex(idx, QItemSelectionModel.ClearAndSelect | QItemSelectionModel.Rows)
        self.table.scrollTo(idx)

    # ---------------------------------------------------------------- row actions

    def _current_row(self) -> int:
        idx = self.table.currentIndex()
        return idx.row() if idx.isValid() else self.model.rowCount() - 1

    def add_row(self) -> None:
        at = self._current_row() + 1
        if self.stack.push_edit(ed.AddRows(at, (StudyRow(),))):
            self.select_row(at, 0)
            self.table.setFocus()

    def duplicate_rows(self) -> None:
        rows = self.selected_rows()
        if not rows:
            return
        studies = self.session.review.studies
        copies = tuple(studies[i] for i in rows)
        self.stack.push_edit(ed.AddRows(rows[-1] + 1, copies))

    def delete_rows(self) -> None:
        rows = self.selected_rows()
        if rows:
            self.stack.push_edit(ed.DeleteRows(rows))

    def move_current(self, step: int) -> None:
        idx = self.table.currentIndex()
        if not idx.isValid():
            return
        src, dst = idx.row(), idx.row() + step
        if 0 <= dst < self.model.rowCount() and self.stack.push_edit(ed.MoveRow(src, dst)):
            self.select_row(dst, idx.column())

    def toggle_exclude(self) -> None:
        rows = self.selected_rows()
        if not rows:
            return
        studies = self.session.review.studies
        new = not all(studies[i].exclude for i in rows)
        edits = [ed.SetExclude(i, new) for i in rows if studies[i].exclude != new]
        if len(edits) == 1:
            self.stack.push_edit(edits[0])
        elif edits:
            self.stack.push_many(
                f"{'leave out' if new else 'bring back'} {len(edits)} studies", edits
            )

    def clear_selected_cells(self) -> None:
        """Delete key: blank the selected editable cells (one undo step)."""
        edits = []
        studies = self.session.review.studies
        for idx in self.table.selectionModel().selectedIndexes():
            key = self.model.columns[idx.column()]
            if not (idx.flags() & Qt.ItemIsEditable):
                continue
            if ed.cell_text(studies[idx.row()], key):
                edits.append(ed.SetCell(idx.row(), key, ""))
        if len(edits) == 1:
            self.stack.push_edit(edits[0])
        elif edits:
            self.stack.push_many(f"clear {len(edits)} cells", edits)
