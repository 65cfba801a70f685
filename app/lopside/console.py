"""The encoding of everything the ``lopside`` command prints, chosen once, here.

Python picks the encoding of ``sys.stdout``/``sys.stderr`` from the console or the locale.
On Windows, output redirected to a file or a pipe is then written in the ANSI code page
(cp1252 in Western Europe), which has no τ, √, ≥ or −: a ``print`` of the summary raises
half-way and leaves a cut-off file. A frozen app runs isolated, so a user cannot fix it
with ``PYTHONIOENCODING`` either (ENGINEERING-NOTES.md). The rule instead:

* **redirected** (a file or a pipe): UTF-8 without a byte-order mark, whatever the code
  page or locale says; the undecodable bytes of a POSIX file name (which Python carries
  as lone surrogates) go out as the bytes they were, anything else UTF-8 cannot carry as
  a backslash escape;
* **a console**: its own encoding; a character it cannot show is written in plain ASCII
  (``τ`` as ``tau``, ``√`` as ``sqrt``, ``≥`` as ``>=``, ``−`` as ``-``; see
  :data:`ASCII_SPELLINGS`), never an error.

:func:`use_safe_output` applies this to the process's streams; ``lopside.cli.main`` calls
it before anything is printed. Nothing else in the package chooses an encoding for output.
"""

from __future__ import annotations

import codecs
import sys
import unicodedata

#: Name of the codec error handler that writes a character a console cannot show in ASCII.
ERRORS = "lopside-ascii"
#: Name of the codec error handler of redirected (UTF-8) output.
REDIRECTED_ERRORS = "lopside-redirected"
#: The encoding of redirected output (documented in the README and in ``lopside --help``).
REDIRECTED_ENCODING = "utf-8"

#: Plain spellings of the characters Lopside's output uses, for consoles that lack them.
ASCII_SPELLINGS = {
    "τ": "tau",
    "²": "2",
    "³": "3",
    "√": "sqrt",
    "≥": ">=",
    "≤": "<=",
    "≠": "!=",
    "≈": "~",
    "−": "-",
    "–": "-",
    "—": "-",
    "‐": "-",
    "‑": "-",
    "×": "x",
    "±": "+/-",
    "·": ".",
    "•": "*",
    "…": "...",
    "‘": "'",
    "’": "'",
    "“": '"',
    "”": '"',
    "→": "->",
    "←": "<-",
    "α": "alpha",
    "β": "beta",
    "χ": "chi",
    "μ": "mu",
    "θ": "theta",
    "Δ": "delta",
    "Σ": "sum",
    "\u00a0": " ",
    "\u2009": " ",
    "\u202f": " ",
}


def ascii_spelling(ch: str) -> str:
    """A plain-ASCII stand-in for one character: the table, else its decomposed letters
    (``é`` -> ``e``), else ``?``."""
    if ch in ASCII_SPELLINGS:
        return ASCII_SPELLINGS[ch]
    if ch.isascii():
        return ch
    plain = unicodedata.normalize("NFKD", ch).encode("ascii", "ignore").decode("ascii")
    return plain or "?"


def _ascii_errors(exc: UnicodeError) -> tuple[str, int]:
    """Spell what the console cannot show in ASCII, keeping text columns in line.

    A longer spelling (``τ²`` -> ``tau2``) would push the rest of an aligned table row to
    the right. When the cell it sits in ends in padding (two spaces or more, before the
    end of the line), the padding gives up the extra width, keeping one space; in running
    text (single spaces) nothing is taken.
    """
    if not isinstance(exc, UnicodeEncodeError):
        raise exc
    text, enc = exc.object, exc.encoding
    line_end = text.find("\n", exc.start)
    line_end = len(text) if line_end < 0 else line_end
    pad = text.find("  ", exc.end, line_end)
    if pad < 0:  # no padding ahead on this line: the word alone
        end = exc.end
        while end < line_end and not text[end].isspace():
            end += 1
        return _spell(text[exc.start : end], enc), end
    spaces = len(text[pad:line_end]) - len(text[pad:line_end].lstrip(" "))
    spelled = _spell(text[exc.start : pad], enc)
    extra = len(spelled) - (pad - exc.start)
    taken = min(max(extra, 0), spaces - 1)
    return spelled + " " * (spaces - taken), pad + spaces


def _spell(segment: str, encoding: str) -> str:
    """``segment`` with each character the console cannot show spelled in ASCII."""
    return "".join(ch if _shows(ch, encoding) else ascii_spelling(ch) for ch in segment)


def _shows(ch: str, encoding: str) -> bool:
    try:
        ch.encode(encoding)
    except (UnicodeEncodeError, LookupError):
        return False
    return True


def _redirected_errors(exc: UnicodeError) -> tuple[bytes, int]:
    if not isinstance(exc, UnicodeEncodeError):
        raise exc
    out = bytearray()
    for ch in exc.object[exc.start : exc.end]:
        code = ord(ch)
        if 0xDC80 <= code <= 0xDCFF:  # a byte that surrogateescape decoding carried
            out.append(code - 0xDC00)
        else:
            out += f"\\u{code:04x}".encode("ascii")
    return bytes(out), exc.end


codecs.register_error(ERRORS, _ascii_errors)
codecs.register_error(REDIRECTED_ERRORS, _redirected_errors)


def to_ascii(text: str) -> str:
    """``text`` with every non-ASCII character spelled as :func:`ascii_spelling` does."""
    return text.encode("ascii", ERRORS).decode("ascii")


def _is_console(stream) -> bool:
    try:
        return bool(stream.isatty())
    except (AttributeError, ValueError, OSError):
        return False


def choose(stream) -> tuple[str, str]:
    """(encoding, error handler) for ``stream``: UTF-8 when redirected, the console's own
    encoding with ASCII stand-ins when it is a console."""
    if _is_console(stream):
        return (getattr(stream, "encoding", None) or "ascii"), ERRORS
    return REDIRECTED_ENCODING, REDIRECTED_ERRORS


def use_safe_output(streams: tuple[str, ...] = ("stdout", "stderr")) -> None:
    """Re-configure ``sys.stdout`` and ``sys.stderr`` as :func:`choose` says.

    Streams that are missing (a windowed Windows exe has none) or cannot be re-configured
    (a test's in-memory buffer) are left alone: they take ``str`` and have no code page.
    """
    for name in streams:
        stream = getattr(sys, name, None)
        reconfigure = getattr(stream, "reconfigure", None)
        if stream is None or reconfigure is None:
            continue
        encoding, errors = choose(stream)
        if codecs.lookup(encoding).name == codecs.lookup(stream.encoding).name:
            if stream.errors != errors:
                reconfigure(errors=errors)
            continue
        try:
            stream.flush()
            reconfigure(encoding=encoding, errors=errors)
        except (ValueError, OSError):  # pragma: no cover - a stream that refuses
            reconfigure(errors=ERRORS)
