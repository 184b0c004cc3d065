"""``visit_grid``: one row per subject and planned visit, missed visits included."""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np
import pandas as pd

from . import _visits as V
from ._columns import EXACT_FLOAT_INT
from ._frames import frames
from ._options import checked_options
from ._panel import Panel
from .errors import ColumnExistsError, OptionError
from .transforms.analysis_visit import day_values
from .transforms.visit_pick import VisitPick
from .visit_windows import Windows
from .visit_windows import windows as make_windows

#: Values of the ``record`` column, in this order.
RECORD_STATES = ["picked", "no value", "missed"]


@checked_options
@frames()
def visit_grid(
    frame: pd.DataFrame,
    windows: Windows | Sequence[Sequence[Any]],
    *,
    id: str | Sequence[str],
    time: str,
    pick: VisitPick,
    day: str | None = None,
    until: str | float | None = None,
    name: str = "visit",
) -> pd.DataFrame:
    """One row per subject and planned visit, carrying the record chosen for that visit.

    Each record is assigned to a planned visit as :func:`panelfx.analysis_visit` does
    (study days from ``day``, by default the time column, which must then hold numbers),
    and one record per visit is chosen as ``pick`` (a :func:`panelfx.visit_pick`) says,
    among the records where its column is present (its rule, ``prefer`` and ``day``; the
    visit and target come from ``windows``, not from the pick's ``visit=``/``target=``).

    Rows: for every subject, the planned visits from the first window up to the last window
    that starts on or before ``until`` (a number, or a column of study days constant
    within subject: end of study or discontinuation); without ``until``, or where the
    subject's ``until`` is missing, up to the last window that starts on or before the
    subject's last record.  Always at least the first window; later windows that hold a
    record appear too, so no chosen record is ever dropped.  Subjects in order of first
    appearance, visits in visit order.

    Columns: the id column(s); ``visit`` (the label, ordered categorical), ``visit_number``,
    ``visit_target`` (``name`` replaces the prefix ``visit``); ``record``: "picked" (a
    record was chosen), "no value" (the window holds records but none with the column
    present) or "missed" (no record in the window); then every other column of ``frame``
    from the chosen record, missing where none was chosen (integers become float64 there,
    as pandas does).  Records outside every window, and records not chosen, are not in
    the grid.  Impute on the grid with e.g. ``pfx.carry_forward(col, flag=True)`` and
    ``id``, ``time="visit_number"``.

    >>> import pandas as pd, panelfx as pfx
    >>> w = pfx.windows([("Baseline", -7, 1, 1), ("Week 2", 8, 21, 15), ("Week 4", 22, 35, 29)])
    >>> df = pd.DataFrame({"pid": [1, 1, 1, 2, 2], "ady": [1, 13, 16, 1, 30],
    ...                    "alt": [30.0, 41.0, 38.0, 25.0, None]})
    >>> pfx.visit_grid(df, w, id="pid", time="ady", pick=pfx.visit_pick("alt", "nearest", prefer="later"),
    ...                until=29)
       pid     visit  visit_number  visit_target    record   ady   alt
    0    1  Baseline             1             1    picked   1.0  30.0
    1    1    Week 2             2            15    picked  16.0  38.0
    2    1    Week 4             3            29    missed   NaN   NaN
    3    2  Baseline             1             1    picked   1.0  25.0
    4    2    Week 2             2            15    missed   NaN   NaN
    5    2    Week 4             3            29  no value   NaN   NaN
    """
    if not isinstance(pick, VisitPick):
        raise OptionError(f"pick must be a panelfx.visit_pick(...), got {type(pick).__name__}")
    w = windows if isinstance(windows, Windows) else make_windows(windows)
    if day is not None and pick.day is not None and day != pick.day:
        raise OptionError(f"day={day!r} and the pick's day={pick.day!r} differ: give one")
    day_col = day if day is not None else pick.day
    panel = Panel(frame, id=id, time=time)
    names = [name, f"{name}_number", f"{name}_target", "record"]
    clash = [c for c in names if c in frame.columns]
    if clash:
        raise ColumnExistsError(f"column {clash[0]!r} is already in the frame (made by analysis_visit?); drop it or "
                                f"choose another prefix with name=", column=clash[0], count=1)
    s = panel.subjects
    d = day_values(panel, day_col, "visit_grid")
    k = V.assign(d, w)
    lows, _, targets = w.bounds()
    target = np.where(k >= 0, targets[np.maximum(k, 0)], np.nan)
    value = panel.columns.numeric(pick.col) if pick.rule in ("max", "min") else None
    picked = V.pick(s, k, ~panel.columns.missing(pick.col), pick.rule, pick.prefer, value, d, target)

    # how many planned visits each subject gets
    n_sub = s.count
    last = _until(panel, until, d)
    with np.errstate(invalid="ignore"):
        due = np.where(np.isnan(last), 0, np.searchsorted(lows, last, side="right"))
    held = np.zeros(n_sub, dtype=np.int64)
    if panel.n:
        held = np.maximum.reduceat(k + 1, s.starts)
    n_rows = np.maximum(np.maximum(due, held), 1).astype(np.int64)
    g_start = np.cumsum(n_rows) - n_rows
    total = int(n_rows.sum())
    subj = np.repeat(np.arange(n_sub), n_rows)
    visit = np.arange(total) - g_start[subj]

    src = np.full(total, -1, dtype=np.int64)
    rows = np.flatnonzero(picked)
    src[g_start[s.grp[rows]] + k[rows]] = rows
    has = np.zeros(total, dtype=bool)
    inside = np.flatnonzero(k >= 0)
    has[g_start[s.grp[inside]] + k[inside]] = True
    state = np.where(src >= 0, 0, np.where(has, 1, 2))

    first_pos = panel.original_positions(s.starts[subj]) if total else np.zeros(0, dtype=np.int64)
    out: dict[str, Any] = {c: frame[c].take(first_pos).to_numpy() if isinstance(frame[c].dtype, np.dtype)
                           else frame[c].array.take(first_pos) for c in panel.id_cols}
    out[name] = pd.Categorical.from_codes(visit, categories=w.labels, ordered=True)
    out[f"{name}_number"] = visit + 1
    t = targets[visit]
    out[f"{name}_target"] = t.astype(np.int64) if all(isinstance(r[3], int) for r in w.items) else t
    out["record"] = pd.Categorical.from_codes(state, categories=RECORD_STATES)
    caller = np.where(src >= 0, panel.original_positions(np.maximum(src, 0)), -1) if total else src
    for c in frame.columns:
        if c not in panel.id_cols:
            out[c] = _take(frame[c], caller)
    return pd.DataFrame(out, index=pd.RangeIndex(total))


def _until(panel: Panel, until: str | float | None, day: np.ndarray) -> np.ndarray:
    """Per subject: the study day that ends planned follow-up (NaN: none)."""
    s = panel.subjects
    if s.n == 0:
        return np.zeros(0)
    last = np.fmax.reduceat(day, s.starts) if s.n else np.zeros(0)  # the last record's day, NaN ignored
    if until is None:
        return last
    if isinstance(until, str):
        u = panel.columns.numeric(until)
        u, none = V.subject_reference(u, np.isnan(u), s, until, panel.ids_at)
        end = u[s.starts]
        return np.where(none[s.starts], last, end)
    if isinstance(until, bool) or not isinstance(until, (int, float, np.integer, np.floating)) or np.isnan(until):
        raise OptionError(f"until must be a number (a study day) or a column of them, got {until!r}")
    return np.full(s.count, float(until))


def _take(series: pd.Series, positions: np.ndarray) -> Any:
    """Values at caller positions (-1: missing), dtype kept where it can hold a missing value."""
    values = series.to_numpy() if isinstance(series.dtype, np.dtype) else series.array
    if isinstance(values, np.ndarray) and values.dtype.kind in "iu" and (positions < 0).any() \
            and values.size and (values.max() > EXACT_FLOAT_INT or values.min() < -EXACT_FLOAT_INT):
        values = pd.array(values, dtype=f"{'U' if values.dtype.kind == 'u' else ''}Int64")
    return pd.api.extensions.take(values, positions, allow_fill=True)


__all__ = ["visit_grid", "RECORD_STATES"]
