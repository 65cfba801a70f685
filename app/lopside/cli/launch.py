"""Starting Lopside without a command: the window (optionally on a file), its
self-test, and what an unknown first word gets instead of a window.
"""

from __future__ import annotations

import argparse
import os

from .. import __version__
from ..cli_options import (
    _fail,
)

#: the headless commands (anything else starts the window)
SUBCOMMANDS = ("check", "sheet", "plot", "batch", "panel", "slide")


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
        from ..window.selftest import run_self_test

        return run_self_test()
    from ..window.app import run_window

    return run_window(args.file)
