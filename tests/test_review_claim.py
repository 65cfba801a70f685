"""The review's own claim about small-study effects (issue 20): model, project file, edits,
the comparison with Lopside's reading, the sheet and the window. Invented data only.

The rule quoted: at least 10 studies for an asymmetry test (Sterne et al. 2011, BMJ
343:d4002; common practice).
"""

from __future__ import annotations

import io
import json

import pytest

from lopside import edits as ed
from lopside import summary as S
from lopside.analysis import analyse
from lopside.appraise.claim import claim_test_key, compare_claim
from lopside.model import project_file
from lopside.model.review import Review, ReviewClaim, ReviewDetails, StudyRow

COUNTS = [
    (40, 600, 52, 598), (31, 410, 40, 405), (22, 300, 30, 302), (18, 220, 25, 221),
    (12, 160, 20, 158), (9, 120, 16, 121), (6, 90, 13, 88), (5, 70, 11, 72),
    (3, 50, 9, 51), (2, 40, 8, 40), (1, 30, 7, 31), (1, 25, 6, 24),
]  # fmt: skip


NO_CLAIM = ReviewClaim()


def review(claim=NO_CLAIM, n=None):
    n = len(COUNTS) if n is None else n
    rows = tuple(
        StudyRow(study=f"Invented {i}", int_events=a, int_total=n1, ctl_events=c, ctl_total=n0)
        for i, (a, n1, c, n0) in enumerate(COUNTS[:n], start=1)
    )
    return Review(details=ReviewDetails(measure="OR", claim=claim), studies=rows)


CLAIM = ReviewClaim(test="Egger's regression test", statistic=1.1, p=0.27, k=12,
                    conclusion="none found")  # fmt: skip


def test_project_file_round_trip_and_validation(tmp_path):
    rv = review(CLAIM)
    path = tmp_path / "c.lopside"
    project_file.save(rv, path)
    back, _ = project_file.load(path)
    assert back.details.claim == CLAIM
    doc = json.loads(path.read_text(encoding="utf-8"))
    body = doc["outcomes"][0]  # format 2: a workbook of one outcome
    body["details"]["claim"]["conclusion"] = "maybe"
    with pytest.raises(project_file.ProjectFileError, match="claim conclusion"):
        project_file.loads(json.dumps(doc), accept_changed=True)
    body["details"]["claim"]["conclusion"] = "found"
    body["details"]["claim"]["p"] = 1.5
    with pytest.raises(project_file.ProjectFileError, match="claim p"):
        project_file.loads(json.dumps(doc), accept_changed=True)
    # older files without a claim still open
    del body["details"]["claim"]
    assert (
        project_file.loads(json.dumps(doc), accept_changed=True)[0].details.claim == ReviewClaim()
    )


def test_edits_set_and_undo_the_claim():
    rv = review()
    rv2, inverse = ed.apply(ed.SetDetail("claim.conclusion", "found"), rv)
    assert rv2.details.claim.conclusion == "found"
    rv3, _ = ed.apply(inverse, rv2)
    assert rv3.details.claim == ReviewClaim()
    rv4, _ = ed.apply(ed.SetDetail("claim.k", 9.0), rv)
    assert rv4.details.claim.k == 9
    for bad in (ed.SetDetail("claim.p", 2.0), ed.SetDetail("claim.conclusion", "maybe"),
                ed.SetDetail("claim.k", 2.5), ed.SetDetail("claim.nothing", 1)):  # fmt: skip
        with pytest.raises(ed.EditError):
            ed.apply(bad, rv)


def test_test_names_are_recognised():
    assert claim_test_key("Egger's regression test") == "egger"
    assert claim_test_key("rank correlation (Begg)") == "begg"
    assert claim_test_key("funnel plot inspection") is None


def test_comparison_none_found_with_too_few_studies():
    res = analyse(review(ReviewClaim(test="Egger's test", k=8, conclusion="none found"), n=8))
    c = compare_claim(res)
    assert c.applicable.startswith("Not applicable: 8 studies")
    assert "8 studies" in c.verdict and "too few" in c.verdict


def test_comparison_agreement_follows_the_recommended_test():
    res = analyse(review(CLAIM))
    ours = res.recommended_test()
    found = ours.pvalue < ours.alpha
    c = compare_claim(res)
    assert c.agreement.startswith("Disagrees" if found else "Agrees")
    assert S.fmt_p_eq(ours.pvalue) in c.agreement
    assert "Not simulated" in c.power  # no power simulation in this analysis


def test_comparison_quotes_the_simulated_power():
    rec_key = analyse(review()).recommendation.key
    from lopside.settings import AnalysisSettings
    from lopside.stats.asymmetry import REGISTRY

    claim = ReviewClaim(test=REGISTRY[rec_key].name, k=12, conclusion="none found")
    res = analyse(review(claim), AnalysisSettings(power_reps=400), with_power=True)
    c = compare_claim(res)
    assert S.fmt_share(res.power.power) in c.power
    if res.power.power < 0.5 and not (res.recommended_test().pvalue < 0.10):
        assert "estimated" in c.verdict and S.fmt_share(res.power.power) in c.verdict


def test_no_claim_no_section():
    res = analyse(review())
    assert compare_claim(res) is None and S.review_claim_section(res) is None


def test_sheet_shows_the_claim_on_pages_one_and_three():
    import pypdf

    from lopside.sheet.build import build_sheet

    res = analyse(review(CLAIM))
    b = build_sheet(res, date="2026-12-02")
    assert b.pages == 3
    pages = [" ".join((p.extract_text() or "").split())
             for p in pypdf.PdfReader(io.BytesIO(b.pdf)).pages]  # fmt: skip
    verdict = S.review_claim_section(res).rows[-1][1]
    assert "The review's own claim" in pages[0]
    assert verdict[:50] in pages[0]
    assert "What the review itself said about small-study effects" in pages[2]


def test_window_details_form_and_causes_view(make_window, qtbot):
    pytest.importorskip("PySide6")
    w = make_window(review())
    form = w.details
    form.claim_test.setText("Egger's test")
    form.claim_test.editingFinished.emit()
    form.claim_k.setText("12")
    form.claim_k.editingFinished.emit()
    form.claim_p.setText("1.7")
    form.claim_p.editingFinished.emit()
    assert "1.7" in form.claim_problem.text()  # said, kept, not applied
    assert w.session.review.details.claim.p is None
    i = form.claim_conclusion.findData("none found")
    form.claim_conclusion.setCurrentIndex(i)
    form.claim_conclusion.activated.emit(i)
    claim = w.session.review.details.claim
    assert (claim.test, claim.k, claim.conclusion) == ("Egger's test", 12, "none found")
    qtbot.waitUntil(
        lambda: (
            w.result is not None
            and w.result.review is w.session.review
            and getattr(w.result, "stage", "full") == "full"
        ),
        timeout=10000,
    )
    w.views.setCurrentWidget(w.causes)
    w.causes.show_result(w.result)
    assert w.causes.claim_box.isVisibleTo(w.causes)
    verdict = S.review_claim_section(w.result).rows[-1][1]
    assert verdict.replace("'", "&#x27;")[:30] in w.causes.claim.text() or verdict[:30] in (
        w.causes.claim.text()
    )
