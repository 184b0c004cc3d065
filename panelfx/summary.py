"""``subject_summary``: one row per subject describing its follow-up and trajectories."""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np
import pandas as pd

from . import _kernels as K
from ._frames import frames
from ._options import checked_options
from ._panel import Panel, require_columns
from .errors import ColumnExistsError, NotConstantError, OptionError, rows_message

#: Statistics reported per value column, in order (column names ``<col>_<stat>``).
STATS = ("n", "first", "last", "mean", "slope", "auc")

#: Statistics given on request (``stats=``), in the order ``stats="all"`` lists them.
EXTRA_STATS = ("min", "max", "time_of_min", "time_of_max", "auc_from", "time_above", "time_below", "last_before")

#: Extra statistics an option switches on when ``stats`` is left at None.
NEEDS = {"auc_from": "area_from", "time_above": "threshold", "time_below": "threshold", "last_before": "before"}


@checked_options
@frames()
def subject_summary(
    frame: pd.DataFrame,
    cols: str | Sequence[str],
    *,
    id: str | Sequence[str],
    time: str,
    unit: str | None = None,
    stats: str | Sequence[str] | None = None,
    area_from: Any = None,
    value_at_start: float | None = None,
    threshold: float | None = None,
    before: Any = None,
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

    More statistics on request: ``stats=`` a list of names (from the six above and the
    ones below, in the order wanted) or ``"all"``; left at None, the six above plus those
    switched on by the options given:

    - ``min``, ``max``: smallest and largest value (the peak); ``time_of_min``,
      ``time_of_max``: the time of the first occasion reaching it, in the time column's
      dtype (the time of peak);
    - ``auc_from``: area under the straight lines joining the values from the time
      ``area_from`` (default 0 for numeric times; a time, or a column holding one per
      subject, e.g. a dose time) to the last value; the value at the start is
      interpolated between the occasions around it; with no occasion at or before the
      start it is ``value_at_start`` if given (0 for a pre-dose concentration, say), else
      the area is missing; with no occasion after the start the area is 0 if one is at
      the start, else missing.  Occasions before the start only serve the interpolation;
    - ``time_above``, ``time_below``: time spent strictly above / below ``threshold``
      during follow-up (first to last value), following the straight lines (a crossing
      inside an interval is placed by linear interpolation);
    - ``last_before``: last value on or before the time ``before`` (a time or a column
      holding one per subject).

    Start and reference times compare exactly; for datetimes they are taken at the time
    column's resolution (rounded down).  Areas and times are in the units of
    ``follow_up``.  Pharmacokinetics: ``stats=["max", "time_of_max", "auc_from"]`` gives
    the peak concentration, the time of peak and the area from time 0 to the last sample.

    >>> import pandas as pd, panelfx as pfx
    >>> df = pd.DataFrame({"pid": [1, 1, 1, 2, 2], "day": [0, 10, 20, 0, 5],
    ...                    "hb": [12.0, 13.0, 15.0, 11.0, None]})
    >>> pfx.subject_summary(df, "hb", id="pid", time="day")
       pid  n_occasions  first_time  last_time  follow_up  hb_n  hb_first  hb_last    hb_mean  hb_slope  hb_auc
    0    1            3           0         20       20.0     3      12.0     15.0  13.333333      0.15   265.0
    1    2            2           0          5        5.0     1      11.0     11.0  11.000000       NaN     0.0

    Concentrations sampled after a dose at time 0 (hours):

    >>> pk = pd.DataFrame({"pid": [1, 1, 1, 1], "h": [0.0, 1.0, 2.0, 4.0], "conc": [0.0, 8.0, 6.0, 2.0]})
    >>> pfx.subject_summary(pk, "conc", id="pid", time="h", stats=["max", "time_of_max", "auc_from"])
       pid  n_occasions  first_time  last_time  follow_up  conc_max  conc_time_of_max  conc_auc_from
    0    1            4         0.0        4.0        4.0       8.0               1.0           19.0
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
    wanted = _wanted(stats, panel, area_from=area_from, threshold=threshold, before=before)
    opts = _options(panel, wanted, area_from=area_from, value_at_start=value_at_start, threshold=threshold,
                    before=before)
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
        y = panel.columns.numeric(c)
        found = _column_stats(panel, y, x_all, n_sub)
        found.update(_extra_stats(panel, y, x_all, n_sub, wanted, opts))
        for stat in wanted:
            key = f"{c}_{stat}"
            if key in out:
                raise ColumnExistsError(f"summary column {key!r} would appear twice; rename {c!r}", column=key,
                                        count=1)
            out[key] = found[stat]
    return pd.DataFrame(out)


def _wanted(stats: Any, panel: Panel, **options: Any) -> list[str]:
    """The statistics asked for, in order; an option a statistic needs must be given."""
    known = (*STATS, *EXTRA_STATS)
    numeric = panel.time_kind == "number"
    if stats is None:
        return [*STATS, *(s for s in EXTRA_STATS if s in NEEDS and options[NEEDS[s]] is not None)]
    if stats == "all":
        return [*STATS, *(s for s in EXTRA_STATS if s not in NEEDS or options[NEEDS[s]] is not None
                          or (s == "auc_from" and numeric))]
    chosen = [stats] if isinstance(stats, str) else stats
    if not isinstance(chosen, (list, tuple)) or not chosen or not all(isinstance(x, str) for x in chosen) \
            or len(set(chosen)) != len(chosen):
        raise OptionError(f"stats must be 'all' or a list of different statistics from {list(known)}, got {stats!r}")
    bad = [x for x in chosen if x not in known]
    if bad:
        raise OptionError(f"unknown statistic {bad[0]!r}; choose from {list(known)} or 'all'")
    for x in chosen:
        need = NEEDS.get(x)
        if need is not None and options[need] is None and not (x == "auc_from" and numeric):
            raise OptionError(f"statistic {x!r} needs {need}=")
    return list(chosen)


def _options(panel: Panel, wanted: list[str], *, area_from: Any, value_at_start: Any, threshold: Any,
             before: Any) -> dict[str, Any]:
    """Start and reference times per row (sorted order) and the threshold, checked."""
    opts: dict[str, Any] = {}
    for name, value in (("value_at_start", value_at_start), ("threshold", threshold)):
        if value is not None and (isinstance(value, bool) or not isinstance(value, (int, float, np.integer,
                                                                                    np.floating))
                                  or not np.isfinite(value)):
            raise OptionError(f"{name} must be a finite number, got {value!r}")
    opts["value_at_start"] = None if value_at_start is None else float(value_at_start)
    opts["threshold"] = None if threshold is None else float(threshold)
    if "auc_from" in wanted:
        opts["start"] = _times_per_row(panel, 0 if area_from is None else area_from, "area_from")
    if "last_before" in wanted:
        opts["before"] = _times_per_row(panel, before, "before")
    return opts


def _times_per_row(panel: Panel, value: Any, what: str) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """A time option (a value, or a column constant within subject) per sorted row as
    (r, exact, elapsed, missing): key <= r exactly when the row is at or before it, exact
    when it falls on the axis' scale, elapsed its time since the subject's first occasion."""
    axis = panel.axis
    n = panel.n
    if isinstance(value, str) and value in panel.frame.columns:
        require_columns(panel.frame, [value], what)
        r, missing = panel.reference(value)
        series = panel.sort(panel.columns.series(value).to_numpy())
        if n:
            s = panel.subjects
            differs = (r != r[s.first]) | (missing != missing[s.first])
            if differs.any():
                ids = panel.ids_at(np.flatnonzero(differs))
                raise NotConstantError(rows_message(f"{what} column varies within subject", value,
                                                    int(differs.sum()), ids), column=value,
                                       count=int(differs.sum()), ids=ids)
    else:
        if isinstance(value, str) and axis.kind == "number":
            raise OptionError(f"{what}={value!r} is not a column of the frame")
        one, gone = axis.reference(pd.Series([value], name=what))
        if gone[0]:
            raise OptionError(f"{what} is missing")
        r, missing = np.full(n, one[0]), np.zeros(n, dtype=bool)
        series = np.full(n, value, dtype=object)
    t_first = axis.t[panel.subjects.first] if n else axis.t[:0]
    if axis.kind == "number":
        x = pd.to_numeric(pd.Series(series)).to_numpy(dtype=np.float64, na_value=np.nan)
        if axis.binary:
            exact = (r >= 0) & (axis.distinct[np.clip(r, 0, max(len(axis.distinct) - 1, 0))] == x) \
                if len(axis.distinct) else np.zeros(n, dtype=bool)
            elapsed = x - t_first
        else:
            scale = axis.scale or 1
            with np.errstate(invalid="ignore", over="ignore"):
                exact = np.rint(x * scale) / scale == x
            elapsed = np.where(exact, axis.duration(r - t_first), x - axis.duration(t_first))
    else:  # datetimes: the start is taken at the column's resolution
        exact = ~missing
        elapsed = axis.duration(r - t_first)
    elapsed = np.where(missing, np.nan, elapsed)
    return r, exact & ~missing, elapsed, missing


def _extra_stats(panel: Panel, y: np.ndarray, x: np.ndarray, n_sub: int, wanted: list[str],
                 opts: dict[str, Any]) -> dict[str, Any]:
    out: dict[str, Any] = {}
    s = panel.subjects
    valid = ~np.isnan(y)
    starts = panel.starts
    empty = panel.n == 0
    if {"min", "max", "time_of_min", "time_of_max"} & set(wanted):
        for stat, ufunc in (("min", np.fmin), ("max", np.fmax)):
            peak = ufunc.reduceat(y, starts) if not empty else np.zeros(0)
            out[stat] = peak
            if f"time_of_{stat}" in wanted:
                hit = valid & (y == peak[panel.grp]) if not empty else valid
                rows = K.first_index(s, hit)[starts] if not empty else np.zeros(0, dtype=np.int64)
                out[f"time_of_{stat}"] = _time_at(panel, rows)
    if "auc_from" in wanted:
        out["auc_from"] = _area_from(panel, y, x, valid, opts)
    if "time_above" in wanted or "time_below" in wanted:
        c = opts["threshold"]
        g = panel.grp[valid]
        a, b, xv = y[valid][:-1], y[valid][1:], x[valid]
        dt = xv[1:] - xv[:-1]
        same = g[1:] == g[:-1]
        n = np.bincount(g, minlength=n_sub)
        for stat, hi, lo in (("time_above", a, b), ("time_below", -a, -b)):
            cc = c if stat == "time_above" else -c
            # share of the interval on the far side of the threshold, along the straight line
            with np.errstate(invalid="ignore", divide="ignore"):
                share = np.where((hi > cc) & (lo > cc), 1.0,
                                 np.where((hi <= cc) & (lo <= cc), 0.0,
                                          (np.maximum(hi, lo) - cc) / np.abs(lo - hi)))
            t = np.bincount(g[1:][same], weights=(share * dt)[same], minlength=n_sub).astype(np.float64)
            t[n == 0] = np.nan
            out[stat] = t
    if "last_before" in wanted:
        r, _, _, missing = opts["before"]
        rows = K.last_index_in_subject(s, valid & (panel.axis.key <= r) & ~missing)[starts] if not empty \
            else np.zeros(0, dtype=np.int64)
        out["last_before"] = K.take(y, rows)
    return out


def _time_at(panel: Panel, rows: np.ndarray) -> pd.Series:
    """The time column's values at sorted rows (-1: missing), in the column's dtype where it
    can hold a missing value."""
    col = panel.frame[panel.time_col]
    pos = panel.original_positions(np.maximum(rows, 0)) if len(rows) else np.zeros(0, dtype=np.int64)
    return col.iloc[pos].reset_index(drop=True).where(pd.Series(rows >= 0))


def _area_from(panel: Panel, y: np.ndarray, x: np.ndarray, valid: np.ndarray, opts: dict[str, Any]) -> np.ndarray:
    """Area from the start to the last value (see subject_summary)."""
    s = panel.subjects
    n_sub = panel.n_subjects
    if panel.n == 0:
        return np.zeros(0)
    r, exact, start, missing = opts["start"]
    key = panel.axis.key
    after = valid & (key > r)
    at_or_before = valid & (key <= r)
    last_before = K.last_index_in_subject(s, at_or_before)[panel.starts]
    first_after = K.first_index(s, after)[panel.starts]
    s0 = start[panel.starts]
    # whole intervals after the start
    g = panel.grp[after]
    ya, xa = y[after], x[after]
    same = g[1:] == g[:-1]
    area = np.bincount(g[1:][same], weights=((ya[1:] + ya[:-1]) * 0.5 * (xa[1:] - xa[:-1]))[same],
                       minlength=n_sub).astype(np.float64)
    # the interval from the start to the first value after it
    yl, xl = K.take(y, last_before), K.take(x, last_before)
    yf, xf = K.take(y, first_after), K.take(x, first_after)
    with np.errstate(invalid="ignore", divide="ignore"):
        at_start = np.where(last_before >= 0, yl + (yf - yl) * ((s0 - xl) / (xf - xl)), np.nan)
    at_start = np.where((last_before >= 0) & (xl == s0), yl, at_start)
    if opts["value_at_start"] is not None:
        at_start = np.where(last_before < 0, opts["value_at_start"], at_start)
    area += (at_start + yf) * 0.5 * (xf - s0)
    # nothing after the start: 0 when a value is at the start exactly, else missing
    on_start = (last_before >= 0) & (key[np.maximum(last_before, 0)] == r[panel.starts]) & exact[panel.starts]
    area = np.where(first_after < 0, np.where(on_start, 0.0, np.nan), area)
    area[missing[panel.starts]] = np.nan
    return area


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
