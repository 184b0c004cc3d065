"""Within/between decomposition: the subject-level part of a value and the deviation from it."""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from typing import Any

import numpy as np

from .. import _kernels as K
from .._panel import Panel
from .._transform import Transform, check_choice, check_column_name
from ..errors import OptionError

LEVELS = ("mean", "baseline")


@dataclasses.dataclass(frozen=True, kw_only=True)
class WithinBetween(Transform):
    """Configured :func:`within_between`."""

    type_name = "within_between"
    col: str
    level: str = "mean"
    names: tuple[str, str] | None = None

    def __post_init__(self) -> None:
        check_column_name("col", self.col)
        check_choice("level", self.level, LEVELS)
        if self.names is not None:
            names = self.names
            if isinstance(names, (str, bytes)) or not isinstance(names, (list, tuple)) or len(names) != 2 \
                    or not all(isinstance(n, str) and n for n in names) or names[0] == names[1]:
                raise OptionError(f"names must be two different column names (between, within), got {names!r}")
            object.__setattr__(self, "names", tuple(names))  # a saved derivation may hand back a list

    def inputs(self) -> tuple[str, ...]:
        return (self.col,)

    def outputs(self) -> tuple[str, ...]:
        if self.names is not None:
            return tuple(self.names)
        return (f"{self.col}_between", f"{self.col}_within")

    @property
    def past_only(self) -> bool:
        return False

    def describe(self) -> str:
        part = "mean of its non-missing values" if self.level == "mean" else "first non-missing value (baseline)"
        return (f"{self.col!r} split into the subject-level part (the subject's {part}) "
                f"and the within-subject deviation from it")

    def compute(self, panel: Panel) -> Sequence[Any]:
        s = panel.subjects
        y = panel.columns.numeric(self.col)
        valid = ~np.isnan(y)
        if self.level == "baseline":
            level = K.take(y, K.first_index(s, valid))
        else:
            count = s.reduce(np.add, valid.astype("float64"))
            with np.errstate(divide="ignore", invalid="ignore"):
                # add.reduceat sums each subject's slice pairwise: accurate without a correction pass
                level = s.reduce(np.add, np.where(valid, y, 0.0)) / count
        return [level, y - level]


def within_between(col: str, level: str = "mean", *, names: Sequence[str] | None = None) -> WithinBetween:
    """Split ``col`` into a subject-level part and the within-subject deviation from it.

    Two outputs: the subject-level ("between") part on every row of the subject, and the
    deviation y - part ("within").  ``level="mean"`` (default) uses the subject's mean
    over its non-missing values: the centring behind fixed-effects ("within") estimates
    and the between/within split of covariates in mixed models.  ``level="baseline"``
    uses the subject's first non-missing value instead.

    Missing values: the part ignores missing values; a subject with no value gets a
    missing part on every row; the deviation is missing where y is.  Not past-only (the
    mean uses every occasion).  Output float64.  Default names: ``<col>_between``,
    ``<col>_within``; ``names=(between, within)`` sets both.

    >>> import pandas as pd, panelfx as pfx
    >>> df = pd.DataFrame({"pid": [1, 1, 1, 2, 2], "wk": [0, 1, 2, 0, 1],
    ...                    "steps": [4.0, 6.0, None, 9.0, 7.0]})
    >>> pfx.derive(df, pfx.within_between("steps"), id="pid", time="wk")
       pid  wk  steps  steps_between  steps_within
    0    1   0    4.0            5.0          -1.0
    1    1   1    6.0            5.0           1.0
    2    1   2    NaN            5.0           NaN
    3    2   0    9.0            8.0           1.0
    4    2   1    7.0            8.0          -1.0
    """
    return WithinBetween(col=col, level=level, names=names)  # type: ignore[arg-type]
