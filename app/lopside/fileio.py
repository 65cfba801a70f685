"""Writing the user's files safely: atomic replace that keeps the file's identity, and the
checks that keep an output from clobbering an input.

Design invariants
-----------------
* :func:`write_atomic` writes a temporary file in the target's own folder, flushes and
  fsyncs it, gives it the old file's mode (and group, where allowed), then renames it over
  the target. A symlink is followed: its target is replaced and the link stays a link.
  The old file is never left half-written; on any failure the temporary file is removed.
* :func:`check_output` is the one place that decides whether a path may receive an output
  (sheet, figure, export). The CLI and the window both ask it; it never touches the disk
  except to read the first bytes of an existing file.
* When the old file cannot be replaced because another program holds it open (a PDF
  viewer on Windows), :class:`OutputLocked` says so and :func:`free_name` suggests a
  name that is free.
"""

from __future__ import annotations

import os
import stat
import tempfile
from pathlib import Path

# The process umask, read once at import (reading it means setting it, which is not
# thread-safe; it does not change while Lopside runs).
_UMASK = os.umask(0o022)
os.umask(_UMASK)

#: what each output kind's file starts with (first bytes), and its suffixes
KINDS: dict[str, tuple[tuple[str, ...], str]] = {
    "pdf": ((".pdf",), "a PDF"),
    "png": ((".png",), "a PNG image"),
    "svg": ((".svg",), "an SVG drawing"),
    "lopside": ((".lopside",), "a Lopside project"),
    "csv": ((".csv",), "a CSV table"),
    # outputs of panel, slide and batch
    "results": ((".csv",), "a CSV of Lopside results"),
    "docx": ((".docx",), "a Word document"),
    "xlsx": ((".xlsx",), "an Excel workbook"),
    "pptx": ((".pptx",), "a PowerPoint file"),
    "parquet": ((".parquet",), "a Parquet file"),
}

#: the first line of a CSV Lopside wrote as results (batch, panel summary), so that a
#: study table (someone's input) is never taken for one
_RESULT_HEADERS = (b"file,status,message,", b"outcome,measure,k,")

#: the part every Office file of each kind holds (they are all ZIP files)
_OFFICE_PARTS = {
    "word/document.xml": "docx",
    "xl/workbook.xml": "xlsx",
    "ppt/presentation.xml": "pptx",
}


class OutputRefused(ValueError):
    """An output path that would destroy something; the message says why and what to do."""


class OutputLocked(OSError):
    """The old file could not be replaced because another program holds it open."""

    def __init__(self, path: Path, suggestion: Path) -> None:
        super().__init__(
            f"{path.name} is open in another program (a PDF viewer?) and cannot be replaced. "
            f"Close it there, or write to another name such as {suggestion.name}."
        )
        self.path = path
        self.suggestion = suggestion


def real_target(path: str | os.PathLike) -> Path:
    """The file a save to ``path`` must replace: a symlink's target (followed to the end)."""
    p = Path(path)
    if p.is_symlink():
        return Path(os.path.realpath(p))
    return p


def write_atomic(path: str | os.PathLike, data: bytes) -> None:
    """Replace ``path`` with ``data`` atomically, keeping the file's mode, group and links.

    Raises
    ------
    OutputLocked
        When the old file is held open by another program (the rename was refused with
        "permission denied" although a new file could be written beside it).
    OSError
        When the folder cannot be written; the old file is left as it was.
    """
    target = real_target(path)
    folder = target.parent if str(target.parent) else Path(".")
    try:
        old = target.stat()
    except FileNotFoundError:
        old = None
    fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp", dir=folder)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            if old is not None:
                _keep_identity(fh.fileno(), old)
            else:  # mkstemp makes 0600; a new file gets the usual mode
                _fchmod(fh.fileno(), 0o666 & ~_UMASK)
            os.fsync(fh.fileno())
        try:
            os.replace(tmp, target)
        except PermissionError:
            if old is not None:
                raise OutputLocked(target, free_name(target)) from None
            raise
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise
    try:  # make the rename itself durable where the platform allows it
        dfd = os.open(folder, os.O_RDONLY)
        try:
            os.fsync(dfd)
        finally:
            os.close(dfd)
    except OSError:
        pass


def _fchmod(fd: int, mode: int) -> None:
    try:
        os.chmod(fd, mode)  # a descriptor where supported (POSIX)
    except (OSError, NotImplementedError, TypeError):
        pass


def _keep_identity(fd: int, old: os.stat_result) -> None:
    _fchmod(fd, stat.S_IMODE(old.st_mode))
    fchown = getattr(os, "fchown", None)
    if fchown is not None:
        try:  # the group can be kept when we belong to it; the owner only by root
            fchown(fd, -1, old.st_gid)
        except OSError:
            pass


def free_name(path: Path) -> Path:
    """``name (2).ext``, ``name (3).ext`` ... : the first that does not exist yet."""
    for i in range(2, 1000):
        candidate = path.with_name(f"{path.stem} ({i}){path.suffix}")
        if not candidate.exists():
            return candidate
    return path.with_name(f"{path.stem} ({os.getpid()}){path.suffix}")


def _same_file(a: Path, b: Path) -> bool:
    try:
        return os.path.samefile(a, b)
    except OSError:
        return os.path.realpath(a) == os.path.realpath(b)


def kind_of_existing(path: Path) -> str | None:
    """What an existing file is, from its first bytes: a KINDS key, "empty" or None."""
    try:
        with open(path, "rb") as fh:
            head = fh.read(2048)
    except OSError:
        return None
    if not head:
        return "empty"
    if head.startswith(b"%PDF"):
        return "pdf"
    if head.startswith(b"\x89PNG"):
        return "png"
    text = head.lstrip(b"\xef\xbb\xbf \t\r\n")
    if text.startswith(b"<") and b"<svg" in head:
        return "svg"
    if text.startswith(b"{") and b'"lopside_project"' in head:
        return "lopside"
    if head.startswith(b"PAR1"):
        return "parquet"
    if head.startswith(b"PK\x03\x04"):
        return _office_kind(path)
    if any(text.startswith(h) for h in _RESULT_HEADERS):
        return "results"
    return None


def _office_kind(path: Path) -> str | None:
    import zipfile

    try:
        with zipfile.ZipFile(path) as z:
            names = set(z.namelist())
    except (OSError, zipfile.BadZipFile):
        return None
    for part, kind in _OFFICE_PARTS.items():
        if part in names:
            return kind
    return None


def kind_for_suffix(path: str | os.PathLike, choices: tuple[str, ...]) -> str | None:
    """The first of ``choices`` (KINDS keys) whose suffixes include ``path``'s, or None."""
    suffix = Path(path).suffix.lower()
    return next((k for k in choices if suffix in KINDS[k][0]), None)


def check_output(
    out: str | os.PathLike,
    kind: str,
    inputs: tuple[str | os.PathLike | None, ...] = (),
    *,
    force: bool = False,
    force_hint: str = " (or add --force to replace it)",
) -> Path:
    """Check that ``out`` may receive an output of ``kind``; return it as a Path.

    Refused always: an output that is one of ``inputs`` (the same file, also through a
    link) and a suffix that does not match ``kind``. Refused unless ``force``: an existing
    file that is not of the output's own kind (a project, a table, anything else).

    Raises
    ------
    OutputRefused
        With a one-line message naming the path and what to do.
    """
    p = Path(out)
    suffixes, what = KINDS[kind]
    if p.suffix.lower() not in suffixes:
        raise OutputRefused(
            f"{p}: the output is {what}; end the file name with {' or '.join(suffixes)}."
        )
    if p.exists() or p.is_symlink():
        for src in inputs:
            if src and Path(src).exists() and _same_file(p, Path(src)):
                raise OutputRefused(
                    f"{p}: this is the file being read; choose another name for the output."
                )
        if p.is_dir():
            raise OutputRefused(f"{p}: is a folder; choose a file name.")
        found = kind_of_existing(p)
        if found not in (kind, "empty") and not force:
            shown = KINDS[found][1] if found in KINDS else "a file of another kind"
            raise OutputRefused(
                f"{p}: already exists and is {shown}, not {what}; choose another name{force_hint}."
            )
    return p
