"""What the headless commands share: input options and loading, analysis options, exit
statuses, the progress line and output checks.

``lopside.cli`` (the parser and the commands) and ``lopside.figures.cli_plot`` (the plot
command) both import from here, so no module imports the module that imports it.
"""

from __future__ import annotations

import argparse
import math
import sys
from dataclasses import replace

from .model.review import MEASURES
from .settings import AnalysisSettings

#: Exit statuses of the headless commands (documented in the README).
EXIT_OK = 0
EXIT_BAD_INPUT = 2
EXIT_INTERNAL = 3
#: lines, cells or columns of a study table or pasted text were not read
EXIT_UNREAD = 4


def add_intake_arguments(p: argparse.ArgumentParser) -> None:
    """How the input is read: direction of benefit, decimal mark, unread lines (issue 12)."""
    p.add_argument(
        "--favours",
        choices=("lower", "higher"),
        default=None,
        help="which values favour the intervention (default: the file's, else lower)",
    )
    mark = p.add_mutually_exclusive_group()
    mark.add_argument(
        "--decimal-comma",
        dest="decimal",
        action="store_const",
        const="comma",
        help="numbers the file does not settle (1,105) use a decimal comma",
    )
    mark.add_argument(
        "--decimal-point",
        dest="decimal",
        action="store_const",
        const="point",
        help="numbers the file does not settle (1,105) use a decimal point",
    )
    p.add_argument(
        "--allow-unread",
        action="store_true",
        help=f"go on when lines, cells or columns were not read (else exit {EXIT_UNREAD})",
    )


class UnreadInput(Exception):
    """Some of the input was not read and --allow-unread was not given."""


def load_input(args):
    """The review and settings for a headless command, with its input options applied.

    Raises the input errors (exit 2) or :class:`UnreadInput` (exit 4) with a message.
    """
    from pathlib import Path

    from .cli_common import (
        InputError,
        is_project,
        load_pdf_review,
        load_review_file,
        unread_report,
    )

    page = getattr(args, "page", None)
    measure = getattr(args, "measure", None)
    decimal = getattr(args, "decimal", None)
    favours = getattr(args, "favours", None)
    if Path(args.file).suffix.lower() == ".pdf" and Path(args.file).is_file():

        def pages_read(done: int, total: int) -> bool:
            if total >= 20 and not getattr(args, "quiet", False):
                end = "\n" if done == total else ""
                print(f"\rreading PDF page {done}/{total}", end=end, file=sys.stderr)
            return True

        review, notes = load_pdf_review(
            Path(args.file), measure, page, pages_read, decimal=decimal, favours=favours
        )
        # which page was read, other pages with rows, marks left out
        for line in notes:
            print(f"lopside: {line}", file=sys.stderr)
        saved: dict = {}
    else:
        if page:
            raise InputError(
                f"--page {page}: pages are for PDF files only; {args.file} is not one."
            )
        review, saved = load_review_file(
            args.file,
            measure,
            decimal=decimal,
            favours=favours,
            accept_changed=getattr(args, "accept_changed", False),
            outcome=getattr(args, "outcome", None),
        )
    account = review.intake
    # only the commands that offer --allow-unread stop on unread input (check, sheet, plot)
    enforce = hasattr(args, "allow_unread") and not args.allow_unread
    if account.study_looking() and not is_project(args.file) and enforce:
        n = len(account.study_looking())
        raise UnreadInput(
            f"{account.source or args.file}: {n} part(s) of the input not read:\n"
            f"{unread_report(account)}\n"
            "Nothing was written. Fix them in the file, or add --allow-unread to go on "
            "without them (they are then listed in the output)."
        )
    return review, settings_from_args(args, AnalysisSettings.from_dict(saved))


def add_force_argument(p: argparse.ArgumentParser) -> None:
    """--force: replace an existing OUT of another kind (never one of the inputs)."""
    p.add_argument(
        "--force",
        action="store_true",
        help="replace an existing file at OUT even if it is of another kind (never an input)",
    )


def add_analysis_arguments(p: argparse.ArgumentParser) -> None:
    """Options shared by check, sheet and plot (the same engine as the window)."""
    p.add_argument("file", metavar="FILE", help="project file, CSV/XLSX study table or .txt")
    p.add_argument("--measure", choices=MEASURES, help="effect measure (overrides the file's)")
    p.add_argument(
        "--page",
        metavar="N",
        help="PDF only: the page(s) holding the table, e.g. 7 or 7-8 (default: the page with "
        "the most study rows)",
    )
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
        "--outcome",
        metavar="NAME",
        default=None,
        help="the outcome to appraise, in a project that holds several (by name)",
    )
    p.add_argument(
        "--accept-changed",
        action="store_true",
        help="read a project file even though it was changed outside Lopside",
    )
    p.add_argument(
        "--quiet",
        action="store_true",
        help="no progress line on stderr while a long analysis runs",
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


#: a review this large shows its progress on stderr even when stderr is not a terminal
PROGRESS_MIN_STUDIES = 1000
#: on a terminal, the progress line appears once an analysis has run this long (seconds)
PROGRESS_AFTER = 0.5


class ConsoleProgress:
    """The progress line of a long analysis on stderr (``--quiet`` turns it off).

    On a terminal one line is rewritten in place once the analysis has run for
    :data:`PROGRESS_AFTER` seconds; otherwise (a log file) one line per stage, only for
    reviews of :data:`PROGRESS_MIN_STUDIES` studies or more, so that small runs stay
    silent.
    """

    def __init__(self, k: int, stream=None, *, label: str = "", start: float | None = None) -> None:
        import time

        self.k = k
        self.stream = stream or sys.stderr
        self.tty = bool(getattr(self.stream, "isatty", lambda: False)())
        #: e.g. "outcome 2/5: " when one command analyses several outcomes
        self.label = label
        #: when the command started (several outcomes share one clock)
        self.start = time.monotonic() if start is None else start
        self.shown = False
        self.enabled = self.tty or k >= PROGRESS_MIN_STUDIES

    def __call__(self, stage: str, index: int, total: int) -> bool:
        import time

        if not self.enabled:
            return True
        if self.tty and not self.shown and time.monotonic() - self.start < PROGRESS_AFTER:
            return True
        text = f"lopside: {self.label}analysing {self.k:,} studies - {stage} ({index + 1}/{total})"
        if self.tty:
            self.stream.write("\r" + text.ljust(78)[:78])
        else:
            self.stream.write(text + "\n")
        self.stream.flush()
        self.shown = True
        return True

    def power(self, done: int, total: int) -> bool:
        if self.enabled and self.tty:
            text = f"\rlopside: {self.label}power simulation {done:,}/{total:,}"
            self.stream.write(text.ljust(79)[:79])
            self.stream.flush()
            self.shown = True
        return True

    def done(self) -> None:
        if self.shown and self.tty:
            self.stream.write("\r" + " " * 79 + "\r")
            self.stream.flush()


def _progress_for(args, review, **where) -> ConsoleProgress | None:
    """The progress line for one analysis of ``review`` (None with ``--quiet``);
    ``where`` (label, start) places it among several outcomes."""
    if getattr(args, "quiet", False):
        return None
    return ConsoleProgress(len(review.studies), **where)


def assess_with_progress(args, review, settings):
    """The assessment (numbers and reading) of ``review``, with the progress line on
    stderr unless ``--quiet``, and the power simulation when ``--power`` asks for it."""
    from .assessment import assess

    progress = _progress_for(args, review)
    assessment = assess(
        review,
        settings,
        with_power=getattr(args, "power", False),
        power_progress=progress.power if progress else None,
        progress=progress,
    )
    if progress:
        progress.done()
    return assessment


def _fail(message: str) -> int:
    print(f"lopside: {message}", file=sys.stderr)
    return 2


def _unread(exc: UnreadInput) -> int:
    print(f"lopside: {exc}", file=sys.stderr)
    return EXIT_UNREAD


#: the loader every command shares (batch, panel and slide call it too)
_load = load_input


def check_output_arg(args, kind: str | tuple[str, ...], inputs=None):
    """The checked ``-o`` path of ``args`` (see :func:`lopside.fileio.check_output`).

    ``kind`` is the output's kind, or the kinds a command writes (chosen by the suffix);
    ``inputs`` the files read (default ``args.file``), which are never written over.
    Raises OutputRefused with a one-line message; nothing is written.
    """
    from pathlib import Path

    from .fileio import OutputRefused, check_output, kind_for_suffix

    kinds = (kind,) if isinstance(kind, str) else tuple(kind)
    chosen = kind_for_suffix(args.output, kinds) or kinds[0]
    files = tuple(inputs) if inputs is not None else (args.file,)
    out = check_output(args.output, chosen, files, force=getattr(args, "force", False))
    folder = out.parent
    if str(folder) and not folder.is_dir():
        raise OutputRefused(
            f"-o {out}: the folder {folder} does not exist; create it or pick another."
        )
    return Path(out)
