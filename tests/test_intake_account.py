"""Issue 12: nothing silently dropped or misread on the way in.

One test per case of the issue (cases 1-5, 7 and 8; case 6 belongs to the diagnostics
work), each with INVENTED data of the same shape as the case reported, plus a property
test: for generated forest tables with junk lines injected, every study line is either a
row of the review or listed as not read - in the session, the JSON and the sheet text.
"""

from __future__ import annotations

import io
import json
import string

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from lopside.analysis import analyse
from lopside.cli import EXIT_BAD_INPUT, EXIT_UNREAD, main
from lopside.cli_common import DecimalUndecided, load_review_file
from lopside.intake.checks import check_row
from lopside.intake.paste import read_pasted
from lopside.intake.table import read_table
from lopside.model.project_file import load, save
from lopside.model.review import IntakeAccount, NotRead, StudyRow
from lopside.report import to_json
from lopside.session import Session
from lopside.summary import text_summary

# Seven invented study lines; lines 4 and 6 cannot be read (two intervals on one line;
# a decimal comma and decimal points mixed on one line), as in the case reported.
SEVEN = """Study or subgroup   Odds Ratio IV, Random, 95% CI
Arvelo 2001    0.82 (0.61 to 1.10)
Brisk 2003     0.75 (0.52 to 1.08)
Cottam 2005    0.91 (0.70 to 1.18) 0.88 (0.60 to 1.20)
Dunmore 2007   0.66 (0.45 to 0.97)
Eskarra 2009   0,70 (0.50 to 0.98)
Fobbing 2011   0.95 (0.80 to 1.13)
Gallow 2013    1.02 (0.85 to 1.22)
"""


def run(argv, capsys):
    code = main(argv)
    out, err = capsys.readouterr()
    return code, out, err


@pytest.fixture
def seven(tmp_path):
    p = tmp_path / "seven.txt"
    p.write_text(SEVEN, encoding="utf-8")
    return p


# -- case 1: unread lines vanish -------------------------------------------------------


def test_case1_cli_refuses_with_exit_4_and_names_the_unread_lines(seven, capsys):
    code, out, err = run(["check", str(seven)], capsys)
    assert code == EXIT_UNREAD == 4
    assert out == ""  # nothing written: a script that ignores the status gets no result
    assert "Cottam 2005" in err and "Eskarra 2009" in err
    assert "--allow-unread" in err


def test_case1_allowed_unread_lines_are_listed_in_text_and_json(seven, capsys):
    code, out, _ = run(["check", str(seven), "--allow-unread"], capsys)
    assert code == 0
    assert "5 of 5 rows" in out  # the analysed rows ...
    assert "2 lines not read" in out  # ... and the two that are not
    assert "Cottam 2005" in out and "Eskarra 2009" in out
    code, out, _ = run(["check", str(seven), "--allow-unread", "--json"], capsys)
    assert code == 0
    data = json.loads(out)
    listed = [n["text"] for n in data["intake"]["not_read"]]
    assert any("Cottam 2005" in t for t in listed) and any("Eskarra 2009" in t for t in listed)
    assert [n["where"] for n in data["intake"]["not_read"]] == ["line 4", "line 6"]


def test_case1_sheet_lists_the_unread_lines(seven, tmp_path, capsys):
    pypdf = pytest.importorskip("pypdf")
    out = tmp_path / "s.pdf"
    assert run(["sheet", str(seven), "-o", str(out)], capsys)[0] == EXIT_UNREAD
    assert not out.exists()
    assert run(["sheet", str(seven), "-o", str(out), "--allow-unread"], capsys)[0] == 0
    text = " ".join((p.extract_text() or "") for p in pypdf.PdfReader(str(out)).pages)
    text = " ".join(text.split())
    assert "2 lines not read" in text
    assert "Cottam 2005" in text and "Eskarra 2009" in text


def test_case1_session_keeps_the_account_and_the_project_file_saves_it(seven, tmp_path):
    s = Session()
    s.open(seven)
    assert len(s.review.studies) == 5
    wheres = [n.where for n in s.review.intake.not_read]
    assert wheres == ["line 4", "line 6"]
    target = s.save(tmp_path / "r.lopside")
    review, _ = load(target)
    assert review.intake == s.review.intake
    # a project written before the account existed still loads, with an empty account
    doc = json.loads(target.read_text(encoding="utf-8"))
    doc = doc["outcomes"][0]  # written as format 2; the same body is a format-1 file
    doc["lopside_project"] = 1
    del doc["intake"]
    del doc["details"]["favours_source"]
    doc.pop("checksum", None)  # such files had no checksum either
    old = tmp_path / "old.lopside"
    old.write_text(json.dumps(doc), encoding="utf-8")
    review, _ = load(old)
    assert review.intake == IntakeAccount() and review.details.favours_source == ""


def test_case1_window_lists_unread_lines_in_the_problems_list(make_window, seven):
    w = make_window()
    assert w.open_path(seven, remember=False, ask=False)
    items = [w.studies.problems.item(i).text() for i in range(w.studies.problems.count())]
    unread = [t for t in items if t.startswith("\u2716 Not read")]
    assert len(unread) == 2
    assert "Cottam 2005" in unread[0] and "Eskarra 2009" in unread[1]


def test_case1_window_paste_keeps_unread_lines_with_the_review(make_window):
    w = make_window()
    dlg = w.open_paste_dialog(SEVEN)
    dlg.accept()
    assert len(w.session.review.studies) == 5
    assert [n.where for n in w.session.review.intake.not_read] == ["line 4", "line 6"]
    w.stack.undo()  # one undo step takes the rows and their account away together
    assert w.session.review.studies == () and w.session.review.intake == IntakeAccount()


# -- case 2: a trial whose name starts with a summary word ------------------------------


TOTAL_TRIAL = """Study   Risk Ratio M-H, Random, 95% CI
Harrow 2011   0.91 (0.80 to 1.04)
TOTAL 2015    0.98 (0.86 to 1.11)
Overall Survival Study 2017   0.87 (0.75 to 1.01)
Pooled Cohort Group 2018      0.93 (0.81 to 1.07)
Q (Quebec) 2019   1.04 (0.90 to 1.20)
Fig. Trialists 2020   0.95 (0.80 to 1.13)
Total (95% CI)   0.94 (0.88 to 1.01)
Heterogeneity: Tau\u00b2 = 0.00; Chi\u00b2 = 3.1, df = 5 (P = 0.68); I\u00b2 = 0%
Test for overall effect: Z = 1.7 (P = 0.09)
Favours treatment   Favours control
"""


def test_case2_summary_words_followed_by_a_year_or_words_are_trials():
    r = read_pasted(TOTAL_TRIAL)
    labels = [row.study for row in r.rows]
    assert labels == [
        "Harrow 2011",
        "TOTAL 2015",
        "Overall Survival Study 2017",
        "Pooled Cohort Group 2018",
        "Q (Quebec) 2019",
        "Fig. Trialists 2020",
    ]
    # the real total line is still the published result, not the trial TOTAL 2015
    assert (r.published.estimate, r.published.lower, r.published.upper) == (0.94, 0.88, 1.01)
    # and the account says why a label starting with a summary word was read as a study
    total_line = next(x for x in r.lines if x.text.startswith("TOTAL"))
    assert "starts with 'TOTAL'" in total_line.account
    skipped = [x.reason for x in r.skipped]
    assert any("heterogeneity" in x for x in skipped) and any("caption" in x for x in skipped)


@pytest.mark.parametrize(
    "line",
    [
        "Total (95% CI)  0.94 (0.88 to 1.01)",
        "Total  0.94 (0.88 to 1.01)",
        "Overall (random effects)  0.94 (0.88 to 1.01)",
        "Subtotal (95% CI)  0.90 (0.80 to 1.02)",
        "Random effects model  0.94 (0.88 to 1.01)",
    ],
)
def test_case2_real_summary_lines_are_still_skipped(line):
    r = read_pasted("Harrow 2011   0.91 (0.80 to 1.04)\n" + line + "\n")
    assert [row.study for row in r.rows] == ["Harrow 2011"]


# -- case 3: "%" in a cell; impossible values --------------------------------------------


RD_PERCENT_CSV = "study,estimate,lower,upper\nAlby 2010,5%,1%,9%\nBrun 2012,3%,-1%,7%\n"


def test_case3_percent_cells_are_proportions_for_a_risk_difference(tmp_path):
    p = tmp_path / "rd.csv"
    p.write_text(RD_PERCENT_CSV, encoding="utf-8")
    review, _ = load_review_file(p, "RD")
    assert (review.studies[0].estimate, review.studies[0].lower) == (0.05, 0.01)
    assert review.studies[1].lower == -0.01
    result = analyse(review)
    assert result.random.estimate < 1  # not 400 %


def test_case3_percent_cells_are_refused_for_other_measures(tmp_path, capsys):
    p = tmp_path / "rd.csv"
    p.write_text(RD_PERCENT_CSV, encoding="utf-8")
    t = read_table(p, "OR")
    assert t.rows[0].estimate is None and dict(t.rows[0].unread)["estimate"] == "5%"
    assert any("percentage" in pr.message for pr in t.problems)
    # on the command line the refusal is a listed unread cell (exit 4), never a silent 5
    code, _, err = run(["check", str(p), "--measure", "OR"], capsys)
    assert code == EXIT_UNREAD and "5%" in err


def test_case3_percent_in_pasted_text():
    r = read_pasted("Alby 2010  5% (1% to 9%)\n", "RD")
    assert (r.rows[0].estimate, r.rows[0].lower, r.rows[0].upper) == (0.05, 0.01, 0.09)
    assert "percentages read as proportions" in r.lines[0].account
    r = read_pasted("Alby 2010  5% (1% to 9%)\n", "OR")
    assert not r.rows and "percentages" in r.not_understood[0].reason


@pytest.mark.parametrize(
    ("row", "measure", "code"),
    [
        (StudyRow("A", estimate=4.0, lower=1.0, upper=9.0), "RD", "rd_over_one"),
        (StudyRow("A", estimate=0.2, lower=-1.2, upper=0.5), "RD", "rd_over_one"),
        (
            StudyRow("A", int_events=12, int_total=10, ctl_events=3, ctl_total=20),
            "OR",
            "events_over_total",
        ),
        (
            StudyRow("A", int_mean=5, int_sd=-1, int_n=20, ctl_mean=4, ctl_sd=1, ctl_n=20),
            "MD",
            "negative",
        ),
        (
            StudyRow("A", int_mean=5, int_sd=1, int_n=1, ctl_mean=4, ctl_sd=1, ctl_n=20),
            "MD",
            "arm_too_small",
        ),
        (StudyRow("A", int_events=0, int_total=0, ctl_events=3, ctl_total=20), "RR", "total_zero"),
    ],
)
def test_case3_impossible_values_get_a_row_message(row, measure, code):
    problems = check_row(row, measure)
    assert code in {p.code for p in problems}
    assert any(p.severity == "error" for p in problems if p.code == code)


# -- case 4: an ambiguous decimal comma ----------------------------------------------------


AMBIGUOUS = "Halden 2017   1,105 (1,012 to 1,206)\nIvarsen 2018   1,210 (1,100 to 1,331)\n"


def test_case4_cli_refuses_and_names_the_options(tmp_path, capsys):
    p = tmp_path / "amb.txt"
    p.write_text(AMBIGUOUS, encoding="utf-8")
    code, out, err = run(["check", str(p), "--measure", "RR"], capsys)
    assert code == EXIT_BAD_INPUT and out == ""
    assert "--decimal-comma" in err and "--decimal-point" in err
    assert "1105" in err and "1.105" in err  # both readings shown
    code, out, _ = run(["check", str(p), "--measure", "RR", "--decimal-comma"], capsys)
    assert code == 0
    assert "decimal comma, as the command line asked" in out
    code, out, _ = run(["check", str(p), "--measure", "RR", "--decimal-comma", "--json"], capsys)
    data = json.loads(out)
    assert data["intake"]["decimal"] == {"mark": "comma", "how": "option", "evidence": None}
    assert data["studies"][0]["y"] == pytest.approx(0.09985, abs=1e-4)  # ln 1.105


def test_case4_table_and_window_ask_and_store_the_decision(tmp_path, make_window):
    p = tmp_path / "amb.csv"
    p.write_text('study,estimate,lower,upper\nHalden 2017,"1,105","1,012","1,206"\n')
    with pytest.raises(DecimalUndecided) as info:
        load_review_file(p, "RR")
    assert info.value.examples[0] == ("row 2", "1,105")
    asked = []
    w = make_window(ask_measure=lambda name: "RR")
    w.ask_decimal = lambda name, examples: asked.append(examples) or "comma"
    assert w.open_path(p, remember=False, ask=False)
    assert asked and w.session.review.studies[0].estimate == 1.105
    account = w.session.review.intake
    assert (account.decimal_mark, account.decimal_how) == ("comma", "asked")
    target = w.session.save(tmp_path / "amb.lopside")
    assert (
        load(target)[0].intake.decimal_text() == "decimal comma, as chosen by the user when asked"
    )


def test_case4_paste_dialog_asks_with_both_readings(make_window):
    w = make_window()
    dlg = w.open_paste_dialog(AMBIGUOUS)
    assert dlg.decimal_frame.isVisibleTo(dlg)
    assert not dlg.ok_button.isEnabled()  # no rows go in before the user answers
    assert "1105" in dlg.decimal_point.text() and "1.105" in dlg.decimal_comma.text()
    dlg.decimal_comma.setChecked(True)
    assert dlg.ok_button.isEnabled()
    assert [r.estimate for r in dlg.rows()] == [1.105, 1.21]
    dlg.reject()


# -- case 5: extra cells, unknown columns --------------------------------------------------


def test_case5_extra_cells_and_unused_columns_are_listed(tmp_path, capsys):
    p = tmp_path / "extra.csv"
    p.write_text(
        "study,estimate,lower,upper,weighting\n"
        "Aske 2004,0.80,0.60,1.07,12.5\n"
        "Birn 2006,0.70,0.50,0.98,8.1,0.65,stray\n",
        encoding="utf-8",
    )
    t = read_table(p)
    wheres = [n.where for n in t.not_read]
    assert wheres == ["column 'weighting'", "row 3"]  # spreadsheet rows, header is row 1
    assert "0.65, stray" in t.not_read[1].text
    code, _, err = run(["check", str(p), "--measure", "OR"], capsys)
    assert code == EXIT_UNREAD and "weighting" in err and "row 3" in err
    code, out, _ = run(["check", str(p), "--measure", "OR", "--allow-unread"], capsys)
    assert code == 0 and "column 'weighting'" in out and "0.65, stray" in out


def test_case5_measure_named_and_ci_columns_are_read(tmp_path):
    p = tmp_path / "or.csv"
    p.write_text("study,or,lower ci,upper ci\nAske 2004,0.80,0.60,1.07\n", encoding="utf-8")
    review, _ = load_review_file(p)
    row = review.studies[0]
    assert (row.estimate, row.lower, row.upper) == (0.80, 0.60, 1.07)
    assert review.measure == "OR" and "named in the file" in review.intake.measure_how


# -- case 7: direction of benefit headless -------------------------------------------------


SMOKING = (
    "study,year,int_events,int_total,ctl_events,ctl_total\n"
    "Quitwell (invented),2004,30,150,18,148\n"
    "Ember (invented),2007,22,120,15,118\n"
    "Ashfree (invented),2010,41,200,25,204\n"
    "Lungsway (invented),2013,12,60,8,61\n"
)


def test_case7_favours_higher_on_the_command_line(tmp_path, capsys):
    p = tmp_path / "smoking.csv"
    p.write_text(SMOKING, encoding="utf-8")
    code, out, _ = run(["check", str(p), "--favours", "higher"], capsys)
    assert code == 0
    assert "higher values favour" in out
    code, out, _ = run(["check", str(p)], capsys)
    assert "lower values favour the intervention (not given: assumed lower)" in out


@pytest.mark.parametrize(("favours", "left"), [("higher", "control"), ("lower", "intervention")])
def test_case7_forest_captions_follow_the_direction(tmp_path, capsys, favours, left):
    p = tmp_path / "smoking.csv"
    p.write_text(SMOKING, encoding="utf-8")
    out = tmp_path / "forest.svg"
    code, _, _ = run(
        ["plot", str(p), "--kind", "forest", "-o", str(out), "--favours", favours], capsys
    )
    assert code == 0
    svg = out.read_text(encoding="utf-8")
    # the caption on the left of the null comes first in the drawing (text kept as text)
    first = min(("control", "intervention"), key=lambda arm: svg.find(f"favours {arm}"))
    assert svg.find("favours control") > 0 and svg.find("favours intervention") > 0
    assert first == left


@pytest.mark.parametrize(
    "text",
    [
        "# favours: higher\n" + SMOKING,
        SMOKING.replace("ctl_total\n", "ctl_total,favours\n", 1).replace("148\n", "148,higher\n"),
    ],
)
def test_case7_favours_in_the_table(tmp_path, text, capsys):
    p = tmp_path / "smoking.csv"
    p.write_text(text, encoding="utf-8")
    review, _ = load_review_file(p)
    assert (review.details.favours, review.details.favours_source) == ("higher", "table")
    code, out, _ = run(["check", str(p), "--json"], capsys)
    assert json.loads(out)["intake"]["favours"]["source"] == "table"


# -- case 8: the paste preview names the measure -------------------------------------------


HEADERLESS_MD = """Corvane 2008     -4.1 (-7.9 to -0.3)
Delmar 2010      -2.6 (-5.0 to -0.2)
Estrid 2011      -1.2 (-3.5 to 1.1)
Galen 2015       -0.8 (-2.4 to 0.8)
"""


def test_case8_paste_preview_assumes_a_mean_difference_and_says_why(make_window):
    w = make_window()  # a new review: its measure is the odds ratio
    dlg = w.open_paste_dialog(HEADERLESS_MD)
    assert dlg.measure_box.currentData() == "MD"
    assert "mean difference" in dlg.measure_why.text() and "below 0" in dlg.measure_why.text()
    dlg.accept()
    assert w.session.review.measure == "MD"
    result = w.session.analyse()
    assert not [p for p in result.problems if p.severity == "error"]
    assert "paste preview" in w.session.review.intake.measure_how


def test_case8_the_user_can_choose_another_measure(make_window):
    w = make_window()
    dlg = w.open_paste_dialog(HEADERLESS_MD)
    dlg.measure_box.setCurrentIndex(dlg.measure_box.findData("SMD"))
    dlg.measure_box.activated.emit(dlg.measure_box.currentIndex())
    dlg.accept()
    assert w.session.review.measure == "SMD"
    assert w.session.review.intake.measure_how == "chosen in the paste preview"


# -- property: every study line is a row or listed as not read -----------------------------


_WORD = st.text(string.ascii_uppercase, min_size=1, max_size=1).flatmap(
    lambda a: st.text(string.ascii_lowercase, min_size=3, max_size=8).map(lambda b: a + b)
)


@st.composite
def forest_tables(draw):
    """A forest table of invented studies with junk lines mixed in.

    Returns the text, the labels of the good study lines and of the junk study lines.
    """
    k = draw(st.integers(2, 9))
    names = draw(st.lists(_WORD, min_size=k + 4, max_size=k + 4, unique=True))
    years = draw(st.lists(st.integers(1990, 2024), min_size=k + 4, max_size=k + 4))
    lines, good, junk = ["Study or subgroup   Odds Ratio IV, Random, 95% CI"], [], []
    for i in range(k):
        est = draw(st.integers(30, 300)) / 100
        lo, hi = round(est * 0.7, 2), round(est * 1.4, 2)
        label = f"{names[i]} {years[i]}"
        good.append(label)
        lines.append(f"{label}   {est:.2f} ({lo:.2f} to {hi:.2f})")
    shapes = [
        "{label}   0.80 (0.60 to 1.07) 0.90 (0.70 to 1.15)",  # two intervals
        "{label}   0,80 (0.60 to 1.07)",  # mixed decimal marks
        "{label}   0.80 (0.60 (0.50 to 1.07))",  # nested brackets
        "{label}   0.80 (0.60, 0.70, 0.90, 1.07)",  # four numbers in a bracket
    ]
    n_junk = draw(st.integers(1, 4))
    for j in range(n_junk):
        label = f"{names[k + j]} {years[k + j]}"
        junk.append(label)
        at = draw(st.integers(1, len(lines)))
        lines.insert(at, draw(st.sampled_from(shapes)).format(label=label))
    # harmless lines that are not studies
    lines.append("Total (95% CI)   0.90 (0.80 to 1.01)")
    lines.append(
        "Heterogeneity: Tau\u00b2 = 0.01; Chi\u00b2 = 5.2, df = 4 (P = 0.27); I\u00b2 = 23%"
    )
    return "\n".join(lines) + "\n", good, junk


def _accounted(label: str, rows: list[str], not_read: list[str]) -> str:
    in_rows = label in rows
    listed = any(label in t for t in not_read)
    assert in_rows != listed, (label, rows, not_read)
    return "row" if in_rows else "not read"


@settings(
    max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture]
)
@given(forest_tables())
def test_property_every_study_line_is_a_row_or_listed_as_not_read(tmp_path, table):
    text, good, junk = table
    p = tmp_path / "forest.txt"
    p.write_text(text, encoding="utf-8")
    s = Session()
    s.open(p)
    rows = [r.study for r in s.review.studies]
    not_read = [n.text for n in s.review.intake.not_read]
    for label in good:
        assert _accounted(label, rows, not_read) == "row"
    for label in junk:
        assert _accounted(label, rows, not_read) == "not read"
    # the JSON says the same
    data = to_json(s.analyse())
    j_rows = [st_["study"] for st_ in data["studies"]]
    j_not = [n["text"] for n in data["intake"]["not_read"]]
    for label in good + junk:
        _accounted(label, j_rows, j_not)
    # and the text output (which the sheet's data section shares) lists every junk line
    out = text_summary(s.analyse())
    for label in junk:
        assert label in out


@settings(
    max_examples=6, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture]
)
@given(forest_tables())
def test_property_the_sheet_lists_every_line_not_read(tmp_path, table):
    pypdf = pytest.importorskip("pypdf")
    from lopside.sheet import sheet_bytes

    text, good, junk = table
    p = tmp_path / "forest.txt"
    p.write_text(text, encoding="utf-8")
    review, _ = load_review_file(p)
    pdf = sheet_bytes(analyse(review))
    flat = " ".join(
        " ".join((pg.extract_text() or "").split()) for pg in pypdf.PdfReader(io.BytesIO(pdf)).pages
    )
    assert f"{len(junk)} line{'s' if len(junk) != 1 else ''} not read" in flat
    for label in junk:
        assert label in flat


@settings(
    max_examples=4, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture]
)
@given(forest_tables())
def test_property_window_model_lists_what_was_not_read(make_window, tmp_path, table):
    # generated tables through the window: the table model and the problems list
    text, good, junk = table
    p = tmp_path / "forest.txt"
    p.write_text(text, encoding="utf-8")
    w = make_window()
    assert w.open_path(p, remember=False, ask=False)
    model_rows = [w.studies.model.index(r, 0).data() for r in range(w.studies.model.rowCount())]
    items = [w.studies.problems.item(i).text() for i in range(w.studies.problems.count())]
    for label in good:
        assert label in model_rows
    for label in junk:
        assert label not in model_rows and any(label in t for t in items)


def test_account_plus_tags_later_input():
    a = IntakeAccount("a.csv", (NotRead("cells", "row 3", "x", "why"),), "point", "evidence", "0.5")
    b = IntakeAccount("pasted text", (NotRead("line", "line 2", "y", "why"),), "comma", "asked")
    c = a.plus(b)
    assert [n.where for n in c.not_read] == ["row 3", "pasted text, line 2"]
    assert (c.source, c.decimal_mark, c.decimal_how) == ("a.csv; pasted text", "comma", "asked")
    assert IntakeAccount().plus(b) == b and a.plus(IntakeAccount()) == a


def test_saved_project_round_trips_the_account(tmp_path):
    review, _ = load_review_file(_write(tmp_path, "s.csv", SMOKING), favours="higher")
    target = tmp_path / "x.lopside"
    save(review, target)
    back, _ = load(target)
    assert back.intake == review.intake and back.details.favours_source == "option"


def _write(tmp_path, name, text):
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return p


def test_case5_row_messages_name_the_spreadsheet_row(tmp_path, capsys):
    # a blank row and the header push study 1 down to spreadsheet row 3
    p = _write(
        tmp_path,
        "rows.csv",
        "study,estimate,lower,upper\n\nAske 2004,0.80,0.90,1.07\nBirn 2006,0.70,0.50,0.98\n",
    )
    code, out, _ = run(["check", str(p), "--measure", "OR", "--json"], capsys)
    assert code == 0
    messages = [pr["message"] for pr in json.loads(out)["problems"]]
    assert any(m.startswith("Row 1 (Aske 2004; spreadsheet row 3), estimate:") for m in messages)
    # the places follow the rows by label after an edit moves them
    review, _ = load_review_file(p, "OR")
    moved = review.with_studies(review.studies[::-1])
    assert moved.intake.places(moved.studies) == ("spreadsheet row 4", "spreadsheet row 3")


def test_comment_rows_above_the_header_are_listed_not_dropped(tmp_path):
    p = _write(tmp_path, "c.csv", "# invented data for a test\n" + SMOKING)
    t = read_table(p)
    assert [(n.kind, n.where) for n in t.not_read] == [("row", "row 1")]
    assert len(t.rows) == 4


def test_decimal_option_settles_a_file_with_both_marks(tmp_path):
    p = _write(
        tmp_path,
        "mixed.csv",
        'study,estimate,lower,upper\nA 2001,"0,80","0,60","1,07"\nB 2002,0.70,0.50,0.98\n'
        'C 2003,"1,105","1,012","1,206"\n',
    )
    with pytest.raises(DecimalUndecided):
        load_review_file(p, "RR")
    review, _ = load_review_file(p, "RR", decimal="comma")
    assert [r.estimate for r in review.studies] == [0.8, 0.7, 1.105]


def test_favours_set_in_the_window_is_one_undoable_edit_with_its_source():
    from lopside import edits as ed

    review, _ = load_review_file(_write_tmp("s.csv", SMOKING))
    assert review.details.favours_source == "assumed"
    new, inverse = ed.apply(ed.SetFavours("higher", "window"), review)
    assert (new.details.favours, new.details.favours_source) == ("higher", "window")
    back, _ = ed.apply(inverse, new)
    assert back == review
    with pytest.raises(ed.EditError):
        ed.apply(ed.SetFavours("sideways"), review)


def _write_tmp(name, text):
    import tempfile
    from pathlib import Path

    p = Path(tempfile.mkdtemp()) / name
    p.write_text(text, encoding="utf-8")
    return p


def test_a_saved_project_prints_its_unread_lines_without_stopping(seven, tmp_path, capsys):
    s = Session()
    s.open(seven)
    target = s.save(tmp_path / "seven.lopside")
    code, out, _ = run(["check", str(target)], capsys)
    assert code == 0  # the lines were shown when it was imported; the output still lists them
    assert "2 lines not read" in out and "Cottam 2005" in out


def test_a_line_without_numbers_is_listed_but_does_not_stop_the_cli(tmp_path, capsys):
    p = _write(
        tmp_path,
        "t.txt",
        "Table 4. Invented trials\n"
        + SEVEN.split("\n", 1)[1]
        .replace("Cottam 2005    0.91 (0.70 to 1.18) 0.88 (0.60 to 1.20)\n", "")
        .replace("Eskarra 2009   0,70 (0.50 to 0.98)\n", ""),
    )
    code, out, _ = run(["check", str(p), "--measure", "OR"], capsys)
    assert code == 0
    assert "1 text line not read" in out and "Table 4. Invented trials" in out
