"""The ``intake`` object of the project file: what was not read and what was decided.

Kept apart from :mod:`lopside.model.project_file` so that the project file only gains two
lines. The object is optional (files written before it existed load with an empty
account) and validated like the rest: wrong types are refused with the place named.
"""

from __future__ import annotations

from typing import Any

from .review import DECIMAL_HOW, FAVOURS_SOURCES, IntakeAccount, NotRead

#: most entries kept (a hostile file cannot make the account huge)
MAX_NOT_READ = 20_000
_KINDS = ("line", "text", "cells", "column", "row", "page")


class IntakeFileError(ValueError):
    """The ``intake`` object of a project file is not valid."""


def intake_to_dict(account: IntakeAccount) -> dict[str, Any] | None:
    """The account as JSON-ready data, or None when it is empty (nothing to save)."""
    if account.is_empty():
        return None
    return {
        "source": account.source,
        "not_read": [
            {"kind": n.kind, "where": n.where, "text": n.text, "reason": n.reason}
            for n in account.not_read
        ],
        "decimal_mark": account.decimal_mark,
        "decimal_how": account.decimal_how,
        "decimal_evidence": account.decimal_evidence,
        "measure_how": account.measure_how,
        "rows_at": [[label, place] for label, place in account.rows_at],
    }


def _text(value: object, where: str, limit: int = 20_000) -> str:
    if value is None:
        return ""
    if not isinstance(value, str):
        raise IntakeFileError(f"intake, {where}: expected text.")
    if len(value) > limit:
        raise IntakeFileError(f"intake, {where}: the text is too long.")
    return value


def intake_from_dict(doc: object) -> IntakeAccount:
    """Read the ``intake`` object; a missing one is an empty account."""
    if doc is None:
        return IntakeAccount()
    if not isinstance(doc, dict):
        raise IntakeFileError("intake: expected an object.")
    items = doc.get("not_read", []) or []
    if not isinstance(items, list) or len(items) > MAX_NOT_READ:
        raise IntakeFileError("intake, not_read: expected a list of entries.")
    not_read = []
    for i, it in enumerate(items, start=1):
        if not isinstance(it, dict):
            raise IntakeFileError(f"intake, not_read entry {i}: expected an object.")
        kind = _text(it.get("kind"), f"not_read entry {i}, kind")
        if kind not in _KINDS:
            raise IntakeFileError(f"intake, not_read entry {i}: unknown kind '{kind}'.")
        not_read.append(
            NotRead(
                kind,
                _text(it.get("where"), f"not_read entry {i}, where"),
                _text(it.get("text"), f"not_read entry {i}, text"),
                _text(it.get("reason"), f"not_read entry {i}, reason"),
            )
        )
    mark = _text(doc.get("decimal_mark"), "decimal_mark")
    if mark not in ("", "point", "comma"):
        raise IntakeFileError("intake, decimal_mark: expected 'point' or 'comma'.")
    how = _text(doc.get("decimal_how"), "decimal_how")
    if how not in DECIMAL_HOW:
        raise IntakeFileError(f"intake, decimal_how: '{how}' is not one of {DECIMAL_HOW}.")
    at = doc.get("rows_at", []) or []
    if not isinstance(at, list) or len(at) > MAX_NOT_READ:
        raise IntakeFileError("intake, rows_at: expected a list of [label, place] pairs.")
    rows_at = []
    for i, pair in enumerate(at, start=1):
        if not (isinstance(pair, list) and len(pair) == 2):
            raise IntakeFileError(f"intake, rows_at entry {i}: expected [label, place].")
        rows_at.append((_text(pair[0], f"rows_at {i}"), _text(pair[1], f"rows_at {i}")))
    return IntakeAccount(
        rows_at=tuple(rows_at),
        source=_text(doc.get("source"), "source"),
        not_read=tuple(not_read),
        decimal_mark=mark,
        decimal_how=how,
        decimal_evidence=_text(doc.get("decimal_evidence"), "decimal_evidence"),
        measure_how=_text(doc.get("measure_how"), "measure_how"),
    )


def favours_source_from(value: object) -> str:
    """The saved ``details.favours_source`` (missing in older files: "")."""
    text = _text(value, "favours_source")
    if text not in FAVOURS_SOURCES:
        raise IntakeFileError(f"details, favours_source: '{text}' is not a known source.")
    return text
