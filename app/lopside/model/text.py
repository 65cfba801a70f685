"""Text that can be stored: the one check for characters a file cannot hold.

A lone surrogate (half of a UTF-16 pair, e.g. from a damaged clipboard or a JSON escape
such as ``\\ud800``) cannot be encoded as UTF-8, so a review holding one could never be
saved; control characters (other than tab and line breaks) are invisible, break the PDF
and spreadsheet exports and are never typed on purpose. Both are refused where text
enters the review (edits, the project file), with a message naming the field, so a save
never fails on them later.
"""

from __future__ import annotations

import re

_BAD = re.compile("[\ud800-\udfff\x00-\x08\x0b\x0c\x0e-\x1f\x7f-\x9f]")
_UNSTORABLE = re.compile("[\ud800-\udfff]")


def text_problem(text: str, *, controls: bool = True) -> str:
    """ "" when ``text`` can be stored; otherwise what is wrong with it, in plain words.

    ``controls=False`` checks only what cannot be saved at all (lone surrogates): files
    written before this check may hold a control character from a PDF copy, and must
    still open.
    """
    m = (_BAD if controls else _UNSTORABLE).search(text)
    if m is None:
        return ""
    ch = m.group()
    code = f"U+{ord(ch):04X}"
    where = f"character {m.start() + 1}"
    if "\ud800" <= ch <= "\udfff":
        return (
            f"{where} is a broken character ({code}, half of a pair) that cannot be saved; "
            "delete it and type the text again"
        )
    return f"{where} is an invisible control character ({code}); delete it"
