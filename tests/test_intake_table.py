"""Tests of the CSV/XLSX study-table reader and writer (lopside.intake.table).

Files are written into tmp_path; XLSX files with openpyxl. Labels and numbers are invented.
The column contract is DESIGN.md section 3.
"""

from __future__ import annotations

import csv
import io
import re
import tempfile
import zipfile
from pathlib import Path

import openpyxl
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from lopside.intake import IntakeError, check_rows, read_table
from lopside.intake import messages as M
from lopside.intake.table import write_table_csv
from lopside.model.review import TABLE_COLUMNS, StudyRow


def _write(path: Path, text: str, encoding: str = "utf-8") -> Path:
    path.write_bytes(text.encode(encoding))
    return path


# -- CSV ------------------------------------------------------------------------------


def test_csv_columns_case_insensitive_any_order_blank_is_missing(tmp_path: Path) -> None:
    p = _write(
        tmp_path / "t.csv",
        "Upper,ESTIMATE,Study,lower,Year,exclude,Risk of bias,notes\n"
        "1.10,0.82,Alpha 2001,0.61,2001,no,Low,first\n"
        "1.21,0.58,Beta 2002,,2002,yes,HIGH,\n"
        "\n"
        "0.94,0.75,Gamma 2003,0.60,2003a,,some concerns,\n",
    )
    t = read_table(p)
    assert [r.study for r in t.rows] == ["Alpha 2001", "Beta 2002", "Gamma 2003"]
    a, b, c = t.rows
    assert (a.estimate, a.lower, a.upper, a.year, a.exclude) == (0.82, 0.61, 1.10, 2001, False)
    assert b.lower is None and b.exclude is True and b.risk_of_bias == "high"
    assert c.year == 2003 and c.risk_of_bias == "some concerns"
    # spreadsheet row numbers: header is row 1, the blank line is row 4
    assert t.row_numbers == (2, 3, 5)
    assert t.unknown_columns == ("notes",)
    assert M.table_message("note_unknown_columns", names="notes") in t.notes
    assert (
        M.table_message("note_renamed_column", given="Risk of bias", name="risk_of_bias") in t.notes
    )
    assert M.table_message("note_year_suffix", row=5, text="2003a", year="2003") in t.notes
    assert M.table_message("note_blank_rows", count=1) in t.notes
    assert t.problems == ()
    # the printed decimals survive for the rounding tolerance of the checks
    assert t.printed_dicts()[0]["upper"] == "1.10"


def test_csv_with_bom(tmp_path: Path) -> None:
    p = _write(tmp_path / "bom.csv", "\ufeffstudy,estimate,se\nAlpha 2001,-0.35,0.13\n")
    t = read_table(p)
    assert t.columns == ("study", "estimate", "se")
    assert t.rows[0].study == "Alpha 2001" and t.rows[0].estimate == -0.35
    assert M.table_message("note_bom") in t.notes


def test_semicolon_csv_with_decimal_commas(tmp_path: Path) -> None:
    p = _write(
        tmp_path / "semi.csv",
        "study;estimate;lower;upper;int_total\n"
        "Alpha 2001;0,82;0,61;1,10;1.234\n"
        "Beta 2002;−0,35;−0,60;−0,10;98\n",
    )
    t = read_table(p)
    assert M.table_message("note_delimiter", name="semicolons") in t.notes
    assert t.decimal_mark == "comma"
    assert M.table_message("note_decimal", mark="comma", evidence="0,82") in t.notes
    a, b = t.rows
    assert (a.estimate, a.lower, a.upper) == (0.82, 0.61, 1.10)
    # in a decimal-comma file, 1.234 groups thousands
    assert a.int_total == 1234
    assert (b.estimate, b.lower, b.upper) == (-0.35, -0.60, -0.10)


def test_cp1252_csv(tmp_path: Path) -> None:
    # en dash (0x96 in cp1252) used as a minus sign, and an accented label
    p = _write(
        tmp_path / "win.csv",
        "study,estimate,lower,upper\nMüller 2004,–0.35,–0.60,–0.10\n",
        "cp1252",
    )
    t = read_table(p)
    assert t.rows[0].study == "Müller 2004"
    assert (t.rows[0].estimate, t.rows[0].lower, t.rows[0].upper) == (-0.35, -0.60, -0.10)
    assert M.table_message("note_encoding", encoding="Windows-1252 (cp1252)") in t.notes


def test_latin1_fallback_when_not_cp1252(tmp_path: Path) -> None:
    # 0x81 is undefined in cp1252, so only Latin-1 can read these bytes
    p = tmp_path / "l1.csv"
    p.write_bytes(b"study,estimate,se\nA\x81 2001,0.5,0.1\n")
    t = read_table(p)
    assert t.rows[0].study == "A\x81 2001"
    assert M.table_message("note_encoding", encoding="Latin-1 (ISO-8859-1)") in t.notes


def test_tab_separated(tmp_path: Path) -> None:
    p = _write(
        tmp_path / "t.tsv",
        "study\tint_events\tint_total\tctl_events\tctl_total\nA 2001\t12\t140\t20\t138\n",
    )
    t = read_table(p)
    assert M.table_message("note_delimiter", name="tabs") in t.notes
    assert t.rows[0].has_counts() and t.rows[0].int_total == 140


def test_unreadable_cells_are_kept_and_reported(tmp_path: Path) -> None:
    p = _write(
        tmp_path / "bad.csv",
        "study,estimate,lower,upper,exclude,year\n"
        "Alpha 2001,0.82,0.61,1.10,no,2001\n"
        "Beta 2002,0.58,abc,1.21,maybe,20x2\n",
    )
    t = read_table(p)
    beta = t.rows[1]
    assert beta.lower is None
    assert beta.unread_dict() == {"lower": "abc", "exclude": "maybe", "year": "20x2"}
    msgs = [pr.message for pr in t.problems]
    assert (
        "bad.csv row 3 (Beta 2002), lower: "
        + M.table_message("unread_cell", text="abc", what="a number")
        in msgs
    )
    assert any(m.startswith("bad.csv row 3 (Beta 2002), exclude: ") for m in msgs)
    assert any(m.startswith("bad.csv row 3 (Beta 2002), year: ") for m in msgs)
    assert {pr.row for pr in t.problems} == {1}
    # the row checks report the same text as unread, naming row and field
    checked = check_rows(t.rows, "OR")
    assert any(pr.code == "unread" and pr.field == "lower" and pr.row == 1 for pr in checked)


def test_missing_values_words_and_footnotes_in_cells(tmp_path: Path) -> None:
    p = _write(
        tmp_path / "f.csv",
        "study,estimate,lower,upper,p\nAlpha 2001,0.70¹,0·55,0.89†,NR\nBeta 2002,0.82a,0.61,1.10,—\n",
    )
    t = read_table(p)
    a, b = t.rows
    assert (a.estimate, a.lower, a.upper, a.p) == (0.70, 0.55, 0.89, None)
    assert (b.estimate, b.p) == (0.82, None)
    assert t.problems == ()
    assert any("footnote mark" in n for n in t.notes)


def test_extra_cells_beyond_header_are_reported(tmp_path: Path) -> None:
    p = _write(tmp_path / "x.csv", "study,estimate,se\nAlpha 2001,0.5,0.1,oops\n")
    t = read_table(p)
    assert len(t.problems) == 1
    assert t.problems[0].severity == "warning"
    assert "'oops' not read" in t.problems[0].message


@pytest.mark.parametrize(
    ("name", "content", "expected"),
    [
        ("empty.csv", "", M.table_message("empty")),
        ("blank.csv", "\n\n  \n", M.table_message("empty")),
        ("t.xls", "study\n", M.table_message("unsupported", suffix=".xls")),
    ],
)
def test_file_level_errors(tmp_path: Path, name: str, content: str, expected: str) -> None:
    p = _write(tmp_path / name, content)
    with pytest.raises(IntakeError) as info:
        read_table(p)
    assert str(info.value) == f"{name}: {expected}"
    assert isinstance(info.value, ValueError)  # the CLI catches input errors as ValueErrors


def test_missing_file(tmp_path: Path) -> None:
    with pytest.raises(IntakeError, match="does not exist"):
        read_table(tmp_path / "nope.csv")


def test_no_known_columns_names_the_row(tmp_path: Path) -> None:
    p = _write(tmp_path / "n.csv", "name,value\nA,1\n")
    with pytest.raises(IntakeError) as info:
        read_table(p)
    assert info.value.row == 1
    assert str(info.value).startswith(
        "n.csv, row 1: none of the column names is one we read ('name', 'value')"
    )


def test_duplicate_column_names_row_and_field(tmp_path: Path) -> None:
    p = _write(tmp_path / "d.csv", "study,Estimate,estimate\nA,1,2\n")
    with pytest.raises(IntakeError) as info:
        read_table(p)
    assert (info.value.row, info.value.field) == (1, "estimate")
    assert "d.csv, row 1, column 'estimate': the column 'estimate' appears twice" in str(info.value)


def test_broken_csv_names_the_row(tmp_path: Path) -> None:
    # a field longer than the csv module allows (an unclosed quote swallowing the file)
    p = _write(tmp_path / "q.csv", 'study,estimate,se\nA,0.5,0.1\nB,"' + "x" * 200_000 + "\n")
    with pytest.raises(IntakeError) as info:
        read_table(p)
    assert info.value.row == 3
    assert "q.csv, row 3: the row could not be read as CSV" in str(info.value)


# -- XLSX -----------------------------------------------------------------------------


def _workbook(path: Path) -> Path:
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Studies"
    ws.append(["Study", "Year", "Estimate", "Lower", "Upper", "Subgroup", "Exclude", "Memo"])
    ws.append(["Alpha", 2001, 0.82, 0.61, 1.1, "Adults", False, "x"])
    ws.append(["Beta", 2002, 0.58, 0.28, 1.21, None, True, None])
    ws.append(["Gamma", 2003, "0,75", "0,60", "0,94", None, "no", None])
    ws.append(["Delta", 2004, "=C2*2", 0.5, 2.0, "Children", None, None])
    ws.append(["Epsilon", 2005, "#DIV/0!", 0.5, 2.0, None, None, None])
    ws["E2"].number_format = "0.00"
    # subgroup merged down over Alpha and Beta (rows 2-3); study merged across two cells
    ws.merge_cells("F2:F3")
    ws.merge_cells("A6:B6")
    ws["A6"] = "Epsilon 2005"
    wb.create_sheet("Notes")
    wb.save(path)
    return path


def test_xlsx_values_formulas_merged_cells(tmp_path: Path) -> None:
    t = read_table(_workbook(tmp_path / "t.xlsx"))
    assert t.kind == "xlsx"
    studies = [r.study for r in t.rows]
    assert studies == ["Alpha", "Beta", "Gamma", "Delta", "Epsilon 2005"]
    alpha, beta, gamma, delta, eps = t.rows
    assert (alpha.estimate, alpha.upper, alpha.exclude, alpha.year) == (0.82, 1.1, False, 2001)
    assert beta.exclude is True
    # the merged subgroup cell applies to both rows of the range
    assert (alpha.subgroup, beta.subgroup) == ("Adults", "Adults")
    assert M.table_message("note_merged", ref="F2:F3", value="Adults") in t.notes
    assert M.table_message("note_merged_across", ref="A6:B6") in t.notes
    # text cells with decimal commas read with the numbers rules
    assert (gamma.estimate, gamma.lower, gamma.upper) == (0.75, 0.60, 0.94)
    # openpyxl saves formulas without a result: never run, reported, formula text kept
    assert delta.estimate is None and delta.unread_dict() == {"estimate": "=C2*2"}
    assert any(
        p.message
        == "t.xlsx row 5 (Delta), estimate: " + M.table_message("formula_no_value", cell="C5")
        for p in t.problems
    )
    # a spreadsheet error value is kept as text and reported
    assert eps.unread_dict() == {"estimate": "#DIV/0!"}
    assert any("#DIV/0!" in p.message and p.field == "estimate" for p in t.problems)
    # the number format tells the printed decimals (1.1 shown as 1.10)
    assert t.printed_dicts()[0]["upper"] == "1.10"
    assert M.table_message("note_sheet", title="Studies", count=2) in t.notes
    assert t.unknown_columns == ("Memo",)


def test_xlsx_formula_with_cached_value_uses_the_saved_result(tmp_path: Path) -> None:
    path = tmp_path / "cached.xlsx"
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.append(["study", "estimate", "se"])
    ws.append(["Alpha", "=0.4+0.1", 0.1])
    wb.save(path)
    # openpyxl cannot calculate; write the saved result into the sheet XML the way a
    # spreadsheet program does (<v> beside <f>), so that the cached value can be read
    src = zipfile.ZipFile(path)
    patched = tmp_path / "patched.xlsx"
    with zipfile.ZipFile(patched, "w") as out:
        for item in src.infolist():
            data = src.read(item.filename)
            if item.filename == "xl/worksheets/sheet1.xml":
                data = re.sub(rb"<f>0.4\+0.1</f><v\s*/?>(</v>)?", b"<f>0.4+0.1</f><v>0.5</v>", data)
                assert b"<v>0.5</v>" in data
            out.writestr(item, data)
    src.close()
    t = read_table(patched)
    assert t.rows[0].estimate == 0.5
    assert t.problems == ()
    assert M.table_message("note_formulas", count=1) in t.notes


def test_corrupt_xlsx(tmp_path: Path) -> None:
    p = tmp_path / "bad.xlsx"
    p.write_bytes(b"this is not a zip file")
    with pytest.raises(IntakeError, match=r"^bad.xlsx: the file is not a readable Excel workbook"):
        read_table(p)


# -- writing --------------------------------------------------------------------------


def test_write_neutralises_formula_text_and_keeps_numbers(tmp_path: Path) -> None:
    rows = [
        StudyRow(
            study='=HYPERLINK("http://example.invalid")', estimate=-0.35, lower=-0.6, upper=-0.1
        ),
        StudyRow(study="+cmd", subgroup="@SUM(A1)", risk_of_bias="-high", estimate=0.82, se=0.1),
        StudyRow(
            study="Plain 2004",
            year=2004,
            int_events=12,
            int_total=140,
            ctl_events=20,
            ctl_total=138,
            exclude=True,
            unread=(("estimate", "=1+1"),),
        ),
    ]
    out = tmp_path / "out.csv"
    write_table_csv(rows, out)
    raw = out.read_bytes()
    assert raw.startswith(b"\xef\xbb\xbf")
    records = list(csv.reader(io.StringIO(raw.decode("utf-8-sig"))))
    assert records[0] == list(TABLE_COLUMNS)
    col = {name: i for i, name in enumerate(TABLE_COLUMNS)}
    r1, r2, r3 = records[1:]
    assert r1[col["study"]] == '\'=HYPERLINK("http://example.invalid")'
    assert r1[col["estimate"]] == "-0.35"  # numbers stay numbers, even negative ones
    assert r2[col["study"]] == "'+cmd"
    assert r2[col["subgroup"]] == "'@SUM(A1)"
    assert r2[col["risk_of_bias"]] == "'-high"
    assert r3[col["int_events"]] == "12" and r3[col["exclude"]] == "yes"
    assert r3[col["estimate"]] == "'=1+1"  # unread text is written (nothing lost), quoted
    # and read back: the quotes are removed again, values unchanged
    back = read_table(out)
    assert [r.study for r in back.rows] == [r.study for r in rows]
    assert back.rows[0].estimate == -0.35 and back.rows[0].lower == -0.6
    assert back.rows[1].subgroup == "@SUM(A1)"
    assert back.rows[2].unread_dict() == {"estimate": "=1+1"}
    assert back.rows[2].exclude is True and back.rows[2].int_total == 140


def test_write_keeps_printed_decimals(tmp_path: Path) -> None:
    out = tmp_path / "p.csv"
    write_table_csv(
        [StudyRow(study="A", estimate=0.5, lower=0.25, upper=1.0)],
        out,
        printed=[{"estimate": "0.50", "upper": "1.00", "lower": "9.99"}],
    )
    text = out.read_text(encoding="utf-8-sig")
    assert "A,,0.50,0.25,1.00," in text  # a printed text that disagrees is not used


@settings(max_examples=100, deadline=None)
@given(
    st.lists(
        st.lists(
            st.text(alphabet=st.characters(blacklist_categories=("Cs",)), max_size=12), max_size=6
        ),
        max_size=6,
    ),
    st.sampled_from([",", ";", "\t"]),
    st.sampled_from(["utf-8", "utf-8-sig", "cp1252"]),
)
def test_any_csv_is_read_or_refused_with_a_message(cells, delimiter, encoding) -> None:
    header = delimiter.join(["study", "estimate", "lower", "upper"])
    body = "\n".join(delimiter.join(r) for r in cells)
    data = (header + "\n" + body).encode(encoding, errors="replace")
    with tempfile.TemporaryDirectory() as folder:
        p = Path(folder) / "fuzz.csv"
        p.write_bytes(data)
        try:
            t = read_table(p)
        except IntakeError as exc:
            assert str(exc).startswith("fuzz.csv")
            return
    # every row read is accounted for, and every unread cell has a problem naming it
    assert len(t.rows) == len(t.row_numbers) == len(t.printed)
    for i, row in enumerate(t.rows):
        for fld, _text in row.unread:
            assert any(p.row == i and p.field == fld for p in t.problems)
