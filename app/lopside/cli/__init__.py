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
import os
import sys

from .. import __version__
from ..cli_options import (  # noqa: F401 - re-exported: lopside.cli.X keeps working
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
from ..model.review import MEASURES
from .launch import (  # noqa: F401 - re-exported: lopside.cli.X keeps working
    SUBCOMMANDS,
    add_self_test_argument,
    unknown_command,
    window_main,
)
from .many import (
    add_batch_arguments,
    cmd_batch,
    cmd_panel,
    cmd_slide,
)
from .single import cmd_check, cmd_sheet

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
    from ..figures.cli_plot import add_plot_arguments, run_plot

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
    pn.add_argument(
        "--title",
        default="",
        help="title of the summary (default: the project's title, else Panel summary)",
    )
    pn.add_argument("--power", action="store_true", help="simulate each test's power (slower)")
    pn.add_argument(
        "--quiet",
        action="store_true",
        help="no progress line on stderr while outcomes are analysed",
    )
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
    from ..console import use_safe_output

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
