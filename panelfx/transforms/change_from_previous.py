"""Change from the previous occasion: difference, percent change or rate per unit time."""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from typing import Any, Literal

import numpy as np

from .. import _kernels as K
from .._options import checked_options
from .._panel import Panel
from .._transform import Transform, check_bool, check_choice, check_column_name, check_name
from ._common import difference, relative_change

KINDS = {"difference": "diff", "percent": "percent_diff", "rate": "rate"}


@dataclasses.dataclass(frozen=True, kw_only=True)
class ChangeFromPrevious(Transform):
    """Configured :func:`change_from_previous`."""

    type_name = "change_from_previous"
    col: str
    kind: Literal["difference", "percent", "rate"] = "difference"
    skip_missing: bool = False
    name: str | None = None

    def __post_init__(self) -> None:
        check_column_name("col", self.col)
        check_name(self.name)
        check_choice("kind", self.kind, list(KINDS))
        check_bool("skip_missing", self.skip_missing)

    def inputs(self) -> tuple[str, ...]:
        return (self.col,)

    def outputs(self) -> tuple[str, ...]:
        return (self.name or f"{self.col}_{KINDS[self.kind]}",)

    @property
    def past_only(self) -> bool:
        return True

    def describe(self) -> str:
        what = {"difference": "value minus previous value",
                "percent": "100 x (value - previous) / previous",
                "rate": "(value - previous) / (time - previous time), per unit of time"}[self.kind]
        prev = "the last earlier occasion with a value" if self.skip_missing else "the previous occasion"
        return f"{what} of {self.col!r}; previous = {prev}"

    def unit_kinds(self, time: str) -> tuple[str | None, ...]:
        if self.kind == "rate":
            return ("rate",)
        return ("duration",) if self.col == time and self.kind == "difference" else (None,)

    def compute(self, panel: Panel) -> Sequence[Any]:
        s = panel.subjects
        if self.skip_missing:
            prev = K.at_previous(s, K.last_index_upto(s, ~panel.columns.missing(self.col)))
        else:
            prev = K.shift_index(s, 1)
        if self.kind == "difference":
            return [difference(panel, self.col, prev)]
        y = panel.columns.numeric(self.col)
        y_prev = K.take(y, prev)
        if self.kind == "rate":
            elapsed = panel.elapsed_since(prev)
            elapsed[elapsed == 0] = np.nan  # tied occasions: no time passed, no rate
            with np.errstate(divide="ignore", invalid="ignore"):
                return [(y - y_prev) / elapsed]
        return [relative_change(y, y_prev, self.kind)]


@checked_options
def change_from_previous(
    col: str,
    kind: Literal["difference", "percent", "rate"] = "difference",
    *,
    skip_missing: bool = False,
    name: str | None = None,
) -> ChangeFromPrevious:
    """Change of ``col`` since the subject's previous occasion.

    Kinds: ``"difference"`` y - y_prev; ``"percent"`` 100 (y - y_prev) / y_prev;
    ``"rate"`` (y - y_prev) / (t - t_prev), per unit of the time column (per ``unit``,
    default days, for datetime times).

    "Previous" means the previous occasion of the subject even when its value is missing,
    so a missing value makes the next change missing too; ``skip_missing=True`` uses the
    last earlier occasion that has a value instead (and its time, for rates).  Missing on
    the subject's first occasion; percent also where the previous value is 0.  Past-only.
    Default names: ``<col>_diff``, ``<col>_percent_diff``, ``<col>_rate``.

    >>> import pandas as pd, panelfx as pfx
    >>> df = pd.DataFrame({"pid": [1, 1, 1, 1], "day": [0, 10, 20, 40],
    ...                    "wt": [80.0, None, 78.0, 77.0]})
    >>> pfx.derive(df, pfx.change_from_previous("wt"),
    ...           pfx.change_from_previous("wt", "rate", skip_missing=True), id="pid", time="day")
       pid  day    wt  wt_diff  wt_rate
    0    1    0  80.0      NaN      NaN
    1    1   10   NaN      NaN      NaN
    2    1   20  78.0      NaN    -0.10
    3    1   40  77.0     -1.0    -0.05
    """
    return ChangeFromPrevious(col=col, kind=kind, skip_missing=skip_missing, name=name)
