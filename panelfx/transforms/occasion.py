"""Occasion number: 1, 2, 3, ... within the subject, in time order."""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from typing import Any

from .._panel import Panel
from .._transform import OccasionHelper


@dataclasses.dataclass(frozen=True, kw_only=True)
class Occasion(OccasionHelper):
    """Configured :func:`occasion`."""

    type_name = "occasion"

    def outputs(self) -> tuple[str, ...]:
        return (self.name or "occasion",)

    def describe(self) -> str:
        return "occasion number within the subject in time order (1 = first occasion)"

    def unit_kinds(self, time: str) -> tuple[str | None, ...]:
        return (None,)  # a count of occasions

    def compute(self, panel: Panel) -> Sequence[Any]:
        return [panel.subjects.pos + 1]


def occasion(*, name: str | None = None) -> Occasion:
    """The occasion number within the subject: 1 at its first occasion, then 2, 3, ...

    Counts rows in time order, whatever their spacing and whatever is missing in them
    (the time column is never missing).  Past-only.  Output int64.  Default name:
    ``occasion``.

    >>> import pandas as pd, panelfx as pfx
    >>> df = pd.DataFrame({"pid": [2, 1, 1, 1], "day": [0, 40, 0, 15]})
    >>> pfx.derive(df, pfx.occasion(), id="pid", time="day")
       pid  day  occasion
    0    2    0         1
    1    1   40         3
    2    1    0         1
    3    1   15         2
    """
    return Occasion(name=name)
