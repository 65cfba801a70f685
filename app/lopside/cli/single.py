"""The commands that appraise one outcome: check (text or JSON) and sheet (PDF)."""

from __future__ import annotations

import json
import sys

from ..cli_options import (
    UnreadInput,
    _fail,
    _unread,
    assess_with_progress,
    check_output_arg,
    load_input,
)
from ..fileio import OutputRefused


def cmd_check(args) -> int:
    from ..cli_common import INPUT_ERRORS

    try:
        review, settings = load_input(args)
    except INPUT_ERRORS as exc:
        return _fail(str(exc))
    except UnreadInput as exc:
        return _unread(exc)
    # one assessment (numbers and reading) feeds the text and the JSON alike
    assessment = assess_with_progress(args, review, settings)
    # the whole text is made before the first byte goes out, so a failure leaves an empty
    # output rather than a cut-off one
    if args.json:
        from ..report import to_json

        text = json.dumps(to_json(assessment), indent=2, ensure_ascii=False, allow_nan=False)
        text += "\n"
    else:
        from ..summary import text_summary

        text = text_summary(assessment)
    sys.stdout.write(text)
    sys.stdout.flush()
    return 0


def cmd_sheet(args) -> int:
    from ..cli_common import INPUT_ERRORS
    from ..fileio import OutputLocked

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
    from ..sheet import write_sheet

    assessment = assess_with_progress(args, review, settings)
    try:
        write_sheet(assessment, out, include_forest=args.include_forest)
    except OutputLocked as exc:
        return _fail(f"-o {out}: {exc}")
    except OSError as exc:
        return _fail(f"{out}: cannot write the sheet ({exc.strerror or exc}).")
    print(f"wrote {out}")
    return 0
