"""Time since baseline: the time since the subject's first occasion."""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from typing import Any

from .._options import checked_options
from .._panel import Panel
from .._transform import OccasionHelper


@dataclasses.dataclass(frozen=True, kw_only=True)
class TimeSinceBaseline(OccasionHelper):
    """Configured :func:`time_since_baseline`."""

    type_name = "time_since_baseline"

    def outputs(self) -> tuple[str, ...]:
        return (self.name or "time_since_baseline",)

    def describe(self) -> str:
        return "time since the subject's first occasion (0 on that occasion)"

    def compute(self, panel: Panel) -> Sequence[Any]:
        return [panel.elapsed_since(panel.subjects.first)]


@checked_options
def time_since_baseline(*, name: str | None = None) -> TimeSinceBaseline:
    """The time since the subject's first occasion (its baseline occasion): 0 there.

    The baseline occasion here is the subject's first row, whatever its values; for a
    baseline chosen by a value rule see :func:`~panelfx.baseline`.  Float64 in the time
    column's units, or in the ``unit`` of :func:`~panelfx.derive` (default days) for
    datetimes.  Never missing.  Past-only.  Default name: ``time_since_baseline``.

    >>> import pandas as pd, panelfx as pfx
    >>> df = pd.DataFrame({"pid": [1, 1, 1, 2],
    ...                    "visit": pd.to_datetime(["2024-01-01", "2024-01-15", "2024-03-01", "2024-02-01"])})
    >>> pfx.derive(df, pfx.time_since_baseline(), unit="W", id="pid", time="visit")
       pid      visit  time_since_baseline
    0    1 2024-01-01             0.000000
    1    1 2024-01-15             2.000000
    2    1 2024-03-01             8.571429
    3    2 2024-02-01             0.000000
    """
    return TimeSinceBaseline(name=name)
