"""Outputs never clobber inputs (issue 13 case 1; issue 22 item 6).

`lopside sheet r.lopside -o r.lopside` used to print "wrote r.lopside", exit 0, and leave a
PDF where the project was. Every case here runs the real command in-process through
``lopside.cli.main`` and checks the exit status, the one-line message and that the file is
byte-identical afterwards.
"""

from __future__ import annotations

import os
import shutil
from pathlib import Path

import pytest

from lopside import cli
from lopside.model import project_file as pf

SAMPLES = Path(__file__).resolve().parents[1] / "sample_reviews"


@pytest.fixture
def project(tmp_path):
    src = sorted(SAMPLES.glob("*.lopside"))[0]
    review, settings = pf.load(src)
    path = tmp_path / "r.lopside"
    pf.save(review, path, settings)
    return path


@pytest.fixture
def table(tmp_path):
    path = tmp_path / "t.csv"
    path.write_text(
        "study,estimate,lower,upper\nInvented A 2001,0.8,0.6,1.1\n"
        "Invented B 2003,0.7,0.5,0.98\nInvented C 2005,0.5,0.3,0.9\n",
        encoding="utf-8",
    )
    return path


def _run(capsys, *argv):
    code = cli.main([str(a) for a in argv])
    err = capsys.readouterr().err.strip()
    return code, err


@pytest.mark.parametrize("command", ["sheet", "plot"])
def test_output_equal_to_the_project_is_refused(capsys, project, command):
    before = project.read_bytes()
    code, err = _run(capsys, command, project, "-o", project)
    assert code == 2 and len(err.splitlines()) == 1
    assert str(project) in err
    assert project.read_bytes() == before


def test_output_equal_to_the_csv_is_refused(capsys, table):
    before = table.read_bytes()
    code, err = _run(capsys, "sheet", table, "--measure", "OR", "-o", table)
    assert code == 2 and "end the file name with .pdf" in err
    assert table.read_bytes() == before


@pytest.mark.skipif(not hasattr(os, "symlink"), reason="needs symlinks")
def test_output_that_is_the_input_through_a_link_is_refused_even_with_force(
    capsys, project, tmp_path
):
    pdf_named = tmp_path / "looks-like.pdf"
    pdf_named.symlink_to(project)
    before = project.read_bytes()
    code, err = _run(capsys, "sheet", pdf_named, "-o", pdf_named, "--force")
    assert code == 2 and "the file being read" in err
    assert project.read_bytes() == before


def test_sheet_over_another_existing_project_is_refused(capsys, project, tmp_path):
    other = tmp_path / "existing.lopside"
    shutil.copy(project, other)
    before = other.read_bytes()
    code, err = _run(capsys, "sheet", project, "-o", other)
    assert code == 2 and len(err.splitlines()) == 1 and "end the file name with .pdf" in err
    assert other.read_bytes() == before


def test_a_pdf_named_file_of_another_kind_needs_force(capsys, project, tmp_path):
    notes = tmp_path / "notes.pdf"
    notes.write_text("my own notes, not a PDF", encoding="utf-8")
    code, err = _run(capsys, "sheet", project, "-o", notes)
    assert code == 2 and "--force" in err and "not a PDF" in err
    assert notes.read_text(encoding="utf-8") == "my own notes, not a PDF"
    code, _ = _run(capsys, "sheet", project, "-o", notes, "--force")
    assert code == 0 and notes.read_bytes().startswith(b"%PDF")


def test_an_existing_pdf_is_replaced(capsys, project, tmp_path):
    out = tmp_path / "sheet.pdf"
    assert _run(capsys, "sheet", project, "-o", out)[0] == 0
    assert _run(capsys, "sheet", project, "-o", out)[0] == 0
    assert out.read_bytes().startswith(b"%PDF")


def test_plot_refuses_a_png_over_a_pdf_without_force(capsys, project, tmp_path):
    out = tmp_path / "fig.png"
    out.write_bytes(b"%PDF-1.4 something else")
    code, err = _run(capsys, "plot", project, "-o", out)
    assert code == 2 and "is a PDF, not a PNG image" in err
    assert out.read_bytes() == b"%PDF-1.4 something else"


def test_a_locked_sheet_says_so_and_names_a_free_name(capsys, project, tmp_path, monkeypatch):
    # issue 22 item 6: on Windows a PDF viewer holds the old sheet open and the rename is
    # refused with "permission denied"; reproduced by refusing os.replace over it
    from lopside import fileio

    out = tmp_path / "sheet.pdf"
    assert _run(capsys, "sheet", project, "-o", out)[0] == 0
    before = out.read_bytes()
    real_replace = os.replace

    def locked(src, dst):
        if Path(dst) == out:
            raise PermissionError(13, "Permission denied")
        return real_replace(src, dst)

    monkeypatch.setattr(fileio.os, "replace", locked)
    code, err = _run(capsys, "sheet", project, "-o", out)
    assert code == 2 and len(err.splitlines()) == 1
    assert "open in another program" in err and "sheet (2).pdf" in err
    assert out.read_bytes() == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["r.lopside", "sheet.pdf"]


def test_changed_project_is_refused_by_the_cli_unless_accepted(capsys, project):
    text = project.read_text(encoding="utf-8")
    project.write_text(text.replace('"title": "', '"title": "Edited by hand: ', 1), "utf-8")
    code, err = _run(capsys, "check", project)
    assert code == 2 and "changed outside Lopside" in err
    code, _ = _run(capsys, "check", project, "--accept-changed")
    assert code == 0


def test_a_lone_surrogate_is_a_message_not_an_internal_error(capsys, tmp_path):
    # issue 13 case 6: `check` exited 3 "internal error (UnicodeEncodeError ...)"
    path = tmp_path / "s.lopside"
    path.write_text(
        '{"lopside_project": 1, "details": {"title": "x\\udc80"}, "studies": '
        '[{"study": "Invented", "estimate": 0.8, "lower": 0.6, "upper": 1.1}]}',
        encoding="utf-8",
    )
    code, err = _run(capsys, "check", path)
    assert code == 2 and "details, title" in err
