"""Start-up hooks for the portable (PyInstaller) bundle; they do nothing in a normal install.

Two problems only a frozen app has (ENGINEERING-NOTES.md, packaging):

* matplotlib keeps its font cache in ``MPLCONFIGDIR``. Inside a bundle the default is not
  writable or not persistent, so the cache is rebuilt at every launch (seconds). Point it
  at a per-user folder *before* the first ``import matplotlib``.
* A windowed Windows build starts with ``sys.stdout`` and ``sys.stderr`` set to ``None``:
  a ``print`` or a warning would raise. Send them, and the ``logging`` root, to a per-user
  log file instead.

The folders are worked out here without Qt (Qt is not imported yet and the command-line
path never imports it). They sit beside the ones Qt uses for the window's own settings.
"""

from __future__ import annotations

import os
import sys
from pathlib import Path

#: Organisation and application names, as the window gives them to Qt (window/messages.py),
#: so this cache folder is the one Qt calls CacheLocation: one folder tree for IT to know.
ORG_NAME = "Lopside"
APP_NAME = "Lopside"
#: The log file is started afresh (previous one kept as ``.1``) once it passes this size.
LOG_MAX_BYTES = 1_000_000


def is_frozen() -> bool:
    """True inside a PyInstaller bundle."""
    return bool(getattr(sys, "frozen", False)) and hasattr(sys, "_MEIPASS")


def user_cache_dir(environ: dict[str, str] | None = None, platform: str | None = None) -> Path:
    """Per-user folder for caches and the log; safe to delete at any time.

    The same folder as Qt's ``QStandardPaths.CacheLocation`` for this app, worked out
    without importing Qt. Windows: ``%LOCALAPPDATA%\\Lopside\\Lopside\\cache`` (local, not
    roaming: a font cache should not follow the user between PCs). macOS:
    ``~/Library/Caches/Lopside/Lopside``. Elsewhere: ``$XDG_CACHE_HOME/Lopside/Lopside`` or
    ``~/.cache/Lopside/Lopside``.
    """
    env = os.environ if environ is None else environ
    plat = sys.platform if platform is None else platform
    home = Path(env.get("HOME") or env.get("USERPROFILE") or Path.home())
    if plat.startswith("win"):
        base = env.get("LOCALAPPDATA") or env.get("APPDATA")
        root = Path(base) if base else home / "AppData" / "Local"
        return root / ORG_NAME / APP_NAME / "cache"
    if plat == "darwin":
        return home / "Library" / "Caches" / ORG_NAME / APP_NAME
    xdg = env.get("XDG_CACHE_HOME")
    return (Path(xdg) if xdg else home / ".cache") / ORG_NAME / APP_NAME


def _set_mplconfigdir(cache: Path) -> Path | None:
    if os.environ.get("MPLCONFIGDIR"):
        # the user or IT chose a folder: respect it
        return Path(os.environ["MPLCONFIGDIR"])
    if "matplotlib" in sys.modules:
        # too late to matter; say nothing rather than pretend
        return None
    d = cache / "matplotlib"
    try:
        d.mkdir(parents=True, exist_ok=True)
    except OSError:
        # a locked-down profile: matplotlib then falls back to a temporary folder itself
        return None
    os.environ["MPLCONFIGDIR"] = str(d)
    return d


def _open_log(cache: Path):
    d = cache / "logs"
    d.mkdir(parents=True, exist_ok=True)
    path = d / "lopside.log"
    try:
        if path.stat().st_size > LOG_MAX_BYTES:
            path.replace(path.with_suffix(".log.1"))
    except OSError:
        pass
    # line buffering: a crash still leaves what was logged before it
    return open(path, "a", encoding="utf-8", errors="replace", buffering=1)  # noqa: SIM115


def _redirect_missing_streams(cache: Path) -> Path | None:
    if sys.stdout is not None and sys.stderr is not None:
        return None
    try:
        log = _open_log(cache)
    except OSError:
        log = open(os.devnull, "w", encoding="utf-8")  # noqa: SIM115
    if sys.stdout is None:
        sys.stdout = log
    if sys.stderr is None:
        sys.stderr = log
    import logging

    logging.basicConfig(
        stream=log,
        level=logging.INFO,
        format="%(asctime)s %(levelname)s %(name)s: %(message)s",
    )
    try:
        import faulthandler

        # a hard crash in Qt or numpy then leaves a Python traceback in the log
        faulthandler.enable(log)
    except (OSError, ValueError, AttributeError):
        pass
    return Path(getattr(log, "name", os.devnull))


def prepare(force: bool = False) -> dict[str, str | None]:
    """Set up a frozen app's environment; call before anything imports matplotlib.

    Parameters
    ----------
    force : bool
        Run the hooks even outside a bundle (tests use it).

    Returns
    -------
    dict
        ``{"mplconfigdir": ..., "log": ...}`` with the folder and log file chosen, or
        ``None`` for a hook that did nothing.
    """
    done: dict[str, str | None] = {"mplconfigdir": None, "log": None}
    if not (force or is_frozen()):
        return done
    cache = user_cache_dir()
    mpl = _set_mplconfigdir(cache)
    log = _redirect_missing_streams(cache)
    done["mplconfigdir"] = str(mpl) if mpl else None
    done["log"] = str(log) if log else None
    return done
