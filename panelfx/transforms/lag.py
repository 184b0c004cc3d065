"""Lag: the value a given number of occasions earlier (or later), or a time offset earlier, within the subject."""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from typing import Any

import numpy as np

from .. import _kernels as K
from .._columns import Take
from .._panel import Panel
from .._transform import Transform, check_bool, check_column_name, check_int, check_name
from ..errors import OptionError
from ._common import check_where, nth_source, sources
from ._spans import check_span, span_label, span_words


@dataclasses.dataclass(frozen=True, kw_only=True)
class Lag(Transform):
    """Configured :func:`lag`."""

    type_name = "lag"
    col: str
    periods: int | None = None  # None: 1 occasion unless offset= is given
    offset: str | float | None = None
    tolerance: str | float | None = None
    skip_missing: bool = False
    where: str | None = None
    name: str | None = None

    def __post_init__(self) -> None:
        check_column_name("col", self.col)
        check_name(self.name)
        check_bool("skip_missing", self.skip_missing)
        check_where(self.where)
        if self.offset is None:
            if self.tolerance is not None:
                raise OptionError("tolerance= applies only to a lag by time (offset=), not to periods=")
            periods = 1 if self.periods is None else self.periods
            check_int("periods", periods, nonzero=True)
            object.__setattr__(self, "periods", periods)
            return
        if self.periods is not None:
            raise OptionError("give either periods= (occasions) or offset= (time), not both")
        object.__setattr__(self, "offset", check_span("offset", self.offset, allow_zero=True))
        if self.tolerance is not None:
            object.__setattr__(self, "tolerance", check_span("tolerance", self.tolerance, allow_zero=True))

    def inputs(self) -> tuple[str, ...]:
        return (self.col,) if self.where is None else (self.col, self.where)

    @property
    def _steps(self) -> int:
        """Occasions back (negative: ahead); 1 for a lag by time, where it is not used."""
        return 1 if self.periods is None else self.periods

    def outputs(self) -> tuple[str, ...]:
        if self.name:
            return (self.name,)
        if self.offset is not None:
            return (f"{self.col}_lag_{span_label(self.offset)}",)
        word = "lag" if self._steps > 0 else "lead"
        return (f"{self.col}_{word}{abs(self._steps)}",)

    @property
    def past_only(self) -> bool:
        return self.offset is not None or self._steps > 0

    def describe(self) -> str:
        if self.offset is not None:
            words = (f"value of {self.col!r} at the subject's latest occasion at or before "
                     f"{span_words(self.offset)} earlier")
            if self.tolerance is not None:
                words += f", if that occasion is at most {span_words(self.tolerance)} older than the target time"
            return words + self._source_words()
        if self._steps > 0:
            return f"value of {self.col!r} {self._steps} occasion(s) earlier in the subject" + self._source_words()
        return (f"value of {self.col!r} {-self._steps} occasion(s) later in the subject (uses the future)"
                + self._source_words())

    def _source_words(self) -> str:
        words = "; occasions where it is missing are skipped" if self.skip_missing else ""
        if self.where is not None:
            words += f"; only occasions where {self.where!r} is true count"
        return words

    def compute(self, panel: Panel) -> Sequence[Any]:
        s = panel.subjects
        mask = sources(panel, self.where, self.col if self.skip_missing else None)
        if self.offset is None:
            if mask is None:
                return [Take(self.col, K.shift_index(s, self._steps))]
            return [Take(self.col, nth_source(s, mask, self._steps))]
        offset = panel.span(self.offset, "offset")
        # last occasion at or before t - offset: one before the first one after it; never a
        # row after the current one (a tied row later in the order, when offset is 0)
        src = np.minimum(panel.first_at_or_after(panel.axis.back(offset, strict=True)) - 1, np.arange(panel.n))
        src = np.where(src >= s.first, src, -1)
        if mask is not None:  # the latest qualifying source at or before that occasion
            src = np.where(src >= 0, K.last_index_upto(s, mask)[np.maximum(src, 0)], -1)
        if self.tolerance is not None:
            # the source's own time must lie at or after t - offset - tolerance (spans add exactly)
            oldest = panel.axis.back(offset + panel.span(self.tolerance, "tolerance"), strict=False)
            src = np.where(panel.axis.key[np.maximum(src, 0)] >= oldest, src, -1)
        return [Take(self.col, src)]


def lag(
    col: str,
    periods: int | None = None,
    *,
    offset: str | float | None = None,
    tolerance: str | float | None = None,
    skip_missing: bool = False,
    where: str | None = None,
    name: str | None = None,
) -> Lag:
    """The value of ``col`` ``periods`` occasions earlier, or ``offset`` time earlier, within the subject.

    By occasions (``periods``, default 1 when ``offset`` is not given): occasions are rows
    of the subject in time order, however far apart in time.  Negative ``periods`` look
    ahead (a lead); that uses the future and is not past-only.

    By time (``offset``, a non-negative number for numeric times or a span such as ``"30D"``
    for datetimes; exclusive with ``periods``): the value at the subject's latest
    occasion at or before t - offset, the value "as of" that time (``offset=0``: as of
    now, the current occasion included).  ``tolerance`` (same kind of span, may be 0)
    drops sources that are too old: the source occasion's own time must lie at or after
    t - offset - tolerance.  Without it any earlier occasion qualifies.

    Sources: ``skip_missing=True`` skips occasions where ``col`` is missing (the value at
    the most recent earlier occasion where it is present: the k-th such one for
    ``periods=k``); ``where`` (a true/false column) lets only occasions where it is true
    serve as sources.  Every row still receives a value.  With ``tolerance`` the age is
    measured from the source actually used, after skipping.

    Missing values: missing where the source occasion does not exist (the subject's first
    ``periods`` rows) and, without ``skip_missing``, where the source value itself is
    missing.  Works on any dtype (numbers, text, categories, datetimes, the time column
    itself) and keeps it; integers become float64 only where a value is missing (nullable
    Int64 when some exceed 2**53, which float64 would round).  Past-only for positive
    ``periods`` and for ``offset``.  Default name: ``<col>_lag<k>`` or ``<col>_lead<k>``;
    ``<col>_lag_<offset>`` by time (``hb_lag_30D``, ``hb_lag_7``).

    >>> import pandas as pd, panelfx as pfx
    >>> df = pd.DataFrame({"pid": ["a", "a", "a", "b"], "wk": [1, 2, 3, 1],
    ...                    "dose": [10, 20, 20, 5]})
    >>> pfx.derive(df, pfx.lag("dose"), pfx.lag("dose", -1), id="pid", time="wk")
      pid  wk  dose  dose_lag1  dose_lead1
    0   a   1    10        NaN        20.0
    1   a   2    20       10.0        20.0
    2   a   3    20       20.0         NaN
    3   b   1     5        NaN         NaN

    By time: the dose as of one week earlier, from a source at most 3 days older than that.

    >>> df = pd.DataFrame({"pid": ["a"] * 5, "day": [0, 5, 8, 16, 30], "dose": [10, 20, 30, 40, 50]})
    >>> pfx.derive(df, pfx.lag("dose", offset=7), pfx.lag("dose", offset=7, tolerance=3, name="dose_wk"),
    ...           id="pid", time="day")
      pid  day  dose  dose_lag_7  dose_wk
    0   a    0    10         NaN      NaN
    1   a    5    20         NaN      NaN
    2   a    8    30        10.0     10.0
    3   a   16    40        30.0     30.0
    4   a   30    50        40.0      NaN
    """
    return Lag(col=col, periods=periods, offset=offset, tolerance=tolerance, skip_missing=skip_missing,
               where=where, name=name)
