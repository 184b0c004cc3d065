"""Time since an event: since the first or the most recent occasion at which a flag is true."""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from typing import Any, Literal

import numpy as np

from .. import _kernels as K
from .._options import checked_options
from .._panel import Panel
from .._transform import check_choice
from ._common import FlagHistory, event_flags, flag_words

WHICH = ("last", "first")


@dataclasses.dataclass(frozen=True, kw_only=True)
class TimeSince(FlagHistory):
    """Configured :func:`time_since` (the flag options of :class:`FlagHistory`, plus ``which``)."""

    type_name = "time_since"
    which: Literal["last", "first"] = "last"

    def __post_init__(self) -> None:
        super().__post_init__()
        check_choice("which", self.which, WHICH)

    def outputs(self) -> tuple[str, ...]:
        if self.name:
            return (self.name,)
        return (f"{self.col}_time_since" if self.which == "last" else f"{self.col}_time_since_first",)

    def describe(self) -> str:
        which = "most recent" if self.which == "last" else "first"
        when = "at or before the current occasion" if self.include_current else "strictly before the current occasion"
        return (f"time since the {which} occasion at which {self.col!r} is true, {when}; "
                f"missing before any such event (a missing flag is not an event)"
                + flag_words(self.any_nonzero, self.where))

    def unit_kinds(self, time: str) -> tuple[str | None, ...]:
        return ("duration",)

    def compute(self, panel: Panel) -> Sequence[Any]:
        s = panel.subjects
        event = event_flags(panel, self.col, self.any_nonzero, self.where)  # a missing flag is no event
        rows = np.arange(panel.n)
        if self.which == "last":
            src = K.last_index_upto(s, event)
            if not self.include_current:
                src = K.at_previous(s, src)
        else:
            src = K.first_index(s, event)
            after = src <= rows if self.include_current else src < rows
            src = np.where((src >= 0) & after, src, -1)
        return [panel.elapsed_since(src)]


@checked_options
def time_since(
    col: str,
    which: Literal["last", "first"] = "last",
    *,
    include_current: bool = True,
    any_nonzero: bool = False,
    where: str | None = None,
    name: str | None = None,
) -> TimeSince:
    """Time since the subject's most recent (``which="last"``) or first (``"first"``)
    occasion at which ``col`` is true, at or before the current occasion.

    ``col`` is a true/false column: booleans, or numbers where 0 is false and any other
    number true.  ``include_current=False`` counts only strictly earlier events, so an
    event occasion reports the time since the event before it (the usual "time since
    previous event" feature).  Durations are float64 in the time column's units, or in
    the ``unit`` of :func:`~panelfx.derive` (default days) for datetimes; 0 on an event
    occasion when the current one counts.

    Event flags are booleans or 0/1 numbers; other numbers (a lab value, an event number)
    are an error unless ``any_nonzero=True`` says every non-zero number is an event.
    ``where`` (a true/false column): only events at occasions where it is true count.

    Missing values: a missing flag is not an event; the result is missing before the
    subject's first (counted) event.  Past-only.  Default names: ``<col>_time_since``,
    ``<col>_time_since_first``.

    >>> import pandas as pd, panelfx as pfx
    >>> df = pd.DataFrame({"pid": [1, 1, 1, 1, 2], "day": [0, 3, 10, 12, 0],
    ...                    "fall": [False, True, False, True, True]})
    >>> pfx.derive(df, pfx.time_since("fall"), pfx.time_since("fall", "first"),
    ...           pfx.time_since("fall", include_current=False, name="since_prior"), id="pid", time="day")
       pid  day   fall  fall_time_since  fall_time_since_first  since_prior
    0    1    0  False              NaN                    NaN          NaN
    1    1    3   True              0.0                    0.0          NaN
    2    1   10  False              7.0                    7.0          7.0
    3    1   12   True              0.0                    9.0          9.0
    4    2    0   True              0.0                    0.0          NaN
    """
    return TimeSince(col=col, which=which, include_current=include_current, any_nonzero=any_nonzero, where=where,
                     name=name)
