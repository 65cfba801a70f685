"""Hostile files: damaged, foreign, oversized or booby-trapped inputs are refused or read
with a message, never with a traceback, and nothing in them is executed.

Extends tests/test_project_file.py (simple bad documents, non-UTF-8 title, too many
studies, failed save) and tests/test_intake_table.py (formulas without a cached value,
merged cells, corrupt zip, export quoting) with the cases those do not cover. Each
refused file is also given to ``lopside check`` in a subprocess, which must exit 2 with
one line on stderr.

The rule that a CSV cell starting with = + - @ is run by spreadsheet programs as a
formula (CSV or formula injection) is common practice (OWASP's CSV injection note, from
memory); so is quoting it with a leading apostrophe.
"""

from __future__ import annotations

import csv
import io
import json
import os
import random
import re
import subprocess
import sys
import time
import zipfile
from pathlib import Path

import openpyxl
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from lopside.intake import messages as M
from lopside.intake.errors import IntakeError
from lopside.intake.table import (
    MAX_ROW_CELLS,
    MAX_TABLE_BYTES,
    MAX_TABLE_ROWS,
    MAX_TABLE_STUDIES,
    read_table,
    write_table_csv,
)
from lopside.model import project_file as pf
from lopside.model.review import TABLE_COLUMNS, Review, ReviewDetails, StudyRow

APP = Path(__file__).resolve().parents[1] / "app"


def _valid_doc() -> dict:
    """A small valid project document (INVENTED studies)."""
    review = Review(
        details=ReviewDetails(title="Invented hostile-file test review", measure="OR"),
        studies=(
            StudyRow(study="Invented A 2001", year=2001, estimate=0.8, lower=0.6, upper=1.1),
            StudyRow(
                study="Invented B 2003", int_events=3, int_total=40, ctl_events=6, ctl_total=41
            ),
        ),
    )
    return pf.review_to_dict(review, {"tau2_method": "PM"})


def _with(change) -> str:
    doc = _valid_doc()
    change(doc)
    return json.dumps(doc)


def _set(path: tuple, value):
    def change(doc):
        target = doc
        for key in path[:-1]:
            target = target[key]
        target[path[-1]] = value

    return change


# --------------------------------------------------------------------------------------
# project files: the document is refused with a message naming the place

PROJECT_CASES = {
    # other versions (the version must be the whole number 1 or 2, not a look-alike)
    "version 3": (_with(_set(("lopside_project",), 3)), "format version 3"),
    # version 2 is a workbook: the one-outcome body under version 2 lacks its outcomes
    "version 2 without outcomes": (
        _with(_set(("lopside_project",), 2)),
        "outcomes: expected a list of one or more outcomes",
    ),
    "outcomes empty": (
        json.dumps({"lopside_project": 2, "outcomes": []}),
        "outcomes: expected a list",
    ),
    "outcome a string": (
        json.dumps({"lopside_project": 2, "outcomes": [{}, "Pain"]}),
        "outcome 2: expected an object",
    ),
    # an error inside the second outcome of two names that outcome
    "second outcome bad": (
        json.dumps({"lopside_project": 2, "outcomes": [{}, {"details": {"measure": "XYZ"}}]}),
        "outcome 2, details, measure",
    ),
    "version 0": (_with(_set(("lopside_project",), 0)), "format version 0"),
    "version true": (_with(_set(("lopside_project",), True)), "format version True"),
    "version text": (_with(_set(("lopside_project",), "1")), "format version '1'"),
    "version 1.5": (_with(_set(("lopside_project",), 1.5)), "format version 1.5"),
    # wrong types
    "title a number": (_with(_set(("details", "title"), 12)), "details, title: expected text"),
    "study a string": (_with(_set(("studies",), ["Smith 2004"])), "study 1: expected an object"),
    "year as text": (_with(_set(("studies", 0, "year"), "2001")), "study 1, year"),
    "year fraction": (_with(_set(("studies", 0, "year"), 2001.5)), "study 1, year"),
    "year absurd": (_with(_set(("studies", 0, "year"), 10**30)), "is not a year"),
    "estimate bool": (_with(_set(("studies", 1, "estimate"), True)), "study 2, estimate"),
    "estimate list": (_with(_set(("studies", 0, "estimate"), [0.8])), "study 1, estimate"),
    "unread a list": (_with(_set(("studies", 0, "unread"), ["x"])), "study 1, unread"),
    "unread number": (_with(_set(("studies", 0, "unread"), {"lower": 3})), "unread lower"),
    "unread field": (_with(_set(("studies", 0, "unread"), {"colour": "x"})), "unknown field"),
    "p bound": (_with(_set(("studies", 0, "p_bound"), "~")), "study 1, p_bound"),
    "ci level text": (_with(_set(("details", "ci_level"), "95")), "details, ci_level"),
    "ci level 100": (_with(_set(("details", "ci_level"), 100)), "details, ci_level"),
    "published text": (_with(_set(("details", "published"), "0.8")), "details, published"),
    "favours": (_with(_set(("details", "favours"), "up")), "details, favours"),
    "causes list": (_with(_set(("notes", "causes"), ["selection"])), "notes, causes"),
    "judgement": (_with(_set(("notes", "causes", "chance"), {"judgement": "sure"})), "judgement"),
    "settings list": (_with(_set(("settings",), [1])), "settings: expected an object"),
    # settings that would stop the analysis (an unknown estimator, an endless simulation)
    "tau2 method": (_with(_set(("settings", "tau2_method"), "XYZ")), "settings, tau2_method"),
    "hksj text": (_with(_set(("settings", "hksj"), "yes")), "settings, hksj"),
    "alpha 5": (_with(_set(("settings", "test_alpha"), 5)), "settings, test_alpha"),
    "side": (_with(_set(("settings", "trimfill_side"), "up")), "settings, trimfill_side"),
    "cuts text": (_with(_set(("settings", "selection_cutpoints"), "abc")), "selection_cutpoints"),
    "cuts order": (_with(_set(("settings", "selection_cutpoints"), [0.5, 0.1])), "increasing"),
    "cuts many": (
        _with(_set(("settings", "selection_cutpoints"), [i / 2000 for i in range(1, 1000)])),
        "selection_cutpoints",
    ),
    "reps huge": (_with(_set(("settings", "power_reps"), 10**12)), "settings, power_reps"),
    "reps negative": (_with(_set(("settings", "power_reps"), -5)), "settings, power_reps"),
    # numbers JSON allows but a project cannot hold
    "NaN literal": (
        _with(_set(("studies", 0, "estimate"), 0.8)).replace("0.8", "NaN", 1),
        "not finite",
    ),
    "NaN in settings": ('{"lopside_project": 1, "settings": {"test_alpha": NaN}}', "test_alpha"),
    "400 digits": (
        '{"lopside_project": 1, "studies": [{"estimate": 1' + "0" * 400 + "}]}",
        "study 1, estimate: the number is too large",
    ),
    "5000 digits": (
        '{"lopside_project": 1, "studies": [{"estimate": 1' + "0" * 5000 + "}]}",
        "damaged or incomplete (a number in it has thousands of digits)",
    ),
    # enormous and deeply nested content
    "long title": (_with(_set(("details", "title"), "x" * (pf.MAX_TEXT + 1))), "longer than"),
    "long notes": (
        _with(_set(("notes", "general"), "x" * (pf.MAX_NOTES + 1))),
        "notes, general: text longer than",
    ),
    "nested in unread": (
        _with(_set(("studies", 0, "unread"), {"lower": json.loads("[" * 40 + "]" * 40)})),
        "nested",
    ),
    "nested 100000": (
        '{"lopside_project": 1, "x": ' + "[" * 100_000 + "]" * 100_000 + "}",
        "nested",
    ),
}


@pytest.mark.parametrize("case", sorted(PROJECT_CASES))
def test_hostile_project_document_is_refused_with_its_place(tmp_path, case):
    text, fragment = PROJECT_CASES[case]
    path = tmp_path / "hostile.lopside"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(pf.ProjectFileError) as err:
        pf.load(path)
    message = str(err.value)
    assert message.startswith("hostile.lopside: "), message
    assert fragment in message, message
    assert "\n" not in message and len(message) < 400, message


def test_good_document_loads_so_the_cases_above_test_one_change_each(tmp_path):
    path = tmp_path / "good.lopside"
    path.write_text(json.dumps(_valid_doc()), encoding="utf-8")
    review, saved = pf.load(path)
    assert len(review.studies) == 2 and saved == {"tau2_method": "PM"}


def test_settings_choices_match_the_statistics_modules():
    # the loader keeps its own literal lists (no heavy imports); they must not drift
    from lopside.settings import AnalysisSettings
    from lopside.stats import adjust_trimfill, effects, pooling

    c = pf.SETTING_CHOICES
    assert set(c["tau2_method"]) == set(pooling.TAU2_METHODS)
    assert set(c["ci_method"]) == set(effects.CI_METHODS)
    assert set(c["smd_correction"]) == set(effects.SMD_CORRECTIONS)
    assert set(c["trimfill_estimator"]) == set(adjust_trimfill.ESTIMATORS)
    assert set(c["trimfill_side"]) == set(adjust_trimfill.SIDES)
    assert set(c["trimfill_trim_model"]) == set(adjust_trimfill.MODELS)
    # every default the application saves is accepted
    assert pf._settings(AnalysisSettings().to_dict()) == AnalysisSettings().to_dict()


def _raw_cases(tmp_path: Path) -> dict[str, tuple[Path, str]]:
    """Files whose bytes (not JSON content) are hostile: name -> (path, message fragment)."""
    out: dict[str, tuple[Path, str]] = {}
    good = json.dumps(_valid_doc(), ensure_ascii=False)

    def put(name: str, data: bytes, fragment: str) -> None:
        p = tmp_path / f"{name}.lopside"
        p.write_bytes(data)
        out[name] = (p, fragment)

    # a text editor's "Unicode" (UTF-16 with BOM) and an 8-bit code page
    put("utf16", good.encode("utf-16"), "is not UTF-8 text")
    put("latin1", good.replace("Invented A", "Inventé A").encode("latin-1"), "is not UTF-8")
    rng = random.Random(20261201)
    put("random bytes", bytes(rng.randrange(256) for _ in range(4096)), "not")
    put("nul bytes", b"\x00" * 1000, "damaged or incomplete")
    put("empty", b"", "damaged or incomplete")
    # a workbook renamed to .lopside
    buf = io.BytesIO()
    openpyxl.Workbook().save(buf)
    put("zip renamed", buf.getvalue(), "not")
    # larger than any project: a sparse file, so that nothing big is written
    big = tmp_path / "huge.lopside"
    with open(big, "wb") as fh:
        fh.truncate(pf.MAX_BYTES + 1)
    out["huge"] = (big, "larger than a project file can be (more than 50 MB)")
    folder = tmp_path / "folder.lopside"
    folder.mkdir()
    out["folder"] = (folder, "")
    if hasattr(os, "mkfifo"):
        fifo = tmp_path / "pipe.lopside"
        os.mkfifo(fifo)  # reading a pipe nobody writes to would never return
        out["pipe"] = (fifo, "not a file")
    return out


def test_hostile_bytes_are_refused(tmp_path):
    for name, (path, fragment) in _raw_cases(tmp_path).items():
        if name == "folder":
            continue  # the CLI says "is a folder" before the loader sees it (below)
        start = time.perf_counter()
        with pytest.raises(pf.ProjectFileError) as err:
            pf.load(path)
        assert fragment in str(err.value), (name, str(err.value))
        assert str(err.value).startswith(path.name), name
        assert time.perf_counter() - start < 5, name  # refused, not read to the end


def test_every_truncation_of_a_saved_project_is_refused_or_complete(tmp_path):
    # a file cut short by a full disk or a failed copy: every prefix is either refused
    # with the "damaged" message or (whitespace only lost) loads the same review
    path = tmp_path / "full.lopside"
    review = pf.review_from_dict(_valid_doc())[0]
    pf.save(review, path)
    data = path.read_bytes()
    cut = tmp_path / "cut.lopside"
    for n in range(0, len(data), 7):
        cut.write_bytes(data[:n])
        try:
            back, _ = pf.load(cut)
        except pf.ProjectFileError as exc:
            assert "damaged or incomplete" in str(exc), (n, str(exc))
        else:
            assert data[n:].strip() == b"" and back == review, n


# --------------------------------------------------------------------------------------
# saving never writes what loading refuses


def test_non_finite_numbers_are_saved_as_text_and_the_file_opens(tmp_path):
    rows = (
        StudyRow(study="Invented inf", estimate=float("inf"), lower=0.5, upper=2.0),
        StudyRow(study="Invented nan", estimate=0.8, se=float("nan"), unread=(("p", "0,0x"),)),
    )
    review = Review(details=ReviewDetails(title="Invented"), studies=rows)
    path = tmp_path / "inf.lopside"
    pf.save(review, path)
    back, _ = pf.load(path)
    assert back.studies[0].estimate is None
    assert back.studies[0].unread_dict() == {"estimate": "inf"}
    assert back.studies[1].se is None
    assert back.studies[1].unread_dict() == {"p": "0,0x", "se": "nan"}
    # the autosave writes dumps(); that text must open too
    assert pf.loads(pf.dumps(review))[0] == back


def test_review_beyond_the_limits_is_not_saved_and_the_old_file_is_kept(tmp_path):
    path = tmp_path / "keep.lopside"
    small = Review(studies=(StudyRow(study="Invented", estimate=1.0, se=0.5),))
    pf.save(small, path)
    before = path.read_bytes()
    too_many = Review(studies=tuple(StudyRow(study=f"S{i}") for i in range(pf.MAX_STUDIES + 1)))
    with pytest.raises(pf.ProjectFileError, match="^Not saved, because .*more than Lopside"):
        pf.save(too_many, path)
    long_label = Review(studies=(StudyRow(study="x" * (pf.MAX_TEXT + 1)),))
    with pytest.raises(pf.ProjectFileError, match="study 1, study: text longer than"):
        pf.save(long_label, path)
    assert path.read_bytes() == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["keep.lopside"]


def test_long_notes_round_trip(tmp_path):
    # free-text notes may be long (a 200,000-character appraisal note is kept whole)
    notes = Review().notes
    review = Review(notes=type(notes)(general="n" * 200_000))
    path = tmp_path / "notes.lopside"
    pf.save(review, path)
    assert pf.load(path)[0] == review


# --------------------------------------------------------------------------------------
# CSV: formula-like cells are data, not formulas


def test_formula_like_csv_cells_are_read_as_text_or_numbers(tmp_path):
    p = tmp_path / "formulas.csv"
    p.write_text(
        "study,estimate,lower,upper,subgroup,risk_of_bias\n"
        '"=HYPERLINK(""http://example.invalid"",""click"")",0.8,0.6,1.1,@SUM(A1:A9),+cmd\n'
        "Plain 2004,-2+3,-0.5,=1+1,-cmd|' /C calc'!A0,low\n"
        "Minus 2005,-0.35,-0.6,-0.1,+A,high\n",
        encoding="utf-8",
    )
    t = read_table(p)
    a, b, c = t.rows
    # text columns keep the text exactly: nothing is evaluated or stripped
    assert a.study == '=HYPERLINK("http://example.invalid","click")'
    assert a.subgroup == "@SUM(A1:A9)" and a.risk_of_bias == "+cmd"
    assert (a.estimate, a.lower, a.upper) == (0.8, 0.6, 1.1)
    # a formula in a number column is not computed (-2+3 is not 1): kept as text, reported
    assert b.estimate is None and b.upper is None
    assert b.unread_dict() == {"estimate": "-2+3", "upper": "=1+1"}
    assert b.lower == -0.5 and b.subgroup == "-cmd|' /C calc'!A0"
    flagged = {(pr.row, pr.field) for pr in t.problems}
    assert {(1, "estimate"), (1, "upper")} <= flagged
    assert any("row 3" in pr.message and "'-2+3'" in pr.message for pr in t.problems)
    # negative numbers are numbers
    assert (c.estimate, c.lower, c.upper) == (-0.35, -0.6, -0.1)


_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    label=st.text(alphabet=st.sampled_from(list("=+-@\t\r'\"ab1 ,;|!(")), max_size=12),
    value=st.one_of(
        st.none(),
        st.floats(allow_nan=False, allow_infinity=False, min_value=-1e6, max_value=1e6),
    ),
    # unread text always holds a letter, so it cannot read back as a number
    unread=st.tuples(
        st.sampled_from(["=", "+", "-", "@", ""]),
        st.text(alphabet=st.sampled_from(list("=+-@12ab.()")), max_size=5),
    ).map(lambda t: t[0] + "x" + t[1]),
    printed=st.sampled_from(["", "+0.50", "-0.5†", "0.50", "−0.5", "=0.5"]),
)
def test_exported_cells_never_start_a_formula(tmp_path_factory, label, value, unread, printed):
    # Property: every cell written that starts with = + - @ tab or CR is either a plain
    # number literal or starts with the neutralising quote; and reading the file back
    # gives the same labels, numbers and unread text.
    row = StudyRow(
        study=label,
        subgroup=label or None,
        estimate=value,
        lower=None,
        unread=(("lower", unread),),
    )
    out = tmp_path_factory.mktemp("export") / "out.csv"
    write_table_csv([row], out, printed=[{"estimate": printed}])
    records = list(csv.reader(io.StringIO(out.read_bytes().decode("utf-8-sig"), newline="")))
    assert records[0] == list(TABLE_COLUMNS)
    for cell in records[1]:
        if cell.startswith(_FORMULA_START):
            assert re.fullmatch(r"-?[0-9]+(\.[0-9]+)?(e[+-][0-9]+)?", cell), cell
    back = read_table(out).rows[0]
    assert back.study == label.strip()
    assert back.estimate == value
    assert back.unread_dict().get("lower") == unread.strip()


# --------------------------------------------------------------------------------------
# CSV files that are too big, too wide, or not files at all


def _table_cases(tmp_path: Path) -> dict[str, tuple[Path, str]]:
    out: dict[str, tuple[Path, str]] = {}
    rows = tmp_path / "rows.csv"
    rows.write_text(
        "study,estimate,se\n" + "".join(f"S{i},0.5,0.1\n" for i in range(MAX_TABLE_STUDIES + 5))
    )
    out["too many studies"] = (rows, M.table_message("too_many_studies", limit=MAX_TABLE_STUDIES))
    blank = tmp_path / "blank.csv"
    blank.write_text("study,estimate,se\nA,0.5,0.1\n" + ",,\n" * MAX_TABLE_ROWS)
    out["too many rows"] = (blank, M.table_message("too_many_rows", limit=MAX_TABLE_ROWS))
    wide = tmp_path / "wide.csv"
    wide.write_text("study,estimate,se\n" + ",".join(["1"] * (MAX_ROW_CELLS + 1)) + "\n")
    out["too wide"] = (wide, "row 2: the row has 16,385 cells")
    huge = tmp_path / "huge.csv"
    with open(huge, "wb") as fh:
        fh.truncate(MAX_TABLE_BYTES + 1)
    out["too big"] = (huge, "larger than a study table can be (more than 50 MB)")
    folder = tmp_path / "folder.csv"
    folder.mkdir()
    out["folder"] = (folder, M.table_message("not_a_file"))
    if hasattr(os, "mkfifo"):
        fifo = tmp_path / "pipe.csv"
        os.mkfifo(fifo)
        out["pipe"] = (fifo, M.table_message("not_a_file"))
    nul = tmp_path / "nul.csv"
    nul.write_bytes(b"study,estimate,se\nA\x00,0.5,0.1\n")
    out["nul"] = (nul, "")  # read (Python 3.11's csv accepts NUL) or refused: never a crash
    return out


def test_hostile_csv_files_are_refused_quickly_with_a_message(tmp_path):
    for name, (path, fragment) in _table_cases(tmp_path).items():
        start = time.perf_counter()
        try:
            read_table(path)
        except IntakeError as exc:
            assert fragment in str(exc), (name, str(exc))
            assert str(exc).startswith(path.name), (name, str(exc))
        else:
            assert name == "nul", f"{name} was read"
        assert time.perf_counter() - start < 10, name


# --------------------------------------------------------------------------------------
# XLSX: formulas are never run; damaged or booby-trapped workbooks are refused


def _patched_xlsx(tmp_path: Path, name: str, patch) -> Path:
    base = tmp_path / f"{name}-base.xlsx"
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.append(["study", "estimate", "se"])
    ws.append(["Invented A", 0.5, 0.1])
    wb.save(base)
    out = tmp_path / f"{name}.xlsx"
    with zipfile.ZipFile(base) as src, zipfile.ZipFile(out, "w") as dst:
        for item in src.infolist():
            data = src.read(item.filename)
            if item.filename == "xl/worksheets/sheet1.xml":
                data = patch(data)
            dst.writestr(item, data)
    return out


def test_xlsx_dangerous_formulas_are_kept_as_text_not_run(tmp_path):
    path = tmp_path / "danger.xlsx"
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.append(["study", "estimate", "lower", "upper", "subgroup"])
    ws.append(["Invented A", '=WEBSERVICE("http://example.invalid/x")', 0.5, 2.0, None])
    ws.append(["Invented B", "=cmd|' /C calc'!A0", 0.5, 2.0, '=HYPERLINK("http://x","y")'])
    ws.append(["Invented C", 0.9, 0.6, 1.3, "adults"])
    ws.append(["Invented D", 0.7, 0.5, 1.0, None])
    ws.merge_cells("C4:C5")  # a number merged down over the next study
    wb.save(path)
    t = read_table(path)
    a, b, c, d = t.rows
    # openpyxl saves no cached result, and data_only reading computes none: the formula
    # text is kept in the cell it came from, and the row is flagged
    assert a.estimate is None and a.unread_dict() == {
        "estimate": '=WEBSERVICE("http://example.invalid/x")'
    }
    assert b.estimate is None and b.unread_dict()["estimate"] == "=cmd|' /C calc'!A0"
    assert b.subgroup is None and b.unread_dict()["subgroup"] == '=HYPERLINK("http://x","y")'
    assert {(0, "estimate"), (1, "estimate")} <= {(p.row, p.field) for p in t.problems}
    # the merged value is given to the rows below, and the note says so
    assert (c.lower, d.lower) == (0.6, 0.6)
    assert M.table_message("note_merged", ref="C4:C5", value=0.6) in t.notes


def test_xlsx_with_entity_declarations_is_refused_quickly(tmp_path):
    # "billion laughs": nested entities that would expand to gigabytes
    ents = '<!ENTITY l0 "lol">' + "".join(
        f'<!ENTITY l{i} "{"".join(f"&l{i - 1};" for _ in range(10))}">' for i in range(1, 10)
    )

    def patch(data: bytes) -> bytes:
        data = data.replace(b"?>", b"?><!DOCTYPE w [" + ents.encode() + b"]>", 1)
        return data.replace(b"<t>Invented A</t>", b"<t>&l9;</t>")

    path = _patched_xlsx(tmp_path, "laughs", patch)
    start = time.perf_counter()
    with pytest.raises(IntakeError, match="not a readable Excel workbook"):
        read_table(path)
    assert time.perf_counter() - start < 5


def test_xlsx_with_truncated_sheet_is_refused(tmp_path):
    path = _patched_xlsx(tmp_path, "cut", lambda data: data[: len(data) // 2])
    with pytest.raises(IntakeError, match="^cut.xlsx: the file is not a readable Excel workbook"):
        read_table(path)


def test_xlsx_zip_bomb_is_refused_before_unpacking(tmp_path):
    path = tmp_path / "bomb.xlsx"
    wb = openpyxl.Workbook()
    wb.active.append(["study", "estimate", "se"])
    wb.save(path)
    chunk = b"\0" * (1 << 20)
    with zipfile.ZipFile(path, "a", compression=zipfile.ZIP_DEFLATED) as zf:
        with zf.open("xl/media/padding.bin", "w", force_zip64=True) as fh:
            for _ in range(401):
                fh.write(chunk)
    assert path.stat().st_size < 5_000_000  # small on disk, 400 MB unpacked
    with pytest.raises(IntakeError, match="unpacks to 4.. MB"):
        read_table(path)


def test_xlsx_with_a_stray_cell_far_below_is_refused_not_read_for_ever(tmp_path):
    path = tmp_path / "stray.xlsx"
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.append(["study", "estimate", "se"])
    ws.append(["Invented A", 0.5, 0.1])
    ws.cell(row=1_000_000, column=1, value="stray")
    wb.save(path)
    start = time.perf_counter()
    with pytest.raises(IntakeError, match="more than 50,000 rows"):
        read_table(path)
    assert time.perf_counter() - start < 30


# --------------------------------------------------------------------------------------
# lopside check on every refused file: exit 2, one line on stderr, no traceback


def _cli_cases(tmp_path: Path) -> list[Path]:
    paths = []
    folder = tmp_path / "documents"
    folder.mkdir()
    for i, name in enumerate(sorted(PROJECT_CASES)):
        p = folder / f"case{i:02d}.lopside"
        p.write_text(PROJECT_CASES[name][0], encoding="utf-8")
        paths.append(p)
    paths += [p for name, (p, _) in _raw_cases(tmp_path / "raw").items() if name != "pipe"]
    tables = tmp_path / "tables"
    tables.mkdir()
    paths += [p for name, (p, _) in _table_cases(tables).items() if name not in ("pipe", "nul")]
    paths.append(_patched_xlsx(tmp_path, "cut", lambda data: data[: len(data) // 2]))
    return paths


def test_lopside_check_refuses_each_hostile_file_with_one_line(tmp_path):
    from concurrent.futures import ThreadPoolExecutor

    (tmp_path / "raw").mkdir()
    paths = _cli_cases(tmp_path)
    env = dict(os.environ, PYTHONPATH=str(APP))

    def check(p: Path):
        proc = subprocess.run(
            [sys.executable, "-m", "lopside", "check", str(p)],
            capture_output=True,
            text=True,
            stdin=subprocess.DEVNULL,
            env=env,
            timeout=120,
        )
        return p, proc.returncode, proc.stdout, proc.stderr

    # a few at a time: each start-up costs about half a second
    with ThreadPoolExecutor(max_workers=4) as pool:
        runs = list(pool.map(check, paths))
    assert len(runs) == len(paths) > 50
    for p, rc, out, err in runs:
        assert rc == 2, (p.name, rc, err[-2000:])
        assert "Traceback" not in err, (p.name, err[-2000:])
        lines = err.strip().splitlines()
        assert len(lines) == 1 and lines[0].startswith("lopside: "), (p.name, err)
        assert out == "", p.name


def test_lopside_check_reads_formula_like_csv_safely(tmp_path):
    p = tmp_path / "formula.csv"
    p.write_text(
        "study,estimate,se\n"
        '"=HYPERLINK(""http://example.invalid"",""x"")",0.5,0.1\n'
        "+cmd,-0.2,0.15\n"
        "@SUM(A1),0.1,0.2\n",
        encoding="utf-8",
    )
    proc = subprocess.run(
        [sys.executable, "-m", "lopside", "check", str(p), "--measure", "MD", "--json"],
        capture_output=True,
        text=True,
        env=dict(os.environ, PYTHONPATH=str(APP)),
        timeout=120,
        stdin=subprocess.DEVNULL,
    )
    assert proc.returncode == 0, proc.stderr[-2000:]
    out = json.loads(proc.stdout)
    assert [s["study"] for s in out["studies"]] == [
        '=HYPERLINK("http://example.invalid","x")',
        "+cmd",
        "@SUM(A1)",
    ]
    assert [s["y"] for s in out["studies"]] == [0.5, -0.2, 0.1]


@pytest.mark.parametrize(
    "text, named",
    [
        # columns named in a way the table does not read: the error names them
        ("study,events_int,total_int\nA,5,40\nB,3,41\n", "events_int, total_int"),
        # counts of one arm only: nothing to analyse, no column to blame
        ("study,int_events,int_total,ctl_events\nA,1,10,2\nB,2,20,3\n", None),
    ],
)
def test_a_table_without_any_effect_is_not_told_to_add_a_measure(tmp_path, text, named):
    """Before: 'the rows give effect estimates but the file does not say which measure',
    which sent the user to --measure for a file whose columns were the problem."""
    from lopside.cli_common import InputError, load_review_file

    path = tmp_path / "misnamed.csv"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(InputError) as err:
        load_review_file(path)
    msg = str(err.value)
    assert msg.startswith("misnamed.csv: no row gives an effect to analyse")
    assert "--measure" not in msg
    if named:
        assert f"Columns not read: {named}." in msg
    else:
        assert "Columns not read" not in msg
