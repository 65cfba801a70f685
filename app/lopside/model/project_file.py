"""The Lopside project file: a versioned JSON document of our own design.

Layout (version 2, a workbook of outcomes)::

    {
      "lopside_project": 2,
      "saved_by": "Lopside 0.1.0",
      "checksum": "sha256:...",
      "outcomes": [ {details, studies, intake, notes, settings}, ... ]
    }

Each entry of ``outcomes`` is exactly a version-1 document without its two version keys
(below), so a version-1 file is read as a workbook of one outcome and written back as
version 2 on its next save (the migration is that one step; nothing in it is renamed or
dropped). :func:`load` and :func:`loads` return one outcome as (review, settings) and
refuse a workbook of several with :class:`SeveralOutcomes`, which names them;
:func:`load_workbook` returns the whole :class:`~lopside.model.workbook.Workbook`.

Layout of one outcome (version 1, files written before workbooks)::

    {
      "lopside_project": 1,
      "saved_by": "Lopside 0.1.0",
      "details":  {title, question, outcome, measure, ci_level, favours, int_label,
                   ctl_label, appraiser, source_note, units (optional),
                   published: {estimate, lower, upper, model}},
      "studies":  [{study, year, estimate, ... , exclude, unread: {field: text}}, ...],
      "intake":   {source, not_read: [{kind, where, text, reason}], decimal_mark, ...},
                                   # optional (model/intake_file.py)
      "notes":    {causes: {key: {judgement, notes}}, rating_override, rating_reason, general},
      "settings": {...}            # analysis settings, optional
    }

The file carries ``"checksum": "sha256:<hex>"``: SHA-256 of the document without that key,
as canonical JSON (keys sorted, no spaces, UTF-8, see :func:`canonical_bytes`). A file
whose content no longer matches was changed outside Lopside (by hand, a sync tool, a
damaged disk); loading it raises :class:`ChangedOutside`, which carries the review so
that the window can offer to open it anyway, read-only until saved. A file without a
checksum (written before it existed) opens as before.

Loading validates everything (unknown version, wrong types, absurd sizes, settings that
are not among the choices are refused with a :class:`ProjectFileError` naming the place).
Saving is atomic (:func:`lopside.fileio.write_atomic`): the document is written to a
temporary file in the same folder, flushed and fsynced, then moved over the old file, so
the previous file is never left half-written; the file keeps its mode and group, and a
symlink keeps pointing at the replaced file.

Text that cannot be stored (a lone surrogate, a control character other than tab and
line breaks) is refused on load, naming the field; edits refuse it at entry
(:mod:`lopside.model.text`), so a review on screen can always be saved.

Saving never writes what loading would refuse: a number that is not finite is written as
unread text in its field (so nothing typed is lost and the row check reports it), and a
review beyond the limits is refused *before* the old file is touched.
"""

from __future__ import annotations

import hashlib
import json
import math
import os
import stat
from pathlib import Path
from typing import Any

from ..fileio import write_atomic
from .intake_file import (
    IntakeFileError,
    favours_source_from,
    intake_from_dict,
    intake_to_dict,
)
from .review import (
    CAUSES,
    CLAIM_CONCLUSIONS,
    JUDGEMENTS,
    MEASURES,
    NUMERIC_FIELDS,
    TABLE_COLUMNS,
    AppraisalNotes,
    CauseNote,
    PublishedResult,
    Review,
    ReviewClaim,
    ReviewDetails,
    StudyRow,
)
from .text import text_problem
from .workbook import MAX_OUTCOMES, Outcome, Workbook

FORMAT_KEY = "lopside_project"
FORMAT_VERSION = 2
#: the versions this Lopside reads (1: one outcome, before workbooks)
READABLE_VERSIONS = (1, 2)
SUFFIX = ".lopside"
#: limits that keep a hostile file from exhausting memory
MAX_BYTES = 50 * 1024 * 1024
MAX_STUDIES = 20_000
#: one-line texts (labels, title, subgroup ...)
MAX_TEXT = 20_000
#: free-text notes, which can legitimately be long
MAX_NOTES = 1_000_000
MAX_DEPTH = 12
#: years a study can carry (the same range the table editor accepts)
YEAR_RANGE = (1000, 2999)
#: settings checked on load: name -> allowed values. Kept here as literals so that this
#: module imports nothing heavy; a test checks them against the statistics modules.
SETTING_CHOICES: dict[str, tuple[Any, ...]] = {
    "measure": (None, *MEASURES),
    "tau2_method": ("REML", "PM", "DL"),
    "ci_method": ("z", "t", "auto"),
    "smd_correction": ("exact", "approx"),
    "funnel_model": ("fixed", "random"),
    "trimfill_estimator": ("L0", "R0"),
    "trimfill_side": ("auto", "left", "right"),
    "trimfill_trim_model": ("FE", "RE"),
    "trimfill_fill_model": ("FE", "RE"),
    "petpeese_sided": ("two", "one"),
}
#: settings that are probabilities (open interval 0 to 1)
SETTING_PROBABILITIES = ("test_alpha", "petpeese_alpha", "power_selection")
#: most replicates a saved power simulation may ask for (the default is 10,000)
MAX_POWER_REPS = 1_000_000
MAX_CUTPOINTS = 10


CHECKSUM_KEY = "checksum"


class ProjectFileError(ValueError):
    """A project file that cannot be read; the message says where and what to do."""


class ChangedOutside(ProjectFileError):
    """The file's content does not match its checksum: it was changed outside Lopside.

    ``workbook`` holds what the file says now (it passed every other check), for a caller
    that asks the user and opens it anyway; ``review`` and ``settings`` are its first
    outcome.
    """

    def __init__(
        self,
        message: str,
        review: Review,
        settings: dict[str, Any],
        workbook: Workbook | None = None,
    ) -> None:
        super().__init__(message)
        self.review = review
        self.settings = settings
        self.workbook = workbook or Workbook.of(review, settings)


class SeveralOutcomes(ProjectFileError):
    """A workbook of several outcomes where one outcome was asked for.

    The message names the outcomes; ``workbook`` holds them all (nothing is picked for the
    caller: a silent first outcome would appraise the wrong one).
    """

    def __init__(self, workbook: Workbook) -> None:
        names = ", ".join(f"'{n}'" for n in workbook.names)
        super().__init__(
            f"this project holds {len(workbook)} outcomes ({names}); choose one with "
            "--outcome NAME, or use 'lopside panel' for all of them."
        )
        self.workbook = workbook


def canonical_bytes(doc: dict[str, Any]) -> bytes:
    """The document without its checksum as canonical JSON (sorted keys, no spaces)."""
    body = {k: v for k, v in doc.items() if k != CHECKSUM_KEY}
    return json.dumps(
        body, sort_keys=True, ensure_ascii=False, separators=(",", ":"), allow_nan=False
    ).encode("utf-8")


def checksum_of(doc: dict[str, Any]) -> str:
    return "sha256:" + hashlib.sha256(canonical_bytes(doc)).hexdigest()


# --------------------------------------------------------------------------------------
# To JSON


def _saved_by() -> str:
    from .. import __version__

    return f"Lopside {__version__}"


def review_to_dict(review: Review, settings: dict[str, Any] | None = None) -> dict[str, Any]:
    """One outcome as a version-1 document (the unit a version-2 workbook lists)."""
    d = review.details
    doc: dict[str, Any] = {
        FORMAT_KEY: 1,
        "saved_by": _saved_by(),
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
            "favours_source": d.favours_source,
            "units": d.units,
            "published": {
                "estimate": d.published.estimate,
                "lower": d.published.lower,
                "upper": d.published.upper,
                "model": d.published.model,
                "i2": d.published.i2,
            },
            "claim": {
                "test": d.claim.test,
                "statistic": d.claim.statistic,
                "p": d.claim.p,
                "k": d.claim.k,
                "conclusion": d.claim.conclusion,
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
    intake = intake_to_dict(review.intake)
    if intake is not None:
        doc["intake"] = intake
    if settings:
        doc["settings"] = settings
    return doc


def _outcome_entry(outcome: Outcome) -> dict[str, Any]:
    doc = review_to_dict(outcome.review, outcome.settings)
    del doc[FORMAT_KEY], doc["saved_by"]
    return doc


def workbook_to_dict(workbook: Workbook) -> dict[str, Any]:
    """The workbook as a version-2 document (without its checksum)."""
    return {
        FORMAT_KEY: FORMAT_VERSION,
        "saved_by": _saved_by(),
        "outcomes": [_outcome_entry(o) for o in workbook.outcomes],
    }


def _entries(doc: dict[str, Any]) -> list[dict[str, Any]]:
    """The outcome entries of a document of either version."""
    return doc["outcomes"] if "outcomes" in doc else [doc]


def _keep_non_finite_as_text(doc: dict[str, Any]) -> None:
    for entry in _entries(doc):
        _keep_entry_finite(entry)


def _keep_entry_finite(doc: dict[str, Any]) -> None:
    """Move numbers that are not finite into ``unread`` (in place).

    JSON has no infinity, and the loader refuses one, so a row holding ``inf`` (from any
    route) would make the whole project impossible to open again. As unread text it is
    kept, shown in its cell and reported by the row check.
    """
    for study in doc["studies"]:
        bad = [
            f
            for f in NUMERIC_FIELDS
            if isinstance(study.get(f), float) and not math.isfinite(study[f])
        ]
        if not bad:
            continue
        unread = dict(study.get("unread", {}))
        for f in bad:
            unread.setdefault(f, repr(study.pop(f)))
        study["unread"] = unread


def _render(doc: dict[str, Any], pad: str = "") -> str:
    """JSON text: indented, with one study per line (outcomes one below the other).

    One compact line per study keeps the file readable and diffable while letting the
    fast C encoder do the bulk of the work (an indented dump of 20,000 studies goes
    through the pure-Python encoder and took seconds).
    """
    parts = []
    inner = pad + "  "
    for key, value in doc.items():
        name = json.dumps(key, ensure_ascii=False)
        if key == "studies" and value:
            rows = ",\n".join(
                inner + "  " + json.dumps(s, ensure_ascii=False, allow_nan=False) for s in value
            )
            parts.append(f"{inner}{name}: [\n{rows}\n{inner}]")
        elif key == "outcomes" and value:
            items = ",\n".join(inner + "  " + _render(o, inner + "  ") for o in value)
            parts.append(f"{inner}{name}: [\n{items}\n{inner}]")
        else:
            body = json.dumps(value, indent=2, ensure_ascii=False, allow_nan=False)
            parts.append(f"{inner}{name}: " + body.replace("\n", "\n" + inner))
    return "{\n" + ",\n".join(parts) + "\n" + pad + "}" + ("" if pad else "\n")


def _with_checksum(doc: dict[str, Any]) -> dict[str, Any]:
    """The document with its checksum placed after the version keys (readable at the top)."""
    out: dict[str, Any] = {}
    for k, v in doc.items():
        out[k] = v
        if k == "saved_by":
            out[CHECKSUM_KEY] = checksum_of(doc)
    if CHECKSUM_KEY not in out:
        out[CHECKSUM_KEY] = checksum_of(doc)
    return out


def dumps(review: Review, settings: dict[str, Any] | None = None) -> str:
    """A one-outcome project as JSON text (see :func:`dumps_workbook`)."""
    return dumps_workbook(Workbook.of(review, settings))


def dumps_workbook(workbook: Workbook) -> str:
    """The project as JSON text (numbers that are not finite kept as unread text)."""
    doc = workbook_to_dict(workbook)
    _keep_non_finite_as_text(doc)
    return _render(_with_checksum(doc))


def save(review: Review, path: str | os.PathLike, settings: dict[str, Any] | None = None) -> None:
    """Save a one-outcome project (see :func:`save_workbook`)."""
    save_workbook(Workbook.of(review, settings), path)


def save_workbook(workbook: Workbook, path: str | os.PathLike) -> None:
    """Write the project atomically (temp file in the same folder, fsync, replace).

    Raises
    ------
    ProjectFileError
        Before anything is written, when the review could not be opened again (more
        studies than :data:`MAX_STUDIES`, a text longer than the limits...); the file on
        disk is left as it was.
    OSError
        When the folder cannot be written; the file on disk is left as it was.
    """
    doc = workbook_to_dict(workbook)
    _keep_non_finite_as_text(doc)
    try:
        workbook_from_dict(doc)
    except ProjectFileError as exc:
        raise ProjectFileError(
            f"Not saved, because the file could not be opened again: {exc}"
        ) from None
    write_atomic(Path(path), _render(_with_checksum(doc)).encode("utf-8"))


# --------------------------------------------------------------------------------------
# From JSON


def _depth(obj: Any, limit: int) -> int:
    """Nesting depth of ``obj`` (1 for a scalar), counted no further than ``limit + 1``.

    Level by level and containers only, so that 20,000 studies are walked quickly.
    """
    level = [obj]
    depth = 1
    while depth <= limit:
        below: list[Any] = []
        for o in level:
            if isinstance(o, dict):
                below.extend(v for v in o.values() if isinstance(v, (dict, list)))
            elif isinstance(o, list):
                below.extend(v for v in o if isinstance(v, (dict, list)))
        if not below:
            return depth
        depth += 1
        level = below
    return depth


def _text(v: Any, where: str, *, allow_none: bool = True, limit: int = MAX_TEXT) -> str:
    if v is None and allow_none:
        return ""
    if not isinstance(v, str):
        raise ProjectFileError(f"{where}: expected text, found {type(v).__name__}.")
    if len(v) > limit:
        raise ProjectFileError(f"{where}: text longer than {limit:,} characters.")
    problem = text_problem(v, controls=False)
    if problem:
        raise ProjectFileError(f"{where}: {problem}; correct it in the file.")
    return v


def _notes(v: Any, where: str) -> str:
    return _text(v, where, limit=MAX_NOTES)


def _number(v: Any, where: str) -> float | None:
    if v is None:
        return None
    if isinstance(v, bool) or not isinstance(v, (int, float)):
        raise ProjectFileError(f"{where}: expected a number, found {type(v).__name__} {v!r:.40}.")
    try:
        f = float(v)
    except OverflowError:  # a whole number with hundreds of digits
        raise ProjectFileError(f"{where}: the number is too large.") from None
    if not math.isfinite(f):
        raise ProjectFileError(f"{where}: the number is not finite.")
    return f


def _settings(doc: Any) -> dict[str, Any]:
    """Check the saved analysis settings that could stop an analysis; return them."""
    if not isinstance(doc, dict):
        raise ProjectFileError("settings: expected an object.")
    for name, allowed in SETTING_CHOICES.items():
        if name in doc and doc[name] not in allowed:
            shown = ", ".join("none" if a is None else str(a) for a in allowed)
            raise ProjectFileError(
                f"settings, {name}: {doc[name]!r:.40} is not one of {shown}; correct it or "
                "delete the line."
            )
    if "hksj" in doc and not isinstance(doc["hksj"], bool):
        raise ProjectFileError("settings, hksj: expected true or false.")
    for name in SETTING_PROBABILITIES:
        if name in doc:
            p = _number(doc[name], f"settings, {name}")
            if p is None or not 0.0 < p < 1.0:
                raise ProjectFileError(f"settings, {name}: expected a number between 0 and 1.")
    if doc.get("orwin_trivial") is not None:
        _number(doc["orwin_trivial"], "settings, orwin_trivial")
    if "selection_cutpoints" in doc:
        cuts = doc["selection_cutpoints"]
        where = "settings, selection_cutpoints"
        if not isinstance(cuts, list) or not 1 <= len(cuts) <= MAX_CUTPOINTS:
            raise ProjectFileError(f"{where}: expected a list of 1 to {MAX_CUTPOINTS} numbers.")
        values = [_number(c, where) for c in cuts]
        if any(c is None or not 0.0 < c < 1.0 for c in values) or values != sorted(set(values)):
            raise ProjectFileError(f"{where}: expected increasing numbers between 0 and 1.")
    for name, low, high in (("power_reps", 1, MAX_POWER_REPS), ("power_seed", 0, 2**63 - 1)):
        if name in doc:
            v = doc[name]
            if isinstance(v, bool) or not isinstance(v, int) or not low <= v <= high:
                raise ProjectFileError(
                    f"settings, {name}: expected a whole number from {low:,} to {high:,}."
                )
    return doc


_STUDY_KEYS = frozenset(
    {
        "study",
        "year",
        "p_bound",
        "risk_of_bias",
        "subgroup",
        "exclude",
        "reported",
        "unread",
        *NUMERIC_FIELDS,
    }  # fmt: skip
)
_TABLE_KEYS = frozenset(TABLE_COLUMNS)


def _study(obj: Any, i: int) -> StudyRow:
    where = f"study {i + 1}"
    if not isinstance(obj, dict):
        raise ProjectFileError(f"{where}: expected an object with the study's fields.")
    unknown = obj.keys() - _STUDY_KEYS
    if unknown:
        # names shown quoted (repr): a name holding a line break stays on one line
        names = ", ".join(repr(str(k)) for k in sorted(unknown))[:200]
        raise ProjectFileError(f"{where}: unknown field(s) {names}.")
    kw: dict[str, Any] = {}
    kw["study"] = _text(obj.get("study"), f"{where}, study")
    year = obj.get("year")
    if year is not None:
        if isinstance(year, bool) or not isinstance(year, int):
            raise ProjectFileError(f"{where}, year: expected a whole number.")
        if not YEAR_RANGE[0] <= year <= YEAR_RANGE[1]:
            raise ProjectFileError(
                f"{where}, year: {year:.0f} is not a year from {YEAR_RANGE[0]} to {YEAR_RANGE[1]}."
            )
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
    rep = obj.get("reported", True)
    if not isinstance(rep, bool):
        raise ProjectFileError(f"{where}, reported: expected true or false.")
    kw["reported"] = rep
    unread = obj.get("unread", {})
    if not isinstance(unread, dict):
        raise ProjectFileError(f"{where}, unread: expected an object of field: text.")
    unknown = unread.keys() - _TABLE_KEYS
    if unknown:
        raise ProjectFileError(
            f"{where}, unread: unknown field(s) "
            f"{', '.join(repr(str(k)) for k in sorted(unknown))[:200]}."
        )
    kw["unread"] = tuple(
        (str(k), _text(v, f"{where}, unread {k}", allow_none=False)) for k, v in unread.items()
    )
    return StudyRow(**kw)


def review_from_dict(doc: Any) -> tuple[Review, dict[str, Any]]:
    """Validate a parsed document of one outcome; returns (review, settings).

    Raises :class:`SeveralOutcomes` for a workbook of several outcomes.
    """
    return _single(workbook_from_dict(doc))


def _single(workbook: Workbook) -> tuple[Review, dict[str, Any]]:
    if len(workbook) != 1:
        raise SeveralOutcomes(workbook)
    only = workbook.outcomes[0]
    return only.review, only.settings


def workbook_from_dict(doc: Any) -> Workbook:
    """Validate a parsed document (version 1 or 2) and build the workbook."""
    if not isinstance(doc, dict):
        raise ProjectFileError("This is not a Lopside project (the top level is not an object).")
    if FORMAT_KEY not in doc:
        raise ProjectFileError(
            "This JSON file is not a Lopside project (no 'lopside_project' version key)."
        )
    version = doc[FORMAT_KEY]
    # bool is an int in Python (True == 1): only a plain whole number is a version
    if (
        isinstance(version, bool)
        or not isinstance(version, int)
        or version not in READABLE_VERSIONS
    ):
        raise ProjectFileError(
            f"This project was written in format version {version!r}; this Lopside reads "
            f"versions {READABLE_VERSIONS[0]} to {FORMAT_VERSION}. Open it with the Lopside "
            "version that wrote it."
        )
    if _depth(doc, MAX_DEPTH) > MAX_DEPTH:
        raise ProjectFileError(
            "The project file is nested more deeply than a project can be."
        ) from None
    if version == 1:
        return Workbook((_outcome_from_dict(doc),))
    entries = doc.get("outcomes")
    if not isinstance(entries, list) or not entries:
        raise ProjectFileError("outcomes: expected a list of one or more outcomes.")
    if len(entries) > MAX_OUTCOMES:
        raise ProjectFileError(
            f"outcomes: {len(entries)} outcomes is more than Lopside handles ({MAX_OUTCOMES})."
        )
    total = sum(len(e.get("studies") or ()) for e in entries if isinstance(e, dict))
    if total > MAX_STUDIES * 5:
        raise ProjectFileError(
            f"outcomes: {total} studies in all is more than Lopside handles ({MAX_STUDIES * 5})."
        )
    outcomes = []
    for i, entry in enumerate(entries):
        if not isinstance(entry, dict):
            raise ProjectFileError(f"outcome {i + 1}: expected an object.")
        try:
            outcomes.append(_outcome_from_dict(entry))
        except ProjectFileError as exc:
            if len(entries) == 1:
                raise
            raise ProjectFileError(f"outcome {i + 1}, {exc}") from None
    return Workbook(tuple(outcomes))


def _outcome_from_dict(doc: dict[str, Any]) -> Outcome:
    """One outcome entry (a version-1 document's body), validated."""
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
        i2=_number(pub.get("i2"), "details, published I²"),
    )
    cl = det.get("claim", {}) or {}
    if not isinstance(cl, dict):
        raise ProjectFileError("details, claim: expected an object.")
    conclusion = _text(cl.get("conclusion"), "details, claim conclusion")
    if conclusion not in CLAIM_CONCLUSIONS:
        raise ProjectFileError(
            "details, claim conclusion: expected one of "
            + ", ".join(repr(c) for c in CLAIM_CONCLUSIONS if c)
            + " or nothing."
        )
    claim_k = _number(cl.get("k"), "details, claim k")
    if claim_k is not None and (claim_k != int(claim_k) or claim_k < 0):
        raise ProjectFileError("details, claim k: expected a whole number of studies.")
    claim_p = _number(cl.get("p"), "details, claim p")
    if claim_p is not None and not 0.0 <= claim_p <= 1.0:
        raise ProjectFileError("details, claim p: expected a P value between 0 and 1.")
    claim = ReviewClaim(
        test=_text(cl.get("test"), "details, claim test"),
        statistic=_number(cl.get("statistic"), "details, claim statistic"),
        p=claim_p,
        k=None if claim_k is None else int(claim_k),
        conclusion=conclusion,
    )
    if published.i2 is not None and not 0.0 <= published.i2 <= 100.0:
        raise ProjectFileError("details, published I²: expected a percentage from 0 to 100.")
    details = ReviewDetails(
        title=_text(det.get("title"), "details, title"),
        question=_notes(det.get("question"), "details, question"),
        outcome=_text(det.get("outcome"), "details, outcome"),
        measure=measure,
        ci_level=level,
        favours=favours,
        int_label=_text(det.get("int_label"), "details, int_label") or "intervention",
        ctl_label=_text(det.get("ctl_label"), "details, ctl_label") or "control",
        published=published,
        appraiser=_text(det.get("appraiser"), "details, appraiser"),
        source_note=_notes(det.get("source_note"), "details, source_note"),
        claim=claim,
        favours_source=_intake_part(favours_source_from, det.get("favours_source")),
        # added later: files without it (all older ones) read as "no units"
        units=_text(det.get("units"), "details, units"),
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
        causes.append((key, CauseNote(j, _notes(c.get("notes"), f"notes, {key}, notes"))))
    notes = AppraisalNotes(
        causes=tuple(causes),
        rating_override=_text(notes_doc.get("rating_override"), "notes, rating_override"),
        rating_reason=_notes(notes_doc.get("rating_reason"), "notes, rating_reason"),
        general=_notes(notes_doc.get("general"), "notes, general"),
    )
    settings = _settings(doc.get("settings", {}) or {})
    intake = _intake_part(intake_from_dict, doc.get("intake"))
    return Outcome(Review(details=details, studies=rows, notes=notes, intake=intake), settings)


def _intake_part(read, value):
    try:
        return read(value)
    except IntakeFileError as exc:
        raise ProjectFileError(str(exc)) from None


def loads(text: str, *, accept_changed: bool = False) -> tuple[Review, dict[str, Any]]:
    """Parse and validate the text of a one-outcome project.

    Raises :class:`SeveralOutcomes` for a workbook of several outcomes, and
    :class:`ChangedOutside` when the checksum does not match (unless ``accept_changed``),
    after every other check passed.
    """
    return _single(loads_workbook(text, accept_changed=accept_changed))


def loads_workbook(text: str, *, accept_changed: bool = False) -> Workbook:
    """Parse and validate project text of either version (see :func:`loads`)."""
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
    except ValueError:  # a whole number with more digits than Python converts (4,300)
        raise ProjectFileError(
            "The project file is damaged or incomplete (a number in it has thousands of "
            "digits). Open the last good copy or the autosave."
        ) from None
    workbook = workbook_from_dict(doc)
    if isinstance(doc, dict) and CHECKSUM_KEY in doc and not accept_changed:
        stored = doc[CHECKSUM_KEY]
        if not isinstance(stored, str) or stored != checksum_of(doc):
            raise ChangedOutside(
                "the file was changed outside Lopside since it was last saved (its content "
                "no longer matches its checksum). Check it before relying on it; to use it "
                "anyway, open it in the window (it stays read-only until saved) or add "
                "--accept-changed.",
                workbook.outcomes[0].review,
                workbook.outcomes[0].settings,
                workbook,
            )
    return workbook


def load(path: str | os.PathLike, *, accept_changed: bool = False) -> tuple[Review, dict[str, Any]]:
    """Read and validate a one-outcome project file; errors name the file and the place.

    Raises :class:`SeveralOutcomes` for a workbook of several outcomes (see
    :func:`load_workbook`), and :class:`ChangedOutside` (a ProjectFileError) when the
    content does not match its checksum, unless ``accept_changed``.
    """
    p = Path(path)
    try:
        return _single(load_workbook(p, accept_changed=accept_changed))
    except SeveralOutcomes as exc:
        err = SeveralOutcomes(exc.workbook)
        err.args = (f"{p.name}: {exc}",)
        raise err from None


def load_workbook(path: str | os.PathLike, *, accept_changed: bool = False) -> Workbook:
    """Read and validate a project file of either version; errors name the file."""
    p = Path(path)
    try:
        info = p.stat()
        size = info.st_size
        if not stat.S_ISREG(info.st_mode):
            # a folder, a pipe or a device (reading /dev/zero would never end)
            raise ProjectFileError(f"{p.name}: not a file; choose a Lopside project file.")
        if size > MAX_BYTES:
            raise ProjectFileError(
                f"{p.name}: the file is larger than a project file can be (more than "
                f"{MAX_BYTES / 2**20:.0f} MB)."
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
        return loads_workbook(text, accept_changed=accept_changed)
    except ChangedOutside as exc:
        raise ChangedOutside(f"{p.name}: {exc}", exc.review, exc.settings, exc.workbook) from None
    except ProjectFileError as exc:
        raise ProjectFileError(f"{p.name}: {exc}") from None
