"""Never lose work: autosave a few seconds after a change; recover after an unclean exit.

Each running window owns ``autosave-<pid>.lopside`` (the review, in the project format)
with a sidecar ``.json`` (which file it was, when) and holds ``autosave-<pid>.lock``
(a QLockFile) while it runs. A clean exit removes all three. At start-up, an autosave
whose lock can be taken belongs to a run that did not exit cleanly (its process is gone:
QLockFile sees the stale lock), so its work can be offered back. Locks of a live window
cannot be taken, so two windows never recover each other's work.
``LOPSIDE_AUTOSAVE_DIR`` points the folder elsewhere (tests).
"""

from __future__ import annotations

import json
import os
import time
from dataclasses import dataclass
from pathlib import Path

from PySide6.QtCore import QLockFile, QObject, QStandardPaths, QTimer

from ..model import project_file
from ..session import Session

DELAY_MS = 3000


def autosave_folder() -> Path:
    d = os.environ.get("LOPSIDE_AUTOSAVE_DIR")
    if d:
        p = Path(d)
    else:
        p = Path(QStandardPaths.writableLocation(QStandardPaths.AppDataLocation)) / "autosave"
    p.mkdir(parents=True, exist_ok=True)
    return p


@dataclass
class Recoverable:
    """Autosaved work of a run that did not exit cleanly."""

    review_file: Path
    original: str  # the project file it belonged to ("" for an unsaved review)
    name: str
    saved_at: float
    lock: QLockFile  # held by us until the work is recovered or discarded

    def when(self) -> str:
        return time.strftime("%d %b %Y %H:%M", time.localtime(self.saved_at))

    def discard(self) -> None:
        for p in (self.review_file, self.review_file.with_suffix(".json")):
            try:
                p.unlink()
            except OSError:
                pass
        self.lock.unlock()


def find_recoverable(folder: Path | None = None) -> list[Recoverable]:
    """Autosaves left by runs that ended without a clean exit (newest first)."""
    folder = folder or autosave_folder()
    found: list[Recoverable] = []
    for f in sorted(folder.glob("autosave-*.lopside")):
        if f.stem == f"autosave-{os.getpid()}":
            continue
        lock = QLockFile(str(f.with_suffix(".lock")))
        lock.setStaleLockTime(0)  # stale only when its process is gone
        if not lock.tryLock(0):
            continue  # a live window owns it
        meta = {}
        try:
            meta = json.loads(f.with_suffix(".json").read_text(encoding="utf-8"))
        except (OSError, ValueError):
            pass
        found.append(
            Recoverable(
                f,
                str(meta.get("original", "")),
                str(meta.get("name", f.name)),
                float(meta.get("saved_at", f.stat().st_mtime)),
                lock,
            )
        )
    found.sort(key=lambda r: r.saved_at, reverse=True)
    return found


class Autosaver(QObject):
    """Writes the session to the autosave file ``delay_ms`` after the last change."""

    def __init__(
        self, session: Session, folder: Path | None = None, delay_ms: int = DELAY_MS, parent=None
    ) -> None:
        super().__init__(parent)
        self.session = session
        self.folder = folder or autosave_folder()
        stem = f"autosave-{os.getpid()}"
        self.file = self.folder / f"{stem}.lopside"
        self.meta = self.folder / f"{stem}.json"
        self.lock = QLockFile(str(self.folder / f"{stem}.lock"))
        self.lock.setStaleLockTime(0)
        self.lock.tryLock(0)
        self.timer = QTimer(self)
        self.timer.setSingleShot(True)
        self.timer.setInterval(delay_ms)
        self.timer.timeout.connect(self.save_now)
        self._written_state = None
        self.last_error = ""
        session.add_listener(changed=lambda _c: self.timer.start())

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
            project_file.save(s.review, self.file, s.settings.to_dict())
            meta = {
                "original": str(s.path or ""),
                "name": s.display_name(),
                "saved_at": time.time(),
            }
            project_file.write_atomic(self.meta, json.dumps(meta).encode("utf-8"))
        except (OSError, ValueError) as exc:
            self.last_error = str(exc)
            return False
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
        self.remove()
        self.lock.unlock()
