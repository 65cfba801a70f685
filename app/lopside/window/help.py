"""Help: the methods guide for clinicians, and the About box with the caution."""

from __future__ import annotations

from PySide6.QtWidgets import QDialog, QDialogButtonBox, QMessageBox, QTextBrowser, QVBoxLayout

from .. import CAUTION, __version__
from ..paths import resources_dir
from . import messages as M

FALLBACK_GUIDE = """# Methods guide

The methods guide file is missing from this installation.

**Caution.** {caution}
"""


def guide_text() -> str:
    """The methods guide (Markdown) shipped in resources/help."""
    p = resources_dir() / "help" / "methods_guide.md"
    try:
        return p.read_text(encoding="utf-8")
    except OSError:
        return FALLBACK_GUIDE.format(caution=CAUTION)


class GuideDialog(QDialog):
    def __init__(self, parent=None) -> None:
        super().__init__(parent)
        self.setWindowTitle("Lopside methods guide")
        self.resize(760, 620)
        lay = QVBoxLayout(self)
        self.browser = QTextBrowser()
        self.browser.setAccessibleName("Methods guide")
        self.browser.setOpenExternalLinks(False)
        self.browser.setMarkdown(guide_text())
        lay.addWidget(self.browser)
        buttons = QDialogButtonBox(QDialogButtonBox.Close)
        buttons.rejected.connect(self.reject)
        buttons.accepted.connect(self.accept)
        lay.addWidget(buttons)


def about_html() -> str:
    return M.ABOUT_TEXT.format(version=__version__, caution=CAUTION)


def show_about(parent) -> None:
    QMessageBox.about(parent, "About Lopside", about_html())
