"""The frozen result types of an appraisal (readings in words, built from one analysis)."""

from __future__ import annotations

from dataclasses import dataclass

#: Directions an evidence line can point for its explanation.
DIRECTIONS: tuple[str, ...] = ("for", "against", "unclear")

#: Where an evidence line comes from (the ``source`` of :class:`Evidence`).
SOURCES: tuple[str, ...] = (
    "contour",  # trim and fill's imputed studies read on the contour-enhanced funnel
    "test",  # the recommended asymmetry test
    "tests",  # the registered tests taken together
    "adjustment",  # the range of adjusted estimates
    "trim and fill",  # trim and fill under its six settings
    "selection model",
    "risk of bias",  # subgroups by risk of bias
    "subgroup",  # subgroups by the entered feature
    "meta-regression",
    "heterogeneity",
    "published",  # the paper's own heterogeneity, reconciled
    "measure",  # what the effect measure does to the funnel
    "power",  # simulated power and false-alarm rate
    "study count",
    "not in the data",  # what the numbers cannot show
    "unreported trials",  # trials known to exist that never reported (issue 20)
    "selection strength",  # how strong selection would have to be (Mathur & VanderWeele)
    "review's claim",  # what the review itself said about small-study effects
)


@dataclass(frozen=True, slots=True)
class Evidence:
    """One line of evidence from this review about one explanation.

    Attributes
    ----------
    direction : {"for", "against", "unclear"}
        Whether the line supports the explanation, argues against it, or cannot tell.
    text : str
        The line in plain words, with its numbers.
    source : str
        One of :data:`SOURCES`.
    cause : str
        The explanation it bears on (one of :data:`lopside.model.review.CAUSES`).
    numbers : tuple of (name, value)
        The numbers the sentence quotes, unformatted (``p`` is a p-value compared with the
        test threshold; effects are on the analysis scale).
    """

    direction: str
    text: str
    source: str = ""
    cause: str = ""
    numbers: tuple[tuple[str, float | int | None], ...] = ()

    def number(self, name: str, default=None):
        for n, v in self.numbers:
            if n == name:
                return v
        return default

    def to_dict(self) -> dict:
        return {
            "cause": self.cause,
            "source": self.source,
            "direction": self.direction,
            "numbers": dict(self.numbers),
            "sentence": self.text,
        }


@dataclass(frozen=True, slots=True)
class CauseReading:
    """One explanation of funnel asymmetry, with this review's evidence and the appraiser's view.

    Attributes
    ----------
    key : str
        One of :data:`lopside.model.review.CAUSES`.
    title : str
        From :data:`lopside.model.review.CAUSE_TITLES`.
    evidence : tuple of Evidence
    what_to_check : str
        What the appraiser should look for in the paper (always given; essential where the
        data entered cannot speak).
    judgement, notes : str
        The appraiser's own judgement (one of JUDGEMENTS) and notes, from the review.
    """

    key: str
    title: str
    evidence: tuple[Evidence, ...]
    what_to_check: str
    judgement: str
    notes: str

    def count(self, direction: str) -> int:
        return sum(1 for e in self.evidence if e.direction == direction)

    @property
    def leaning(self) -> str:
        """ "for", "against", "mixed" or "unclear": the balance of this cause's lines."""
        f, a = self.count("for"), self.count("against")
        if f and not a:
            return "for"
        if a and not f:
            return "against"
        if f and a:
            return "mixed"
        return "unclear"


@dataclass(frozen=True, slots=True)
class ContourReading:
    """Where trim and fill's imputed studies fall on the contour-enhanced funnel.

    Attributes
    ----------
    k0 : int or None
        Number of imputed studies (None when trim and fill could not be run).
    side : str
        "left", "right" or "".
    filled_regions, observed_regions : tuple of (region label, count)
        Counts per significance region (two-sided p from y/SE against no effect).
    verdict : str
        "non-significant" (consistent with publication bias), "significant" (other causes
        more likely), "mixed", "none filled" or "not available".
    text : str
    """

    k0: int | None
    side: str
    filled_regions: tuple[tuple[str, int], ...]
    observed_regions: tuple[tuple[str, int], ...]
    verdict: str
    text: str
    #: the verdict sentence alone (for the side-by-side table, where the lead is not repeated)
    conclusion: str = ""


@dataclass(frozen=True, slots=True)
class TestReading:
    """The recommended test and what it says.

    Attributes
    ----------
    key, name : str
        Registry key and display name ("" when no test was recommended).
    computed : bool
    pvalue : float or None
    signal : bool or None
        p below the threshold (None when not computed).
    exploratory : bool
        The test's behaviour for this measure is not established.
    larger_in_small : bool or None
        True when small studies show larger effects (the usual pattern of bias).
    text : str
    others_text : str
        The other computed tests in one line.
    n_signal, n_computed : int
        How many computed tests (all registered) fall below the threshold, and how many ran.
    """

    key: str
    name: str
    computed: bool
    pvalue: float | None
    signal: bool | None
    exploratory: bool
    larger_in_small: bool | None
    text: str
    others_text: str
    n_signal: int
    n_computed: int


@dataclass(frozen=True, slots=True)
class AdjustmentRange:
    """How much the adjustment methods move the estimate (a range, never a corrected answer).

    Attributes
    ----------
    estimates : tuple of (method, estimate)
        Adjusted estimates on the analysis scale (trim and fill, the PET-PEESE choice,
        limit meta-analysis, selection model), where computed.
    low, high : float or None
        Smallest and largest adjusted estimate (analysis scale).
    unadjusted : float or None
        The chosen random-effects estimate.
    towards_null : int
        Adjusted estimates nearer no effect than the unadjusted one.
    crosses_null : int
        Adjusted estimates on the other side of no effect.
    moves : str
        "towards null", "little", "mixed", "away from null" or "not available".
    text : str
    """

    estimates: tuple[tuple[str, float], ...]
    low: float | None
    high: float | None
    unadjusted: float | None
    towards_null: int
    crosses_null: int
    moves: str
    text: str
    #: estimates moved away from no effect, and those that hardly move (towards_null +
    #: away + little = len(estimates) whenever there is an unadjusted estimate)
    away: int = 0
    little: int = 0


@dataclass(frozen=True, slots=True)
class SmallStudyReading:
    """What the funnel, the test, its conditions, power and the adjustments say."""

    contour: ContourReading
    test: TestReading
    failed_rules: tuple[str, ...]
    rules_text: str
    power_text: str
    adjustments: AdjustmentRange
    #: (label, text) pairs in reading order, for renderers
    lines: tuple[tuple[str, str], ...]


@dataclass(frozen=True, slots=True)
class DomainRating:
    """Suggested rating of the publication-bias domain, and the appraiser's own.

    Attributes
    ----------
    suggested : str
        One of :data:`lopside.model.review.DOMAIN_RATINGS`.
    reasons : tuple of str
    override, override_reason : str
        The appraiser's rating and reason ("" when the suggestion is accepted or not yet
        confirmed).
    note : str
        Where the words come from, and that this is a suggestion.
    assessable : bool
        False when the data cannot support a rating (too few studies, no test, no
        significant study, or too little power); ``suggested`` then says so, and the
        appraiser is still free to rate.
    evidence : tuple of Evidence
        Every evidence line that points "for" publication bias (all are in ``reasons``).
    leaning : str
        When not assessable: "towards bias" if signals point to bias, else "".
    """

    suggested: str
    reasons: tuple[str, ...]
    override: str
    override_reason: str
    note: str
    assessable: bool = True
    evidence: tuple[Evidence, ...] = ()
    leaning: str = ""

    @property
    def final(self) -> str:
        """The appraiser's rating if recorded, otherwise the suggestion."""
        return self.override or self.suggested

    @property
    def overridden(self) -> bool:
        return bool(self.override) and self.override != self.suggested


@dataclass(frozen=True, slots=True)
class Appraisal:
    """Everything the readings say about one analysis."""

    small_study: SmallStudyReading
    causes: tuple[CauseReading, ...]
    rating: DomainRating
    #: (term, gloss) for every jargon term glossed in the readings, in order of first use
    glossary: tuple[tuple[str, str], ...] = ()

    def cause(self, key: str) -> CauseReading:
        for c in self.causes:
            if c.key == key:
                return c
        raise KeyError(key)

    @property
    def evidence(self) -> tuple[Evidence, ...]:
        """Every evidence line of every explanation, in the order shown."""
        return tuple(e for c in self.causes for e in c.evidence)

    @property
    def strongest_alternative(self) -> tuple[CauseReading, Evidence] | None:
        """The explanation other than selection with the strongest line "for" it.

        Lines with a p-value below the threshold rank first (smallest p first), then the
        explanation with most lines "for". None when no other explanation has a line "for".
        """
        best = None
        for c in self.causes:
            if c.key == "selection":
                continue
            for e in c.evidence:
                if e.direction != "for":
                    continue
                p = e.number("p")
                rank = (0 if p is not None else 1, p if p is not None else 1.0, -c.count("for"))
                if best is None or rank < best[0]:
                    best = (rank, c, e)
        return None if best is None else (best[1], best[2])
