"""What a paste reading returns: one :class:`LineReading` per non-blank line and the
:class:`PasteResult` that gathers them (with the decimal mark and measure it settled on).
"""

from __future__ import annotations

from dataclasses import dataclass

from lopside.intake import messages as M
from lopside.model.review import MEASURE_NAMES, IntakeAccount, NotRead, PublishedResult, StudyRow

#: Lines longer than this are reported and not read (a forest-table row is ~40-200 chars).
MAX_LINE_CHARS = 2000


@dataclass(frozen=True, slots=True)
class LineReading:
    """How one non-blank pasted line was read.

    ``status`` is ``"study"``, ``"skipped"`` or ``"not understood"``. ``route`` names
    what was read, joined by "+": ``"ci"``, ``"se"``, ``"p"``, ``"counts"``, ``"means"``
    (e.g. ``"ci+counts"``); it is empty for lines that are not studies. ``account`` is
    the plain-English reading; ``reason``/``advice`` explain a skipped or not-understood
    line. ``printed`` keeps each number as printed (canonical, "." decimal) so that the
    row checks can allow for the printed decimals.
    """

    line_no: int
    text: str
    status: str
    route: str = ""
    account: str = ""
    reason: str = ""
    advice: str = ""
    row_index: int | None = None
    printed: tuple[tuple[str, str], ...] = ()
    #: decimal mark used on the line: "point", "comma" or "" (no decimals on it)
    decimal_mark: str = ""


@dataclass(frozen=True, slots=True)
class PasteResult:
    """Everything read from a paste: the study rows and an account of every line."""

    rows: tuple[StudyRow, ...]
    lines: tuple[LineReading, ...]
    #: measure named in a header line ("Odds Ratio M-H, Random, 95% CI" -> "OR")
    measure_hint: str | None = None
    #: the pooled result from the last "Total" line, if it printed one
    published: PublishedResult | None = None
    #: decimal mark the paste settled on ("point", "comma"; "" when nothing needed it)
    decimal_mark: str = ""
    #: how: "evidence" (a number such as 0,82), "option" (the caller said), "" (none)
    decimal_how: str = ""
    #: the number that settled it
    decimal_evidence: str = ""
    #: (line, number) read with nothing to settle the decimal mark ("1,105" as 1105)
    undecided: tuple[tuple[int, str], ...] = ()
    #: the measure the rows look like, and why (a suggestion for the user to confirm)
    measure_guess: str | None = None
    measure_why: str = ""

    @property
    def studies(self) -> tuple[LineReading, ...]:
        return tuple(r for r in self.lines if r.status == "study")

    @property
    def skipped(self) -> tuple[LineReading, ...]:
        return tuple(r for r in self.lines if r.status == "skipped")

    @property
    def not_understood(self) -> tuple[LineReading, ...]:
        return tuple(r for r in self.lines if r.status == "not understood")

    def not_read(self) -> tuple[NotRead, ...]:
        """Lines that were not read, for the review's intake account."""
        no_numbers = M.not_understood("no_numbers")[0]
        # a line with no numbers after its label is listed, but is not study-looking
        return tuple(
            NotRead(
                "text" if r.reason == no_numbers else "line",
                f"line {r.line_no}",
                r.text.strip(),
                r.reason,
            )
            for r in self.not_understood
        )

    def intake_account(self, source: str, measure_how: str = "") -> IntakeAccount:
        """What this paste adds to a review's intake account."""
        return IntakeAccount(
            source=source,
            not_read=self.not_read(),
            decimal_mark=self.decimal_mark,
            decimal_how=self.decimal_how,
            decimal_evidence=self.decimal_evidence,
            measure_how=measure_how,
            rows_at=tuple(
                (self.rows[r.row_index].study, f"{source} line {r.line_no}")
                for r in self.studies
                if r.row_index is not None
            ),
        )

    def printed(self, row_index: int) -> dict[str, str]:
        """The numbers of row ``row_index`` as printed (field -> text)."""
        for r in self.lines:
            if r.row_index == row_index:
                return dict(r.printed)
        return {}

    def account(self) -> str:
        """A readable multi-line summary: counts first, then one line per pasted line."""
        n_study, n_skip, n_nu = len(self.studies), len(self.skipped), len(self.not_understood)
        out = [
            f"{n_study} stud{'y' if n_study == 1 else 'ies'} read, {n_skip} line(s) skipped, "
            f"{n_nu} line(s) not understood."
        ]
        if self.measure_hint:
            out.append(f"The header names the measure: {MEASURE_NAMES[self.measure_hint]}.")
        if self.published is not None:
            p = self.published
            out.append(f"Published pooled result: {p.estimate:g} ({p.lower:g} to {p.upper:g}).")
        for r in self.lines:
            text = r.text if len(r.text) <= 80 else r.text[:77] + "..."
            if r.status == "study":
                out.append(f"Line {r.line_no}: {r.account}   [{text.strip()}]")
            elif r.status == "skipped":
                out.append(f"Line {r.line_no}: skipped, {r.reason}.   [{text.strip()}]")
            else:
                out.append(
                    f"Line {r.line_no}: NOT UNDERSTOOD: {r.reason}. {r.advice}   [{text.strip()}]"
                )
        return "\n".join(out)
