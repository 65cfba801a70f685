"""Project file: round trip, validation of hostile files, atomic save."""

from __future__ import annotations

import hashlib
import json
import os
import random
import stat

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


# ------------------------------------------------------------------ issue 13: identity, integrity


@pytest.mark.skipif(os.name != "posix", reason="POSIX file modes")
def test_save_keeps_the_file_mode(tmp_path):
    # issue 13 case 5: saving rewrote a shared 0644 file as 0600 (mkstemp's mode)
    path = tmp_path / "shared.lopside"
    pf.save(_review(), path)
    os.chmod(path, 0o644)
    pf.save(_review().with_details(title="again"), path)
    assert stat.S_IMODE(path.stat().st_mode) == 0o644
    os.chmod(path, 0o640)
    pf.save(_review(), path)
    assert stat.S_IMODE(path.stat().st_mode) == 0o640


@pytest.mark.skipif(os.name != "posix", reason="POSIX file modes")
def test_a_new_file_gets_the_usual_mode_not_0600(tmp_path):
    path = tmp_path / "new.lopside"
    pf.save(_review(), path)
    umask = os.umask(0)
    os.umask(umask)
    assert stat.S_IMODE(path.stat().st_mode) == 0o666 & ~umask


@pytest.mark.skipif(not hasattr(os, "symlink"), reason="needs symlinks")
def test_save_through_a_symlink_replaces_the_target_and_keeps_the_link(tmp_path):
    # issue 13 case 5: the link was replaced by a plain file and its target left stale
    real_dir = tmp_path / "real"
    real_dir.mkdir()
    target = real_dir / "review.lopside"
    pf.save(_review(), target)
    link = tmp_path / "link.lopside"
    link.symlink_to(target)
    pf.save(_review().with_details(title="Saved through the link"), link)
    assert link.is_symlink() and os.readlink(link) == str(target)
    back, _ = pf.load(target)
    assert back.details.title == "Saved through the link"
    assert sorted(p.name for p in real_dir.iterdir()) == ["review.lopside"]  # no temp left


def test_the_file_carries_a_checksum_of_its_canonical_json(tmp_path):
    path = tmp_path / "sum.lopside"
    pf.save(_review(), path)
    doc = json.loads(path.read_text(encoding="utf-8"))
    body = {k: v for k, v in doc.items() if k != "checksum"}
    # recomputed here with hashlib and json directly (Python standard library)
    canonical = json.dumps(body, sort_keys=True, ensure_ascii=False, separators=(",", ":"))
    assert doc["checksum"] == "sha256:" + hashlib.sha256(canonical.encode("utf-8")).hexdigest()


def test_random_byte_flips_never_load_silently(tmp_path):
    # issue 13 case 7: nine random byte flips loaded silently with changed contents
    path = tmp_path / "flip.lopside"
    pf.save(_review(), path, settings={"tau2_method": "PM"})
    good = path.read_bytes()
    original = pf.load(path)
    rng = random.Random(20261202)
    silent = []
    for trial in range(300):
        data = bytearray(good)
        for _ in range(rng.randint(1, 9)):
            i = rng.randrange(len(data))
            data[i] ^= 1 << rng.randrange(8)
        path.write_bytes(bytes(data))
        try:
            loaded = pf.load(path)
        except pf.ProjectFileError:
            continue  # refused, or flagged as changed outside Lopside: never silent
        if loaded != original:
            silent.append(trial)
    assert silent == []


def test_a_changed_file_says_so_and_can_be_opened_anyway(tmp_path):
    path = tmp_path / "edited.lopside"
    pf.save(_review(), path)
    text = path.read_text(encoding="utf-8").replace("Row two", "Row 2!")
    path.write_text(text, encoding="utf-8")
    with pytest.raises(pf.ChangedOutside) as err:
        pf.load(path)
    assert "edited.lopside" in str(err.value) and "changed outside Lopside" in str(err.value)
    assert err.value.review.studies[1].study == "Row 2!"  # what the file says now
    back, _ = pf.load(path, accept_changed=True)
    assert back.studies[1].study == "Row 2!"


def test_a_file_without_a_checksum_still_opens(tmp_path):
    path = tmp_path / "old.lopside"
    pf.save(_review(), path)
    doc = json.loads(path.read_text(encoding="utf-8"))
    del doc["checksum"]
    path.write_text(json.dumps(doc), encoding="utf-8")
    back, _ = pf.load(path)
    assert back == _review()


def test_whitespace_changes_do_not_count_as_changed(tmp_path):
    path = tmp_path / "pretty.lopside"
    pf.save(_review(), path)
    doc = json.loads(path.read_text(encoding="utf-8"))
    path.write_text(json.dumps(doc, indent=7), encoding="utf-8")
    assert pf.load(path)[0] == _review()


def test_a_lone_surrogate_in_a_file_is_refused_naming_the_field(tmp_path):
    # issue 13 case 6: such a title loaded, and then the review could never be saved
    path = tmp_path / "sur.lopside"
    path.write_text('{"lopside_project": 1, "details": {"title": "a\\ud800b"}}', "utf-8")
    with pytest.raises(pf.ProjectFileError) as err:
        pf.load(path)
    assert "sur.lopside: details, title: character 2 is a broken character" in str(err.value)
