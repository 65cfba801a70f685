"""Shared result vocabulary for the statistics core (scipy-style words).

Every statistic returns a frozen, slotted dataclass. Where a quantity cannot be computed
for these data, functions return :class:`NotComputable` with a plain-language reason
instead of raising or returning NaN; the window, CLI and sheet show the reason.
"""

from __future__ import annotations

import math
from collections import deque
from collections.abc import Sequence
from dataclasses import dataclass, fields
from itertools import repeat
from typing import NamedTuple


class ConfidenceInterval(NamedTuple):
    low: float
    high: float


@dataclass(frozen=True, slots=True)
class NotComputable:
    """A result that could not be computed, and why (plain words for the user)."""

    reason: str

    def __bool__(self) -> bool:  # lets callers write ``if result:``
        return False


#: what a view shows for a number of the full stage while only the core stage is ready
CORE_PENDING = "being updated (the full analysis follows in a moment)"


def is_pending(x: object) -> bool:
    """True for a result the full stage of the analysis has still to compute."""
    return isinstance(x, NotComputable) and x.reason == CORE_PENDING


def finite(x: float | None) -> bool:
    return x is not None and isinstance(x, (int, float)) and math.isfinite(x)


@dataclass(frozen=True, slots=True)
class PooledEstimate:
    """A pooled effect on the analysis scale (log for ratio measures).

    ``model`` is a short key: "FE-IV", "MH", "Peto", "DL", "PM", "REML" (random-effects
    keys are the tau^2 estimator); ``hksj`` says whether the Hartung-Knapp-Sidik-Jonkman
    (modified, max(1, q)) interval was used, in which case ``statistic`` is a t with
    ``df`` degrees of freedom, otherwise a z.
    """

    model: str
    estimate: float
    se: float
    ci: ConfidenceInterval
    statistic: float
    pvalue: float
    confidence_level: float = 0.95
    tau2: float = 0.0
    df: float | None = None
    hksj: bool = False
    k: int = 0
    #: prediction interval (random effects with k >= 3 only)
    pi: ConfidenceInterval | None = None
    #: random-effects weights in percent (same order as the studies passed in)
    weights: tuple[float, ...] = ()
    converged: bool = True
    note: str = ""


class RowsOnDemand(Sequence):
    """The rows of a result, made when first read (a read-only sequence, equal to the
    tuple of its rows).

    For a large review the rows of leave-one-out are thousands of result objects that the
    analysis itself never reads (it reads ``columns``, the arrays they are made from);
    only an output that lists them (the JSON) pays for making them. ``make()`` returns the
    rows in order; it is called once (twice at worst, when two threads ask at the same
    moment: the same rows either way). Pickled as the tuple of its rows.
    """

    __slots__ = ("_n", "_make", "_rows", "columns")

    def __init__(self, n: int, make, columns=None) -> None:
        self._n = int(n)
        self._make = make
        self._rows: tuple | None = None
        #: the numbers the rows are made from, for readers that need only those
        self.columns = columns

    def _all(self) -> tuple:
        rows = self._rows
        if rows is None:
            rows = tuple(self._make())
            if len(rows) != self._n:
                raise RuntimeError(f"{len(rows)} rows made where {self._n} were expected")
            self._rows = rows
        return rows

    @property
    def made(self) -> bool:
        """Whether the rows have been made (for tests and benchmarks)."""
        return self._rows is not None

    def __len__(self) -> int:
        return self._n

    def __getitem__(self, i):
        return self._all()[i]

    def __iter__(self):
        return iter(self._all())

    def __eq__(self, other) -> bool:
        if isinstance(other, (tuple, RowsOnDemand)):
            return self._all() == tuple(other)
        return NotImplemented

    def __hash__(self) -> int:
        return hash(self._all())

    def __repr__(self) -> str:
        return repr(self._all())

    def __reduce__(self):
        return (tuple, (self._all(),))


def instances(cls, *columns) -> list:
    """Instances of a frozen, slotted dataclass, one per row of ``columns`` (one iterable
    per field, in field order; ``itertools.repeat`` for a value shared by every row).

    The same objects as ``cls(*row)`` (same type, fields, equality, hash and pickling),
    built about four times faster: the dataclass ``__init__`` of a frozen class sets each
    field through ``object.__setattr__``, which at k = 3,000 leave-one-out rows (two
    pooled estimates each) cost more than the pooling. Each row is made as an instance
    of a plain class with the same slots and then given ``cls`` as its class (Python
    allows that only between classes of the same layout, else TypeError). Only for
    classes whose ``__init__`` just stores its arguments (no ``__post_init__``).
    """
    maker = _TWINS.get(cls)
    if maker is None:
        names = cls.__slots__
        if hasattr(cls, "__post_init__") or tuple(f.name for f in fields(cls)) != names:
            raise TypeError(f"{cls.__name__} cannot be built without its __init__")
        code = f"def __init__(self, {', '.join(names)}):\n" + "".join(
            f"    self.{n} = {n}\n" for n in names
        )
        space: dict = {}
        exec(code, space)  # noqa: S102 - a fixed template over the class's own field names
        maker = type(f"_Plain{cls.__name__}", (), {"__slots__": names, **space})
        _TWINS[cls] = maker
    objs = list(map(maker, *columns))
    deque(map(setattr, objs, repeat("__class__"), repeat(cls)), maxlen=0)
    return objs


_TWINS: dict[type, type] = {}
