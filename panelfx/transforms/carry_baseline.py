"""Baseline carried forward: missing values after the baseline replaced by the baseline value."""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from typing import Any, Literal

import numpy as np

from .._columns import Take
from .._options import checked_options
from .._panel import Panel
from .._transform import Transform, check_bool, check_column_name, check_name
from ._common import baseline_index, check_rule, reference_columns, rule_words
from ._fill import fill_flag, flag_words


@dataclasses.dataclass(frozen=True, kw_only=True)
class CarryBaseline(Transform):
    """Configured :func:`carry_baseline`."""

    type_name = "carry_baseline"
    col: str
    rule: Literal["first_valid", "first", "last_before"] = "first_valid"
    reference: str | float | None = None
    flag: bool = False
    name: str | None = None

    def __post_init__(self) -> None:
        check_column_name("col", self.col)
        check_name(self.name)
        check_rule(self.rule, self.reference)
        check_bool("flag", self.flag)

    def inputs(self) -> tuple[str, ...]:
        return (self.col, *reference_columns(self.reference))

    def outputs(self) -> tuple[str, ...]:
        out = self.name or f"{self.col}_bocf"
        return (out, f"{out}_flag") if self.flag else (out,)

    @property
    def past_only(self) -> bool:
        # the baseline lies at or before every row it fills, except that a reference time can
        # make a later record the baseline (then earlier rows are not filled)
        return self.rule != "last_before"

    def describe(self) -> str:
        words = (f"{self.col!r}, a missing value after the baseline replaced by the baseline "
                 f"({rule_words(self.rule, self.reference)})")
        return words + (flag_words("BOCF", "baseline observation carried forward") if self.flag else "")

    def compute(self, panel: Panel) -> Sequence[Any]:
        base = baseline_index(panel, self.col, self.rule, self.reference)
        rows = np.arange(panel.n)
        missing = panel.columns.missing(self.col)
        filled = missing & (base >= 0) & (rows > base) & ~missing[np.maximum(base, 0)]
        src = np.where(filled, base, np.where(missing, -1, rows))
        if self.flag:
            return [Take(self.col, src), fill_flag(filled, "BOCF")]
        return [Take(self.col, src)]


@checked_options
def carry_baseline(
    col: str,
    rule: Literal["first_valid", "first", "last_before"] = "first_valid",
    *,
    reference: str | float | None = None,
    flag: bool = False,
    name: str | None = None,
) -> CarryBaseline:
    """``col`` with each missing value after the baseline replaced by the baseline value
    (baseline observation carried forward, BOCF, a sensitivity analysis of the trade).

    The baseline is chosen as in :func:`panelfx.baseline` (``rule``, ``reference``).  Only
    occasions after the baseline's own occasion are filled; non-missing values are kept.

    Missing values: missing before the baseline and wherever the subject has no baseline.
    Keeps the column's dtype.  Past-only for the rules "first_valid" and "first".  Default
    name: ``<col>_bocf``; ``flag=True`` adds ``<name>_flag``, a categorical holding "BOCF"
    where the value was filled.

    >>> import pandas as pd, panelfx as pfx
    >>> df = pd.DataFrame({"pid": [1, 1, 1, 1, 2], "wk": [0, 4, 8, 12, 0],
    ...                    "score": [None, 20.0, 14.0, None, 31.0]})
    >>> pfx.derive(df, pfx.carry_baseline("score", flag=True), id="pid", time="wk")
       pid  wk  score  score_bocf score_bocf_flag
    0    1   0    NaN         NaN             NaN
    1    1   4   20.0        20.0             NaN
    2    1   8   14.0        14.0             NaN
    3    1  12    NaN        20.0            BOCF
    4    2   0   31.0        31.0             NaN
    """
    return CarryBaseline(col=col, rule=rule, reference=reference, flag=flag, name=name)
