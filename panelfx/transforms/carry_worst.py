"""Worst carried forward: a missing value replaced by the worst of the subject's earlier values."""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from typing import Any, Literal

import numpy as np

from .._columns import Take
from .._options import checked_options
from .._panel import Panel
from .._transform import Transform, check_bool, check_choice, check_column_name, check_name
from ..errors import OptionError
from ._fill import fill_flag, flag_words


@dataclasses.dataclass(frozen=True, kw_only=True)
class CarryWorst(Transform):
    """Configured :func:`carry_worst`."""

    type_name = "carry_worst"
    col: str
    worst: Literal["max", "min"]
    flag: bool = False
    name: str | None = None

    def __post_init__(self) -> None:
        check_column_name("col", self.col)
        check_name(self.name)
        if self.worst is None:
            raise OptionError("worst= must say which direction is worse: 'max' (higher is worse) or 'min'")
        check_choice("worst", self.worst, ("max", "min"))
        check_bool("flag", self.flag)

    def inputs(self) -> tuple[str, ...]:
        return (self.col,)

    def outputs(self) -> tuple[str, ...]:
        out = self.name or f"{self.col}_wocf"
        return (out, f"{out}_flag") if self.flag else (out,)

    @property
    def past_only(self) -> bool:
        return True

    def describe(self) -> str:
        side = "largest" if self.worst == "max" else "smallest"
        words = f"{self.col!r}, a missing value replaced by the {side} of the subject's earlier non-missing values"
        return words + (flag_words("WOCF", "worst observation carried forward") if self.flag else "")

    def compute(self, panel: Panel) -> Sequence[Any]:
        s = panel.subjects
        v = panel.columns.numeric(self.col)
        ok = ~np.isnan(v)
        rows = np.arange(panel.n)
        # Running worst per subject without a loop: rank the values (exact, ties keep the
        # earliest row), then a running maximum of subject * width + rank never crosses subjects.
        order = np.lexsort((rows, v if self.worst == "max" else -v))  # best first ... worst last
        order = order[ok[order]]
        rank = np.full(panel.n, -1, dtype=np.int64)
        rank[order] = np.arange(len(order))
        width = len(order) + 1
        key = np.where(ok, s.grp * width + rank, s.grp * width - 1)
        run = np.maximum.accumulate(key) if panel.n else key
        best = run - s.grp * width  # the worst rank so far in the subject, -1 when none
        src_of_rank = np.empty(max(len(order), 1), dtype=np.int64)
        src_of_rank[: len(order)] = order
        src = np.where(best >= 0, src_of_rank[np.maximum(best, 0)], -1)
        filled = ~ok & (src >= 0)
        out = np.where(ok, rows, src)
        if self.flag:
            return [Take(self.col, out), fill_flag(filled, "WOCF")]
        return [Take(self.col, out)]


@checked_options
def carry_worst(
    col: str,
    worst: Literal["max", "min"],
    *,
    flag: bool = False,
    name: str | None = None,
) -> CarryWorst:
    """``col`` with each missing value replaced by the worst of the subject's earlier non-missing
    values (worst observation carried forward, WOCF, a sensitivity analysis of the trade).

    ``worst`` is required and says which direction is worse: ``"max"`` (a higher value is
    worse, e.g. a symptom score) or ``"min"`` (e.g. a lung function).  Non-missing values
    are kept; values are numbers.

    Missing values: missing before the subject's first non-missing value.  Never carried
    from one subject to the next.  Past-only.  Default name: ``<col>_wocf``;
    ``flag=True`` adds ``<name>_flag``, a categorical holding "WOCF" where the value was filled.

    >>> import pandas as pd, panelfx as pfx
    >>> df = pd.DataFrame({"pid": [1, 1, 1, 1, 2], "wk": [0, 4, 8, 12, 0],
    ...                    "score": [12.0, 20.0, 14.0, None, None]})
    >>> pfx.derive(df, pfx.carry_worst("score", "max", flag=True), id="pid", time="wk")
       pid  wk  score  score_wocf score_wocf_flag
    0    1   0   12.0        12.0             NaN
    1    1   4   20.0        20.0             NaN
    2    1   8   14.0        14.0             NaN
    3    1  12    NaN        20.0            WOCF
    4    2   0    NaN         NaN             NaN
    """
    return CarryWorst(col=col, worst=worst, flag=flag, name=name)
