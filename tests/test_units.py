"""The optional "units" review detail: model, project file (additive), form, sheet text."""

from __future__ import annotations

import json

import pytest

from lopside.model import project_file
from lopside.model.review import Review, ReviewDetails, StudyRow


def md_review(units="mmHg") -> Review:
    """INVENTED: four fictional trials of a blood-pressure drug, mean differences."""
    rows = tuple(
        StudyRow(study=f"Trial {c}", estimate=e, lower=e - 3, upper=e + 3)
        for c, e in zip("ABCD", (-4.0, -2.5, -6.0, -1.0))
    )
    return Review(details=ReviewDetails(title="Invented", measure="MD", units=units), studies=rows)


def test_units_round_trip_and_older_files_read_as_none(tmp_path):
    path = tmp_path / "r.lopside"
    project_file.save(md_review(), path)
    review, _ = project_file.load(path)
    assert review.details.units == "mmHg"
    doc = json.loads(path.read_text(encoding="utf-8"))
    del doc["outcomes"][0]["details"]["units"]  # a file written before the field existed
    doc.pop("checksum", None)  # (which had no checksum either)
    path.write_text(json.dumps(doc), encoding="utf-8")
    review, _ = project_file.load(path)
    assert review.details.units == ""
    doc["outcomes"][0]["details"]["units"] = 12
    path.write_text(json.dumps(doc), encoding="utf-8")
    with pytest.raises(project_file.ProjectFileError, match="units"):
        project_file.load(path)


def test_units_in_the_review_header_and_on_the_forest_axis():
    from lopside.analysis import analyse
    from lopside.figures.adaptors import forest_input_from_result
    from lopside.figures.forest import forest_figure
    from lopside.settings import AnalysisSettings
    from lopside.summary import header_section

    result = analyse(md_review(), AnalysisSettings())
    rows = dict(header_section(result).rows)
    assert "units: mmHg" in rows["Effect measure"]
    fig = forest_figure(*forest_input_from_result(result))
    assert fig.lopside_artists["ax"].get_xlabel() == "Mean difference (mmHg)"
    assert (
        "units"
        not in dict(header_section(analyse(md_review(""), AnalysisSettings())).rows)[
            "Effect measure"
        ]
    )


def test_units_field_in_the_details_form(make_window):
    pytest.importorskip("PySide6")
    w = make_window(md_review(""))
    w.details.units.setText("points on a 0-100 scale")
    w.details.units.editingFinished.emit()
    assert w.session.review.details.units == "points on a 0-100 scale"
    w.stack.undo()
    assert w.session.review.details.units == ""
