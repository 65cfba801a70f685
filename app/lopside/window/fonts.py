"""Register the DejaVu fonts shipped with matplotlib, so labels render on bare machines."""

from __future__ import annotations

from pathlib import Path

FAMILY = "DejaVu Sans"


def _font_dir() -> Path | None:
    # matplotlib's data folder is found without importing matplotlib itself (which is slow):
    # importlib.util.find_spec only locates the package.
    import importlib.util

    spec = importlib.util.find_spec("matplotlib")
    if spec is None or not spec.submodule_search_locations:
        return None
    d = Path(next(iter(spec.submodule_search_locations))) / "mpl-data" / "fonts" / "ttf"
    return d if d.is_dir() else None


def register_fonts() -> list[str]:
    """Add DejaVu Sans (regular, bold, oblique) to Qt's font database.

    Returns the families registered (empty when the files are not found; Qt then uses
    whatever the system has).
    """
    from PySide6.QtGui import QFontDatabase

    d = _font_dir()
    if d is None:
        return []
    families: list[str] = []
    for name in (
        "DejaVuSans.ttf",
        "DejaVuSans-Bold.ttf",
        "DejaVuSans-Oblique.ttf",
        "DejaVuSansMono.ttf",
    ):
        p = d / name
        if p.is_file():
            fid = QFontDatabase.addApplicationFont(str(p))
            if fid >= 0:
                families.extend(QFontDatabase.applicationFontFamilies(fid))
    return sorted(set(families))
