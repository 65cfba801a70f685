"""The analysis-ready arrays of the included studies.

:class:`StudyData` is what every statistic in :mod:`lopside.stats` reads: one array per
quantity, one entry per *included, usable* study, in table order. It is built once per
analysis by :func:`lopside.analysis.analyse` from the derived effects, so no statistic
re-derives an effect size. Missing values are ``nan`` in the float arrays (counts absent,
sample size unknown) and ``""`` in the label arrays.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np


@dataclass(frozen=True, slots=True, eq=False)
class StudyData:
    """Arrays for the studies that enter the analysis.

    Attributes
    ----------
    measure : str
        "OR", "RR", "HR", "RD", "MD" or "SMD".
    y, se : ndarray
        Effect on the analysis scale (log for ratios) and its standard error.
    labels : tuple of str
        Study labels.
    rows : tuple of int
        Index of each study in the review's table (0-based).
    n : ndarray
        Total sample size (nan when unknown).
    n1, n0 : ndarray
        Arm sizes, intervention and control (nan when unknown).
    a, b, c, d : ndarray
        2x2 cells as entered (events/non-events, intervention then control; nan when
        the study has no counts). No continuity correction applied.
    se_modified : ndarray
        sqrt(1/n1 + 1/n0) for SMDs (Pustejovsky & Rodgers 2019), else nan.
    asd, asd_var : ndarray
        Arcsine difference and its variance (Rücker et al. 2008) where counts exist.
    risk_of_bias, subgroup : tuple of str
    """

    measure: str
    y: np.ndarray
    se: np.ndarray
    labels: tuple[str, ...] = ()
    rows: tuple[int, ...] = ()
    n: np.ndarray = field(default_factory=lambda: np.empty(0))
    n1: np.ndarray = field(default_factory=lambda: np.empty(0))
    n0: np.ndarray = field(default_factory=lambda: np.empty(0))
    a: np.ndarray = field(default_factory=lambda: np.empty(0))
    b: np.ndarray = field(default_factory=lambda: np.empty(0))
    c: np.ndarray = field(default_factory=lambda: np.empty(0))
    d: np.ndarray = field(default_factory=lambda: np.empty(0))
    se_modified: np.ndarray = field(default_factory=lambda: np.empty(0))
    asd: np.ndarray = field(default_factory=lambda: np.empty(0))
    asd_var: np.ndarray = field(default_factory=lambda: np.empty(0))
    risk_of_bias: tuple[str, ...] = ()
    subgroup: tuple[str, ...] = ()

    @property
    def k(self) -> int:
        return int(self.y.size)

    @property
    def v(self) -> np.ndarray:
        return self.se**2

    def has_counts(self) -> bool:
        """True when every study has complete 2x2 counts."""
        return self.a.size == self.k and self.k > 0 and bool(np.all(np.isfinite(self.a)))

    def has_sizes(self) -> bool:
        return self.n.size == self.k and self.k > 0 and bool(np.all(np.isfinite(self.n)))

    def subset(self, mask) -> StudyData:
        """The studies where ``mask`` is true (boolean array or index array)."""
        mask = np.asarray(mask)
        if mask.dtype != bool:
            m = np.zeros(self.k, dtype=bool)
            m[mask] = True
            mask = m
        idx = np.flatnonzero(mask)

        def arr(x: np.ndarray) -> np.ndarray:
            return x[mask] if x.size == self.k else x

        def tup(t: tuple) -> tuple:
            return tuple(t[i] for i in idx) if len(t) == self.k else t

        return StudyData(
            measure=self.measure,
            y=arr(self.y),
            se=arr(self.se),
            labels=tup(self.labels),
            rows=tup(self.rows),
            n=arr(self.n),
            n1=arr(self.n1),
            n0=arr(self.n0),
            a=arr(self.a),
            b=arr(self.b),
            c=arr(self.c),
            d=arr(self.d),
            se_modified=arr(self.se_modified),
            asd=arr(self.asd),
            asd_var=arr(self.asd_var),
            risk_of_bias=tup(self.risk_of_bias),
            subgroup=tup(self.subgroup),
        )

    @classmethod
    def from_arrays(cls, measure: str, y, se, **kw) -> StudyData:
        """Convenience constructor for tests and simulations: fills absent arrays with nan."""
        y = np.asarray(y, dtype=float)
        se = np.asarray(se, dtype=float)
        k = y.size
        nan = np.full(k, np.nan)
        arrays = {}
        for name in ("n", "n1", "n0", "a", "b", "c", "d", "se_modified", "asd", "asd_var"):
            arrays[name] = np.asarray(kw.pop(name), dtype=float) if name in kw else nan.copy()
        labels = tuple(kw.pop("labels", (f"Study {i + 1}" for i in range(k))))
        rows = tuple(kw.pop("rows", range(k)))
        rob = tuple(kw.pop("risk_of_bias", ("",) * k))
        sub = tuple(kw.pop("subgroup", ("",) * k))
        if kw:
            raise TypeError(f"unknown StudyData fields: {sorted(kw)}")
        return cls(
            measure=measure,
            y=y,
            se=se,
            labels=labels,
            rows=rows,
            risk_of_bias=rob,
            subgroup=sub,
            **arrays,
        )
