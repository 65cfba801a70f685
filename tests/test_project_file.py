"""Project file: round trip, validation of hostile files, atomic save."""

from __future__ import annotations

import json

import pytest

from lopside.model import project_file as pf
from lopside.model.review import (
    AppraisalNotes,
    CauseNote,
    PublishedResult,
    Review,
    ReviewDetails,
    StudyRow,
)


def _review() -> Review:
    rows = (
        StudyRow(study="Ærøskøbing 2001", year=2001, estimate=0.8, lower=0.6, upper=1.1),
        StudyRow(
            study="Row two",
            int_events=3,
            int_total=40,
            ctl_events=0,
            ctl_total=41,
            risk_of_bias="high",
            subgroup="A",
            exclude=True,
        ),
        StudyRow(study="Typed badly", estimate=1.2, unread=(("lower", "0,9x"),)),
    )
    notes = AppraisalNotes().with_cause("methods", CauseNote("likely", "small trials unblinded"))
    return Review(
        details=ReviewDetails(
            title="Invented τ² review",
            measure="OR",
            published=PublishedResult(0.8, 0.7, 0.95, "random effects"),
        ),
        studies=rows,
        notes=notes,
    )


def test_round_trip_is_identical(tmp_path):
    r = _review()
    path = tmp_path / "a.lopside"
    pf.save(r, path, settings={"tau2_method": "PM"})
    back, settings = pf.load(path)
    assert back == r
    assert settings == {"tau2_method": "PM"}


@pytest.mark.parametrize(
    "text, fragment",
    [
        ('{"lopside_project": 1, "studies": [', "damaged or incomplete"),
        ('{"lopside_project": 7}', "format version 7"),
        ('{"something": 1}', "not a Lopside project"),
        ("[1, 2]", "not a Lopside project"),
        ('{"lopside_project": 1, "studies": [{"estimate": "big"}]}', "study 1, estimate"),
        ('{"lopside_project": 1, "studies": [{"colour": 3}]}', "unknown field"),
        ('{"lopside_project": 1, "details": {"measure": "XYZ"}}', "details, measure"),
        ('{"lopside_project": 1, "studies": {"a": 1}}', "studies: expected a list"),
        ('{"lopside_project": 1, "studies": [{"exclude": "yes"}]}', "exclude"),
        ('{"lopside_project": 1, "x": ' + "[" * 50 + "]" * 50 + "}", "nested"),
    ],
)
def test_bad_files_are_refused_with_a_message(tmp_path, text, fragment):
    path = tmp_path / "bad.lopside"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(pf.ProjectFileError) as err:
        pf.load(path)
    assert fragment in str(err.value)
    assert "bad.lopside" in str(err.value)


def test_non_utf8_is_refused(tmp_path):
    path = tmp_path / "bin.lopside"
    path.write_bytes(b'{"lopside_project": 1, "details": {"title": "\xff\xfe"}}')
    with pytest.raises(pf.ProjectFileError, match="not UTF-8"):
        pf.load(path)


def test_too_many_studies_is_refused(tmp_path):
    doc = {"lopside_project": 1, "studies": [{}] * (pf.MAX_STUDIES + 1)}
    path = tmp_path / "big.lopside"
    path.write_text(json.dumps(doc))
    with pytest.raises(pf.ProjectFileError, match="more than Lopside handles"):
        pf.load(path)


def test_failed_save_leaves_previous_file_untouched(tmp_path, monkeypatch):
    path = tmp_path / "keep.lopside"
    pf.save(_review(), path)
    before = path.read_bytes()

    def boom(*a, **k):
        raise OSError("disk full")

    monkeypatch.setattr(pf.os, "replace", boom)
    with pytest.raises(OSError):
        pf.save(_review().with_details(title="changed"), path)
    assert path.read_bytes() == before
    assert [p.name for p in tmp_path.iterdir()] == ["keep.lopside"]  # no temp file left behind
