"""Baseline: a subject's reference value, carried to every one of its rows."""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from typing import Any, Literal

from .._columns import Take
from .._options import checked_options
from .._panel import Panel
from .._transform import Transform, check_column_name, check_name
from ._common import baseline_index, check_rule, check_where, reference_columns, rule_words, where_words, with_where


@dataclasses.dataclass(frozen=True, kw_only=True)
class Baseline(Transform):
    """Configured :func:`baseline`."""

    type_name = "baseline"
    col: str
    rule: Literal["first_valid", "first", "last_before"] = "first_valid"
    reference: str | float | None = None
    where: str | None = None
    name: str | None = None

    def __post_init__(self) -> None:
        check_column_name("col", self.col)
        check_name(self.name)
        check_rule(self.rule, self.reference)
        check_where(self.where)

    def inputs(self) -> tuple[str, ...]:
        return with_where((self.col, *reference_columns(self.reference)), self.where)

    def outputs(self) -> tuple[str, ...]:
        return (self.name or f"{self.col}_baseline",)

    @property
    def past_only(self) -> bool:
        # The baseline may lie after an early missing occasion, or be chosen by a later reference.
        return False

    def describe(self) -> str:
        return (f"baseline of {self.col!r}: {rule_words(self.rule, self.reference)}, carried to every row of the "
                f"subject{where_words(self.where)}")

    def compute(self, panel: Panel) -> Sequence[Any]:
        return [Take(self.col, baseline_index(panel, self.col, self.rule, self.reference, self.where))]


@checked_options
def baseline(
    col: str,
    rule: Literal["first_valid", "first", "last_before"] = "first_valid",
    *,
    reference: str | float | None = None,
    where: str | None = None,
    name: str | None = None,
) -> Baseline:
    """The subject's baseline value of ``col``, carried to every row of the subject.

    Rules:

    - ``"first_valid"`` (default): the first non-missing value of the subject.
    - ``"first"``: the value at the subject's first occasion, even when it is missing.
    - ``"last_before"``: the last non-missing value on or before the subject's reference
      time, given by ``reference`` (a column of times, constant within subject, such as
      the start of treatment; or a number for numeric times).  This is the usual
      convention of clinical-trial analysis datasets; CDISC ADaM leaves the exact rule to
      the analysis plan.

    ``where`` (a true/false column): only occasions where it is true may hold the baseline
    (the baseline among pre-dose rows, say); every row still receives it.

    Missing values: a subject with no qualifying value gets a missing baseline on every
    row.  The output keeps the column's dtype (integers become float64 only when a
    baseline is missing).  Not past-only: the baseline can come from a later occasion.
    Default name: ``<col>_baseline``.

    >>> import pandas as pd, panelfx as pfx
    >>> df = pd.DataFrame({"pid": [1, 1, 1, 2, 2], "day": [0, 30, 60, 0, 30],
    ...                    "sbp": [None, 150, 140, 162, 158]})
    >>> pfx.derive(df, pfx.baseline("sbp"), id="pid", time="day")
       pid  day    sbp  sbp_baseline
    0    1    0    NaN         150.0
    1    1   30  150.0         150.0
    2    1   60  140.0         150.0
    3    2    0  162.0         162.0
    4    2   30  158.0         162.0
    """
    return Baseline(col=col, rule=rule, reference=reference, where=where, name=name)
