"""Pick the rows of a review's PDF: pages ranked by study rows, the page with every line
found boxed and numbered, ticks to leave lines out, a drawn region to keep only part of a
page. The chosen lines then go to the paste preview (the same reader and account as text
pasted by hand). Nothing here reads numbers: :mod:`lopside.intake.pdf` does.
"""

from __future__ import annotations

from PySide6.QtCore import QRectF, Qt, QThread, Signal
from PySide6.QtGui import QBrush, QColor, QFont, QImage, QPainter, QPen, QPixmap
from PySide6.QtWidgets import (
    QAbstractItemView,
    QDialog,
    QDialogButtonBox,
    QGraphicsPixmapItem,
    QGraphicsScene,
    QGraphicsView,
    QHBoxLayout,
    QLabel,
    QListWidget,
    QListWidgetItem,
    QPushButton,
    QSplitter,
    QVBoxLayout,
    QWidget,
)

from . import messages as M

#: the palette's teal for rows read as studies, grey for other lines (resources/palette.md)
STUDY_PEN = QColor("#2E7F75")
OTHER_PEN = QColor("#8A96A3")
REGION_PEN = QColor("#C2410C")
RENDER_SCALE = 1.4


class PdfReadWorker(QThread):
    """Reads the text layer of every page off the GUI thread, with progress and cancel."""

    progress = Signal(int, int)
    finished_ok = Signal(object)
    failed = Signal(str)

    def __init__(self, path: str, parent=None) -> None:
        super().__init__(parent)
        self.path = path
        self._cancel = False

    def cancel(self) -> None:
        self._cancel = True

    def run(self) -> None:
        from ..intake.pdf import PdfError, read_pdf

        def prog(done: int, total: int) -> bool:
            self.progress.emit(done, total)
            return not self._cancel

        try:
            doc = read_pdf(self.path, progress=prog)
        except PdfError as exc:
            self.failed.emit(str(exc))
            return
        except Exception as exc:  # noqa: BLE001 - shown as a sentence, never a traceback
            self.failed.emit(M.PDF_FAILED.format(error=type(exc).__name__))
            return
        self.finished_ok.emit(doc)


class _PageView(QGraphicsView):
    """The rendered page; dragging draws the region whose lines are kept."""

    region_drawn = Signal(QRectF)

    def __init__(self, parent=None) -> None:
        super().__init__(parent)
        self.setScene(QGraphicsScene(self))
        self.setRenderHint(QPainter.Antialiasing)
        self.setDragMode(QGraphicsView.NoDrag)
        self.setAccessibleName("Page preview")
        self._start = None
        self._rubber = None

    def mousePressEvent(self, event) -> None:  # noqa: N802 - Qt API
        if event.button() == Qt.LeftButton:
            self._start = self.mapToScene(event.position().toPoint())
            if self._rubber is not None:
                self.scene().removeItem(self._rubber)
            self._rubber = self.scene().addRect(QRectF(self._start, self._start), QPen(REGION_PEN))
        super().mousePressEvent(event)

    def mouseMoveEvent(self, event) -> None:  # noqa: N802 - Qt API
        if self._start is not None and self._rubber is not None:
            end = self.mapToScene(event.position().toPoint())
            self._rubber.setRect(QRectF(self._start, end).normalized())
        super().mouseMoveEvent(event)

    def mouseReleaseEvent(self, event) -> None:  # noqa: N802 - Qt API
        if self._start is not None and self._rubber is not None:
            rect = self._rubber.rect()
            self._start = None
            if rect.width() > 4 and rect.height() > 4:
                self.region_drawn.emit(rect)
        super().mouseReleaseEvent(event)

    def forget_region(self) -> None:
        self._rubber = None


class PdfDialog(QDialog):
    """Choose the page(s) and lines of a PDF; :meth:`chosen_text` gives them to the paste
    preview, one line per row, with :attr:`chosen_pages` saying where they came from."""

    def __init__(self, path: str, parent=None, *, doc=None) -> None:
        super().__init__(parent)
        from pathlib import Path

        self.path = path
        self.doc = doc
        self.region: dict[int, QRectF] = {}
        self.unticked: set[tuple[int, int]] = set()
        self.setWindowTitle(M.PDF_TITLE.format(name=Path(path).name))
        self.resize(1040, 640)
        lay = QVBoxLayout(self)
        help_ = QLabel(M.PDF_HELP)
        help_.setWordWrap(True)
        lay.addWidget(help_)
        split = QSplitter(Qt.Horizontal)
        left = QWidget()
        ll = QVBoxLayout(left)
        ll.setContentsMargins(0, 0, 0, 0)
        ll.addWidget(QLabel(M.PDF_PAGES))
        self.pages = QListWidget()
        self.pages.setAccessibleName("Pages")
        self.pages.setSelectionMode(QAbstractItemView.ExtendedSelection)
        self.pages.itemSelectionChanged.connect(self._pages_changed)
        ll.addWidget(self.pages, 1)
        ll.addWidget(QLabel(M.PDF_LINES))
        self.lines = QListWidget()
        self.lines.setAccessibleName("Lines found on the page")
        self.lines.itemChanged.connect(self._line_ticked)
        ll.addWidget(self.lines, 2)
        self.clear_region = QPushButton(M.PDF_CLEAR_REGION)
        self.clear_region.clicked.connect(self._clear_region)
        ll.addWidget(self.clear_region)
        split.addWidget(left)
        self.view = _PageView()
        self.view.region_drawn.connect(self._region_drawn)
        split.addWidget(self.view)
        split.setSizes([380, 640])
        lay.addWidget(split, 1)
        bottom = QHBoxLayout()
        self.status = QLabel("")
        self.status.setWordWrap(True)
        bottom.addWidget(self.status, 1)
        self.buttons = QDialogButtonBox(QDialogButtonBox.Ok | QDialogButtonBox.Cancel)
        self.ok_button = self.buttons.button(QDialogButtonBox.Ok)
        self.ok_button.setText(M.PDF_USE)
        self.ok_button.setEnabled(False)
        self.buttons.accepted.connect(self.accept)
        self.buttons.rejected.connect(self.reject)
        bottom.addWidget(self.buttons)
        lay.addLayout(bottom)
        self._images: dict[int, QImage] = {}
        if doc is not None:
            self.show_document(doc)

    # ------------------------------------------------------------------ document

    def show_document(self, doc) -> None:
        self.doc = doc
        self.pages.blockSignals(True)
        self.pages.clear()
        ranked = doc.ranked()
        order = ranked + [p for p in doc.pages if p not in ranked]
        for page in order:
            if page.problem:
                text = M.PDF_PAGE_PROBLEM.format(n=page.number, problem=page.problem)
            elif page.study_rows:
                text = M.PDF_PAGE_ROWS.format(n=page.number, rows=page.study_rows)
            else:
                text = M.PDF_PAGE_NONE.format(n=page.number)
            item = QListWidgetItem(text)
            item.setData(Qt.UserRole, page.number)
            self.pages.addItem(item)
        self.pages.blockSignals(False)
        if self.pages.count():
            self.pages.setCurrentRow(0)
            self.pages.item(0).setSelected(True)
        if doc.cancelled:
            self.status.setText(M.PDF_CANCELLED.format(n=len(doc.pages)))

    def selected_pages(self) -> list[int]:
        return sorted(it.data(Qt.UserRole) for it in self.pages.selectedItems())

    def _page(self, n: int):
        return next(p for p in self.doc.pages if p.number == n)

    # ------------------------------------------------------------------ lines

    def _kept(self, line) -> bool:
        """A line is kept unless unticked or outside the region drawn on its page."""
        page = self._page(line.page)
        idx = page.lines.index(line)
        if (line.page, idx) in self.unticked:
            return False
        region = self.region.get(line.page)
        if region is None:
            return True
        x0, top, x1, bottom = page.box_on_page(line)
        s = RENDER_SCALE
        cx, cy = (x0 + x1) / 2 * s, (top + bottom) / 2 * s
        return region.contains(cx, cy)

    def reading(self):
        """The rows the chosen lines give (:class:`lopside.intake.pdf.PdfRows`)."""
        from ..intake.pdf import rows_from_pages

        return rows_from_pages(self.doc, self.selected_pages(), keep=self._kept)

    def _pages_changed(self) -> None:
        pages = self.selected_pages()
        if not pages:
            return
        self._fill_lines()
        self._draw(pages[0])

    def _fill_lines(self) -> None:
        from ..intake.paste import read_pasted

        self.lines.blockSignals(True)
        self.lines.clear()
        number = 0
        for n in self.selected_pages():
            page = self._page(n)
            for idx, line in enumerate(page.lines):
                reading = read_pasted(line.text).lines
                status = reading[0].status if reading else "skipped"
                kept = self._kept(line)
                if status == "study" and kept:
                    number += 1
                label = f"p{n}  {number if status == 'study' and kept else '-'}.  {line.text}"
                item = QListWidgetItem(label)
                item.setData(Qt.UserRole, (n, idx))
                item.setFlags(item.flags() | Qt.ItemIsUserCheckable)
                item.setCheckState(Qt.Checked if (n, idx) not in self.unticked else Qt.Unchecked)
                item.setForeground(QBrush(STUDY_PEN if status == "study" else OTHER_PEN))
                item.setToolTip(
                    reading[0].account or reading[0].reason if reading else M.PDF_EMPTY_LINE
                )
                self.lines.addItem(item)
        self.lines.blockSignals(False)
        got = self.reading()
        rows = len(got.paste.rows)
        self.ok_button.setEnabled(rows > 0)
        self.status.setText(
            M.PDF_STATUS.format(
                rows=rows,
                pages=", ".join(str(p) for p in self.selected_pages()),
                other=len(got.paste.lines) - rows,
            )
        )

    def _line_ticked(self, item: QListWidgetItem) -> None:
        key = tuple(item.data(Qt.UserRole))
        if item.checkState() == Qt.Checked:
            self.unticked.discard(key)
        else:
            self.unticked.add(key)
        self._fill_lines()
        self._draw(self.selected_pages()[0])

    def _region_drawn(self, rect: QRectF) -> None:
        pages = self.selected_pages()
        if pages:
            self.region[pages[0]] = rect
            self._fill_lines()
            self._draw(pages[0])

    def _clear_region(self) -> None:
        for n in self.selected_pages():
            self.region.pop(n, None)
        self._fill_lines()
        if self.selected_pages():
            self._draw(self.selected_pages()[0])

    # ------------------------------------------------------------------ drawing

    def _image(self, n: int) -> QImage | None:
        if n in self._images:
            return self._images[n]
        from ..intake.pdf import render_page

        try:
            pil = render_page(self.path, n, scale=RENDER_SCALE).convert("RGB")
        except Exception:  # noqa: BLE001 - a preview that cannot be drawn is a blank page
            return None
        data = pil.tobytes("raw", "RGB")
        img = QImage(data, pil.width, pil.height, 3 * pil.width, QImage.Format_RGB888).copy()
        self._images[n] = img
        return img

    def _draw(self, n: int) -> None:
        from ..intake.paste import read_pasted

        scene = self.view.scene()
        scene.clear()
        self.view.forget_region()
        page = self._page(n)
        img = self._image(n)
        s = RENDER_SCALE
        if img is not None:
            scene.addItem(QGraphicsPixmapItem(QPixmap.fromImage(img)))
        else:
            scene.addRect(QRectF(0, 0, page.width * s, page.height * s), QPen(OTHER_PEN))
        font = QFont()
        font.setPointSize(9)
        font.setBold(True)
        number = 0
        for line in page.lines:
            x0, top, x1, bottom = page.box_on_page(line)
            rect = QRectF(x0 * s - 2, top * s - 2, (x1 - x0) * s + 4, (bottom - top) * s + 4)
            reading = read_pasted(line.text).lines
            study = bool(reading) and reading[0].status == "study"
            kept = self._kept(line)
            if study and kept:
                number += 1
                pen = QPen(STUDY_PEN, 2)
                scene.addRect(rect, pen)
                tag = scene.addSimpleText(str(number), font)
                tag.setBrush(QBrush(STUDY_PEN))
                # the number stands where the line starts to read
                if page.turn == "ccw":
                    tag.setPos(rect.left(), rect.bottom() + 2)
                elif page.turn == "cw":
                    tag.setPos(rect.left(), rect.top() - 16)
                else:
                    tag.setPos(rect.left() - 18, rect.top())
            else:
                pen = QPen(OTHER_PEN, 1, Qt.DashLine)
                scene.addRect(rect, pen)
        region = self.region.get(n)
        if region is not None:
            scene.addRect(region, QPen(REGION_PEN, 2, Qt.DashLine))
        # show the part of the page that holds text (with a margin), not the blank paper
        boxes = [page.box_on_page(line) for line in page.lines]
        if boxes:
            x0 = min(b[0] for b in boxes) * s - 40
            y0 = min(b[1] for b in boxes) * s - 30
            x1 = max(b[2] for b in boxes) * s + 30
            y1 = max(b[3] for b in boxes) * s + 30
            self._focus = QRectF(x0, y0, x1 - x0, y1 - y0)
        else:
            self._focus = QRectF(0, 0, page.width * s, page.height * s)
        self.view.setSceneRect(QRectF(0, 0, page.width * s, page.height * s))
        self.view.fitInView(self._focus, Qt.KeepAspectRatio)

    def resizeEvent(self, event) -> None:  # noqa: N802 - Qt API
        super().resizeEvent(event)
        focus = getattr(self, "_focus", None)
        if focus is not None:
            self.view.fitInView(focus, Qt.KeepAspectRatio)

    # ------------------------------------------------------------------ result

    def chosen_text(self) -> str:
        """The kept lines of the chosen pages, one per line (for the paste preview)."""
        lines = []
        for n in self.selected_pages():
            for line in self._page(n).lines:
                if self._kept(line):
                    lines.append(line.text)
        return "\n".join(lines)

    @property
    def chosen_pages(self) -> list[int]:
        return self.selected_pages()

    def origin(self):
        """(file name, the reading of the chosen lines, pages whose text could not be
        read) for :meth:`PasteDialog.set_origin`: the intake account then names page
        and line of the PDF for each row instead of "pasted text"."""
        from pathlib import Path

        return Path(self.path).name, self.reading(), tuple(self.doc.unread_pages())
