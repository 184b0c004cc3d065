"""Carry forward: the last non-missing value, carried to later occasions within limits."""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from typing import Any

import numpy as np

from .. import _kernels as K
from .._columns import Take
from .._options import checked_options
from .._panel import Panel
from .._transform import Transform, check_bool, check_column_name, check_int, check_name
from ._common import check_where, sources, where_words, with_where
from ._fill import fill_flag, flag_words
from ._spans import check_span, span_words


@dataclasses.dataclass(frozen=True, kw_only=True)
class CarryForward(Transform):
    """Configured :func:`carry_forward`."""

    type_name = "carry_forward"
    col: str
    limit: int | None = None
    max_span: str | float | None = None
    name: str | None = None
    flag: bool = False
    where: str | None = None

    def __post_init__(self) -> None:
        check_column_name("col", self.col)
        check_name(self.name)
        check_bool("flag", self.flag)
        check_where(self.where)
        if self.limit is not None:
            check_int("limit", self.limit, minimum=1)
        if self.max_span is not None:
            object.__setattr__(self, "max_span", check_span("max_span", self.max_span))

    def inputs(self) -> tuple[str, ...]:
        return with_where((self.col,), self.where)

    def outputs(self) -> tuple[str, ...]:
        out = self.name or f"{self.col}_locf"
        return (out, f"{out}_flag") if self.flag else (out,)

    @property
    def past_only(self) -> bool:
        return True

    def describe(self) -> str:
        words = f"{self.col!r}, a missing value replaced by the subject's last earlier non-missing value"
        if self.limit is not None:
            words += f", carried at most {self.limit} occasion(s)"
        if self.max_span is not None:
            words += f", carried at most {span_words(self.max_span)}"
        if self.flag:
            words += flag_words("LOCF", "last observation carried forward")
        return words + where_words(self.where)

    def compute(self, panel: Panel) -> Sequence[Any]:
        mask = sources(panel, self.where, self.col)
        assert mask is not None  # a column is given: never "every row"
        src = K.last_index_upto(panel.subjects, mask)
        ok = src >= 0
        if self.limit is not None:
            ok &= np.arange(panel.n) - src <= self.limit
        if self.max_span is not None:
            # at most max_span old: the source lies at or after t - max_span
            oldest = panel.axis.back(panel.span(self.max_span, "max_span"), strict=False)
            ok &= panel.axis.key[np.maximum(src, 0)] >= oldest
        rows = np.where(ok, src, -1)
        if self.flag:
            return [Take(self.col, rows), fill_flag((rows >= 0) & (rows != np.arange(panel.n)), "LOCF")]
        return [Take(self.col, rows)]


@checked_options
def carry_forward(
    col: str,
    *,
    limit: int | None = None,
    max_span: str | float | None = None,
    name: str | None = None,
    flag: bool = False,
    where: str | None = None,
) -> CarryForward:
    """``col`` with each missing value replaced by the subject's last earlier non-missing value.

    ``limit`` (an integer >= 1) carries a value to at most that many later occasions;
    ``max_span`` (a positive number for numeric times, a span such as ``"90D"`` for
    datetimes) carries it only while the time since its own occasion is at most that
    long.  Given both, both must hold.  Non-missing values are kept as they are.

    ``where`` (a true/false column): only occasions where it is true serve as sources (the
    last value from on-treatment occasions, say); every row receives the value of the last
    such occasion at or before it, its own included when it qualifies.

    Missing values: missing before the subject's first non-missing value and beyond the
    limits.  Never carried from one subject to the next.  Works on any dtype (numbers,
    text, categories) and keeps it.  Past-only.  Default name: ``<col>_locf`` (last observation carried forward).

    ``flag=True`` adds ``<name>_flag``, a categorical holding "LOCF" (last observation
    carried forward) where the value was carried and missing elsewhere, so that filled
    values stay visible.  See also :func:`panelfx.carry_baseline` and
    :func:`panelfx.carry_worst` for sensitivity analyses.

    >>> import pandas as pd, panelfx as pfx
    >>> df = pd.DataFrame({"pid": [1, 1, 1, 1, 2], "day": [0, 30, 60, 200, 0],
    ...                    "bmi": [None, 27.1, None, None, 31.0]})
    >>> pfx.derive(df, pfx.carry_forward("bmi"), pfx.carry_forward("bmi", max_span=90, name="bmi_90"),
    ...           id="pid", time="day")
       pid  day   bmi  bmi_locf  bmi_90
    0    1    0   NaN         NaN     NaN
    1    1   30  27.1        27.1    27.1
    2    1   60   NaN        27.1    27.1
    3    1  200   NaN        27.1     NaN
    4    2    0  31.0        31.0    31.0
    """
    return CarryForward(col=col, limit=limit, max_span=max_span, name=name, flag=flag, where=where)
