"""Within/between decomposition: the subject-level part of a value and the deviation from it,
and its nested form (region > clinic > subject > occasion)."""

from __future__ import annotations

import dataclasses
import re
from collections.abc import Sequence
from typing import Any, Literal

import numpy as np
import pandas as pd

from .. import _kernels as K
from .._nesting import CODES, check_levels, level_codes
from .._options import checked_options
from .._panel import Panel
from .._transform import Transform, check_choice, check_column_name
from ..errors import NestingError, OptionError, rows_message

BETWEEN = ("mean", "baseline")

Between = Literal["mean", "baseline"]
Codes = Literal["within_parent", "unique"]


def _safe(name: str) -> str:
    """A level's column name as a formula-safe suffix: lower case, [a-z0-9_] only."""
    return re.sub(r"[^a-z0-9_]", "_", name.lower())


@dataclasses.dataclass(frozen=True, kw_only=True)
class WithinBetween(Transform):
    """Configured :func:`within_between`."""

    type_name = "within_between"
    col: str
    between: Between = "mean"
    names: tuple[str, ...] | None = None
    levels: tuple[str, ...] = ()
    fit: str | None = None
    codes: Codes = "within_parent"

    def __post_init__(self) -> None:
        check_column_name("col", self.col)
        check_choice("between", self.between, BETWEEN)
        levels = tuple(check_levels(self.levels, allow_empty=True))
        object.__setattr__(self, "levels", levels)  # a saved derivation may hand back a list
        if self.col in levels:
            raise OptionError(f"col {self.col!r} is also one of the levels")
        if self.fit is not None:
            check_column_name("fit", self.fit)
            if self.fit == self.col or self.fit in levels:
                raise OptionError(f"fit {self.fit!r} must be a true/false column other than col and the levels")
        check_choice("codes", self.codes, CODES)
        if self.between == "baseline" and (levels or self.fit is not None):
            raise OptionError("levels= and fit= work with subject means: use them with between='mean'")
        defaults = (*(f"{self.col}_{_safe(c)}" for c in levels), f"{self.col}_between", f"{self.col}_within")
        if self.names is not None:
            names = self.names
            if isinstance(names, (str, bytes)) or not isinstance(names, (list, tuple)) or len(names) != len(defaults) \
                    or not all(isinstance(n, str) and n for n in names) or len(set(names)) != len(names):
                what = "(between, within)" if not levels else f"({', '.join(levels)}, between, within)"
                count = "two" if len(defaults) == 2 else str(len(defaults))
                raise OptionError(f"names must be {count} different column names {what}, got {names!r}")
            object.__setattr__(self, "names", tuple(names))  # a saved derivation may hand back a list
        elif len(set(defaults)) != len(defaults):
            raise OptionError(f"the default output names {list(defaults)} repeat a name: set names=")

    def inputs(self) -> tuple[str, ...]:
        return (self.col, *self.levels, *((self.fit,) if self.fit is not None else ()))

    def groupings(self) -> tuple[str, ...]:
        return self.levels

    def outputs(self) -> tuple[str, ...]:
        if self.names is not None:
            return tuple(self.names)
        return (*(f"{self.col}_{_safe(c)}" for c in self.levels), f"{self.col}_between", f"{self.col}_within")

    @property
    def past_only(self) -> bool:
        return False

    def describe(self) -> str:
        if self.between == "baseline":
            return (f"{self.col!r} split into the subject-level part (the subject's first non-missing value "
                    f"(baseline)) and the within-subject deviation from it")
        rows = f" over the rows where {self.fit!r} is true" if self.fit is not None else ""
        if not self.levels:
            return (f"{self.col!r} split into the subject-level part (the subject's mean of its non-missing "
                    f"values{rows}) and the within-subject deviation from it")
        chain = " > ".join([*self.levels, "subject"])
        return (f"{self.col!r} split over the nested levels {chain}: the {self.levels[0]!r} mean, each inner "
                f"level's mean minus its parent's, and the row's deviation from the subject mean (means of "
                f"non-missing values{rows}; the parts add up to the value)")

    def compute(self, panel: Panel) -> Sequence[Any]:
        s = panel.subjects
        y = panel.columns.numeric(self.col)
        valid = ~np.isnan(y)
        if not self.levels and self.fit is None:
            if self.between == "baseline":
                level = K.take(y, K.first_index(s, valid))
            else:
                count = s.reduce(np.add, valid.astype("float64"))
                with np.errstate(divide="ignore", invalid="ignore"):
                    # add.reduceat sums each subject's slice pairwise: accurate without a correction pass
                    level = s.reduce(np.add, np.where(valid, y, 0.0)) / count
            return [level, y - level]
        return self._nested(panel, y, valid)

    def _nested(self, panel: Panel, y: np.ndarray, valid: np.ndarray) -> list[np.ndarray]:
        s = panel.subjects
        if panel.time_col in self.levels:
            raise OptionError(f"the time column {panel.time_col!r} cannot be a level")
        use = valid
        if self.fit is not None:
            true, _ = panel.columns.flags(self.fit)  # a missing flag does not count as fit
            use = valid & true
        table = pd.DataFrame({c: panel.columns.series(c) for c in self.levels})
        codes = [panel.sort(c) for c in level_codes(table, list(self.levels), self.codes)]
        for c, name in zip(codes, self.levels):
            if s.n and (np.minimum.reduceat(c, s.starts) != np.maximum.reduceat(c, s.starts)).any():
                moved = c != c[s.first]
                bad = np.unique(s.grp[moved])
                ids = panel.ids_at(s.starts[bad])
                raise NestingError(
                    rows_message(f"{len(bad)} subject(s) seen under more than one unit of level {name!r} "
                                 f"(a subject must sit in one {name!r})", name, int(moved.sum()), ids),
                    column=name, count=len(bad), ids=ids)
        codes.append(s.grp)
        # Unit means over the rows used, outermost first; with fit=, a unit with no row used
        # takes its parent's mean (what a model assumes for a unit it has not seen).
        top = np.nan
        if self.fit is not None and use.any():
            top = _means(y, use, np.zeros(s.n, dtype=np.int64), 1)[0]
        means: list[np.ndarray] = []
        for k, code in enumerate(codes):
            m = _means(y, use, code, int(code.max()) + 1 if s.n else 0)
            if self.fit is not None:
                empty = np.isnan(m)
                if k == 0:
                    m[empty] = top
                else:
                    parent = np.zeros(len(m), dtype=np.int64)
                    parent[code] = codes[k - 1]
                    m[empty] = means[k - 1][parent[empty]]
            means.append(m)
        at = [m[c] for m, c in zip(means, codes)]
        parts = [at[0], *(at[k] - at[k - 1] for k in range(1, len(at)))]
        return [*parts, y - at[-1]]


def _means(y: np.ndarray, use: np.ndarray, code: np.ndarray, k: int) -> np.ndarray:
    """Mean of y over the rows used, per unit code (NaN for a unit with none)."""
    w = use.astype(np.float64)
    yy = np.where(use, y, 0.0)
    n = np.bincount(code, weights=w, minlength=k)
    with np.errstate(divide="ignore", invalid="ignore"):
        m = np.bincount(code, weights=yy, minlength=k) / n
        fix = np.bincount(code, weights=np.where(use, yy - m[code], 0.0), minlength=k) / n  # one correction pass
    return m + fix


@checked_options
def within_between(
    col: str,
    between: Between = "mean",
    *,
    names: Sequence[str] | None = None,
    levels: Sequence[str] = (),
    fit: str | None = None,
    codes: Codes = "within_parent",
) -> WithinBetween:
    """Split ``col`` into a subject-level part and the within-subject deviation from it.

    Two outputs: the subject-level ("between") part on every row of the subject, and the
    deviation y - part ("within").  ``between="mean"`` (default) uses the subject's mean
    over its non-missing values: the centring behind fixed-effects ("within") estimates
    and the between/within split of covariates in mixed models.  ``between="baseline"``
    uses the subject's first non-missing value instead.

    **Nested levels.**  ``levels=["region", "clinic"]`` (outermost first) names the levels
    above the subject (the panel's id, the innermost level; occasions are the rows).  The
    outputs are then the region mean (``<col>_region``), the clinic mean minus the region
    mean (``<col>_clinic``), the subject mean minus the clinic mean (``<col>_between``)
    and the row minus the subject mean (``<col>_within``): they add up to the value (up to
    float rounding) and are uncorrelated across levels, so a model given all of them
    estimates a separate effect per level.  A level's mean is the mean of the values of
    all its rows (row-weighted).  Level codes may repeat across parents (clinic "C1" of
    two regions is two clinics; ``codes="unique"`` says a code names one unit and checks
    it); a level may be an id column (``id=["clinic", "pid"]``, ``levels=["clinic"]``); a
    subject seen under two units of a level is a :class:`~panelfx.NestingError` naming the
    subjects.  Output names are formula-safe (``Clinic ID`` gives ``<col>_clinic_id``).

    **fit=** names a true/false column: only the rows where it is true (missing counts
    as false) enter the means, and every row receives its parts, so means pooled over
    training subjects can be given to test subjects without leaking their values.  A unit
    with no such row takes its parent's mean (the outermost level: the mean of all rows
    used), so its own part is 0 and the deviation goes to the level below.

    Missing values: means ignore missing values; without ``fit``, a unit with no value
    gets missing parts on every row; the deviation is missing where y is.  Not past-only
    (the means use every occasion).  Output float64.  Default names: ``<col>_between``,
    ``<col>_within`` (after ``<col>_<level>`` for each level); ``names=`` sets them all.

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

    Two clinics, subject numbers restarting in each; the clinic mean comes from every row
    of the clinic:

    >>> df = pd.DataFrame({"clinic": ["A", "A", "A", "B", "B", "B"], "pid": [1, 1, 2, 1, 1, 2],
    ...                    "wk": [0, 1, 0, 0, 1, 0], "y": [1.0, 3.0, 8.0, 10.0, 12.0, 14.0]})
    >>> out = pfx.derive(df, pfx.within_between("y", levels=["clinic"]), id=["clinic", "pid"], time="wk")
    >>> out.drop(columns="wk")
      clinic  pid     y  y_clinic  y_between  y_within
    0      A    1   1.0       4.0       -2.0      -1.0
    1      A    1   3.0       4.0       -2.0       1.0
    2      A    2   8.0       4.0        4.0       0.0
    3      B    1  10.0      12.0       -1.0      -1.0
    4      B    1  12.0      12.0       -1.0       1.0
    5      B    2  14.0      12.0        2.0       0.0
    """
    return WithinBetween(col=col, between=between, names=names, levels=levels, fit=fit,  # type: ignore[arg-type]
                         codes=codes)
