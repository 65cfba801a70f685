"""Never lose work: autosave soon after a change; offer every autosave back after a crash.

Design invariants
-----------------
* Each window owns one autosave, named ``autosave-<time>-<pid>-<random>``: the review
  (``.lopside``, the project format), a sidecar ``.json`` (title, file, time, number of
  studies, host) and a ``.lock`` (a QLockFile) held while the window lives. The name never
  collides across runs, hosts or reused process ids; a window touches only its own files.
* A lock is taken over when its process is gone on this host, or when it has not been
  refreshed for :data:`STALE_AFTER_S` whatever host wrote it (a roaming profile after a
  crash on another PC). A live window refreshes its lock every :data:`HEARTBEAT_MS`, so
  it is never taken over.
* At start-up :func:`find_recoverable` lists every autosave whose lock could be taken (its
  window is gone) and holds those locks; the window asks the user what to restore and
  what to discard. Only what the user discards, and what was restored (and now lives in
  the new window's own autosave), is deleted; the rest is released and offered again.
* A clean exit removes the window's own three files.
* Autosave writes a few seconds after the first unsaved change (not after the last one,
  so steady typing cannot postpone it) on the GUI thread; analyses run in workers and do
  not delay it.

``LOPSIDE_AUTOSAVE_DIR`` points the folder elsewhere (tests).
"""

from __future__ import annotations

import json
import os
import secrets
import time
from dataclasses import dataclass, field
from pathlib import Path

from PySide6.QtCore import QLockFile, QObject, QStandardPaths, QSysInfo, QTimer, Signal

from ..fileio import write_atomic
from ..model import project_file
from ..session import Session

DELAY_MS = 3000
#: a lock not refreshed for this long belongs to a window that is gone (any host)
STALE_AFTER_S = 10 * 60
HEARTBEAT_MS = 60_000
PREFIX = "autosave-"


def autosave_folder() -> Path:
    d = os.environ.get("LOPSIDE_AUTOSAVE_DIR")
    if d:
        p = Path(d)
    else:
        p = Path(QStandardPaths.writableLocation(QStandardPaths.AppDataLocation)) / "autosave"
    p.mkdir(parents=True, exist_ok=True)
    return p


def new_stem() -> str:
    """A name no other run, host or reused process id will make."""
    return f"{PREFIX}{time.strftime('%Y%m%d-%H%M%S')}-{os.getpid()}-{secrets.token_hex(4)}"


def make_lock(path: Path) -> QLockFile:
    lock = QLockFile(str(path))
    lock.setStaleLockTime(STALE_AFTER_S * 1000)
    return lock


@dataclass
class Recoverable:
    """Autosaved work of a window that did not close cleanly (its lock is held by us)."""

    review_file: Path
    original: str  # the project file it belonged to ("" for an unsaved review)
    name: str  # what the window's title showed
    title: str  # the review's title
    saved_at: float
    studies: int | None
    host: str
    lock: QLockFile = field(repr=False)
    read_only: str = ""  # why the original file must not be saved over (a sample ...)

    @property
    def meta_file(self) -> Path:
        return self.review_file.with_suffix(".json")

    def when(self) -> str:
        return time.strftime("%d %b %Y %H:%M", time.localtime(self.saved_at))

    def discard(self) -> None:
        """Delete the autosave for good (the user chose to, or it was restored)."""
        for p in (self.review_file, self.meta_file):
            try:
                p.unlink()
            except OSError:
                pass
        self.lock.unlock()

    def release(self) -> None:
        """Keep the autosave and let the next start offer it again."""
        self.lock.unlock()


@dataclass
class RecoveryChoice:
    """What the user chose: restore these, discard those; the rest is kept for later."""

    restore: list[Recoverable] = field(default_factory=list)
    discard: list[Recoverable] = field(default_factory=list)


def as_choice(answer, items: list[Recoverable]) -> RecoveryChoice:
    """Read an ``ask_recover`` answer: None, one item, a list of items, or a RecoveryChoice."""
    if answer is None:
        return RecoveryChoice()
    if isinstance(answer, RecoveryChoice):
        return answer
    if isinstance(answer, Recoverable):
        return RecoveryChoice(restore=[answer])
    return RecoveryChoice(restore=[a for a in answer if a in items])


def _read_meta(path: Path) -> dict:
    try:
        meta = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return {}
    return meta if isinstance(meta, dict) else {}


def find_recoverable(folder: Path | None = None, skip: tuple[str, ...] = ()) -> list[Recoverable]:
    """Every autosave whose window is gone, newest first; their locks are now ours.

    ``skip`` names stems to leave alone (this process's own windows). Lock files left
    without an autosave (a window that never saved anything) are removed when stale.
    """
    folder = folder or autosave_folder()
    found: list[Recoverable] = []
    for f in sorted(folder.glob(f"{PREFIX}*.lopside")):
        if f.stem in skip:
            continue
        lock = make_lock(f.with_suffix(".lock"))
        if not lock.tryLock(0):
            continue  # a live window owns it (here or on another PC)
        meta = _read_meta(f.with_suffix(".json"))
        try:
            mtime = f.stat().st_mtime
        except OSError:
            lock.unlock()
            continue
        studies = meta.get("studies")
        found.append(
            Recoverable(
                review_file=f,
                original=str(meta.get("original", "")),
                name=str(meta.get("name", f.name)),
                title=str(meta.get("title", "")),
                saved_at=float(meta.get("saved_at", mtime)),
                studies=studies if isinstance(studies, int) else None,
                host=str(meta.get("host", "")),
                lock=lock,
                read_only=str(meta.get("read_only", "")),
            )
        )
    # clean up: locks (and sidecars) of windows that are gone and left no autosave
    for lk in folder.glob(f"{PREFIX}*.lock"):
        if lk.stem in skip or lk.with_suffix(".lopside").exists():
            continue
        stale = make_lock(lk)
        if stale.tryLock(0):
            try:
                lk.with_suffix(".json").unlink()
            except OSError:
                pass
            stale.unlock()  # removes the lock file
    found.sort(key=lambda r: r.saved_at, reverse=True)
    return found


class Autosaver(QObject):
    """Writes the session to this window's autosave ``delay_ms`` after the first change.

    ``failed(message)`` is emitted when an autosave cannot be written (never silent).
    """

    failed = Signal(str)

    def __init__(
        self, session: Session, folder: Path | None = None, delay_ms: int = DELAY_MS, parent=None
    ) -> None:
        super().__init__(parent)
        self.session = session
        self.folder = folder or autosave_folder()
        self.stem = new_stem()
        self.file = self.folder / f"{self.stem}.lopside"
        self.meta = self.folder / f"{self.stem}.json"
        self.lock_file = self.folder / f"{self.stem}.lock"
        self.lock = make_lock(self.lock_file)
        self.lock.tryLock(0)
        self.timer = QTimer(self)
        self.timer.setSingleShot(True)
        self.timer.setInterval(delay_ms)
        self.timer.timeout.connect(self.save_now)
        self.heartbeat = QTimer(self)
        self.heartbeat.setInterval(HEARTBEAT_MS)
        self.heartbeat.timeout.connect(self.refresh_lock)
        self.heartbeat.start()
        self._written_state = None
        self.last_error = ""
        session.add_listener(changed=self._changed)

    def _changed(self, _change) -> None:
        if not self.timer.isActive():
            self.timer.start()

    def refresh_lock(self) -> None:
        """Keep the lock fresh so no other PC takes it over while this window lives."""
        try:
            os.utime(self.lock_file)
        except OSError:
            pass

    def save_now(self) -> bool:
        """Write the autosave now (or remove it when there is nothing unsaved)."""
        self.timer.stop()
        s = self.session
        if not s.dirty:
            self.remove()
            return False
        if self._written_state == (s.state_id, s.settings):
            return True
        try:
            # the same checked, atomic save as File > Save, so an autosave always reopens
            project_file.save_workbook(s.workbook, self.file)  # every outcome
            meta = {
                "original": str(s.path or ""),
                "name": s.display_name(),
                "title": s.review.details.title,
                "studies": len(s.review.studies),
                "saved_at": time.time(),
                "host": QSysInfo.machineHostName(),
                "pid": os.getpid(),
                "read_only": s.read_only,
            }
            write_atomic(self.meta, json.dumps(meta, ensure_ascii=False).encode("utf-8"))
        except (OSError, ValueError) as exc:
            self.last_error = str(exc)
            self.failed.emit(self.last_error)
            return False
        self.last_error = ""
        self._written_state = (s.state_id, s.settings)
        return True

    def remove(self) -> None:
        for p in (self.file, self.meta):
            try:
                p.unlink()
            except OSError:
                pass
        self._written_state = None

    def close(self) -> None:
        """A clean exit: nothing left to recover."""
        self.timer.stop()
        self.heartbeat.stop()
        self.remove()
        self.lock.unlock()
