"""Progress and cancel of a long analysis (the CLI's stderr line, the window's worker)."""

from __future__ import annotations

import io

import pytest

from lopside.analysis import STAGES, AnalysisCancelled, analyse
from lopside.cli import PROGRESS_MIN_STUDIES, ConsoleProgress, main
from lopside.cli_common import load_review_file
from lopside.paths import sample_reviews_dir


def _sample():
    return load_review_file(str(sample_reviews_dir() / "delirium_vantoprine.lopside"), None)[0]


def test_analyse_reports_every_stage_in_order():
    seen = []
    analyse(_sample(), progress=lambda stage, i, n: seen.append((stage, i, n)))
    assert [s for s, _, _ in seen] == list(STAGES[:-1])  # no power simulation asked
    assert [i for _, i, _ in seen] == list(range(len(STAGES) - 1))
    assert {n for _, _, n in seen} == {len(STAGES)}


def test_a_false_answer_cancels_the_analysis():
    calls = []

    def stop_at_leave_one_out(stage, i, n):
        calls.append(stage)
        return stage != "leave one out"

    with pytest.raises(AnalysisCancelled):
        analyse(_sample(), progress=stop_at_leave_one_out)
    assert calls[-1] == "leave one out"  # nothing ran after the answer


def test_console_progress_writes_lines_for_a_large_review_to_a_log():
    out = io.StringIO()  # not a terminal: one line per stage, only for large reviews
    p = ConsoleProgress(PROGRESS_MIN_STUDIES, stream=out)
    assert p("pooling", 1, len(STAGES)) is True
    assert (
        out.getvalue() == f"lopside: analysing {PROGRESS_MIN_STUDIES:,} studies - pooling (2/9)\n"
    )
    small = io.StringIO()
    ConsoleProgress(30, stream=small)("pooling", 1, len(STAGES))
    assert small.getvalue() == ""


def test_check_on_a_small_review_keeps_stderr_empty(capsys):
    path = str(sample_reviews_dir() / "delirium_vantoprine.lopside")
    assert main(["check", "--json", path]) == 0
    assert capsys.readouterr().err == ""
    assert main(["check", "--quiet", path]) == 0
    assert capsys.readouterr().err == ""


# --------------------------------------------------------------------------------------
# Staged analysis: the core stage first, the full stage reusing it


def test_core_stage_has_the_first_numbers_and_says_the_rest_is_pending():
    from lopside.analysis import CORE_PENDING
    from lopside.report import to_json
    from lopside.stats.results import NotComputable

    review = _sample()
    full = analyse(review)
    core = analyse(review, stage="core")
    assert core.stage == "core" and full.stage == "full"
    for name in ("fixed", "random", "heterogeneity", "trim_fill"):
        assert to_json_part(getattr(core, name)) == to_json_part(getattr(full, name)), name
    assert core.tests.keys() == full.tests.keys()
    for name in ("leave_one_out", "cumulative", "selection", "limit", "pet_peese"):
        value = getattr(core, name)
        assert isinstance(value, NotComputable) and value.reason == CORE_PENDING, name
    to_json(core)  # every output path can render a core result


def test_core_stage_pools_only_the_chosen_model_and_says_the_others_follow():
    """The core stage pools with the chosen τ² (issue 16); the comparison with the other
    estimators belongs to the full stage, and until then the summary says so rather than
    showing a table half old, half new (DESIGN 8)."""
    from lopside.analysis import CORE_PENDING
    from lopside.settings import AnalysisSettings
    from lopside.stats.results import NotComputable
    from lopside.summary import pooled_section

    review = _sample()
    for hksj in (False, True):
        settings = AnalysisSettings(tau2_method="PM", hksj=hksj)
        core = analyse(review, settings, stage="core")
        full = analyse(review, settings)
        chosen, other = (
            (core.random_hksj_by_method, core.random_by_method)
            if hksj
            else (core.random_by_method, core.random_hksj_by_method)
        )
        assert chosen["PM"] is core.random
        for table, key in [(chosen, "DL"), (chosen, "REML")] + [(other, m) for m in other]:
            assert isinstance(table[key], NotComputable) and table[key].reason == CORE_PENDING
        assert list(core.random_by_method) == list(full.random_by_method)
        full_tables = full.random_hksj_by_method if hksj else full.random_by_method
        assert to_json_part(full_tables["PM"]) == to_json_part(core.random)
        for m, p in full.random_by_method.items():
            assert not isinstance(p, NotComputable), m
        rows = pooled_section(core).rows
        assert [r[1] for r in rows if r[0].startswith("Random effects, DerSimonian")] == [
            "updating\u2026"
        ]


def test_full_stage_from_a_core_stage_equals_the_whole_analysis():
    from lopside.report import to_json

    review = _sample()
    core = analyse(review, stage="core")
    seen = []
    full = analyse(review, core=core, progress=lambda s, i, n: seen.append(s))
    assert full.fixed is core.fixed and full.data is core.data  # reused, not recomputed
    assert "pooling" not in seen and "leave one out" in seen
    whole = to_json(analyse(review))
    assert to_json(full) == whole


def to_json_part(x):
    from lopside.report import plain

    return plain(x)


def test_core_stage_reading_says_what_is_still_coming_not_that_it_could_not_be_run():
    """While only the core stage is shown, the funnel's reading must not claim that only
    one adjustment could be run or that no other test could be (DESIGN 8: a number still
    being computed is not a number that failed)."""
    from lopside.assessment import assessment_of
    from lopside.summary.appraisal import small_study_section

    def rows(result):
        return dict(small_study_section(assessment_of(result).appraisal).rows)

    review = _sample()
    core_rows, full_rows = rows(analyse(review, stage="core")), rows(analyse(review))
    assert "being updated" in core_rows["Adjusted"]
    assert "Only one adjustment could be run" not in core_rows["Adjusted"]
    assert "the others are being updated" in core_rows["Other tests"]
    assert "being updated" not in full_rows["Adjusted"] + full_rows["Other tests"]


def test_panel_reports_each_outcome_by_number_and_name(tmp_path):
    """panel analyses several outcomes one after another: its progress line says which
    (before, it had no progress at all and refused --quiet)."""
    from lopside.panel import OutcomeInput, build_panel
    from lopside.settings import AnalysisSettings

    review = load_review_file(str(sample_reviews_dir() / "delirium_vantoprine.lopside"))[0]
    inputs = [OutcomeInput(n, review, AnalysisSettings()) for n in ("Delirium", "Falls")]
    log = io.StringIO()  # a log file: lines, as for a large review
    made = []

    def progress_for(inp, number, total):
        p = ConsoleProgress(
            PROGRESS_MIN_STUDIES, stream=log, label=f"{number}/{total} {inp.name}: "
        )
        made.append(p)
        return p

    summary = build_panel("Invented", inputs, progress_for=progress_for)
    assert len(summary.outcomes) == 2 and len(made) == 2
    lines = log.getvalue().splitlines()
    assert lines[0] == (
        f"lopside: 1/2 Delirium: analysing {PROGRESS_MIN_STUDIES:,} studies - "
        f"{STAGES[0]} (1/{len(STAGES)})"
    )
    assert [ln.split(":")[1].strip() for ln in lines] == ["1/2 Delirium"] * (len(STAGES) - 1) + [
        "2/2 Falls"
    ] * (len(STAGES) - 1)


def test_panel_and_slide_take_quiet_and_keep_stderr_empty(tmp_path, capsys):
    path = str(sample_reviews_dir() / "delirium_vantoprine.lopside")
    assert main(["panel", path, "-o", str(tmp_path / "p.csv"), "--quiet"]) == 0
    assert main(["slide", path, "-o", str(tmp_path / "s.png"), "--quiet"]) == 0
    assert capsys.readouterr().err == ""


def test_core_stage_adjustments_say_updating_not_not_computed():
    """The Adjust view in the core stage read 'not computed' beside 'being updated (the
    full analysis follows in a moment)' for PET-PEESE, the limit and the selection model,
    and 'How strong selection would have to be was not computed: being updated (...)'."""
    from lopside.summary.adjustments import adjustments_section
    from lopside.words.numbers import UPDATING
    from lopside.words.selection import selection_sentence

    review = _sample()
    core = analyse(review, stage="core")
    rows = {r[0]: r for r in adjustments_section(core).rows}
    pending = [r for name, r in rows.items() if name.startswith(("PET", "Limit", "Selection"))]
    assert pending and all(r[1:] == (UPDATING, "", "") for r in pending), pending
    assert not any("not computed" in " ".join(r) for r in rows.values())
    assert selection_sentence(core) == "How strong selection would have to be is being updated."
    full = analyse(review)
    full_rows = {r[0]: r for r in adjustments_section(full).rows}
    assert all(UPDATING not in " ".join(r) for r in full_rows.values())
