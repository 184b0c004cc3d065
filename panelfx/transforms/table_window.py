"""Table window: a statistic over a side table's records (events, doses) in a window ending at each row."""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from typing import Any, Literal

import numpy as np

from .. import _windows as W
from .._options import checked_options
from .._panel import Panel
from .._tables import Flags, TableUse, check_table_name
from .._transform import Transform, check_choice, check_column_name, check_int, check_name
from ..errors import OptionError
from ._spans import check_span, span_label
from .as_of import _plus_one

STATS = ("count", "sum", "mean", "min", "max", "any")
CLOSED = W.CLOSED
_WORDS = {"count": "number", "sum": "sum", "mean": "mean", "min": "minimum", "max": "maximum", "any": "any true"}


@dataclasses.dataclass(frozen=True, kw_only=True)
class TableWindow(Transform):
    """Configured :func:`table_window`."""

    type_name = "table_window"
    table: str
    col: str | None = None
    stat: Literal["count", "sum", "mean", "min", "max", "any"] = "count"
    time: str
    span: str | float | None = None
    closed: Literal["right", "both", "left", "neither"] = "right"
    min_valid: int = 1
    name: str | None = None

    def __post_init__(self) -> None:
        check_table_name(self.table)
        if self.col is not None:
            check_column_name("col", self.col)
        check_column_name("time", self.time)
        check_name(self.name)
        check_choice("stat", self.stat, STATS)
        if self.stat in ("sum", "mean", "min", "max") and self.col is None:
            raise OptionError(f"stat={self.stat!r} needs col= (a column of the side table)")
        if self.span is not None:
            object.__setattr__(self, "span", check_span("span", self.span))
        check_choice("closed", self.closed, CLOSED)
        if self.span is None and self.closed in ("both", "neither"):
            raise OptionError(f"closed={self.closed!r} needs span=; without a span the window is everything so "
                              f"far: closed='right' (at or before t) or 'left' (strictly before t)")
        check_int("min_valid", self.min_valid, minimum=0)

    def inputs(self) -> tuple[str, ...]:
        return ()

    def tables(self) -> tuple[TableUse, ...]:
        return (TableUse(self.table, self.time, (), (self.col,) if self.col else ()),)

    def outputs(self) -> tuple[str, ...]:
        if self.name:
            return (self.name,)
        window = "sofar" if self.span is None else span_label(self.span)
        prior = "_prior" if self.closed in ("left", "neither") else ""
        return (f"{self.col or self.table}_{self.stat}_{window}{prior}",)

    @property
    def past_only(self) -> bool:
        return True

    def describe(self) -> str:
        left = "[" if self.closed in ("both", "left") else "("
        right = "]" if self.closed in ("both", "right") else ")"
        window = f"times in {left}t - {self.span}, t{right}" if self.span is not None else \
            ("times up to t" if self.closed == "right" else "times before t")
        what = f"records of side table {self.table!r}" if self.col is None and self.stat == "count" else \
            f"non-missing values of {self.table}.{self.col}" if self.stat == "count" else \
            f"records of side table {self.table!r}" if self.col is None else f"{self.table}.{self.col}"
        words = f"{_WORDS[self.stat]} of {what} of the subject with {window} (record time {self.time!r})"
        if self.stat not in ("count",) and not (self.stat == "any" and self.col is None):
            words += f"; missing when fewer than {self.min_valid} non-missing value(s)"
        return words

    def compute(self, panel: Panel) -> Sequence[Any]:
        view = panel.tables[self.table].view(self.time)
        n, m = view.n, view.m
        g = view.g
        has = g >= 0
        upto = _plus_one(view.qkey) if self.closed in ("right", "both") else view.qkey
        hi = view.first_at_or_after(upto)
        if self.span is None:
            lo = np.where(has, view.subjects.starts[np.maximum(g, 0)] if m else 0, 0)
        else:
            span = view.span(self.span, "span")
            lo = view.first_at_or_after(view.back(span, strict=self.closed in ("right", "neither")))
        lo = np.where(has, np.minimum(lo, hi), 0)
        hi = np.where(has, hi, 0)
        length = hi - lo
        lo[length == 0] = 0  # empty windows point at no record (the prefix sums index lo and hi - 1)
        hi[length == 0] = 0
        b = W.Bounds(lo=lo, stop=hi, length=length, end=0,
                     width=max(W.DIRECT_MAX + 1, int(length.max()) if n else 0))
        if self.col is None:
            if self.stat == "any":
                return [length > 0]
            return [length.astype(np.int64)]
        if self.stat == "any":
            true, missing = view.columns.flags(self.col)
            valid = ~missing
            cnt = _count(b, valid, m)
            hits = _count(b, true, m)
            return [Flags(hits > 0, cnt < max(self.min_valid, 0))]
        y = view.columns.numeric(self.col)
        valid = ~np.isnan(y)
        cnt = _count(b, valid, m)
        if self.stat == "count":
            return [cnt]
        if m == 0:
            return [np.full(n, 0.0 if self.stat == "sum" and self.min_valid == 0 else np.nan)]
        if self.stat in ("min", "max"):
            out = _extreme(b, y, np.fmin if self.stat == "min" else np.fmax)
        else:
            infinite = np.isinf(y)
            out = W.total(view.subjects, b, np.where(valid & ~infinite, y, 0.0))
            if infinite.any():  # IEEE sums: +inf wins, unless -inf is there too
                up = _count(b, y == np.inf, m) > 0
                down = _count(b, y == -np.inf, m) > 0
                out = np.where(up & down, np.nan, np.where(up, np.inf, np.where(down, -np.inf, out)))
            if self.stat == "mean":
                with np.errstate(invalid="ignore", divide="ignore"):
                    out = out / cnt
        out[cnt < self.min_valid] = np.nan
        return [out]


def _extreme(b: W.Bounds, y: np.ndarray, ufunc: np.ufunc) -> np.ndarray:
    """Minimum (``np.fmin``) or maximum (``np.fmax``) of the non-missing records of each window:
    a sparse table over the records (level k: extreme of 2**k consecutive records), each
    window answered at its own level by two overlapping blocks.  O(m log w)."""
    out = np.full(len(b.lo), np.nan)
    has = b.length > 0
    if not has.any():
        return out
    m = y.size
    level_of = np.frexp(np.maximum(b.length, 1))[1] - 1  # floor(log2(length)), exact
    top = int(level_of[has].max())
    level = y.astype(np.float64, copy=True)
    h = 1
    for k in range(top + 1):
        rows = np.flatnonzero(has & (level_of == k))
        lo = b.lo[rows]
        out[rows] = ufunc(level[lo], level[lo + b.length[rows] - h])
        if k < top:
            ufunc(level[: m - h], level[h:], out=level[: m - h])
            h *= 2
    return out


def _count(b: W.Bounds, mask: np.ndarray, m: int) -> np.ndarray:
    if m == 0:
        return np.zeros(len(b.lo), dtype=np.int64)
    return W.count(b, mask)


@checked_options
def table_window(
    table: str,
    col: str | None = None,
    stat: Literal["count", "sum", "mean", "min", "max", "any"] = "count",
    *,
    time: str,
    span: str | float | None = None,
    closed: Literal["right", "both", "left", "neither"] = "right",
    min_valid: int = 1,
    name: str | None = None,
) -> TableWindow:
    """A statistic over the records of side table ``table`` in a window ending at each row's time:
    events between visits, doses in the last week, the worst result so far.

    For each row (subject i, time t): the records of subject i in ``table`` (passed as
    ``derive(..., tables={table: frame})``; ``time`` names its time column) with times in
    the window.  ``span`` (a number, or a span such as ``"30D"``): ``closed="right"``
    (default) (t - span, t], ``"both"`` [t - span, t], ``"left"`` [t - span, t),
    ``"neither"`` (t - span, t); no span: every record so far, at or before t (``"left"``:
    strictly before t).

    Statistics: ``"count"`` (records, or with ``col`` the non-missing values of ``col``;
    never missing), ``"sum"``, ``"mean"``, ``"min"``, ``"max"`` (of the non-missing
    values of ``col``) and ``"any"`` (``col`` a true/false column: any true value; without
    ``col``: any record).  Every statistic but count (and any without ``col``) is missing
    when the window holds fewer than ``min_valid`` (default 1) non-missing values, so a sum
    over no record is 0 only with ``min_valid=0``.  Subjects with no record count 0.
    Tied records all count.  Past-only.  Outputs: int64 counts, float64 sums, means,
    minima and maxima, booleans for ``any``.  Default name:
    ``<col or table>_<stat>_<span or sofar>``, ``_prior`` added when t is left out.

    >>> import pandas as pd, panelfx as pfx
    >>> visits = pd.DataFrame({"pid": [1, 1, 1, 2], "day": [0, 14, 28, 0]})
    >>> ae = pd.DataFrame({"pid": [1, 1, 1, 3], "onset": [3, 14, 20, 1], "grade": [1, 3, 2, 4]})
    >>> pfx.derive(visits, pfx.table_window("ae", time="onset", span=14),
    ...            pfx.table_window("ae", "grade", "max", time="onset"),
    ...            id="pid", time="day", tables={"ae": ae})
       pid  day  ae_count_14  grade_max_sofar
    0    1    0            0              NaN
    1    1   14            2              3.0
    2    1   28            1              3.0
    3    2    0            0              NaN
    """
    return TableWindow(table=table, col=col, stat=stat, time=time, span=span, closed=closed,
                       min_valid=min_valid, name=name)


__all__ = ["table_window", "TableWindow"]
