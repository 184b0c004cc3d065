"""Analysis visit: the planned visit whose window holds each occasion's study day."""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from typing import Any

import numpy as np
import pandas as pd

from .. import _visits as V
from .._panel import Panel
from .._transform import Transform, check_column_name, check_name
from ..errors import OptionError
from ..visit_windows import Windows
from ..visit_windows import windows as make_windows


def day_values(panel: Panel, day: str | None, what: str) -> np.ndarray:
    """Study days in sorted order (float64, NaN missing): the ``day`` column, or the time
    column itself when it holds numbers."""
    if day is None:
        if panel.time_kind != "number":
            raise OptionError(f"{what} needs day= (a column of study days, e.g. made by pfx.study_day) when the "
                              f"time column {panel.time_col!r} holds {panel.time_kind} values")
        return panel.columns.numeric(panel.time_col)
    return panel.columns.numeric(day)


def as_windows(rows: Any, overlap: str) -> Windows:
    return make_windows(rows, overlap=overlap)  # type: ignore[arg-type]


@dataclasses.dataclass(frozen=True, kw_only=True)
class AnalysisVisit(Transform):
    """Configured :func:`analysis_visit`."""

    type_name = "analysis_visit"
    windows: tuple[tuple[str, float | None, float | None, float], ...]
    overlap: str = "none"
    day: str | None = None
    outside: str | None = None
    name: str | None = None

    def __post_init__(self) -> None:
        w = as_windows(self.windows, self.overlap)
        object.__setattr__(self, "windows", w.items)
        if self.day is not None:
            check_column_name("day", self.day)
        check_name(self.name)
        if self.outside is not None:
            if not isinstance(self.outside, str) or not self.outside:
                raise OptionError(f"outside must be a label (non-empty text) or None, got {self.outside!r}")
            if self.outside in w.labels:
                raise OptionError(f"outside={self.outside!r} is also the label of a window")

    @property
    def value(self) -> Windows:
        """The windows as a :class:`~panelfx.visit_windows.Windows` value."""
        return Windows(self.windows, self.overlap)

    def inputs(self) -> tuple[str, ...]:
        return () if self.day is None else (self.day,)

    def outputs(self) -> tuple[str, ...]:
        p = self.name or "visit"
        return (p, f"{p}_number", f"{p}_target", f"{p}_distance")

    @property
    def past_only(self) -> bool:
        return True  # each row's own day and the fixed windows

    def describe(self) -> str:
        day = f"study day {self.day!r}" if self.day is not None else "the time column taken as study days"
        rule = "; where windows overlap, the window with the nearest target (the earlier on a tie)" \
            if self.overlap == "nearest_target" else ""
        out = f"labelled {self.outside!r}" if self.outside is not None else "missing"
        return (f"planned visit whose window (inclusive bounds) holds {day}{rule}; windows "
                f"{[list(r) for r in self.windows]}; days outside every window: {out}; with the visit number, "
                f"target day and distance to the target")

    def compute(self, panel: Panel) -> Sequence[Any]:
        w = self.value
        day = day_values(panel, self.day, "analysis_visit")
        k = V.assign(day, w)
        ok = k >= 0
        labels = w.labels + ([self.outside] if self.outside is not None else [])
        codes = k.copy()
        if self.outside is not None:
            codes[~ok & ~np.isnan(day)] = len(w)
        visit = pd.Categorical.from_codes(codes, categories=labels, ordered=True)
        number = np.where(ok, k + 1, 0)
        targets = np.array([r[3] for r in w.items], dtype=object)
        all_int = all(isinstance(r[3], int) for r in w.items)
        target = np.where(ok, targets[np.maximum(k, 0)].astype(np.float64), np.nan)
        dist = V.distance(day, k, w)
        if ok.all():
            return [visit, number, target.astype(np.int64) if all_int else target, dist]
        return [visit, np.where(ok, number, np.nan), target, dist]


def analysis_visit(
    windows: Windows | Sequence[Sequence[Any]],
    *,
    day: str | None = None,
    outside: str | None = None,
    name: str | None = None,
) -> AnalysisVisit:
    """The planned visit of each occasion: the window (see :func:`panelfx.windows`) that holds its study day.

    ``day`` names a column of study days (made by :func:`panelfx.study_day`, say); by
    default the time column itself, which must then hold numbers.  Bounds are inclusive;
    where windows overlap (``overlap="nearest_target"``) the window whose target is
    nearest wins, the earlier one on a tie.  Four columns: the visit label (an ordered
    categorical in visit order), the visit number (1, 2, ...), the target day and the
    distance |day - target| (day - target gives its sign).

    Missing values: a day outside every window, or a missing day, gets a missing visit,
    number, target and distance; with ``outside`` (e.g. ``"Unscheduled"``) a day outside
    every window gets that label instead (added as the last category), the other three
    stay missing.  Every occasion is assigned to at most one visit; several occasions can
    fall in one window (choose one with :func:`panelfx.visit_pick`).  Past-only.  Default
    names: ``visit``, ``visit_number``, ``visit_target``, ``visit_distance`` (``name``
    replaces the prefix).  Number and target are int64 when every row has a visit and
    the targets are whole numbers, else float64.

    >>> import pandas as pd, panelfx as pfx
    >>> w = pfx.windows([("Baseline", -7, 1, 1), ("Week 2", 8, 21, 15), ("Week 4", 22, 35, 29)])
    >>> df = pd.DataFrame({"pid": [1, 1, 1, 1, 2], "ady": [1, 12, 19, 50, 30]})
    >>> pfx.derive(df, pfx.analysis_visit(w, outside="Unscheduled"), id="pid", time="ady")
       pid  ady        visit  visit_number  visit_target  visit_distance
    0    1    1     Baseline           1.0           1.0             0.0
    1    1   12       Week 2           2.0          15.0             3.0
    2    1   19       Week 2           2.0          15.0             4.0
    3    1   50  Unscheduled           NaN           NaN             NaN
    4    2   30       Week 4           3.0          29.0             1.0
    """
    w = windows if isinstance(windows, Windows) else make_windows(windows)
    return AnalysisVisit(windows=w.items, overlap=w.overlap, day=day, outside=outside, name=name)
