"""Trials known to be missing (issue 20): the `reported` column in every input path, the
row checks, the SE-from-size rules and the scenarios. Invented data only.

Outside references: the large-sample variances of log OR / log RR / RD at a given risk
(Cochrane Handbook 6.4.1, common practice); the DerSimonian-Laird estimator written out
(DerSimonian & Laird 1986; Cochrane Handbook 10.10.4.1).
"""

from __future__ import annotations

import csv
import json
import math

import numpy as np
import pytest

from lopside.analysis import UNREPORTED_REASON, analyse
from lopside.edits import cell_text, set_cell
from lopside.intake.checks import check_row
from lopside.intake.table import read_table, write_table_csv
from lopside.model import project_file
from lopside.model.review import Review, ReviewDetails, StudyRow
from lopside.report import to_json
from lopside.settings import AnalysisSettings
from lopside.stats.unreported import se_from_size, unreported_trials

COUNTS = [(12, 100, 20, 100), (30, 250, 45, 250), (8, 60, 15, 60), (50, 400, 70, 400)]


def review(extra=(), measure="OR"):
    rows = [
        StudyRow(study=f"Invented {i}", int_events=a, int_total=n1, ctl_events=c, ctl_total=n0)
        for i, (a, n1, c, n0) in enumerate(COUNTS, start=1)
    ]
    return Review(details=ReviewDetails(measure=measure), studies=tuple(rows) + tuple(extra))


MISSING = (
    StudyRow(study="Invented missing 1", int_total=150, ctl_total=150, reported=False),
    StudyRow(study="Invented missing 2", n=500, reported=False),
)


def dl(y, v):
    w = 1 / v
    mu = np.sum(w * y) / np.sum(w)
    q = np.sum(w * (y - mu) ** 2)
    t2 = max(0.0, (q - (len(y) - 1)) / (np.sum(w) - np.sum(w**2) / np.sum(w)))
    ws = 1 / (v + t2)
    est = np.sum(ws * y) / np.sum(ws)
    return est, math.sqrt(1 / np.sum(ws))


def test_missing_trials_never_enter_the_main_analysis_and_are_listed():
    base = analyse(review())
    res = analyse(review(MISSING))
    assert res.k == base.k == 4
    assert res.random.estimate == base.random.estimate
    listed = [e for e in res.excluded if e.reason == UNREPORTED_REASON]
    assert [e.row for e in listed] == [4, 5]
    assert base.unreported_trials is None and "unreported_trials" not in to_json(base)


def test_scenarios_match_a_direct_dl_pooling_with_the_median_control_risk():
    res = analyse(review(MISSING), AnalysisSettings(tau2_method="DL"))
    u = res.unreported_trials
    assert u.count == 2 and u.participants == 800
    p0 = float(np.median([c / n0 for _, _, c, n0 in COUNTS]))
    # log OR variance at risk p0 in both arms (Handbook 6.4.1, common practice)
    se1 = math.sqrt(2 / (150 * p0 * (1 - p0)))
    se2 = math.sqrt(2 / (250 * p0 * (1 - p0)))
    assert u.se == pytest.approx((se1, se2), rel=1e-12)
    y = np.array([math.log(a * (n0 - c) / ((n1 - a) * c)) for a, n1, c, n0 in COUNTS])
    v = np.array([1 / a + 1 / (n1 - a) + 1 / c + 1 / (n0 - c) for a, n1, c, n0 in COUNTS])
    mu = res.random.estimate
    for scen, value in zip(u.scenarios, (0.0, -mu)):
        est, se = dl(np.r_[y, value, value], np.r_[v, se1**2, se2**2])
        assert scen.pooled.estimate == pytest.approx(est, abs=1e-12)
        assert scen.pooled.se == pytest.approx(se, rel=1e-10)
    # a null trial pulls the (beneficial, negative) estimate towards no effect
    assert mu < u.scenarios[0].pooled.estimate < 0
    out = to_json(res)["unreported_trials"]
    assert out["count"] == 2 and out["participants"] == 800
    assert [s["assumed"] for s in out["scenarios"]] == ["no effect", "opposite effect"]
    assert out["scenarios"][0]["estimate"] == pytest.approx(u.scenarios[0].pooled.estimate)


@pytest.mark.parametrize("measure", ["RR", "RD"])
def test_se_rule_for_rr_and_rd(measure):
    res = analyse(review(MISSING, measure))
    p0 = float(np.median([c / n0 for _, _, c, n0 in COUNTS]))
    n = 150
    if measure == "RR":
        expected = math.sqrt(2 * (1 - p0) / (n * p0))
    else:
        expected = math.sqrt(p0 * (1 - p0) * 2 / n)
    assert res.unreported_trials.se[0] == pytest.approx(expected, rel=1e-12)


def test_ratio_given_as_ci_uses_the_reviews_own_se_size_relation():
    rows = tuple(
        StudyRow(study=f"Invented {i}", estimate=0.8, lower=lo, upper=hi, n=n)
        for i, (lo, hi, n) in enumerate([(0.6, 1.07, 300), (0.5, 1.28, 120), (0.7, 0.91, 900)])
    )
    rv = Review(details=ReviewDetails(measure="HR"), studies=rows + MISSING)
    res = analyse(rv)
    data = res.data
    c = float(np.median(data.se * np.sqrt(data.n)))
    assert res.unreported_trials.se[1] == pytest.approx(c / math.sqrt(500), rel=1e-12)
    assert "relation between SE and size" in res.unreported_trials.se_rule


def test_no_size_anywhere_is_not_computable_with_reason():
    rows = (StudyRow(study="Invented 1", estimate=0.8, lower=0.6, upper=1.07),
            StudyRow(study="Invented 2", estimate=0.7, lower=0.5, upper=0.98))  # fmt: skip
    res = analyse(Review(details=ReviewDetails(measure="HR"), studies=rows + MISSING))
    assert "cannot be told from its size" in res.unreported_trials.reason
    assert "reason" in to_json(res)["unreported_trials"]


def test_row_checks_for_missing_trials():
    no_size = check_row(StudyRow(study="X", reported=False), "OR")
    assert [p.code for p in no_size] == ["unreported_no_size"]
    with_results = check_row(
        StudyRow(study="X", n=100, estimate=0.8, lower=0.5, upper=1.2, reported=False), "OR"
    )
    assert [p.code for p in with_results] == ["unreported_has_results"]
    assert check_row(StudyRow(study="X", n=100, reported=False), "OR") == ()


def test_csv_reads_and_writes_the_reported_column(tmp_path):
    path = tmp_path / "t.csv"
    path.write_text(
        "study,int_events,int_total,ctl_events,ctl_total,n,reported\n"
        "Invented A,10,100,20,100,,yes\n"
        "Invented B,,,,,300,no\n"
        "Invented C,,,,,200,perhaps\n",
        encoding="utf-8",
    )
    table = read_table(path)
    rows = table.rows
    assert [r.reported for r in rows] == [True, False, True]
    assert rows[2].unread_dict() == {"reported": "perhaps"}  # kept, never lost
    out = tmp_path / "back.csv"
    write_table_csv(rows, out)
    with out.open(encoding="utf-8-sig") as fh:
        back = list(csv.DictReader(fh))
    assert [b["reported"] for b in back] == ["", "no", "perhaps"]
    again = read_table(out).rows
    assert [r.reported for r in again] == [True, False, True]


def test_project_file_round_trip_and_bad_value(tmp_path):
    rv = review(MISSING)
    path = tmp_path / "r.lopside"
    project_file.save(rv, path)
    back, _ = project_file.load(path)
    assert [s.reported for s in back.studies] == [True] * 4 + [False, False]
    assert back == rv
    text = path.read_text(encoding="utf-8")
    assert text.count('"reported": false') == 2 and '"reported": true' not in text
    doc = json.loads(text)
    doc_studies = doc["outcomes"][0]["studies"]  # format 2: a workbook of one outcome
    doc_studies[4]["reported"] = "no"
    with pytest.raises(project_file.ProjectFileError, match="reported: expected true or false"):
        project_file.loads(json.dumps(doc), accept_changed=True)


def test_edit_cell_reported():
    row = set_cell(StudyRow(study="X", n=100), "reported", "no")
    assert row.reported is False and cell_text(row, "reported") == "no"
    row = set_cell(row, "reported", "")
    assert row.reported is True and cell_text(row, "reported") == ""
    odd = set_cell(StudyRow(study="X"), "reported", "maybe")
    assert odd.reported is True and odd.unread_dict() == {"reported": "maybe"}


def test_se_from_size_smd():
    from lopside.stats.data import StudyData

    d = StudyData(measure="SMD", y=np.array([0.2, 0.3]), se=np.array([0.1, 0.2]))
    se, rule = se_from_size(d, [(200.0, 80.0, 120.0)])
    assert se[0] == pytest.approx(math.sqrt(1 / 80 + 1 / 120))


def test_unreported_trials_needs_rows():
    from lopside.stats.data import StudyData

    d = StudyData(measure="OR", y=np.array([0.2]), se=np.array([0.1]))
    assert not unreported_trials(d, [], (), None)


def test_sheet_page_one_carries_both_sentences():
    import io

    import pypdf

    from lopside import summary as S
    from lopside.sheet.build import build_sheet

    res = analyse(review(MISSING))
    b = build_sheet(res, date="2026-12-02")
    assert b.pages == 3
    pages = [p.extract_text() or "" for p in pypdf.PdfReader(io.BytesIO(b.pdf)).pages]
    flat = [" ".join(p.split()) for p in pages]
    missing = " ".join(S.missing_trials_sentence(res).split())
    assert missing[:60] in flat[0]
    assert "Selection needed" in flat[0] and "Trials never reported" in flat[0]
    # page 2 no longer has room for the selection block (the sensitivity section moved
    # there); the window, the text and the JSON carry it
    # the caution stays on every page
    assert all("Lopside informs an appraisal" in p for p in flat)


def test_appraisal_counts_known_missing_trials_for_selective_reporting():
    from lopside import summary as S
    from lopside.appraise import appraise

    res = analyse(review(MISSING))
    sel = next(c for c in appraise(res).causes if c.key == "selection")
    lines = [(e.direction, e.text) for e in sel.evidence]
    assert ("for", S.missing_trials_sentence(res)) in lines
    assert ("unclear", S.selection_sentence(res)) in lines
    base = next(c for c in appraise(analyse(review())).causes if c.key == "selection")
    assert not any("never reported" in e.text for e in base.evidence)


def test_xlsx_reads_the_reported_column(tmp_path):
    import openpyxl

    wb = openpyxl.Workbook()
    ws = wb.active
    ws.append(["Study", "N", "Reported"])
    ws.append(["Invented A", 120, "No"])
    ws.append(["Invented B", 80, True])
    ws.append(["Invented C", 60, 0])
    path = tmp_path / "t.xlsx"
    wb.save(path)
    rows = read_table(path).rows
    assert [r.reported for r in rows] == [False, True, False]
