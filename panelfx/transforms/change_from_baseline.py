"""Change from baseline: difference, percent change or ratio to the subject's baseline."""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from typing import Any, Literal

import numpy as np

from .. import _kernels as K
from .._options import checked_options
from .._panel import Panel
from .._transform import Transform, check_bool, check_choice, check_column_name, check_name
from ._common import baseline_index, check_rule, difference, reference_columns, relative_change, rule_words

KINDS = {"difference": "change", "percent": "percent_change", "ratio": "ratio"}


@dataclasses.dataclass(frozen=True, kw_only=True)
class ChangeFromBaseline(Transform):
    """Configured :func:`change_from_baseline`."""

    type_name = "change_from_baseline"
    col: str
    kind: Literal["difference", "percent", "ratio"] = "difference"
    rule: Literal["first_valid", "first", "last_before"] = "first_valid"
    reference: str | float | None = None
    after_baseline_only: bool = False
    name: str | None = None

    def __post_init__(self) -> None:
        check_column_name("col", self.col)
        check_name(self.name)
        check_choice("kind", self.kind, list(KINDS))
        check_rule(self.rule, self.reference)
        check_bool("after_baseline_only", self.after_baseline_only)

    def inputs(self) -> tuple[str, ...]:
        return (self.col, *reference_columns(self.reference))

    def outputs(self) -> tuple[str, ...]:
        return (self.name or f"{self.col}_{KINDS[self.kind]}",)

    @property
    def past_only(self) -> bool:
        return False

    def describe(self) -> str:
        what = {"difference": "value minus baseline", "percent": "100 x (value - baseline) / baseline",
                "ratio": "value / baseline"}[self.kind]
        rows = "; missing up to and including the baseline occasion" if self.after_baseline_only else ""
        return f"{what} of {self.col!r}; baseline = {rule_words(self.rule, self.reference)}{rows}"

    def unit_kinds(self, time: str) -> tuple[str | None, ...]:
        return ("duration",) if self.col == time and self.kind == "difference" else (None,)

    def compute(self, panel: Panel) -> Sequence[Any]:
        base_row = baseline_index(panel, self.col, self.rule, self.reference)
        if self.kind == "difference":
            out = difference(panel, self.col, base_row)
        else:
            y = panel.columns.numeric(self.col)
            out = relative_change(y, K.take(y, base_row), self.kind)
        if self.after_baseline_only:
            out[np.arange(panel.n) <= base_row] = np.nan
        return [out]


@checked_options
def change_from_baseline(
    col: str,
    kind: Literal["difference", "percent", "ratio"] = "difference",
    *,
    rule: Literal["first_valid", "first", "last_before"] = "first_valid",
    reference: str | float | None = None,
    after_baseline_only: bool = False,
    name: str | None = None,
) -> ChangeFromBaseline:
    """Change of ``col`` from the subject's baseline (chosen as in :func:`baseline`).

    Kinds: ``"difference"`` y - base (CDISC ADaM's CHG); ``"percent"``
    100 (y - base) / base (ADaM's PCHG); ``"ratio"`` y / base.

    Missing values: missing where y or the baseline is missing; percent and ratio are also
    missing where the baseline is 0.  By default every row gets a value, so the baseline
    occasion itself has difference 0; ``after_baseline_only=True`` leaves the occasions up
    to and including the baseline missing, as post-baseline analyses (and ADaM's blank
    change on the baseline record) want.  Not past-only.  Default names:
    ``<col>_change``, ``<col>_percent_change``, ``<col>_ratio``.

    >>> import pandas as pd, panelfx as pfx
    >>> df = pd.DataFrame({"pid": [1, 1, 1, 2, 2], "day": [0, 30, 60, 0, 30],
    ...                    "score": [12, 6, 2, 0, 4]})
    >>> pfx.derive(df, pfx.change_from_baseline("score"),
    ...           pfx.change_from_baseline("score", "percent"), id="pid", time="day")
       pid  day  score  score_change  score_percent_change
    0    1    0     12           0.0          0.000000
    1    1   30      6          -6.0        -50.000000
    2    1   60      2         -10.0        -83.333333
    3    2    0      0           0.0               NaN
    4    2   30      4           4.0               NaN
    """
    return ChangeFromBaseline(col=col, kind=kind, rule=rule, reference=reference,
                              after_baseline_only=after_baseline_only, name=name)
