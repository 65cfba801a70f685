"""Error messages in plain words, with the technical detail kept behind "Show details".

The core's messages are written for the command line too: they start with the file's
name (the window's dialog already names it) and sometimes carry the name of the Python
exception that a library raised ("(BadZipFile)"). A reader preparing a journal club needs
neither; whoever helps them later may need both, so the untouched text and the exception
class go to the dialog's details.
"""

from __future__ import annotations

import re

#: "(BadZipFile)", "(UnicodeDecodeError)": a CamelCase word alone in brackets
_CLASS_IN_BRACKETS = re.compile(r"\s*\((?:[A-Z][a-z0-9]+){2,}\)")
#: "ValueError: ..." at the start of a message
_CLASS_PREFIX = re.compile(r"^(?:\w+\.)*\w*(?:Error|Exception|Warning)\b:\s+")


def plain(text: str, *names: str) -> str:
    """``text`` without exception class names and without a leading file name or path."""
    s = _CLASS_PREFIX.sub("", str(text).strip())
    for name in names:
        if name and s.startswith(f"{name}:"):
            s = s[len(name) + 1 :].lstrip()
    s = _CLASS_IN_BRACKETS.sub("", s)
    s = re.sub(r"\[Errno -?\d+\]\s*", "", s)  # OSError's number means nothing to a reader
    return s[:1].upper() + s[1:] if s else s


def details(exc: BaseException | str, *extra: str) -> str:
    """The technical account: exception class and its full text, plus any extra lines."""
    if isinstance(exc, BaseException):
        head = f"{type(exc).__module__}.{type(exc).__name__}: {exc}"
    else:
        head = str(exc)
    return "\n".join([head, *[x for x in extra if x]])


def show_error(parent, title: str, text: str, detail: str = "") -> object:
    """A warning box (window-modal, not blocking) with a "Show details" part; returns it."""
    from PySide6.QtCore import Qt
    from PySide6.QtWidgets import QMessageBox

    box = QMessageBox(QMessageBox.Warning, title, text, QMessageBox.Ok, parent)
    if detail:
        box.setDetailedText(detail)
    box.setWindowModality(Qt.WindowModal)
    box.setAttribute(Qt.WA_DeleteOnClose)
    box.show()
    return box
