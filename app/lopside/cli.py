"""Command line: the headless commands and the window launcher.

    lopside                         open the window
    lopside FILE                    open the window on a review or study table
    lopside --self-test             build the window offscreen, analyse a sample, write a sheet
    lopside check FILE [--measure M] [--json] [--power]
    lopside sheet FILE -o OUT.pdf [--measure M] [--include-forest] [--appraiser NAME]
    lopside plot FILE --kind funnel|forest|cumulative|radial -o OUT.png|.svg|.pdf

Exit status 0 on success, 2 on bad input (message on stderr naming the problem).
"""

from __future__ import annotations

import argparse
import json
import math
import os
import sys
from dataclasses import replace

from . import __version__
from .model.review import MEASURES
from .settings import AnalysisSettings

SUBCOMMANDS = ("check", "sheet", "plot")


def add_analysis_arguments(p: argparse.ArgumentParser) -> None:
    """Options shared by check, sheet and plot (the same engine as the window)."""
    p.add_argument("file", metavar="FILE", help="project file, CSV/XLSX study table or .txt")
    p.add_argument("--measure", choices=MEASURES, help="effect measure (overrides the file's)")
    p.add_argument(
        "--tau2",
        dest="tau2_method",
        choices=("REML", "PM", "DL"),
        default=None,
        help="between-study variance estimator (default REML)",
    )
    p.add_argument("--hksj", action="store_true", help="Hartung-Knapp interval (modified)")
    p.add_argument(
        "--ci-method",
        choices=("z", "t", "auto"),
        default=None,
        help="how the paper's study CIs were computed (default z)",
    )
    p.add_argument(
        "--fill-side",
        choices=("auto", "left", "right"),
        default=None,
        help="trim and fill: side of the missing studies",
    )
    p.add_argument(
        "--fill-estimator",
        choices=("L0", "R0"),
        default=None,
        help="trim and fill: estimator of the number missing",
    )
    p.add_argument(
        "--eta",
        type=_eta,
        default=None,
        metavar="ETA",
        help="one more selection ratio (at least 1) for the sensitivity to selection, "
        "beside 1, 2, 5, 10, 20 and 50",
    )


def _eta(text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a number") from None
    if not (math.isfinite(value) and value >= 1):
        raise argparse.ArgumentTypeError(
            f"{text!r}: the selection ratio must be a number of at least 1"
        )
    return value


def settings_from_args(args, base: AnalysisSettings) -> AnalysisSettings:
    changes = {}
    if getattr(args, "measure", None):
        changes["measure"] = args.measure
    if getattr(args, "tau2_method", None):
        changes["tau2_method"] = args.tau2_method
    if getattr(args, "hksj", False):
        changes["hksj"] = True
    if getattr(args, "ci_method", None):
        changes["ci_method"] = args.ci_method
    if getattr(args, "fill_side", None):
        changes["trimfill_side"] = args.fill_side
    if getattr(args, "fill_estimator", None):
        changes["trimfill_estimator"] = args.fill_estimator
    if getattr(args, "eta", None) is not None:
        changes["selection_eta"] = args.eta
    return replace(base, **changes)


def _fail(message: str) -> int:
    print(f"lopside: {message}", file=sys.stderr)
    return 2


def _load(args):
    from .cli_common import load_review_file

    review, saved = load_review_file(args.file, args.measure)
    settings = settings_from_args(args, AnalysisSettings.from_dict(saved))
    return review, settings


def cmd_check(args) -> int:
    from .analysis import analyse
    from .cli_common import INPUT_ERRORS

    try:
        review, settings = _load(args)
    except INPUT_ERRORS as exc:
        return _fail(str(exc))
    progress = None
    if args.power and not args.json and sys.stderr.isatty():

        def progress(done, total):
            print(f"\rpower simulation {done}/{total}", end="", file=sys.stderr)
            return True

    result = analyse(review, settings, with_power=args.power, power_progress=progress)
    if args.json:
        from .report import to_json

        json.dump(to_json(result), sys.stdout, indent=2, ensure_ascii=False, allow_nan=False)
        sys.stdout.write("\n")
    else:
        from .summary import text_summary

        sys.stdout.write(text_summary(result))
    return 0


def cmd_sheet(args) -> int:
    from .cli_common import INPUT_ERRORS

    try:
        review, settings = _load(args)
    except INPUT_ERRORS as exc:
        return _fail(str(exc))
    if args.appraiser:
        review = review.with_details(appraiser=args.appraiser)
    from .analysis import analyse
    from .sheet import write_sheet

    result = analyse(review, settings, with_power=args.power)
    try:
        write_sheet(result, args.output, include_forest=args.include_forest)
    except OSError as exc:
        return _fail(f"{args.output}: cannot write the sheet ({exc.strerror or exc}).")
    print(f"wrote {args.output}")
    return 0


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="lopside",
        description="Appraise small-study effects in a published meta-analysis (offline).",
    )
    parser.add_argument("--version", action="version", version=f"Lopside {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    c = sub.add_parser("check", help="print the analysis summary")
    add_analysis_arguments(c)
    c.add_argument("--json", action="store_true", help="print the JSON object instead of text")
    c.add_argument(
        "--power",
        action="store_true",
        help="also simulate the recommended test's power for this review",
    )
    c.set_defaults(func=cmd_check)
    s = sub.add_parser("sheet", help="write the appraisal sheet (PDF)")
    add_analysis_arguments(s)
    s.add_argument("-o", "--output", required=True, metavar="OUT.pdf")
    s.add_argument("--include-forest", action="store_true", help="add the forest plot")
    s.add_argument("--appraiser", default="", metavar="NAME")
    s.add_argument("--power", action="store_true", help="include the power simulation")
    s.set_defaults(func=cmd_sheet)
    p = sub.add_parser("plot", help="draw one figure to PNG, SVG or PDF")
    from .figures.cli_plot import add_plot_arguments, run_plot

    add_plot_arguments(p)
    p.set_defaults(func=run_plot)
    return parser


def window_main(argv: list[str]) -> int:
    wp = argparse.ArgumentParser(prog="lopside", description="Open the Lopside window.")
    wp.add_argument("file", nargs="?", metavar="FILE", help="review or study table to open")
    wp.add_argument(
        "--self-test",
        action="store_true",
        help="build the window offscreen, analyse a sample, write a sheet, exit",
    )
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
    argv = list(sys.argv[1:] if argv is None else argv)
    if argv and argv[0] in SUBCOMMANDS or argv[:1] in (["-h"], ["--help"]):
        parser = build_parser()
        args = parser.parse_args(argv)
        try:
            return int(args.func(args) or 0)
        except KeyboardInterrupt:
            return 130
        except Exception as exc:  # noqa: BLE001 - last guard: one line, never a traceback
            if os.environ.get("LOPSIDE_DEBUG"):
                raise
            print(
                f"lopside: internal error ({type(exc).__name__}: {exc}); nothing was written. "
                "Please report it with the file that caused it.",
                file=sys.stderr,
            )
            return 3
    return window_main(argv)


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
