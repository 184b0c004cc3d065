"""Gap: the time since the subject's previous occasion."""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from typing import Any

from .. import _kernels as K
from .._options import checked_options
from .._panel import Panel
from .._transform import OccasionHelper


@dataclasses.dataclass(frozen=True, kw_only=True)
class Gap(OccasionHelper):
    """Configured :func:`gap`."""

    type_name = "gap"

    def outputs(self) -> tuple[str, ...]:
        return (self.name or "gap",)

    def describe(self) -> str:
        return "time since the subject's previous occasion (missing on its first occasion)"

    def compute(self, panel: Panel) -> Sequence[Any]:
        return [panel.elapsed_since(K.shift_index(panel.subjects, 1))]


@checked_options
def gap(*, name: str | None = None) -> Gap:
    """The time since the subject's previous occasion.

    Float64 in the time column's units, or in the ``unit`` of :func:`~panelfx.derive`
    (default days) for datetimes.  Missing on the subject's first occasion.  Past-only.
    Default name: ``gap``.

    >>> import pandas as pd, panelfx as pfx
    >>> df = pd.DataFrame({"pid": [1, 1, 1, 2],
    ...                    "visit": pd.to_datetime(["2024-01-01", "2024-01-15", "2024-03-01", "2024-02-01"])})
    >>> pfx.derive(df, pfx.gap(), id="pid", time="visit")
       pid      visit   gap
    0    1 2024-01-01   NaN
    1    1 2024-01-15  14.0
    2    1 2024-03-01  46.0
    3    2 2024-02-01   NaN
    """
    return Gap(name=name)
