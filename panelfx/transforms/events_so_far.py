"""Events so far: the running count of occasions at which a flag is true."""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from typing import Any

from .._options import checked_options
from .._panel import Panel
from ._common import FlagHistory, flag_words


@dataclasses.dataclass(frozen=True, kw_only=True)
class EventsSoFar(FlagHistory):
    """Configured :func:`events_so_far`."""

    type_name = "events_so_far"

    def outputs(self) -> tuple[str, ...]:
        return (self.name or f"{self.col}_events",)

    def describe(self) -> str:
        return (f"number of the subject's occasions {self._when()} the current one at which {self.col!r} is true "
                f"(a missing flag is not an event)" + flag_words(self.any_nonzero, self.where))

    def compute(self, panel: Panel) -> Sequence[Any]:
        return [self.counts(panel)]


@checked_options
def events_so_far(col: str, *, include_current: bool = True, any_nonzero: bool = False, where: str | None = None,
                  name: str | None = None) -> EventsSoFar:
    """How many of the subject's occasions up to the current one have ``col`` true.

    ``col`` is a true/false column (booleans, or numbers where 0 is false and any other
    number true).  ``include_current=False`` counts only strictly earlier occasions
    ("number of prior events").  Missing values: a missing flag is not an event, so the
    count is never missing.  Past-only.  Output int64.  Default name: ``<col>_events``.

    >>> import pandas as pd, panelfx as pfx
    >>> df = pd.DataFrame({"pid": [1, 1, 1, 1, 2], "wk": [1, 2, 3, 4, 1],
    ...                    "admitted": [1, 0, None, 1, 0]})
    >>> pfx.derive(df, pfx.events_so_far("admitted"),
    ...           pfx.events_so_far("admitted", include_current=False, name="prior"), id="pid", time="wk")
       pid  wk  admitted  admitted_events  prior
    0    1   1       1.0               1      0
    1    1   2       0.0               1      1
    2    1   3       NaN               1      1
    3    1   4       1.0               2      1
    4    2   1       0.0               0      0
    """
    return EventsSoFar(col=col, include_current=include_current, any_nonzero=any_nonzero, where=where, name=name)
