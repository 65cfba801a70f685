"""Jargon glossed once: the first mention of a term carries its plain meaning, later ones not.

The readings are built in a fixed order (funnel reading, then the explanations, then the
rating), so the same analysis always glosses the same mention.
"""

from __future__ import annotations

#: term -> the term with its plain-language gloss (used at first mention)
GLOSSES: dict[str, str] = {
    "small-study effects": (
        "small-study effects (smaller studies showing different, usually larger, effects "
        "than larger ones)"
    ),
    "contour-enhanced funnel plot": (
        "contour-enhanced funnel plot (shaded by where a study would have been "
        "statistically significant)"
    ),
    "I²": "I² (the share of variation between studies beyond chance)",
    "τ²": "τ² (the between-study variance)",
    "prediction interval": (
        "prediction interval (where the effect in a new, similar study would probably lie)"
    ),
    "SE": "SE (standard error: a study's imprecision, larger in smaller studies)",
    "trim and fill": "trim and fill (adds mirror-image studies where the funnel has a gap)",
    "PET-PEESE": "PET-PEESE (regression estimates of the effect in a very large study)",
    "limit meta-analysis": (
        "limit meta-analysis (the estimate extrapolated to a study with no sampling error)"
    ),
    "selection model": (
        "selection model (re-weights studies by how likely results like theirs were to be "
        "published)"
    ),
    "power": "power (the chance that the test detects bias of the simulated size)",
    "meta-regression": "meta-regression (a regression of study effects on study features)",
}


class Glossary:
    """Hands out a term with its gloss the first time, the bare term afterwards.

    Used only while one appraisal is being built; :meth:`used` gives the glossed terms.
    """

    def __init__(self) -> None:
        self._seen: list[str] = []

    def __call__(self, term: str) -> str:
        if term in self._seen or term not in GLOSSES or not GLOSSES[term]:
            return term
        self._seen.append(term)
        return GLOSSES[term]

    def used(self) -> tuple[tuple[str, str], ...]:
        return tuple((t, GLOSSES[t]) for t in self._seen)
