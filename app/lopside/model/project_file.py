"""The Lopside project file: a versioned JSON document of our own design.

Layout (version 1)::

    {
      "lopside_project": 1,
      "saved_by": "Lopside 0.1.0",
      "details":  {title, question, outcome, measure, ci_level, favours, int_label,
                   ctl_label, appraiser, source_note,
                   published: {estimate, lower, upper, model}},
      "studies":  [{study, year, estimate, ... , exclude, unread: {field: text}}, ...],
      "notes":    {causes: {key: {judgement, notes}}, rating_override, rating_reason, general},
      "settings": {...}            # analysis settings, optional
    }

Loading validates everything (unknown version, wrong types, absurd sizes are refused with
a :class:`ProjectFileError` naming the place). Saving is atomic: the document is written to
a temporary file in the same folder, flushed and fsynced, then moved over the old file, so
the previous file is never left half-written.
"""

from __future__ import annotations

import json
import math
import os
import tempfile
from pathlib import Path
from typing import Any

from .review import (
    CAUSES,
    JUDGEMENTS,
    MEASURES,
    NUMERIC_FIELDS,
    AppraisalNotes,
    CauseNote,
    PublishedResult,
    Review,
    ReviewDetails,
    StudyRow,
)

FORMAT_KEY = "lopside_project"
FORMAT_VERSION = 1
SUFFIX = ".lopside"
#: limits that keep a hostile file from exhausting memory
MAX_BYTES = 50 * 1024 * 1024
MAX_STUDIES = 20_000
MAX_TEXT = 20_000
MAX_DEPTH = 12


class ProjectFileError(ValueError):
    """A project file that cannot be read; the message says where and what to do."""


# --------------------------------------------------------------------------------------
# To JSON


def review_to_dict(review: Review, settings: dict[str, Any] | None = None) -> dict[str, Any]:
    from .. import __version__

    d = review.details
    doc: dict[str, Any] = {
        FORMAT_KEY: FORMAT_VERSION,
        "saved_by": f"Lopside {__version__}",
        "details": {
            "title": d.title,
            "question": d.question,
            "outcome": d.outcome,
            "measure": d.measure,
            "ci_level": d.ci_level,
            "favours": d.favours,
            "int_label": d.int_label,
            "ctl_label": d.ctl_label,
            "appraiser": d.appraiser,
            "source_note": d.source_note,
            "published": {
                "estimate": d.published.estimate,
                "lower": d.published.lower,
                "upper": d.published.upper,
                "model": d.published.model,
            },
        },
        "studies": [s.to_dict() for s in review.studies],
        "notes": {
            "causes": {
                k: {"judgement": n.judgement, "notes": n.notes} for k, n in review.notes.causes
            },
            "rating_override": review.notes.rating_override,
            "rating_reason": review.notes.rating_reason,
            "general": review.notes.general,
        },
    }
    if settings:
        doc["settings"] = settings
    return doc


def dumps(review: Review, settings: dict[str, Any] | None = None) -> str:
    return json.dumps(review_to_dict(review, settings), indent=2, ensure_ascii=False) + "\n"


def save(review: Review, path: str | os.PathLike, settings: dict[str, Any] | None = None) -> None:
    """Write the project atomically (temp file in the same folder, fsync, replace)."""
    write_atomic(Path(path), dumps(review, settings).encode("utf-8"))


def write_atomic(path: Path, data: bytes) -> None:
    folder = path.parent if str(path.parent) else Path(".")
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=folder)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
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


# --------------------------------------------------------------------------------------
# From JSON


def _depth(obj: Any, limit: int) -> int:
    stack = [(obj, 1)]
    deepest = 0
    while stack:
        o, d = stack.pop()
        deepest = max(deepest, d)
        if d > limit:
            return d
        if isinstance(o, dict):
            stack.extend((v, d + 1) for v in o.values())
        elif isinstance(o, list):
            stack.extend((v, d + 1) for v in o)
    return deepest


def _text(v: Any, where: str, *, allow_none: bool = True) -> str:
    if v is None and allow_none:
        return ""
    if not isinstance(v, str):
        raise ProjectFileError(f"{where}: expected text, found {type(v).__name__}.")
    if len(v) > MAX_TEXT:
        raise ProjectFileError(f"{where}: text longer than {MAX_TEXT} characters.")
    return v


def _number(v: Any, where: str) -> float | None:
    if v is None:
        return None
    if isinstance(v, bool) or not isinstance(v, (int, float)):
        raise ProjectFileError(f"{where}: expected a number, found {type(v).__name__} {v!r:.40}.")
    f = float(v)
    if not math.isfinite(f):
        raise ProjectFileError(f"{where}: the number is not finite.")
    return f


def _study(obj: Any, i: int) -> StudyRow:
    where = f"study {i + 1}"
    if not isinstance(obj, dict):
        raise ProjectFileError(f"{where}: expected an object with the study's fields.")
    known = {"study", "year", "p_bound", "risk_of_bias", "subgroup", "exclude", "unread"}
    known.update(NUMERIC_FIELDS)
    unknown = set(obj) - known
    if unknown:
        raise ProjectFileError(f"{where}: unknown field(s) {', '.join(sorted(unknown))}.")
    kw: dict[str, Any] = {}
    kw["study"] = _text(obj.get("study"), f"{where}, study")
    year = obj.get("year")
    if year is not None:
        if isinstance(year, bool) or not isinstance(year, int):
            raise ProjectFileError(f"{where}, year: expected a whole number.")
        kw["year"] = year
    for f in NUMERIC_FIELDS:
        if f in obj:
            kw[f] = _number(obj[f], f"{where}, {f}")
    pb = obj.get("p_bound")
    if pb is not None:
        if pb not in ("<", "<=", ">"):
            raise ProjectFileError(f"{where}, p_bound: expected '<', '<=' or '>'.")
        kw["p_bound"] = pb
    for f in ("risk_of_bias", "subgroup"):
        if obj.get(f) is not None:
            kw[f] = _text(obj[f], f"{where}, {f}")
    ex = obj.get("exclude", False)
    if not isinstance(ex, bool):
        raise ProjectFileError(f"{where}, exclude: expected true or false.")
    kw["exclude"] = ex
    unread = obj.get("unread", {})
    if not isinstance(unread, dict):
        raise ProjectFileError(f"{where}, unread: expected an object of field: text.")
    kw["unread"] = tuple(
        (str(k), _text(v, f"{where}, unread {k}", allow_none=False)) for k, v in unread.items()
    )
    return StudyRow(**kw)


def review_from_dict(doc: Any) -> tuple[Review, dict[str, Any]]:
    """Validate a parsed document and build the review; returns (review, settings)."""
    if not isinstance(doc, dict):
        raise ProjectFileError("This is not a Lopside project (the top level is not an object).")
    if FORMAT_KEY not in doc:
        raise ProjectFileError(
            "This JSON file is not a Lopside project (no 'lopside_project' version key)."
        )
    version = doc[FORMAT_KEY]
    if version != FORMAT_VERSION:
        raise ProjectFileError(
            f"This project was written in format version {version!r}; this Lopside reads "
            f"version {FORMAT_VERSION}. Open it with the Lopside version that wrote it."
        )
    if _depth(doc, MAX_DEPTH) > MAX_DEPTH:
        raise ProjectFileError(
            "The project file is nested more deeply than a project can be."
        ) from None
    det = doc.get("details", {})
    if not isinstance(det, dict):
        raise ProjectFileError("details: expected an object.")
    measure = _text(det.get("measure", "OR"), "details, measure")
    if measure not in MEASURES:
        raise ProjectFileError(
            f"details, measure: '{measure}' is not one of {', '.join(MEASURES)}."
        )
    favours = _text(det.get("favours", "lower"), "details, favours")
    if favours not in ("lower", "higher"):
        raise ProjectFileError("details, favours: expected 'lower' or 'higher'.")
    level = _number(det.get("ci_level", 95.0), "details, ci_level")
    if level is None or not 50.0 < level < 100.0:
        raise ProjectFileError("details, ci_level: expected a percentage between 50 and 100.")
    pub = det.get("published", {}) or {}
    if not isinstance(pub, dict):
        raise ProjectFileError("details, published: expected an object.")
    published = PublishedResult(
        estimate=_number(pub.get("estimate"), "details, published estimate"),
        lower=_number(pub.get("lower"), "details, published lower"),
        upper=_number(pub.get("upper"), "details, published upper"),
        model=_text(pub.get("model"), "details, published model"),
    )
    details = ReviewDetails(
        title=_text(det.get("title"), "details, title"),
        question=_text(det.get("question"), "details, question"),
        outcome=_text(det.get("outcome"), "details, outcome"),
        measure=measure,
        ci_level=level,
        favours=favours,
        int_label=_text(det.get("int_label"), "details, int_label") or "intervention",
        ctl_label=_text(det.get("ctl_label"), "details, ctl_label") or "control",
        published=published,
        appraiser=_text(det.get("appraiser"), "details, appraiser"),
        source_note=_text(det.get("source_note"), "details, source_note"),
    )
    studies = doc.get("studies", [])
    if not isinstance(studies, list):
        raise ProjectFileError("studies: expected a list of studies.")
    if len(studies) > MAX_STUDIES:
        raise ProjectFileError(
            f"studies: {len(studies)} studies is more than Lopside handles ({MAX_STUDIES})."
        )
    rows = tuple(_study(s, i) for i, s in enumerate(studies))
    notes_doc = doc.get("notes", {}) or {}
    if not isinstance(notes_doc, dict):
        raise ProjectFileError("notes: expected an object.")
    causes_doc = notes_doc.get("causes", {}) or {}
    if not isinstance(causes_doc, dict):
        raise ProjectFileError("notes, causes: expected an object.")
    causes = []
    for key in CAUSES:
        c = causes_doc.get(key, {}) or {}
        if not isinstance(c, dict):
            raise ProjectFileError(f"notes, causes, {key}: expected an object.")
        j = _text(c.get("judgement", "not judged"), f"notes, {key}, judgement") or "not judged"
        if j not in JUDGEMENTS:
            raise ProjectFileError(
                f"notes, {key}, judgement: '{j}' is not one of {', '.join(JUDGEMENTS)}."
            )
        causes.append((key, CauseNote(j, _text(c.get("notes"), f"notes, {key}, notes"))))
    notes = AppraisalNotes(
        causes=tuple(causes),
        rating_override=_text(notes_doc.get("rating_override"), "notes, rating_override"),
        rating_reason=_text(notes_doc.get("rating_reason"), "notes, rating_reason"),
        general=_text(notes_doc.get("general"), "notes, general"),
    )
    settings = doc.get("settings", {}) or {}
    if not isinstance(settings, dict):
        raise ProjectFileError("settings: expected an object.")
    return Review(details=details, studies=rows, notes=notes), settings


def loads(text: str) -> tuple[Review, dict[str, Any]]:
    try:
        doc = json.loads(text)
    except json.JSONDecodeError as exc:
        raise ProjectFileError(
            f"The project file is damaged or incomplete (line {exc.lineno}, column {exc.colno}: "
            f"{exc.msg}). Open the last good copy or the autosave."
        ) from None
    except RecursionError:
        raise ProjectFileError(
            "The project file is nested more deeply than a project can be."
        ) from None
    return review_from_dict(doc)


def load(path: str | os.PathLike) -> tuple[Review, dict[str, Any]]:
    """Read and validate a project file; errors name the file and the place."""
    p = Path(path)
    try:
        size = p.stat().st_size
        if size > MAX_BYTES:
            raise ProjectFileError(
                f"{p.name}: {size / 1e6:.0f} MB is larger than a project file can be."
            )
        raw = p.read_bytes()
    except OSError as exc:
        raise ProjectFileError(f"{p.name}: cannot be read ({exc.strerror}).") from None
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise ProjectFileError(
            f"{p.name}: not a Lopside project (byte {exc.start} is not UTF-8 text)."
        ) from None
    try:
        return loads(text)
    except ProjectFileError as exc:
        raise ProjectFileError(f"{p.name}: {exc}") from None
