"""Workbooks: several outcomes in one project (issue 18).

What is checked, and against what:

* the file format: a workbook written and read back is the same value; a format-1 file
  (every file before workbooks, among them the shipped samples) opens as one outcome,
  unchanged, and is written back as format 2 (the migration); the checksum covers every
  outcome; a loader that wants one outcome never picks one silently;
* the workbook's own operations (rename, duplicate, reorder, delete, shared details, copy
  of studies between outcomes);
* the headless commands: ``--outcome`` chooses, its absence is refused with the names;
  the numbers of an outcome read from the workbook equal those of the same outcome saved
  on its own (the one-outcome path is the reference: it is checked against statsmodels and
  handbook examples in test_pooling.py and test_asymmetry.py); ``panel`` and ``batch``
  give one row per outcome; outputs never replace a file of another kind without
  ``--force``.

All data are invented (sample_reviews/heart_failure_workbook.lopside says so in every
outcome's source note).
"""

from __future__ import annotations

import csv
import json
from pathlib import Path

import pytest

from lopside import cli
from lopside.model import project_file as pf
from lopside.model.review import Review, StudyRow
from lopside.model.workbook import STUDY_IDENTITY, Outcome, Workbook, WorkbookError

ROOT = Path(__file__).resolve().parents[1]
SAMPLES = ROOT / "sample_reviews"
WORKBOOK = SAMPLES / "heart_failure_workbook.lopside"
NAMES = (
    "All-cause mortality at 90 days",
    "Readmission for heart failure at 90 days",
    "Six-minute walk distance at 90 days",
    "Quality of life at 90 days",
    "Serious adverse events",
)


def _review(name: str, k: int = 3) -> Review:
    rows = tuple(
        StudyRow(
            study=f"Invented {i} 20{10 + i}",
            year=2010 + i,
            estimate=0.7 + 0.05 * i,
            lower=0.5,
            upper=1.1 + 0.05 * i,
            risk_of_bias="low",
            subgroup="a",
        )
        for i in range(k)
    )
    return Review(studies=rows).with_details(
        title="Invented review", outcome=name, source_note="INVENTED"
    )


def _three() -> Workbook:
    wb = Workbook.of(_review("Mortality"), {"tau2_method": "PM"})
    wb = wb.inserted(1, Outcome(_review("Pain", 4), {}))
    return wb.inserted(2, Outcome(_review("Adverse events", 5), {"hksj": True}))


# ------------------------------------------------------------------------ the file


def test_workbook_round_trip_is_the_same_value(tmp_path):
    wb = _three()
    path = tmp_path / "w.lopside"
    pf.save_workbook(wb, path)
    doc = json.loads(path.read_text(encoding="utf-8"))
    assert doc["lopside_project"] == 2 and len(doc["outcomes"]) == 3
    assert pf.load_workbook(path) == wb


def test_format_1_opens_unchanged_and_migrates_on_save(tmp_path):
    review = _review("Mortality")
    old = tmp_path / "old.lopside"
    old.write_text(json.dumps(pf.review_to_dict(review, {"tau2_method": "DL"})), "utf-8")
    wb = pf.load_workbook(old)
    assert len(wb) == 1 and wb.outcomes[0].review == review
    assert wb.outcomes[0].settings == {"tau2_method": "DL"}
    assert pf.load(old) == (review, {"tau2_method": "DL"})
    pf.save_workbook(wb, old)
    doc = json.loads(old.read_text(encoding="utf-8"))
    assert doc["lopside_project"] == 2 and "details" not in doc
    # the migrated outcome is the format-1 body, key for key
    body = pf.review_to_dict(review, {"tau2_method": "DL"})
    del body["lopside_project"], body["saved_by"]
    assert doc["outcomes"] == [body]
    assert pf.load(old) == (review, {"tau2_method": "DL"})


@pytest.mark.parametrize("path", sorted(SAMPLES.glob("*.lopside")), ids=lambda p: p.name)
def test_every_shipped_project_opens_as_a_workbook(path):
    wb = pf.load_workbook(path)
    if path == WORKBOOK:
        assert wb.names == NAMES
        assert all("INVENTED" in o.review.details.source_note for o in wb.outcomes)
    else:  # written in format 1, before workbooks
        assert json.loads(path.read_text(encoding="utf-8"))["lopside_project"] == 1
        assert (wb.outcomes[0].review, wb.outcomes[0].settings) == pf.load(path)


def test_one_outcome_loader_refuses_several_and_names_them(tmp_path):
    with pytest.raises(pf.SeveralOutcomes) as err:
        pf.load(WORKBOOK)
    message = str(err.value)
    assert message.startswith("heart_failure_workbook.lopside: this project holds 5 outcomes")
    assert all(f"'{n}'" in message for n in NAMES) and "--outcome" in message
    assert len(err.value.workbook) == 5


def test_checksum_covers_every_outcome(tmp_path):
    path = tmp_path / "w.lopside"
    pf.save_workbook(_three(), path)
    text = path.read_text(encoding="utf-8")
    # the third outcome's last study (only it has five), renamed by hand
    assert text.count('"Invented 4 2014"') == 1
    path.write_text(text.replace('"Invented 4 2014"', '"Edited 4 2014"'), encoding="utf-8")
    with pytest.raises(pf.ChangedOutside) as err:
        pf.load_workbook(path)
    assert err.value.workbook.outcomes[2].review.studies[4].study == "Edited 4 2014"
    assert len(pf.load_workbook(path, accept_changed=True)) == 3


def test_save_refuses_what_could_not_be_opened_again_and_keeps_the_old_file(tmp_path):
    path = tmp_path / "w.lopside"
    pf.save_workbook(_three(), path)
    before = path.read_bytes()
    huge = Outcome(_review("Huge", 0).with_studies([StudyRow(study="x")] * (pf.MAX_STUDIES + 1)))
    with pytest.raises(pf.ProjectFileError, match="outcome 4, studies"):
        pf.save_workbook(_three().inserted(3, huge), path)
    assert path.read_bytes() == before


# ------------------------------------------------------------------------ operations


def test_rename_refuses_empty_and_taken_names():
    wb = _three()
    assert wb.renamed(1, "  Pain   at 6 weeks ").names[1] == "Pain at 6 weeks"
    with pytest.raises(WorkbookError, match="already called 'mortality'"):
        wb.renamed(1, "mortality")
    with pytest.raises(WorkbookError, match="needs a name"):
        wb.renamed(1, "   ")
    assert wb.renamed(0, "MORTALITY").names[0] == "MORTALITY"  # its own name, recased


def test_duplicate_move_delete():
    wb = _three()
    dup = wb.duplicated(0)
    assert dup.names == ("Mortality", "Mortality (copy)", "Pain", "Adverse events")
    assert dup.outcomes[1].review.studies == wb.outcomes[0].review.studies
    assert dup.duplicated(0).names[1] == "Mortality (copy) (2)"
    assert wb.moved(2, 0).names == ("Adverse events", "Mortality", "Pain")
    assert wb.removed(1).names == ("Mortality", "Adverse events")
    with pytest.raises(WorkbookError, match="last outcome"):
        Workbook.of(_review("Only")).removed(0)
    with pytest.raises(WorkbookError, match="no outcome 5"):
        wb.removed(4)


def test_shared_details_change_everywhere_and_new_outcomes_carry_them():
    wb = _three().with_shared(title="Renamed review", appraiser="A. Reader")
    assert {o.review.details.title for o in wb.outcomes} == {"Renamed review"}
    new = wb.new_outcome("Pain")
    assert new.review.details.outcome == "Pain (2)" and not new.review.studies
    assert new.review.details.appraiser == "A. Reader"
    with pytest.raises(WorkbookError, match="measure"):
        wb.with_shared(measure="RR")


def test_copy_studies_carries_who_they_are_not_their_numbers():
    wb = _three()
    out = wb.copy_studies(2, 0, rows=(3, 4))
    copied = out.outcomes[0].review.studies[3:]
    source = wb.outcomes[2].review.studies[3:]
    assert [s.study for s in copied] == [s.study for s in source]
    for new, old in zip(copied, source):
        for f in STUDY_IDENTITY:
            assert getattr(new, f) == getattr(old, f)
        assert new.estimate is None and new.lower is None and new.upper is None
    assert len(wb.copy_studies(1, 0).outcomes[0].review.studies) == 3 + 4


def test_find_names_the_outcomes_and_suggests_one():
    wb = pf.load_workbook(WORKBOOK)
    assert wb.find(" serious ADVERSE events") == 4
    with pytest.raises(WorkbookError, match="Did you mean 'Quality of life at 90 days'"):
        wb.find("quality")


# ------------------------------------------------------------------------ commands


def _run(capsys, *argv) -> tuple[int, str, str]:
    code = cli.main([str(a) for a in argv])
    out = capsys.readouterr()
    return code, out.out, out.err


def test_check_needs_outcome_and_reads_the_one_named(tmp_path, capsys):
    code, _, err = _run(capsys, "check", WORKBOOK)
    assert code == 2 and "holds 5 outcomes" in err and err.count("\n") == 1
    code, out, err = _run(
        capsys, "check", WORKBOOK, "--outcome", "six-minute walk distance at 90 days", "--json"
    )
    assert code == 0, err
    from_book = json.loads(out)
    # the same outcome saved on its own: the one-outcome path gives the same numbers
    wb = pf.load_workbook(WORKBOOK)
    alone = tmp_path / "walk.lopside"
    pf.save_workbook(Workbook((wb.outcomes[2],)), alone)
    code, out, err = _run(capsys, "check", alone, "--json")
    assert code == 0, err
    assert json.loads(out)["pooled"] == from_book["pooled"]
    assert from_book["measure"] == "MD" and from_book["k"] == 11
    code, _, err = _run(capsys, "check", WORKBOOK, "--outcome", "mortality")
    assert code == 2 and "Did you mean 'All-cause mortality at 90 days'" in err


def test_sheet_plot_slide_take_outcome(tmp_path, capsys):
    for argv in (
        ("sheet", WORKBOOK, "--outcome", NAMES[3], "-o", tmp_path / "q.pdf"),
        ("plot", WORKBOOK, "--outcome", NAMES[4], "-o", tmp_path / "f.png"),
        ("slide", WORKBOOK, "--outcome", NAMES[0], "-o", tmp_path / "s.pptx"),
    ):
        code, _, err = _run(capsys, *argv)
        assert code == 0, err
        assert Path(argv[-1]).stat().st_size > 1000
    from pypdf import PdfReader

    text = "".join(p.extract_text() for p in PdfReader(tmp_path / "q.pdf").pages)
    assert NAMES[3] in " ".join(text.split())


def test_panel_and_batch_give_one_row_per_outcome(tmp_path, capsys):
    code, _, err = _run(capsys, "panel", WORKBOOK, "-o", tmp_path / "p.csv")
    assert code == 0, err
    with open(tmp_path / "p.csv", encoding="utf-8-sig", newline="") as fh:
        rows = list(csv.DictReader(fh))
    assert tuple(r["outcome"] for r in rows) == NAMES
    assert [r["measure"] for r in rows] == ["OR", "RR", "MD", "SMD", "OR"]
    sheets = tmp_path / "sheets"
    code, _, err = _run(
        capsys,
        "batch",
        WORKBOOK,
        "-o",
        tmp_path / "b.csv",
        "--workers",
        "1",
        "--sheets",
        sheets,
        "--quiet",
    )
    assert code == 0, err
    with open(tmp_path / "b.csv", encoding="utf-8-sig", newline="") as fh:
        batch = list(csv.DictReader(fh))
    assert tuple(r["outcome"] for r in batch) == NAMES and {r["status"] for r in batch} == {"ok"}
    # the panel and the batch read the same numbers for each outcome
    assert [r["estimate"] for r in batch] == [r["estimate"] for r in rows]
    # one sheet per outcome: none written over another
    assert len(list(sheets.glob("*.pdf"))) == 5


@pytest.mark.parametrize(
    "command,out,extra",
    [
        ("panel", "p.csv", ()),
        ("panel", "p.xlsx", ()),
        ("slide", "s.pptx", ()),
        ("batch", "b.csv", ("--workers", "1", "--quiet")),
    ],
)
def test_outputs_never_replace_a_file_of_another_kind(tmp_path, capsys, command, out, extra):
    target = tmp_path / out
    # someone's study table, or a document of another kind, under the output's name
    if out.endswith(".csv"):
        precious = b"study,estimate,lower,upper\nA,0.8,0.6,1.1\n"
    else:
        precious = _office_file_of_another_kind(tmp_path)
    target.write_bytes(precious)
    source = SAMPLES / "wound_dressings_small.lopside" if command == "slide" else WORKBOOK
    code, _, err = _run(capsys, command, source, "-o", target, *extra)
    assert code == 2 and "already exists" in err and "--force" in err
    assert target.read_bytes() == precious
    code, _, err = _run(capsys, command, source, "-o", target, "--force", *extra)
    assert code == 0, err
    assert target.read_bytes() != precious
    # its own kind is replaced without --force (the command run again)
    code, _, err = _run(capsys, command, source, "-o", target, *extra)
    assert code == 0, err


def _office_file_of_another_kind(tmp_path: Path) -> bytes:
    """A small ZIP that is a Word document (for .xlsx/.pptx outputs)."""
    import zipfile

    path = tmp_path / "other.zip"
    with zipfile.ZipFile(path, "w") as z:
        z.writestr("word/document.xml", "<w:document/>")
    return path.read_bytes()


def test_an_output_is_never_one_of_the_inputs(tmp_path, capsys):
    copy = tmp_path / "w.lopside"
    copy.write_bytes(WORKBOOK.read_bytes())
    table = tmp_path / "t.csv"
    table.write_text("study,estimate,lower,upper\nA,0.8,0.6,1.1\nB,0.7,0.5,0.9\n", "utf-8")
    code, _, err = _run(capsys, "panel", copy, table, "--measure", "OR", "-o", table, "--force")
    assert code == 2 and "being read" in err
    assert table.read_text("utf-8").startswith("study,")


# ------------------------------------------------------------------------ the session


def _session_of(wb: Workbook, tmp_path):
    from lopside.session import Session

    path = tmp_path / "w.lopside"
    pf.save_workbook(wb, path)
    s = Session()
    s.open(path)
    return s


def test_session_holds_every_outcome_and_saves_them_all(tmp_path):
    from lopside import edits as ed

    s = _session_of(_three(), tmp_path)
    assert s.outcome_names == ("Mortality", "Pain", "Adverse events")
    assert s.review.details.outcome == "Mortality" and s.settings.tau2_method == "PM"
    s.select_outcome(2)
    assert s.settings.hksj and not s.dirty  # choosing is not an edit
    s.do(ed.SetCell(0, "study", "Edited in outcome 3"))
    s.select_outcome(0)
    s.do(ed.SetCell(0, "study", "Edited in outcome 1"))
    target = s.save()
    back = pf.load_workbook(target)
    assert back.outcomes[2].review.studies[0].study == "Edited in outcome 3"
    assert back.outcomes[0].review.studies[0].study == "Edited in outcome 1"
    assert back.outcomes[1].review == _three().outcomes[1].review
    from lopside.settings import AnalysisSettings

    assert [AnalysisSettings.from_dict(o.settings) for o in back.outcomes] == [
        AnalysisSettings.from_dict(o.settings) for o in _three().outcomes
    ]


def test_undo_selects_the_outcome_it_changes(tmp_path):
    from lopside import edits as ed

    s = _session_of(_three(), tmp_path)
    s.select_outcome(1)
    s.do(ed.SetCell(0, "study", "typed in Pain"))
    s.select_outcome(0)
    s.undo()  # the step was made on Pain: Pain is shown, then changed back
    assert s.outcome_index == 1
    assert s.review.studies[0].study == "Invented 0 2010"
    s.redo()
    assert s.review.studies[0].study == "typed in Pain"
    assert not pf.load_workbook(s.path) == s.workbook and s.dirty


def test_outcome_edits_undo_in_order(tmp_path):
    import lopside.workbook_edits as wbe

    s = _session_of(_three(), tmp_path)
    original = s.workbook
    s.do(wbe.AddOutcome(3, s.new_outcome_slot("Length of stay")))
    assert s.outcome_names[-1] == "Length of stay" and s.outcome_index == 3
    s.do(wbe.MoveOutcome(3, 0))
    s.do(wbe.RenameOutcome(1, "Death"))
    s.do(wbe.AddOutcome(2, s.duplicate_slot(1)))
    assert s.outcome_names == ("Length of stay", "Death", "Death (copy)", "Pain", "Adverse events")
    s.select_outcome(4)
    s.do(wbe.DeleteOutcome(4))  # the current outcome: its neighbour is shown
    assert s.outcome_index == 3 and len(s.outcome_names) == 4
    with pytest.raises(WorkbookError, match="already called"):
        s.do(wbe.RenameOutcome(0, "pain"))
    for _ in range(5):
        assert s.undo() is not None
    assert s.workbook == original and not s.dirty


def test_review_level_details_change_every_outcome_and_undo_together(tmp_path):
    from lopside import edits as ed

    s = _session_of(_three(), tmp_path)
    s.select_outcome(1)
    s.do(ed.SetDetail("title", "A better title"))
    assert {r.details.title for r, _ in s.outcome_reviews()} == {"A better title"}
    s.do(ed.SetDetail("measure", "RR"))  # an outcome's own detail: this outcome only
    assert [r.details.measure for r, _ in s.outcome_reviews()] == ["OR", "RR", "OR"]
    s.undo()
    s.undo()
    assert {r.details.title for r, _ in s.outcome_reviews()} == {"Invented review"}
    with pytest.raises(ed.EditError):
        s.do(ed.SetDetail("title", "bad\x00title"))
