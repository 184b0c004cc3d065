"""A finding for :func:`panelfx.check`: interval data declared with its start column as time.

Data in (start, stop] form (one row per interval, an event on the interval it closes) have
two times per row.  Declared with ``time=start``, transforms of the event flag measure from
the wrong end of each interval (time since the previous event comes out longer by that
interval's length).  The sign of such data: another column of the same kind of times that is
never before the declared time, mostly after it, and equal to the next row's time of the
subject on most rows (intervals that follow each other).
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from typing import Any

import numpy as np
import pandas as pd

from ._panel import Panel
from ._time import time_kind
from .errors import PanelError

#: Shares of rows that make a column look like the stop of intervals (heuristic, common practice for such checks).
AFTER_SHARE = 0.9
CONTIGUOUS_SHARE = 0.5


def interval_columns(panel: Panel, id_cols: Sequence[str], time: str) -> list[tuple[str, int, int, int]]:
    """(column, rows equal to the next time, rows with a next time, first such sorted row) for each
    column that looks like the stop of intervals starting at ``time``."""
    frame = panel.frame
    s = panel.subjects
    has_next = np.ones(panel.n, dtype=bool)
    if panel.n:
        has_next[s.ends - 1] = False
    nxt = np.flatnonzero(has_next)
    if not len(nxt):
        return []
    key = panel.axis.key
    found = []
    for col in frame.columns:
        if col in id_cols or col == time:
            continue
        try:
            if time_kind(frame[col], "column") != panel.axis.kind:
                continue
            r, missing = panel.reference(col)
        except (PanelError, TypeError, ValueError, OverflowError):
            continue
        ok = ~missing
        if ok.sum() < 2 or (r[ok] < key[ok]).any() or (r[ok] > key[ok]).mean() < AFTER_SHARE:
            continue
        rows = nxt[ok[nxt]]
        equal = r[rows] == key[rows + 1]
        if len(rows) and equal.mean() >= CONTIGUOUS_SHARE:
            found.append((str(col), int(equal.sum()), len(rows), int(rows[0])))
    return found


def interval_findings(frame: pd.DataFrame, panel: Panel, positions: np.ndarray, id_cols: Sequence[str], time: str,
                      rows: Callable[..., pd.DataFrame]) -> list[pd.DataFrame]:
    """The ``interval_data`` warnings, one per suspicious column, on the first row it concerns."""
    out: list[Any] = []
    for col, equal, total, first in interval_columns(panel, id_cols, time):
        detail = (f"column {col!r} looks like the stop of (start, stop] intervals that begin at {time!r}: it is "
                  f"never before {time!r} and equals the next row's {time!r} on {equal} of {total} rows; events "
                  f"happen at the stop, so declare time={col!r} for transforms of an event flag (see the README: "
                  f"Interval data)")
        out.append(rows(frame, id_cols, time, positions[panel.original_positions(np.array([first]))],
                        "interval_data", detail))
    return out
