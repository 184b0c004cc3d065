"""First and last dose: the subject's earliest start and latest end in a dosing table, on every row."""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from typing import Any, Literal

import numpy as np

from .._panel import Panel
from .._tables import NativeTimes, SideTake, TableUse, check_table_name
from .._time import INT_MAX
from .._transform import Transform, check_choice, check_column_name, check_name
from ..errors import OptionError
from .exposure import OPEN_END, intervals


@dataclasses.dataclass(frozen=True, kw_only=True)
class FirstDose(Transform):
    """Configured :func:`first_dose`."""

    type_name = "first_dose"
    table: str
    start: str
    name: str | None = None

    def __post_init__(self) -> None:
        check_table_name(self.table)
        check_column_name("start", self.start)
        check_name(self.name)

    def inputs(self) -> tuple[str, ...]:
        return ()

    def tables(self) -> tuple[TableUse, ...]:
        return (TableUse(self.table, self.start),)

    def outputs(self) -> tuple[str, ...]:
        return (self.name or f"{self.table}_first_dose",)

    @property
    def past_only(self) -> bool:
        return False  # the first dose may lie after the row

    def describe(self) -> str:
        return f"the subject's earliest {self.table}.{self.start} (uses the future)"

    def compute(self, panel: Panel) -> Sequence[Any]:
        view = panel.tables[self.table].view(self.start)
        g = view.g
        first = view.subjects.starts[np.maximum(g, 0)] if view.m else np.zeros(view.n, dtype=np.int64)
        return [SideTake(view, self.start, np.where(g >= 0, first, -1))]


@dataclasses.dataclass(frozen=True, kw_only=True)
class LastDose(Transform):
    """Configured :func:`last_dose`."""

    type_name = "last_dose"
    table: str
    start: str
    end: str | None = None
    supply: str | None = None
    open_end: Literal["error", "until_time"] = "error"
    name: str | None = None

    def __post_init__(self) -> None:
        check_table_name(self.table)
        check_column_name("start", self.start)
        for opt in ("end", "supply"):
            if getattr(self, opt) is not None:
                check_column_name(opt, getattr(self, opt))
        if (self.end is None) == (self.supply is None):
            raise OptionError("give end= (a column of end times) or supply= (a column of days' supply), exactly one")
        check_choice("open_end", self.open_end, OPEN_END)
        check_name(self.name)

    # the interval reading shared with exposure expects these
    inclusive = True
    overlap = "sum"

    def inputs(self) -> tuple[str, ...]:
        return ()

    def tables(self) -> tuple[TableUse, ...]:
        return (TableUse(self.table, self.start, (self.end,) if self.end else (),
                         (self.supply,) if self.supply else ()),)

    def outputs(self) -> tuple[str, ...]:
        return (self.name or f"{self.table}_last_dose",)

    @property
    def past_only(self) -> bool:
        return False

    def describe(self) -> str:
        end = f"{self.table}.{self.end}" if self.end else f"day of the last of {self.table}.{self.supply} days' supply"
        words = f"the subject's latest {end} (uses the future)"
        if self.open_end == "until_time":
            words += "; missing while a record has no end"
        return words

    def compute(self, panel: Panel) -> Sequence[Any]:
        view = panel.tables[self.table].view(self.start, (self.end,) if self.end else ())
        iv = intervals(view, self)
        g = view.g
        n = view.n
        if view.m == 0:
            return [NativeTimes(view.axis, np.zeros(n, dtype=view.qt.dtype), np.ones(n, dtype=bool))]
        open_value = np.inf if iv.end.dtype.kind == "f" else INT_MAX
        # the last covered day: the exclusive end minus the day added for an inclusive end
        last = np.where(iv.end == open_value, open_value, iv.end - iv.step)
        latest = np.maximum.reduceat(last, view.subjects.starts)
        per_row = latest[np.maximum(g, 0)]
        missing = (g < 0) | (per_row == open_value)
        if self.end is not None and not missing.all():
            # keep the end column's own dtype: the record holding the latest end
            order = np.lexsort((last, view.subjects.grp))
            row = order[view.subjects.ends - 1]
            rows = np.where(missing, -1, row[np.maximum(g, 0)])
            return [SideTake(view, self.end, rows)]
        return [NativeTimes(view.axis, np.where(missing, 0, per_row).astype(view.qt.dtype), missing)]


def first_dose(table: str, *, start: str, name: str | None = None) -> FirstDose:
    """The subject's earliest ``start`` in side table ``table`` (a dosing table), on every row.

    A subject-level reference time: use it with ``baseline(rule="last_before",
    reference=...)`` for the last value before the first dose, or for study days.
    Missing for subjects without records.  Keeps the start column's dtype.  Not
    past-only (the first dose may lie after the row).  Default name ``<table>_first_dose``.

    >>> import pandas as pd, panelfx as pfx
    >>> visits = pd.DataFrame({"pid": [1, 1, 2], "day": [0, 7, 0]})
    >>> ex = pd.DataFrame({"pid": [1, 1], "start": [5, 2], "end": [9, 4]})
    >>> pfx.derive(visits, pfx.first_dose("ex", start="start"), pfx.last_dose("ex", start="start", end="end"),
    ...            id="pid", time="day", tables={"ex": ex})
       pid  day  ex_first_dose  ex_last_dose
    0    1    0            2.0           9.0
    1    1    7            2.0           9.0
    2    2    0            NaN           NaN
    """
    return FirstDose(table=table, start=start, name=name)


def last_dose(table: str, *, start: str, end: str | None = None, supply: str | None = None,
              open_end: Literal["error", "until_time"] = "error", name: str | None = None) -> LastDose:
    """The subject's latest end of dosing in side table ``table`` (the last dosing day), on every row.

    From ``end`` (the record's last day, dtype kept) or ``supply`` (days' supply: the
    start plus supply - 1 days).  A record without an end is an error, or with
    ``open_end="until_time"`` (still running) makes the last dose missing.  Missing for
    subjects without records.  Not past-only.  Default name ``<table>_last_dose``.
    See :func:`first_dose` for an example.
    """
    return LastDose(table=table, start=start, end=end, supply=supply, open_end=open_end, name=name)


__all__ = ["first_dose", "last_dose", "FirstDose", "LastDose"]
