"""The ``lopside plot`` command: draw one figure of a review to PNG, SVG or PDF.

    lopside plot FILE [--kind funnel|forest|cumulative|radial] -o OUT.png|.svg|.pdf
                 [--size column|page|slide] [--axis se|precision|variance|size]
                 [--model fixed|random] [--colour-by none|subgroup|risk_of_bias]
                 [--no-contours] [--egger-line] [--show-filled] [--labels [NAMES]]
                 [the analysis options of check and sheet: --measure, --tau2, --hksj,
                  --ci-method, --fill-side, --fill-estimator]

FILE and the analysis options come from ``lopside.cli.add_analysis_arguments`` (one
definition for check, sheet and plot); this module adds only the figure's own options.
The figure is written atomically (a temporary file in the same folder, then replaced).

Exit status 0 on success; 2 on bad input, with one message on stderr that names the
problem and what to do.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

KINDS = ("funnel", "forest", "cumulative", "radial")


def add_plot_arguments(parser: argparse.ArgumentParser) -> None:
    """Add the figure's own ``plot`` arguments to ``parser`` (FILE and the analysis options
    come from ``lopside.cli.add_analysis_arguments``, added before these).

    Arguments (attribute names on the parsed namespace in brackets):

    * ``--kind`` [kind] — funnel (default), forest, cumulative or radial.
    * ``--force`` [force] — replace an existing file at OUT that is not of its format.
    * ``-o/--output OUT`` [output] — required; the suffix .png, .svg or .pdf sets the format.
    * ``--size`` [size] — column (85 mm), page (180 mm) or slide (16:9); default column
      for funnel and radial, page for forest and cumulative.
    * ``--axis`` [axis] — funnel's vertical axis: se (default), precision, variance, size.
    * ``--model`` [model] — fixed or random centre for the funnel (default: settings).
    * ``--colour-by`` [colour_by] — none (default), subgroup or risk_of_bias.
    * ``--no-contours`` [no_contours] — leave out the significance bands.
    * ``--egger-line`` [egger_line] — overlay Egger's regression line (funnel, radial).
    * ``--show-filled`` [show_filled] — add trim-and-fill studies and adjusted estimate.
    * ``--labels [NAMES]`` [labels] — name studies on the funnel: all, or a comma list.
    """
    from ..cli_options import add_force_argument

    parser.add_argument(
        "--kind", choices=KINDS, default="funnel", help="which figure (default funnel)"
    )
    add_force_argument(parser)
    parser.add_argument(
        "-o", "--output", required=True, metavar="OUT", help="output file: .png, .svg or .pdf"
    )
    parser.add_argument(
        "--size",
        choices=("column", "page", "slide"),
        default=None,
        help="figure size (default: column for funnel and radial, page for forest and "
        "cumulative, whose study tables need the width)",
    )
    parser.add_argument(
        "--axis",
        choices=("se", "precision", "variance", "size"),
        default="se",
        help="funnel's vertical axis (default se)",
    )
    parser.add_argument("--model", choices=("fixed", "random"), default=None, help="funnel centre")
    parser.add_argument(
        "--colour-by",
        dest="colour_by",
        choices=("none", "subgroup", "risk_of_bias"),
        default="none",
        help="colour studies by subgroup or risk of bias",
    )
    parser.add_argument(
        "--no-contours", dest="no_contours", action="store_true", help="no significance bands"
    )
    parser.add_argument(
        "--egger-line", dest="egger_line", action="store_true", help="draw Egger's line"
    )
    parser.add_argument(
        "--show-filled", dest="show_filled", action="store_true", help="show trim-and-fill studies"
    )
    parser.add_argument(
        "--labels",
        nargs="?",
        const="all",
        default=None,
        metavar="NAMES",
        help="name studies on the funnel: all (no value), or a comma-separated list",
    )


def _fail(message: str) -> int:
    print(f"lopside: {message}", file=sys.stderr)
    return 2


def run_plot(args: argparse.Namespace) -> int:
    """Run ``lopside plot`` with parsed ``args`` (see :func:`add_plot_arguments`).

    Returns
    -------
    int
        0 on success, 2 on bad input (message on stderr), 4 when some of the input was
        not read (see ``lopside.cli.EXIT_UNREAD``).
    """
    from dataclasses import replace

    from ..fileio import OutputLocked, OutputRefused
    from .common import FigureInputError
    from .export import format_for

    out = Path(args.output)
    try:
        fmt = format_for(out)
    except ValueError as exc:
        return _fail(f"-o {out}: {exc}.")
    from ..cli_options import check_output_arg

    try:
        out = check_output_arg(args, fmt)
    except OutputRefused as exc:
        return _fail(str(exc))

    from ..cli_common import INPUT_ERRORS
    from ..cli_options import EXIT_UNREAD, UnreadInput, load_input

    try:
        # the same input and analysis options as check and sheet (PDF pages included)
        review, settings = load_input(args)
    except INPUT_ERRORS as exc:
        return _fail(str(exc))
    except UnreadInput as exc:
        print(f"lopside: {exc}", file=sys.stderr)
        return EXIT_UNREAD
    # plus the funnel's centre line
    if getattr(args, "model", None):
        settings = replace(settings, funnel_model=args.model)

    from ..analysis import analyse
    from ..cli_options import _progress_for

    progress = _progress_for(args, review)
    result = analyse(review, settings, progress=progress)
    if progress:
        progress.done()
    if result.data.k == 0:
        return _fail(
            f"{args.file}: no study has a usable effect and standard error, so there is "
            "nothing to plot. Run 'lopside check' to see what each row is missing."
        )
    try:
        fig = build_figure(result, args)
    except FigureInputError as exc:
        return _fail(f"{args.file}: {exc}")
    from ..fileio import write_atomic
    from .export import figure_bytes

    try:  # rendered first, then replaced atomically: never a half-written figure
        write_atomic(out, figure_bytes(fig, fmt))
    except OutputLocked as exc:
        return _fail(f"-o {out}: {exc}")
    except OSError as exc:
        return _fail(f"-o {out}: cannot write the figure ({exc.strerror or exc}).")
    print(f"wrote {out}")
    return 0


def build_figure(result, args: argparse.Namespace):
    """The figure ``args.kind`` asks for, built from an analysis result.

    Raises
    ------
    FigureInputError
        When the result cannot make that figure (the message says why).
    """
    from .adaptors import (
        cumulative_input_from_result,
        forest_input_from_result,
        funnel_input_from_result,
        radial_input_from_result,
    )
    from .common import FigureInputError

    kind = getattr(args, "kind", "funnel")
    size = getattr(args, "size", None) or default_size(getattr(args, "kind", "funnel"))
    if kind == "funnel":
        from .funnel import FunnelOptions, funnel_figure

        show = bool(getattr(args, "show_filled", False))
        opts = FunnelOptions(
            axis=getattr(args, "axis", "se"),
            model=getattr(args, "model", None),
            contours=not getattr(args, "no_contours", False),
            colour_by=getattr(args, "colour_by", "none"),
            egger_line=bool(getattr(args, "egger_line", False)),
            adjusted_line=show,
            show_filled=show,
            labels=getattr(args, "labels", None) or (),
        )
        inp = funnel_input_from_result(result, opts)
        if opts.colour_by != "none" and not any(inp.groups):
            field = "subgroup" if opts.colour_by == "subgroup" else "risk_of_bias"
            raise FigureInputError(
                f"--colour-by {opts.colour_by}: no study has a {field} entry; fill in the "
                f"{field} column or leave out --colour-by."
            )
        fig = funnel_figure(inp, opts, size)
        from .flag_marks import flagged_points, mark_flagged  # rows to check

        mark_flagged(fig.axes[0], flagged_points(result, opts.axis), size=size)
        return fig
    if kind == "forest":
        from .forest import forest_figure

        rows, pooled, opts = forest_input_from_result(result)
        return forest_figure(rows, pooled, replace_size(opts, size))
    if kind == "cumulative":
        from .companions import cumulative_figure

        inp = cumulative_input_from_result(result, getattr(args, "model", None))
        if inp is None:
            reason = getattr(getattr(result, "cumulative", None), "reason", "")
            raise FigureInputError(
                "the cumulative plot could not be made" + (f": {reason}" if reason else "")
            )
        return cumulative_figure(inp, size)
    if kind == "radial":
        from .companions import radial_figure

        return radial_figure(
            radial_input_from_result(result),
            size,
            egger_line=bool(getattr(args, "egger_line", False)),
        )
    raise FigureInputError(f"unknown figure kind {kind!r}; use one of {', '.join(KINDS)}")


def default_size(kind: str) -> str:
    """The size a figure gets when none is asked for: a forest or cumulative plot is a
    table with a plot beside it and needs the page width to show names and intervals."""
    return "page" if kind in ("forest", "cumulative") else "column"


def replace_size(opts, size: str):
    from dataclasses import replace

    return replace(opts, size=size)
