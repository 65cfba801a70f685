"""Command line: the headless commands and the window launcher.

    lopside                         open the window
    lopside FILE                    open the window on a review or study table
    lopside --self-test             build the window offscreen, analyse a sample, write a sheet
    lopside check FILE [--measure M] [--json] [--power]
    lopside sheet FILE -o OUT.pdf [--measure M] [--include-forest] [--appraiser NAME]
    lopside plot FILE --kind funnel|forest|cumulative|radial -o OUT.png|.svg|.pdf
    lopside batch INPUT... -o OUT.csv|.xlsx|.parquet [--workers N] [--scheduler ADDRESS]
    lopside panel FILE... -o OUT.pdf|.docx|.xlsx|.csv [--skip-bad]
    lopside slide FILE -o slide.pptx|.png [--outcome NAME]

Options shared by check, sheet and plot for the input: --favours lower|higher,
--decimal-comma / --decimal-point, --allow-unread.

Exit status (see EXIT_* below and the README): 0 success; 2 bad input (message on
stderr naming the problem); 3 internal error; 4 some of the input was not read (lines,
cells or columns listed on stderr; nothing written) unless --allow-unread; 130 stopped.
Output redirected to a file or a pipe is UTF-8; a console gets plain ASCII for what it
cannot show (lopside.console decides, once, in main()).
An output never replaces the input, must have its format's suffix, and replaces an
existing file of another kind only with ``--force`` (:func:`lopside.fileio.check_output`).
"""

from __future__ import annotations

import argparse
import json
import os
import sys

from . import __version__
from .cli_options import (  # noqa: F401 - re-exported: lopside.cli.X keeps working
    EXIT_BAD_INPUT,
    EXIT_INTERNAL,
    EXIT_OK,
    EXIT_UNREAD,
    PROGRESS_AFTER,
    PROGRESS_MIN_STUDIES,
    ConsoleProgress,
    UnreadInput,
    _eta,
    _fail,
    _load,
    _progress_for,
    _unread,
    add_analysis_arguments,
    add_force_argument,
    add_intake_arguments,
    check_output_arg,
    load_input,
    settings_from_args,
)
from .fileio import OutputRefused
from .model.review import MEASURES

SUBCOMMANDS = ("check", "sheet", "plot", "batch", "panel", "slide")

#: What ``lopside --help`` says before the list of commands: every way to start Lopside.
USAGE = (
    "lopside [FILE]\n"
    "       lopside --self-test\n"
    "       lopside COMMAND ... [options]   (COMMAND: " + ", ".join(SUBCOMMANDS) + ")"
)
DESCRIPTION = """\
Appraise small-study effects in a published meta-analysis (offline).

ways to start:
  lopside               open the window
  lopside FILE          open the window on FILE (a project .lopside, a CSV/XLSX study
                        table, a .txt of rows pasted from a paper, or the review's PDF)
  lopside --self-test   build the window offscreen, analyse a sample review, write a
                        sheet, and exit (0 when everything worked)
  lopside COMMAND ...   one of the headless commands below; 'lopside COMMAND -h' lists
                        its options"""
EPILOG = """\
Exit status: 0 done, 2 bad input (one message on stderr naming the file and what to do),
3 internal error (nothing half-written), 4 some lines, cells or columns of the input
were not read (listed on stderr; add --allow-unread to go on). Output redirected to a
file or a pipe is UTF-8 without a byte-order mark; a console that cannot show a character
(tau, sqrt, >=, -) gets it spelled in plain ASCII."""


def cmd_check(args) -> int:
    from .assessment import assess
    from .cli_common import INPUT_ERRORS

    try:
        review, settings = load_input(args)
    except INPUT_ERRORS as exc:
        return _fail(str(exc))
    except UnreadInput as exc:
        return _unread(exc)
    progress = _progress_for(args, review)
    # one assessment (numbers and reading) feeds the text and the JSON alike
    assessment = assess(
        review,
        settings,
        with_power=args.power,
        power_progress=progress.power if progress else None,
        progress=progress,
    )
    if progress:
        progress.done()
    # the whole text is made before the first byte goes out, so a failure leaves an empty
    # output rather than a cut-off one
    if args.json:
        from .report import to_json

        text = json.dumps(to_json(assessment), indent=2, ensure_ascii=False, allow_nan=False)
        text += "\n"
    else:
        from .summary import text_summary

        text = text_summary(assessment)
    sys.stdout.write(text)
    sys.stdout.flush()
    return 0


def cmd_sheet(args) -> int:
    from .cli_common import INPUT_ERRORS
    from .fileio import OutputLocked, OutputRefused

    try:
        out = check_output_arg(args, "pdf")
    except OutputRefused as exc:
        return _fail(str(exc))
    try:
        review, settings = load_input(args)
    except INPUT_ERRORS as exc:
        return _fail(str(exc))
    except UnreadInput as exc:
        return _unread(exc)
    if args.appraiser:
        review = review.with_details(appraiser=args.appraiser)
    from .assessment import assess
    from .sheet import write_sheet

    progress = _progress_for(args, review)
    assessment = assess(review, settings, with_power=args.power, progress=progress)
    if progress:
        progress.done()
    try:
        write_sheet(assessment, out, include_forest=args.include_forest)
    except OutputLocked as exc:
        return _fail(f"-o {out}: {exc}")
    except OSError as exc:
        return _fail(f"{out}: cannot write the sheet ({exc.strerror or exc}).")
    print(f"wrote {out}")
    return 0


def cmd_batch(args) -> int:
    from pathlib import Path

    from .batch import BatchError, BatchOptions, console_progress, find_inputs, run_batch

    files, problems = find_inputs(args.inputs, args.output)
    if problems:
        return _fail(problems[0])
    if not files:
        return _fail(
            "no input files found (looked for .lopside, .csv, .xlsx, .txt and .pdf files)."
        )
    if args.workers is not None and args.workers < 1:
        return _fail("--workers: give a whole number of 1 or more.")
    if Path(args.output).suffix.lower() in (".csv", ".xlsx", ".parquet"):
        try:  # an existing file of another kind (a study table...) needs --force
            check_output_arg(args, ("results", "xlsx", "parquet"), files)
        except OutputRefused as exc:
            return _fail(str(exc))
    options = BatchOptions(
        measure=args.measure,
        favours=args.favours,
        tau2_method=args.tau2_method,
        ci_method=args.ci_method,
        hksj=args.hksj,
        sheets_dir=args.sheets,
    )
    if args.sheets:
        Path(args.sheets).mkdir(parents=True, exist_ok=True)
    try:
        summary = run_batch(
            files,
            Path(args.output),
            options=options,
            workers=args.workers,
            scheduler=args.scheduler,
            dashboard=args.dashboard,
            resume=args.resume,
            progress=None if args.quiet else console_progress(),
        )
    except BatchError as exc:
        return _fail(str(exc))
    except OSError as exc:
        return _fail(f"{args.output}: cannot write the results ({exc.strerror or exc}).")
    ok, na, err = (summary.count(s) for s in ("ok", "not analysable", "error"))
    line = f"wrote {args.output}: {ok} analysed, {na} not analysable, {err} with errors" + (
        f", {summary.skipped} already done" if summary.skipped else ""
    )
    if summary.interrupted:
        print(f"stopped: {line}; run again with --resume to continue.", file=sys.stderr)
        return 130
    print(line)
    return 0


def _outcome_inputs(args):
    """One outcome per table file (named by its stem), every outcome of a project."""
    from pathlib import Path

    from .cli_common import INPUT_ERRORS, is_project, load_outcomes
    from .panel import OutcomeInput
    from .settings import AnalysisSettings

    inputs = []
    for f in args.files:
        ns = argparse.Namespace(**{**vars(args), "file": f})
        try:
            if is_project(f):
                found = load_outcomes(f, args.measure, favours=args.favours)
            else:  # tables, text and PDFs: with the account check of every command
                review, settings = _load(ns)
                found = [(Path(f).stem, review, settings)]
        except INPUT_ERRORS as exc:
            if not getattr(args, "skip_bad", False):
                raise
            inputs.append(OutcomeInput(Path(f).stem, skipped=str(exc).splitlines()[0]))
            continue
        for name, review, settings in found:
            if isinstance(settings, dict):
                settings = AnalysisSettings.from_dict(settings)
            if getattr(args, "favours", None):
                review = review.with_details(favours=args.favours)
            inputs.append(OutcomeInput(name, review, settings))
    return inputs


def cmd_panel(args) -> int:
    from pathlib import Path

    from .cli_common import INPUT_ERRORS
    from .panel import build_panel
    from .panel.export import FORMATS, write_panel

    out = Path(args.output)
    if out.suffix.lower() not in FORMATS:
        return _fail(f"-o {out}: write the panel summary as .pdf, .docx, .xlsx or .csv.")
    try:
        check_output_arg(args, ("pdf", "docx", "xlsx", "results"), args.files)
    except OutputRefused as exc:
        return _fail(str(exc))
    try:
        inputs = _outcome_inputs(args)
        summary = build_panel(args.title or "Panel summary", inputs, with_power=args.power)
    except INPUT_ERRORS as exc:
        return _fail(str(exc).splitlines()[0])
    except ValueError as exc:
        return _fail(str(exc))
    try:
        write_panel(summary, out)
    except OSError as exc:
        return _fail(f"{out}: cannot write the summary ({exc.strerror or exc}).")
    n = len(summary.outcomes)
    bad = sum(1 for o in summary.outcomes if not o.analysable)
    print(
        f"wrote {out}: {n} outcome{'s' if n != 1 else ''}"
        + (f", {bad} not analysed" if bad else "")
    )
    return 0


def cmd_slide(args) -> int:
    from pathlib import Path

    from .analysis import analyse
    from .assessment import assessment_of
    from .cli_common import INPUT_ERRORS
    from .panel.slide import write_slide

    out = Path(args.output)
    if out.suffix.lower() not in (".pptx", ".png"):
        return _fail(f"-o {out}: write the slide as .pptx or .png.")
    try:
        check_output_arg(args, ("pptx", "png"))
    except OutputRefused as exc:
        return _fail(str(exc))
    try:
        review, settings = _load(args)
    except INPUT_ERRORS as exc:
        return _fail(str(exc))
    if args.favours:
        review = review.with_details(favours=args.favours)
    name = review.details.outcome or review.details.title or Path(args.file).stem
    result = analyse(review, settings)
    try:
        write_slide(result, assessment_of(result).appraisal, out, title=name)
    except ValueError as exc:
        return _fail(f"{args.file}: {exc}.")
    except OSError as exc:
        return _fail(f"{out}: cannot write the slide ({exc.strerror or exc}).")
    print(f"wrote {out}")
    return 0


def add_batch_arguments(b: argparse.ArgumentParser) -> None:
    b.add_argument(
        "inputs",
        nargs="+",
        metavar="INPUT",
        help="files or folders (searched recursively for .lopside, .csv, .xlsx, .txt, .pdf)",
    )
    b.add_argument(
        "-o",
        "--output",
        required=True,
        metavar="OUT",
        help="results file: .csv, .xlsx or .parquet (one row per outcome)",
    )
    b.add_argument("--measure", choices=MEASURES, help="effect measure for study tables")
    b.add_argument(
        "--favours",
        choices=("lower", "higher"),
        help="which values favour the intervention, for study tables",
    )
    b.add_argument(
        "--tau2",
        dest="tau2_method",
        choices=("REML", "PM", "DL"),
        default=None,
        help="between-study variance estimator (default REML)",
    )
    b.add_argument(
        "--ci-method",
        choices=("z", "t", "auto"),
        default=None,
        help="how the papers' study CIs were computed (default z)",
    )
    b.add_argument("--hksj", action="store_true", help="Hartung-Knapp interval (modified)")
    b.add_argument(
        "--workers",
        type=int,
        default=None,
        metavar="N",
        help="local worker processes (default: one per core; 1 = no Dask, in this process)",
    )
    b.add_argument(
        "--scheduler",
        metavar="ADDRESS",
        help="use an existing Dask cluster, e.g. tcp://10.0.0.5:8786, instead of local workers",
    )
    b.add_argument(
        "--resume",
        action="store_true",
        help="skip inputs already in OUT (unchanged files); failed ones are tried again",
    )
    b.add_argument("--sheets", metavar="DIR", help="also write each appraisal sheet into DIR")
    b.add_argument(
        "--dashboard",
        action="store_true",
        help="open Dask's dashboard on 127.0.0.1:8787 (off by default: no port is opened)",
    )
    b.add_argument("--quiet", action="store_true", help="no progress line on stderr")


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="lopside",
        usage=USAGE,
        description=DESCRIPTION,
        epilog=EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    parser.add_argument("--version", action="version", version=f"Lopside {__version__}")
    add_self_test_argument(parser)
    sub = parser.add_subparsers(
        dest="command", metavar="COMMAND", title="headless commands", prog="lopside"
    )
    c = sub.add_parser("check", help="print the analysis summary")
    add_analysis_arguments(c)
    add_intake_arguments(c)
    c.add_argument("--json", action="store_true", help="print the JSON object instead of text")
    c.add_argument(
        "--power",
        action="store_true",
        help="also simulate the recommended test's power for this review",
    )
    c.set_defaults(func=cmd_check)
    s = sub.add_parser("sheet", help="write the appraisal sheet (PDF)")
    add_analysis_arguments(s)
    add_intake_arguments(s)
    s.add_argument(
        "-o", "--output", required=True, metavar="OUT.pdf", help="where to write the sheet (PDF)"
    )
    s.add_argument("--include-forest", action="store_true", help="add the forest plot")
    s.add_argument(
        "--appraiser", default="", metavar="NAME", help="name printed on the sheet as appraiser"
    )
    s.add_argument("--power", action="store_true", help="include the power simulation")
    add_force_argument(s)
    s.set_defaults(func=cmd_sheet)
    p = sub.add_parser("plot", help="draw one figure to PNG, SVG or PDF")
    from .figures.cli_plot import add_plot_arguments, run_plot

    add_analysis_arguments(p)
    add_intake_arguments(p)
    add_plot_arguments(p)
    p.set_defaults(func=run_plot)
    pn = sub.add_parser(
        "panel", help="summary of several outcomes side by side (PDF, DOCX, XLSX or CSV)"
    )
    pn.add_argument(
        "files",
        nargs="+",
        metavar="FILE",
        help="a project, or one study table per outcome (named by its file name)",
    )
    pn.add_argument(
        "-o", "--output", required=True, metavar="OUT", help=".pdf, .docx, .xlsx or .csv"
    )
    pn.add_argument("--measure", choices=MEASURES, help="effect measure for study tables")
    pn.add_argument(
        "--favours", choices=("lower", "higher"), help="which values favour the intervention"
    )
    pn.add_argument("--title", default="", help="title of the summary (default: Panel summary)")
    pn.add_argument("--power", action="store_true", help="simulate each test's power (slower)")
    pn.add_argument(
        "--skip-bad",
        action="store_true",
        help="list a file that cannot be read as skipped, instead of stopping",
    )
    add_force_argument(pn)
    pn.set_defaults(func=cmd_panel, page=None)
    sl = sub.add_parser("slide", help="one journal-club slide: funnel and reading (PPTX or PNG)")
    add_analysis_arguments(sl)
    sl.add_argument("-o", "--output", required=True, metavar="OUT", help=".pptx or .png")
    sl.add_argument(
        "--favours", choices=("lower", "higher"), help="which values favour the intervention"
    )
    add_force_argument(sl)
    sl.set_defaults(func=cmd_slide)
    b = sub.add_parser("batch", help="appraise many files at once (Dask), one row per outcome")
    add_batch_arguments(b)
    add_force_argument(b)
    b.set_defaults(func=cmd_batch)
    return parser


def add_self_test_argument(p: argparse.ArgumentParser) -> None:
    p.add_argument(
        "--self-test",
        action="store_true",
        help="build the window offscreen, analyse a sample review, write a sheet, exit",
    )


def unknown_command(argv: list[str]) -> str | None:
    """The message for a first argument that is neither a command nor a file to open.

    ``lopside chek FILE`` would otherwise try to open a window on a file called "chek".
    A first word that names an existing path, or looks like a file name (has a suffix)
    and stands alone, is left to the window, which reports a missing file itself.
    """
    if not argv or argv[0].startswith("-"):
        return None
    word = argv[0]
    if os.path.exists(word):
        return None
    if len(argv) == 1 and os.path.splitext(word)[1]:
        return None
    import difflib

    close = difflib.get_close_matches(word.lower(), SUBCOMMANDS, n=1, cutoff=0.6)
    hint = f" (did you mean {close[0]}?)" if close else ""
    return (
        f"unknown command '{word}'{hint}. Commands: {', '.join(SUBCOMMANDS)}; "
        "or give a file to open in the window; 'lopside --help' for more."
    )


def window_main(argv: list[str]) -> int:
    bad = unknown_command(argv)
    if bad:
        return _fail(bad)
    wp = argparse.ArgumentParser(
        prog="lopside", description="Open the Lopside window.", epilog="Commands: lopside --help"
    )
    wp.add_argument("file", nargs="?", metavar="FILE", help="review or study table to open")
    add_self_test_argument(wp)
    wp.add_argument("--version", action="version", version=f"Lopside {__version__}")
    args = wp.parse_args(argv)
    if args.self_test:
        from .window.selftest import run_self_test

        return run_self_test()
    from .window.app import run_window

    return run_window(args.file)


def single_thread_blas() -> None:
    """One BLAS thread, set before numpy loads.

    Lopside's arrays are small; with several OpenBLAS threads awake every small call pays
    for waking them (one selection-model fit measured 63 ms with default threads against
    9 ms with one). A user's own setting wins.
    """
    if "numpy" in sys.modules:
        return
    for var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
        os.environ.setdefault(var, "1")


def main(argv: list[str] | None = None) -> int:
    single_thread_blas()
    from .console import use_safe_output

    use_safe_output()
    argv = list(sys.argv[1:] if argv is None else argv)
    if argv and argv[0] in SUBCOMMANDS or argv[:1] in (["-h"], ["--help"]):
        parser = build_parser()
        args = parser.parse_args(argv)
        try:
            return int(args.func(args) or 0)
        except KeyboardInterrupt:
            return 130
        except BrokenPipeError:
            # the reader stopped early (``| head``): not our failure, and nothing to say
            _silence_stdout()
            return 0
        except Exception as exc:  # noqa: BLE001 - last guard: one line, never a traceback
            if os.environ.get("LOPSIDE_DEBUG"):
                raise
            print(
                f"lopside: internal error ({type(exc).__name__}: {exc}); nothing was written. "
                "Please report it with the file that caused it.",
                file=sys.stderr,
            )
            return EXIT_INTERNAL
    return window_main(argv)


def _silence_stdout() -> None:
    """Point stdout at the null device, so the interpreter's final flush into a closed
    pipe does not print an error of its own."""
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
    except (OSError, ValueError, AttributeError):
        pass


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
