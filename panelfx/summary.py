"""``subject_summary``: one row per subject describing its follow-up and trajectories."""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pandas as pd

from . import _kernels as K
from ._panel import Panel, require_columns
from .errors import ColumnExistsError, OptionError

#: Statistics reported per value column, in order (column names ``<col>_<stat>``).
STATS = ("n", "first", "last", "mean", "slope", "auc")


def subject_summary(
    frame: pd.DataFrame,
    cols: str | Sequence[str],
    *,
    id: str | Sequence[str],
    time: str,
    unit: str | None = None,
) -> pd.DataFrame:
    """One row per subject: its follow-up and, for each column of ``cols``, a trajectory summary.

    Columns: the id column(s); ``n_occasions`` (rows of the subject); ``first_time`` and
    ``last_time`` (in the time column's dtype); ``follow_up`` (last - first time, float64
    in the time column's units, or in ``unit``, default days, for datetimes); then for
    each value column ``<col>_n`` (non-missing values), ``<col>_first`` and
    ``<col>_last`` (first and last non-missing values), ``<col>_mean``, ``<col>_slope``
    (ordinary least-squares slope of the value on time, per unit of time) and
    ``<col>_auc`` (area under the straight lines joining the values, trapezoid rule, in
    value x time units).

    Missing values: every statistic of a column uses only the occasions where it is
    present, so the area joins the neighbours of a missing occasion by a straight line
    and runs from the first to the last non-missing occasion.  With no value, all are
    missing (``<col>_n`` is 0); with one, the slope is missing and the area 0.  Subjects
    come in order of first appearance in ``frame``; the index is 0, 1, 2, ...

    >>> import pandas as pd, panelfx as pfx
    >>> df = pd.DataFrame({"pid": [1, 1, 1, 2, 2], "day": [0, 10, 20, 0, 5],
    ...                    "hb": [12.0, 13.0, 15.0, 11.0, None]})
    >>> pfx.subject_summary(df, "hb", id="pid", time="day")
       pid  n_occasions  first_time  last_time  follow_up  hb_n  hb_first  hb_last    hb_mean  hb_slope  hb_auc
    0    1            3           0         20       20.0     3      12.0     15.0  13.333333      0.15   265.0
    1    2            2           0          5        5.0     1      11.0     11.0  11.000000       NaN     0.0
    """
    panel = Panel(frame, id=id, time=time, unit=unit)
    columns = [cols] if isinstance(cols, str) else list(cols)
    if not columns or not all(isinstance(c, str) for c in columns):
        raise OptionError(f"cols must be a column name or a list of column names, got {cols!r}")
    if len(set(columns)) != len(columns):
        raise OptionError(f"cols names a column twice: {columns!r}")
    require_columns(frame, columns, "value")
    for c in columns:
        if c in (*panel.id_cols, panel.time_col):
            raise OptionError(f"cols includes the id or time column {c!r}")

    n_sub = panel.n_subjects
    ends = panel.ends[:n_sub]  # the panel's ends hold one entry even for an empty frame
    first_rows = panel.original_positions(panel.starts)
    last_rows = panel.original_positions(ends - 1)
    out: dict[str, object] = {}
    for c in panel.id_cols:
        out[c] = frame[c].iloc[first_rows].reset_index(drop=True)
    out["n_occasions"] = (ends - panel.starts).astype(np.int64)
    out["first_time"] = frame[time].iloc[first_rows].reset_index(drop=True)
    out["last_time"] = frame[time].iloc[last_rows].reset_index(drop=True)
    t0 = panel.t[panel.starts]
    out["follow_up"] = panel.axis.elapsed(panel.t[ends - 1], t0)
    # Time from the subject's first occasion keeps the slope sums on small numbers.
    x_all = panel.elapsed_since(panel.subjects.first)
    for c in columns:
        stats = _column_stats(panel, panel.columns.numeric(c), x_all, n_sub)
        for stat in STATS:
            key = f"{c}_{stat}"
            if key in out:
                raise ColumnExistsError(f"summary column {key!r} would appear twice; rename {c!r}", column=key,
                                        count=1)
            out[key] = stats[stat]
    return pd.DataFrame(out)


def _column_stats(panel: Panel, y: np.ndarray, x_all: np.ndarray, n_sub: int) -> dict[str, np.ndarray]:
    valid = ~np.isnan(y)
    g = panel.grp[valid]
    yv, x = y[valid], x_all[valid]
    n = np.bincount(g, minlength=n_sub).astype(np.int64)
    with np.errstate(divide="ignore", invalid="ignore"):
        mean = np.bincount(g, weights=yv, minlength=n_sub) / n
        mean = mean + np.bincount(g, weights=yv - mean[g], minlength=n_sub) / n  # one correction pass
        xm = np.bincount(g, weights=x, minlength=n_sub) / n
        dx, dy = x - xm[g], yv - mean[g]
        sxx = np.bincount(g, weights=dx * dx, minlength=n_sub)
        slope = np.bincount(g, weights=dx * dy, minlength=n_sub) / sxx
    slope[n < 2] = np.nan
    # Trapezoids between consecutive non-missing occasions of the same subject.
    same = g[1:] == g[:-1]
    area = (yv[1:] + yv[:-1]) * 0.5 * (x[1:] - x[:-1])
    auc = np.bincount(g[1:][same], weights=area[same], minlength=n_sub).astype("float64")  # int when empty
    auc[n == 0] = np.nan
    if panel.n:
        first = K.take(y, K.first_index(panel.subjects, valid)[panel.starts])
        last = K.take(y, K.last_index_in_subject(panel.subjects, valid)[panel.starts])
    else:
        first = last = np.zeros(0)
    return {"n": n, "first": first, "last": last, "mean": mean, "slope": slope, "auc": auc}


__all__ = ["subject_summary"]
