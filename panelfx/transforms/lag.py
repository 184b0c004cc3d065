"""Lag: the value a given number of occasions earlier (or later) within the subject."""

from __future__ import annotations

import dataclasses
from typing import Any, Sequence

from .. import _kernels as K
from .._panel import Panel
from .._transform import Transform, check_column_name, check_int, check_name


@dataclasses.dataclass(frozen=True, kw_only=True)
class Lag(Transform):
    """Configured :func:`lag`."""

    type_name = "lag"
    col: str
    periods: int = 1
    name: str | None = None

    def __post_init__(self) -> None:
        check_column_name("col", self.col)
        check_name(self.name)
        check_int("periods", self.periods, nonzero=True)

    def inputs(self) -> tuple[str, ...]:
        return (self.col,)

    def outputs(self) -> tuple[str, ...]:
        if self.name:
            return (self.name,)
        word = "lag" if self.periods > 0 else "lead"
        return (f"{self.col}_{word}{abs(self.periods)}",)

    @property
    def past_only(self) -> bool:
        return self.periods > 0

    def describe(self) -> str:
        if self.periods > 0:
            return f"value of {self.col!r} {self.periods} occasion(s) earlier in the subject"
        return f"value of {self.col!r} {-self.periods} occasion(s) later in the subject (uses the future)"

    def compute(self, panel: Panel) -> Sequence[Any]:
        return [panel.gather(self.col, K.shift_index(panel, self.periods))]


def lag(col: str, periods: int = 1, *, name: str | None = None) -> Lag:
    """The value of ``col`` ``periods`` occasions earlier within the subject.

    Negative ``periods`` look ahead (a lead); that uses the future and is not past-only.
    Occasions are rows of the subject in time order, however far apart in time.

    Missing values: missing where the source occasion does not exist (the subject's first
    ``periods`` rows) and where the source value itself is missing.  Works on any dtype
    (numbers, text, categories) and keeps it; integers become float64 only where a value
    is missing.  Past-only for positive ``periods``.  Default name: ``<col>_lag<k>`` or
    ``<col>_lead<k>``.

    >>> import pandas as pd, panelfx as px
    >>> df = pd.DataFrame({"pid": ["a", "a", "a", "b"], "wk": [1, 2, 3, 1],
    ...                    "dose": [10, 20, 20, 5]})
    >>> px.derive(df, px.lag("dose"), px.lag("dose", -1), id="pid", time="wk")
      pid  wk  dose  dose_lag1  dose_lead1
    0   a   1    10        NaN        20.0
    1   a   2    20       10.0        20.0
    2   a   3    20       20.0         NaN
    3   b   1     5        NaN         NaN
    """
    return Lag(col=col, periods=periods, name=name)
