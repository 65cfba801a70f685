"""Reading study rows pasted from a forest-plot table in a PDF or a web page.

Design invariants
-----------------
* One study per line. Every non-blank line ends up in :attr:`PasteResult.lines` as a
  study, as skipped (with the reason) or as not understood (with the reason and what to
  do): nothing is dropped silently. Blank lines are passed over.
* The reader never raises. A line that still trips it is reported as not understood
  (reason "internal"); the property-based tests check that this never happens.
* Time is linear in the length of the text: each line is scanned by hand-written loops,
  the few regular expressions are anchored and cannot backtrack badly, and a line longer
  than :data:`MAX_LINE_CHARS` is reported, not read.
* Reading is token-based, not column-based, because PDF viewers collapse column gaps
  into single spaces; a tab, where one survives, only marks the end of the label.
* Values are stored as printed (natural scale): an odds ratio of 0.82 stays 0.82.
  The first arm of a pair is the intervention arm, as forest tables print it.
* The decimal mark is decided per line from the numbers on it (``0,82`` can only be a
  decimal comma). A line whose numbers could be read either way (``1,234``) follows
  the other lines of the paste; with nothing to go on, the comma is a thousands mark.

Layout
------
* :mod:`.result` -- what a reading returns (:class:`LineReading`, :class:`PasteResult`).
* :mod:`.tokens` -- the lexer: one left-to-right pass over a cleaned line.
* :mod:`.lines` -- line classification (study, header, total, heterogeneity, caption,
  heading, axis) and where the label ends.
* :mod:`.cells` -- cell grammar: tokens read into numbers, counts, intervals, P and SE.
* :mod:`.columns` -- column inference: which items are the estimate, the interval, the
  arms' counts or means and the weights; the study row and its account.
* :mod:`.reader` -- :func:`read_pasted`, the two passes over the lines.
"""

from __future__ import annotations

from lopside.intake.paste.lines import published_i2_of
from lopside.intake.paste.reader import read_pasted
from lopside.intake.paste.result import MAX_LINE_CHARS, LineReading, PasteResult

__all__ = ["LineReading", "MAX_LINE_CHARS", "PasteResult", "published_i2_of", "read_pasted"]
