"""Study rows straight from a review's PDF: the text layer with word positions.

Design invariants
-----------------
* Lines are rebuilt from the words' positions (pdfplumber), not from the order a PDF
  viewer would copy them in: words on one baseline form a line, left to right. A page set
  in two columns is read one column after the other; a table printed sideways (rotated a
  quarter turn) is read along its own lines.
* The lines of the chosen page(s) go through the same reader as pasted text
  (:func:`lopside.intake.paste.read_pasted`), so every line is accounted for the same way:
  a study, skipped with the reason, or not understood with the reason. Each line keeps
  its page number.
* Footnote marks set as small raised characters ("0.70" with a small "1") are left out and
  the account says so; NFKC is never applied to numbers.
* Failure is a sentence: a password, a page without a text layer, a damaged file, or a
  page too complex to read are each reported in plain words (:class:`PdfError` for the
  whole file). Work is bounded: pages with more than :data:`MAX_PAGE_CHARS` characters are
  not read, each page is read against a deadline (:data:`PAGE_SECONDS`; a page that
  takes longer is stopped and named, see :func:`read_pdf`), and a progress callback may
  cancel. A page that could not be read is listed in the intake account (kind "page"),
  never passed over silently.
* The intake account names where each row came from on the PDF ("page 7 of review.pdf,
  line 12"), not "pasted text", also after the lines went through the paste preview
  (:meth:`PdfRows.intake_account`).
* Rendering pages for the window's preview (pypdfium2) lives here too, with no Qt.
"""

from __future__ import annotations

import ctypes
import os
import statistics
import threading
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field, replace
from pathlib import Path

from ..model.review import IntakeAccount, NotRead
from .errors import IntakeError

#: A page with more characters than this is not read (a forest table has a few thousand).
MAX_PAGE_CHARS = 200_000
#: Longest time one page's text layer may take to read, in seconds. A page of a review
#: takes well under a second; one built of a huge number of tiny pieces (a scatter of
#: glyphs, a figure drawn as text) can take minutes, and is stopped instead.
PAGE_SECONDS = 15.0
#: After the deadline, how long the stopped page has to wind down (seconds).
STOP_GRACE_SECONDS = 2.0
#: ... during which the stop is raised again this often (seconds)
STOP_AGAIN_SECONDS = 0.1
#: Largest PDF file read (bytes).
MAX_PDF_BYTES = 200 * 2**20

NO_TEXT_LAYER = (
    "this page has no text layer (it is a scanned image) - type or paste the rows, "
    "or run your PDF reader's text recognition first"
)


class PdfError(IntakeError):
    """A PDF that cannot be read at all (password, damaged, not a PDF)."""


def too_slow(seconds: float) -> str:
    """Why a page was stopped (the page itself is named by the caller)."""
    return (
        f"reading its text took longer than {seconds:g} s and was stopped (a page built "
        "of very many small pieces, such as a figure drawn as text); if the table is on "
        "it, copy its rows from your PDF reader and paste them"
    )


@dataclass(frozen=True, slots=True)
class PdfWord:
    text: str
    x0: float
    x1: float
    top: float
    bottom: float
    size: float


@dataclass(frozen=True, slots=True)
class PdfLine:
    """One rebuilt line of a page: its text and where it stands (PDF points, top-left)."""

    page: int
    text: str
    x0: float
    x1: float
    top: float
    bottom: float
    #: footnote marks left out of the text (small raised characters)
    dropped_marks: tuple[str, ...] = ()
    #: the line's number on its page (1-based, in reading order)
    line_no: int = 0


@dataclass(frozen=True, slots=True)
class PdfPage:
    """A page's rebuilt lines and how many of them read as studies."""

    number: int  # 1-based
    width: float
    height: float
    lines: tuple[PdfLine, ...]
    study_rows: int = 0
    #: "" when the page was read; otherwise why not (no text layer, too complex)
    problem: str = ""
    #: "upright", or "sideways" for a table printed a quarter turn
    orientation: str = "upright"
    columns: int = 1
    #: for a sideways page, which way it was turned to read it: "ccw" or "cw"
    turn: str = ""

    def unread(self) -> bool:
        """The page has text that could not be read (too slow, too large, an error);
        a page without a text layer is not counted: it holds no text to lose."""
        return bool(self.problem) and self.problem != NO_TEXT_LAYER

    def box_on_page(self, line: PdfLine) -> tuple[float, float, float, float]:
        """(x0, top, x1, bottom) of ``line`` on the page as printed (points, top-left),
        undoing the quarter turn used to read a sideways table."""
        if self.turn == "ccw":
            return line.top, self.height - line.x1, line.bottom, self.height - line.x0
        if self.turn == "cw":
            return self.width - line.bottom, line.x0, self.width - line.top, line.x1
        return line.x0, line.top, line.x1, line.bottom


@dataclass(frozen=True, slots=True)
class PdfDocument:
    path: str
    pages: tuple[PdfPage, ...]
    cancelled: bool = False

    def unread_pages(self) -> list[PdfPage]:
        """Pages whose text could not be read (see :meth:`PdfPage.unread`)."""
        return [p for p in self.pages if p.unread()]

    def ranked(self) -> list[PdfPage]:
        """Pages holding study rows, most rows first (ties: earlier page first)."""
        return sorted(
            (p for p in self.pages if p.study_rows > 0), key=lambda p: (-p.study_rows, p.number)
        )


@dataclass(frozen=True, slots=True)
class PdfRows:
    """Rows read from chosen pages: the paste reading plus where each line came from."""

    paste: object  # PasteResult
    pages: tuple[int, ...]
    #: page number of each line of the paste, by line number (1-based)
    line_pages: tuple[int, ...]
    notes: tuple[str, ...] = field(default_factory=tuple)
    #: each line's text and its number on its page, in the order of ``line_pages``
    texts: tuple[str, ...] = ()
    page_lines: tuple[int, ...] = ()

    def where(self, name: str = "") -> str:
        """ "page 7 of review.pdf", "pages 7-8 of ...", "pages 7 and 9 of ..." (the pages
        read); without ``name`` just the pages."""
        pages = sorted(set(self.pages))
        if len(pages) == 1:
            text = f"page {pages[0]}"
        elif pages == list(range(pages[0], pages[-1] + 1)):
            text = f"pages {pages[0]}-{pages[-1]}"
        else:
            text = "pages " + ", ".join(str(n) for n in pages[:-1]) + f" and {pages[-1]}"
        return f"{text} of {name}" if name else text

    def places(self, paste=None) -> dict[int, tuple[int, int] | None]:
        """(page, line on that page) of each line of ``paste`` (default: this reading),
        by line number; matched by text, so that lines the user edited, added or removed
        in the paste preview keep the right places (an edited line has None)."""
        paste = self.paste if paste is None else paste
        avail: dict[str, list[tuple[int, int]]] = {}
        for text, page, line_no in zip(self.texts, self.line_pages, self.page_lines):
            avail.setdefault(text.strip(), []).append((page, line_no))
        out: dict[int, tuple[int, int] | None] = {}
        for r in paste.lines:
            hits = avail.get(r.text.strip())
            out[r.line_no] = hits.pop(0) if hits else None
        return out

    def intake_account(
        self,
        name: str,
        measure_how: str = "",
        *,
        paste=None,
        unread_pages: Sequence[PdfPage] = (),
        with_prose: bool = False,
    ) -> IntakeAccount:
        """The intake account of rows read from this PDF: the source is the page(s) of
        the file ("page 7 of review.pdf"), each row's place is "page 7 of review.pdf,
        line 12", lines not read are named by page and line, and pages that could not be
        read at all (``unread_pages``) are listed as such. ``paste`` is the reading of the
        lines as finally accepted (the window's paste preview may have edited them).
        Lines without any digit (titles, prose around a table) are left out of the list
        unless ``with_prose``; the caller says how many (:meth:`prose_count`)."""
        paste = self.paste if paste is None else paste
        at = self.places(paste)
        edited = "edited in the paste preview"

        def place(line_no: int) -> str:
            got = at.get(line_no)
            return f"page {got[0]}, line {got[1]}" if got else f"line {line_no}, {edited}"

        not_read: list[NotRead] = []
        for page in unread_pages:
            not_read.append(NotRead("page", f"page {page.number}", "", page.problem))
        by_line = {n.where: n for n in paste.not_read()}
        for r in paste.not_understood:
            if not with_prose and not any(ch.isdigit() for ch in r.text):
                continue
            n = by_line.get(f"line {r.line_no}")
            kind = n.kind if n is not None else "line"
            not_read.append(NotRead(kind, place(r.line_no), r.text.strip(), r.reason))
        rows_at = []
        for r in paste.studies:
            if r.row_index is None:
                continue
            got = at.get(r.line_no)
            where = f"page {got[0]} of {name}, line {got[1]}" if got else place(r.line_no)
            rows_at.append((paste.rows[r.row_index].study, where))
        return IntakeAccount(
            source=self.where(name),
            not_read=tuple(not_read),
            decimal_mark=paste.decimal_mark,
            decimal_how=paste.decimal_how,
            decimal_evidence=paste.decimal_evidence,
            measure_how=measure_how,
            rows_at=tuple(rows_at),
        )

    @staticmethod
    def prose_count(paste) -> int:
        """Lines not read that hold no digit at all (titles, prose): counted, not listed."""
        return sum(1 for r in paste.not_understood if not any(ch.isdigit() for ch in r.text))

    def source_note(self, name: str) -> str:
        """Where the rows came from, for the review's source note and the sheet:
        "Rows 1-5 from page 7 and rows 6-8 from page 8 of review.pdf (...)"."""
        runs: list[tuple[int, int, int]] = []  # (first row, last row, page), 1-based rows
        for i in range(len(self.paste.rows)):
            page = self.page_of_row(i)
            if runs and runs[-1][2] == page and runs[-1][1] == i:
                runs[-1] = (runs[-1][0], i + 1, page)
            else:
                runs.append((i + 1, i + 1, page))
        if len(runs) == 1:
            where = f"Rows read from page {runs[0][2]} of {name}"
        else:
            parts = [
                f"row{'s' if a != b else ''} {a}{f'-{b}' if a != b else ''} from page {p}"
                for a, b, p in runs
            ]
            first = parts[0][0].upper() + parts[0][1:].replace(" from", " read from", 1)
            where = ", ".join([first, *parts[1:-1]]) + f" and {parts[-1]} of {name}"
        return where + " by Lopside's PDF reader; check them against the paper."

    def page_of_row(self, row_index: int) -> int | None:
        for r in self.paste.lines:
            if r.row_index == row_index:
                return self.line_pages[r.line_no - 1]
        return None


# ------------------------------------------------------------------------------------
# opening


def _open(path: Path):
    try:
        import pdfplumber
        from pdfminer.pdfdocument import PDFEncryptionError, PDFPasswordIncorrect
        from pdfminer.pdfparser import PDFSyntaxError
    except ImportError as exc:  # pragma: no cover - a declared dependency
        raise PdfError(f"reading PDFs needs pdfplumber ({exc}).", path=path) from exc
    if not path.exists():
        raise PdfError("no such file.", path=path)
    size = path.stat().st_size
    if size > MAX_PDF_BYTES:
        raise PdfError("the PDF is larger than 200 MB.", path=path)
    with open(path, "rb") as fh:
        head = fh.read(1024)
    if b"%PDF" not in head:
        raise PdfError("this is not a PDF file.", path=path)
    password = PdfError(
        "the PDF is protected by a password. Open it in your PDF reader, select the "
        "table's rows, copy them and paste them into Lopside.",
        path=path,
    )
    try:
        pdf = pdfplumber.open(path)
        _ = len(pdf.pages)
    except Exception as exc:  # noqa: BLE001 - pdfminer raises many kinds on bad files
        # pdfplumber wraps pdfminer's errors; look at what it wraps
        inner = [exc, *getattr(exc, "args", ())]
        if any(isinstance(e, (PDFPasswordIncorrect, PDFEncryptionError)) for e in inner):
            raise password from exc
        if any("password" in str(e).lower() for e in inner):
            raise password from exc
        detail = "" if not any(isinstance(e, PDFSyntaxError) for e in inner) else f" ({exc})"
        raise PdfError(
            f"the PDF is damaged or cut short and cannot be read{detail}.", path=path
        ) from exc
    return pdf


# ------------------------------------------------------------------------------------
# words -> lines


def _turned(chars, rotated: str, width: float, height: float) -> list[dict]:
    """Sideways characters turned upright: reading direction on x, lines down the page."""
    out = []
    for c in chars:
        c = dict(c)
        x0, x1, top, bottom = c["x0"], c["x1"], c["top"], c["bottom"]
        if rotated == "ccw":  # reads bottom to top; later lines further right
            nx0, nx1, ntop, nbottom = height - bottom, height - top, x0, x1
        else:  # reads top to bottom; later lines further left
            nx0, nx1, ntop, nbottom = top, bottom, width - x1, width - x0
        c.update(
            x0=nx0,
            x1=nx1,
            top=ntop,
            bottom=nbottom,
            doctop=ntop,
            y0=height - nbottom,
            y1=height - ntop,
            upright=True,
            width=nx1 - nx0,
            height=nbottom - ntop,
            # pdfminer gives a sideways character's advance as its size; the font size is
            # its extent across the line
            size=x1 - x0,
        )
        out.append(c)
    return out


def _words(page, rotated: str | None) -> list[PdfWord]:
    from pdfplumber.utils import extract_words

    width, height = float(page.width), float(page.height)
    if rotated is None:
        chars = [c for c in page.chars if c.get("upright", True)]
    else:
        want = 1 if rotated == "ccw" else -1
        chars = [
            c
            for c in page.chars
            if not c.get("upright", True) and (c.get("matrix") or (0, 1))[1] * want > 0
        ]
        chars = _turned(chars, rotated, width, height)
    out = []
    for w in extract_words(chars, x_tolerance=1.5, extra_attrs=["size"], keep_blank_chars=False):
        out.append(
            PdfWord(
                text=w["text"],
                x0=float(w["x0"]),
                x1=float(w["x1"]),
                top=float(w["top"]),
                bottom=float(w["bottom"]),
                size=float(w.get("size") or (w["bottom"] - w["top"])),
            )
        )
    return out


def _axes(w: PdfWord) -> tuple[float, float, float, float]:
    """(line position, start along the line, end along the line, thickness)."""
    return (w.top + w.bottom) / 2, w.x0, w.x1, w.bottom - w.top


def _column_split(words: Sequence[PdfWord], width: float) -> float | None:
    """x of a gutter between two text columns, if the page is set in two."""
    if len(words) < 20:
        return None
    lo, hi = width * 0.3, width * 0.7
    step = 2.0
    bins = int((hi - lo) / step)
    crossing = [0] * bins
    for w in words:
        a = max(0, int((w.x0 - lo) / step))
        b = min(bins - 1, int((w.x1 - lo) / step))
        for i in range(a, b + 1):
            crossing[i] += 1
    # the widest run of bins that (almost) no word crosses, at least 8 points wide
    limit = max(1, len(words) // 100)
    best, run_start, best_mid = 0, None, None
    for i, c in enumerate(crossing + [limit + 1]):
        if c <= limit:
            if run_start is None:
                run_start = i
        elif run_start is not None:
            if i - run_start > best:
                best = i - run_start
                best_mid = lo + (run_start + i) / 2 * step
            run_start = None
    if best * step >= 8 and best_mid is not None:
        left = sum(1 for w in words if w.x1 <= best_mid)
        right = sum(1 for w in words if w.x0 >= best_mid)
        if left >= 10 and right >= 10:
            return best_mid
    return None


def _lines_of(words: Sequence[PdfWord], page_no: int, rotated: str | None, height: float):
    if not words:
        return []
    placed = sorted(((_axes(w), w) for w in words), key=lambda t: t[0][0])
    thick = statistics.median(a[3] for a, _ in placed) or 1.0
    groups: list[list[tuple[tuple[float, float, float, float], PdfWord]]] = []
    for item in placed:
        if groups and abs(item[0][0] - groups[-1][-1][0][0]) <= 0.45 * thick:
            groups[-1].append(item)
        else:
            groups.append([item])
    lines = []
    for g in groups:
        g.sort(key=lambda t: t[0][1])
        sizes = [w.size for _, w in g]
        main = statistics.median(sizes)
        base = statistics.median(w.bottom for _, w in g)
        kept, marks = [], []
        for i, (_, w) in enumerate(g):
            small = w.size < 0.8 * main
            raised = base is not None and w.bottom < base - 0.12 * main
            after_word = i > 0
            if small and raised and after_word and len(w.text) <= 3:
                marks.append(w.text)
                continue
            kept.append(w)
        if not kept:
            continue
        text = " ".join(w.text for w in kept)
        lines.append(
            PdfLine(
                page=page_no,
                text=text,
                x0=min(w.x0 for _, w in g),
                x1=max(w.x1 for _, w in g),
                top=min(w.top for _, w in g),
                bottom=max(w.bottom for _, w in g),
                dropped_marks=tuple(marks),
            )
        )
    return lines


def _score(lines: Sequence[PdfLine]) -> int:
    """Study rows the lines read as (what ranks the pages)."""
    from .paste import read_pasted

    if not lines:
        return 0
    return len(read_pasted("\n".join(line.text for line in lines)).rows)


def _label_score(lines: Sequence[PdfLine]) -> float:
    """Study rows weighted by how much their label looks like a study's label: a row
    without a label (numbers cut from their names) counts nothing, a label as long as a
    sentence (prose run into the row) half."""
    from .paste import read_pasted

    if not lines:
        return 0.0
    score = 0.0
    paste = read_pasted("\n".join(line.text for line in lines))
    for reading in paste.studies:
        label = paste.rows[reading.row_index].study or ""
        # a row without a label of its own is named by the reader ("Line 8"), not printed
        if label and label in reading.text and any(ch.isalpha() for ch in label):
            score += 1.0 if len(label.split()) <= 8 else 0.5
    return score


def _read_page(page, number: int) -> PdfPage:
    width, height = float(page.width), float(page.height)
    n_chars = len(page.chars)
    if n_chars == 0:
        return PdfPage(number, width, height, (), problem=NO_TEXT_LAYER)
    if n_chars > MAX_PAGE_CHARS:
        return PdfPage(
            number,
            width,
            height,
            (),
            problem=f"this page holds more than {MAX_PAGE_CHARS:,} characters and was not read",
        )
    upright = sum(1 for c in page.chars if c.get("upright", True))
    if upright >= n_chars / 2:
        words = _words(page, None)
        lines = _lines_of(words, number, None, height)
        columns = 1
        split = _column_split(words, width)
        if split is not None:
            # two columns only when reading them apart gives better-labelled rows (a table's
            # own column gaps look like a gutter too, but cutting there loses the labels)
            left = [w for w in words if w.x1 <= split]
            right = [w for w in words if w.x1 > split]
            apart = _lines_of(left, number, None, height) + _lines_of(right, number, None, height)
            if _label_score(apart) > _label_score(lines):
                lines, columns = apart, 2
        lines = _numbered(lines)
        return PdfPage(number, width, height, tuple(lines), _score(lines), columns=columns)
    best = None
    for rot in ("ccw", "cw"):
        lines = _lines_of(_words(page, rot), number, rot, height)
        score = _score(lines)
        if best is None or score > best[0]:
            best = (score, lines, rot)
    return PdfPage(
        number,
        width,
        height,
        tuple(_numbered(best[1])),
        best[0],
        orientation="sideways",
        turn=best[2],
    )


def _numbered(lines: Sequence[PdfLine]) -> list[PdfLine]:
    return [replace(line, line_no=i) for i, line in enumerate(lines, start=1)]


class _Stop(BaseException):
    """Raised inside a page's reading thread when its deadline has passed. A
    BaseException, so that pdfminer's and pdfplumber's ``except Exception`` clauses
    cannot swallow it."""


def _stop_thread(thread: threading.Thread) -> None:
    """Raise :class:`_Stop` in ``thread`` at its next Python instruction (CPython's
    PyThreadState_SetAsyncExc). pdfminer and pdfplumber are pure Python, so a page's
    reading stops within a fraction of a second; only a single long C call (inflating a
    huge stream) is not interrupted, and the caller then stops reading the file."""
    ident = thread.ident
    if ident is None:  # pragma: no cover - the thread was started
        return
    set_async = ctypes.pythonapi.PyThreadState_SetAsyncExc
    set_async.argtypes = (ctypes.c_ulong, ctypes.py_object)
    set_async.restype = ctypes.c_int
    set_async(ident, _Stop)


def _read_page_bounded(page, number: int, seconds: float) -> tuple[PdfPage, bool]:
    """(the page, whether its reading could not be stopped). Reads ``page`` in a worker
    thread and stops it after ``seconds``; the page then comes back with the reason as
    its problem and no lines."""
    if seconds == float("inf"):
        return _read_page(page, number), False
    box: dict[str, object] = {}

    def work() -> None:
        try:
            try:
                box["page"] = _read_page(page, number)
            except _Stop:
                box["stopped"] = True
            except Exception as exc:  # noqa: BLE001 - handed to the reading thread
                box["error"] = exc
        except _Stop:  # a repeated stop landing while the first one is handled
            box["stopped"] = True

    thread = threading.Thread(target=work, name=f"lopside-pdf-page-{number}", daemon=True)
    thread.start()
    thread.join(seconds)
    if not thread.is_alive():
        if "error" in box:
            raise box["error"]  # type: ignore[misc]
        return box["page"], False  # type: ignore[return-value]
    # the stop is raised again every STOP_AGAIN_SECONDS of the grace period: landing in
    # a garbage-collector callback or a __del__, an exception is printed and dropped
    # (seen in the test suite), and the page would read on
    waited = 0.0
    while thread.is_alive() and waited < STOP_GRACE_SECONDS:
        _stop_thread(thread)
        thread.join(STOP_AGAIN_SECONDS)
        waited += STOP_AGAIN_SECONDS
    empty = PdfPage(number, float(page.width), float(page.height), (), problem=too_slow(seconds))
    return empty, thread.is_alive()


def read_pdf(
    path: str | os.PathLike[str],
    *,
    pages: Sequence[int] | None = None,
    progress: Callable[[int, int], bool] | None = None,
    page_seconds: float | None = None,
) -> PdfDocument:
    """Read the text layer of ``path`` page by page (all pages, or the 1-based ``pages``).

    ``progress(done, total)`` is called after each page; returning False cancels (the
    pages read so far are kept and ``cancelled`` is set). Raises :class:`PdfError` for a
    file that cannot be read at all.

    Each page is read in a worker thread against a deadline of ``page_seconds`` (None:
    :data:`PAGE_SECONDS` as it is at the call; ``math.inf``: no deadline, no thread). A page that takes longer is stopped and comes back with no lines and
    the reason as its ``problem`` (:func:`too_slow`); the other pages are read as usual.
    Should a page's reading not stop (a single long call inside C), the pages after it
    are not read either, each with that reason, since the file is still in use.
    """
    p = Path(path)
    seconds = PAGE_SECONDS if page_seconds is None else page_seconds
    pdf = _open(p)
    out: list[PdfPage] = []
    cancelled = False
    try:
        total = len(pdf.pages)
        wanted = list(range(1, total + 1)) if pages is None else list(pages)
        for n in wanted:
            if not 1 <= n <= total:
                raise PdfError(
                    f"there is no page {n} (the PDF has {total} page{'s' if total != 1 else ''}).",
                    path=p,
                )
        stuck = 0
        for i, n in enumerate(wanted):
            if stuck:
                out.append(
                    PdfPage(
                        n,
                        0.0,
                        0.0,
                        (),
                        problem=(
                            f"this page could not be read: reading page {stuck} could not be "
                            "stopped, so the rest of the file was left"
                        ),
                    )
                )
                continue
            page = pdf.pages[n - 1]
            try:
                got, hung = _read_page_bounded(page, n, seconds)
                out.append(got)
                if hung:
                    stuck = n
            except Exception as exc:  # noqa: BLE001 - one bad page is a sentence, not a stop
                out.append(
                    PdfPage(
                        n,
                        float(page.width),
                        float(page.height),
                        (),
                        problem=f"this page could not be read ({type(exc).__name__})",
                    )
                )
            finally:
                if not stuck:
                    page.close()
            if progress is not None and progress(i + 1, len(wanted)) is False:
                cancelled = True
                break
    finally:
        pdf.close()
    return PdfDocument(str(p), tuple(out), cancelled)


def parse_pages(spec: str) -> list[int]:
    """'7', '7-8' or '7,9' -> page numbers; raises ValueError with a plain message."""
    pages: list[int] = []
    allowed = set("0123456789,- ")
    if not spec or not set(spec) <= allowed:
        raise ValueError("give page numbers such as 7, 7-8 or 7,9")
    for part in spec.replace(" ", "").split(","):
        if not part:
            continue
        if part.count("-") > 1 or part.startswith("-") or part.endswith("-"):
            raise ValueError(f"page range {part!r}: give FIRST-LAST, e.g. 7-8")
        if "-" in part:
            a, b = part.split("-", 1)
            lo, hi = int(a), int(b)
            if lo < 1 or hi < lo:
                raise ValueError(f"page range {part!r}: give FIRST-LAST with FIRST <= LAST")
            pages.extend(range(lo, hi + 1))
        else:
            n = int(part)
            if n < 1:
                raise ValueError("pages are numbered from 1")
            pages.append(n)
    if not pages:
        raise ValueError("give a page number, e.g. --page 7 or --page 7-8")
    return pages


def rows_from_pages(
    doc: PdfDocument,
    pages: Sequence[int],
    measure: str | None = None,
    *,
    keep: Callable[[PdfLine], bool] | None = None,
    decimal: str | None = None,
) -> PdfRows:
    """Read the lines of ``pages`` (in that order) as pasted text; ``keep`` filters lines
    (a region drawn on the page, unticked rows)."""
    from .paste import read_pasted

    by_number = {p.number: p for p in doc.pages}
    lines: list[PdfLine] = []
    notes: list[str] = []
    for n in pages:
        page = by_number[n]
        if page.problem:
            notes.append(f"page {n}: {page.problem}.")
        for line in page.lines:
            if keep is None or keep(line):
                lines.append(line)
                if line.dropped_marks:
                    notes.append(
                        f"page {n}: footnote mark(s) {', '.join(line.dropped_marks)} left out "
                        f"of '{line.text[:60]}'."
                    )
        if page.orientation == "sideways":
            notes.append(f"page {n}: the table is printed sideways; read along its lines.")
        if page.columns == 2:
            notes.append(f"page {n}: set in two columns; read one column after the other.")
    paste = read_pasted("\n".join(line.text for line in lines), measure, decimal)
    return PdfRows(
        paste=paste,
        pages=tuple(pages),
        line_pages=tuple(line.page for line in lines),
        notes=tuple(notes),
        texts=tuple(line.text for line in lines),
        page_lines=tuple(line.line_no for line in lines),
    )


def choose_pages(doc: PdfDocument, page_spec: str | None) -> tuple[list[int], list[str]]:
    """The pages to read and what to tell the user about the choice."""
    name = Path(doc.path).name
    if page_spec:
        return parse_pages(page_spec), []
    ranked = doc.ranked()
    if not ranked:
        no_text = [p.number for p in doc.pages if p.problem == NO_TEXT_LAYER]
        if no_text and len(no_text) == len(doc.pages):
            raise PdfError(f"{NO_TEXT_LAYER}.", path=doc.path)
        raise PdfError(
            "no page holds lines that read as study rows. Give the table's page with "
            "--page N, or copy the rows from your PDF reader and paste them.",
            path=doc.path,
        )
    best = ranked[0].number
    others = [p.number for p in ranked[1:]]
    msg = [f"{name}: rows read from page {best} ({ranked[0].study_rows} study rows)"]
    if others:
        msg.append(
            "other pages that also hold study rows: "
            + ", ".join(str(n) for n in others[:10])
            + (" ..." if len(others) > 10 else "")
            + " (choose with --page N, or --page N-M for a table that runs on)"
        )
    return [best], ["; ".join(msg) + "."]


def render_page(path: str | os.PathLike[str], number: int, scale: float = 1.5):
    """The page as a PIL image for a preview (pypdfium2), ``scale`` pixels per point."""
    import pypdfium2 as pdfium

    doc = pdfium.PdfDocument(os.fspath(path))
    try:
        page = doc[number - 1]
        try:
            return page.render(scale=scale).to_pil()
        finally:
            page.close()
    finally:
        doc.close()


__all__ = [
    "MAX_PAGE_CHARS",
    "NO_TEXT_LAYER",
    "PAGE_SECONDS",
    "PdfDocument",
    "PdfError",
    "PdfLine",
    "PdfPage",
    "PdfRows",
    "choose_pages",
    "parse_pages",
    "read_pdf",
    "render_page",
    "rows_from_pages",
]
