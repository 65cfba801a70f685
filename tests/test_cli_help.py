"""The command line tells what it can do (issue 15, CLI): every way to start it, help for
every option, a near-miss command named, and one definition of the analysis options."""

from __future__ import annotations

import argparse

import pytest

from lopside.cli import SUBCOMMANDS, build_parser, main


def _subparsers(parser: argparse.ArgumentParser) -> dict[str, argparse.ArgumentParser]:
    for action in parser._actions:  # noqa: SLF001 - argparse has no public accessor
        if isinstance(action, argparse._SubParsersAction):  # noqa: SLF001
            return dict(action.choices)
    return {}


def test_help_names_every_way_to_start(capsys):
    with pytest.raises(SystemExit) as stop:
        main(["--help"])
    assert stop.value.code == 0
    out = capsys.readouterr().out
    for command in SUBCOMMANDS:
        assert f"\n    {command} " in out, command
    assert "lopside [FILE]" in out and "open the window" in out
    assert "--self-test" in out
    assert "UTF-8" in out  # the documented encoding of redirected output


def test_every_option_of_every_command_has_help():
    parser = build_parser()
    parsers = {"lopside": parser, **_subparsers(parser)}
    assert set(parsers) == {"lopside", *SUBCOMMANDS}
    missing = [
        f"{name} {action.option_strings or action.dest}"
        for name, p in parsers.items()
        for action in p._actions  # noqa: SLF001
        if not isinstance(action, argparse._SubParsersAction)  # noqa: SLF001
        and not (action.help and action.help.strip())
    ]
    assert missing == []


@pytest.mark.parametrize(
    "argv,hint",
    [
        (["chek", "review.lopside"], " (did you mean check?)"),
        (["chek"], " (did you mean check?)"),
        (["shet", "r.csv", "-o", "x.pdf"], " (did you mean sheet?)"),
        (["plto", "r.csv"], " (did you mean plot?)"),
        (["frobnicate", "r.csv"], "."),
    ],
)
def test_an_unknown_command_is_named_with_the_nearest_one(
    tmp_path, monkeypatch, capsys, argv, hint
):
    monkeypatch.chdir(tmp_path)  # no file called like the word
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert f"unknown command '{argv[0]}'{hint}" in err
    assert "unrecognized arguments" not in err and "Traceback" not in err


def test_an_existing_file_or_a_lone_file_name_still_opens_the_window(tmp_path, monkeypatch):
    from lopside.cli import unknown_command

    monkeypatch.chdir(tmp_path)
    (tmp_path / "chek").write_text("x", encoding="utf-8")
    assert unknown_command(["chek"]) is None  # a file of that name exists
    assert unknown_command(["review.lopside"]) is None  # the window reports it missing
    assert unknown_command(["--self-test"]) is None
    assert unknown_command([]) is None


def test_plot_takes_the_same_analysis_options_as_check_and_sheet():
    subs = _subparsers(build_parser())

    def analysis_options(p: argparse.ArgumentParser) -> dict[str, tuple]:
        return {
            a.dest: (tuple(a.option_strings), a.choices, a.default, a.help)
            for a in p._actions  # noqa: SLF001
            if a.dest
            in {
                "file",
                "measure",
                "tau2_method",
                "hksj",
                "ci_method",
                "fill_side",
                "fill_estimator",
            }
        }

    check = analysis_options(subs["check"])
    assert len(check) == 7
    assert analysis_options(subs["sheet"]) == check
    assert analysis_options(subs["plot"]) == check
    args = build_parser().parse_args(
        ["plot", "r.csv", "-o", "f.png", "--ci-method", "t", "--fill-side", "left"]
        + ["--fill-estimator", "R0", "--tau2", "PM", "--hksj"]
    )
    from lopside.cli import settings_from_args
    from lopside.settings import AnalysisSettings

    s = settings_from_args(args, AnalysisSettings())
    assert (s.ci_method, s.trimfill_side, s.trimfill_estimator, s.tau2_method, s.hksj) == (
        "t",
        "left",
        "R0",
        "PM",
        True,
    )
