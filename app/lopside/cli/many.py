"""The commands over several outcomes or files: batch (one row per outcome, on Dask),
panel (every outcome side by side) and slide (one outcome for a journal club).
"""

from __future__ import annotations

import argparse
import sys

from ..cli_options import (
    _fail,
    _load,
    _progress_for,
    assess_with_progress,
    check_output_arg,
)
from ..fileio import OutputRefused
from ..model.review import MEASURES


def cmd_batch(args) -> int:
    from pathlib import Path

    from ..batch import BatchError, BatchOptions, console_progress, find_inputs, run_batch

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


def _outcome_inputs(args):
    """One outcome per table file (named by its stem), every outcome of a project."""
    from pathlib import Path

    from ..cli_common import INPUT_ERRORS, is_project, load_outcomes
    from ..panel import OutcomeInput
    from ..settings import AnalysisSettings

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

    from ..cli_common import INPUT_ERRORS
    from ..panel import build_panel, panel_title
    from ..panel.export import FORMATS, write_panel

    out = Path(args.output)
    if out.suffix.lower() not in FORMATS:
        return _fail(f"-o {out}: write the panel summary as .pdf, .docx, .xlsx or .csv.")
    try:
        check_output_arg(args, ("pdf", "docx", "xlsx", "results"), args.files)
    except OutputRefused as exc:
        return _fail(str(exc))
    import time

    start = time.monotonic()

    def progress_for(inp, number, total):
        where = f"outcome {number}/{total} ({inp.name}): " if total > 1 else ""
        return _progress_for(args, inp.review, label=where, start=start)

    try:
        inputs = _outcome_inputs(args)
        summary = build_panel(
            args.title
            or panel_title(i.review.details.title for i in inputs if i.review is not None),
            inputs,
            with_power=args.power,
            progress_for=progress_for,
        )
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

    from ..cli_common import INPUT_ERRORS
    from ..panel.slide import write_slide

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
    assessment = assess_with_progress(args, review, settings)
    try:
        write_slide(assessment.analysis, assessment.appraisal, out, title=name)
    except ValueError as exc:
        return _fail(f"{args.file}: {exc}.")
    except OSError as exc:
        return _fail(f"{out}: cannot write the slide ({exc.strerror or exc}).")
    print(f"wrote {out}")
    return 0
