"""Where bundled files live: inside the installed package, or at the repository top."""

from __future__ import annotations

import sys
from pathlib import Path

_REPO_TOP = Path(__file__).resolve().parents[2]


def _package_dir(name: str) -> Path | None:
    # An installed package has the folder beside this module (the wheel puts it there).
    # importlib.resources is no help: these folders have no __init__.py, so files()
    # returns a MultiplexedPath whose str() is not a path.
    p = Path(__file__).resolve().parent / name
    return p if p.is_dir() else None


def _find(name: str) -> Path:
    frozen = getattr(sys, "_MEIPASS", None)
    if frozen:
        p = Path(frozen) / "lopside" / name
        if p.is_dir():
            return p
    p = _package_dir(name)
    if p is not None:
        return p
    return _REPO_TOP / name


def sample_reviews_dir() -> Path:
    """Folder of the invented demo reviews."""
    return _find("sample_reviews")


def resources_dir() -> Path:
    """Folder of icons, palette, help text."""
    return _find("resources")


def sample_reviews() -> list[Path]:
    d = sample_reviews_dir()
    return sorted(
        p for p in d.iterdir() if p.suffix.lower() in {".lopside", ".csv", ".txt", ".xlsx"}
    )
