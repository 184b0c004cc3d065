"""``grid``: every subject's trajectory at common times, long or as a subject x time matrix."""

from __future__ import annotations

import math
from collections.abc import Sequence
from fractions import Fraction
from typing import Any, Literal

import numpy as np
import pandas as pd

from ._frames import frames
from ._options import checked_options
from ._panel import Panel, require_columns
from ._time import decimal_scale, exact_number
from ._transform import check_bool, check_choice
from .errors import ColumnExistsError, OptionError

METHODS = ("linear", "carry", "nearest")
SHAPES = ("long", "wide")
Method = Literal["linear", "carry", "nearest"]
Shape = Literal["long", "wide"]

#: Most grid times one call makes (a guard against an ``every`` far too small).
MAX_POINTS = 100_000


@checked_options
@frames()
def grid(
    frame: pd.DataFrame,
    col: str | Sequence[str],
    *,
    id: str | Sequence[str],
    time: str,
    at: Sequence[Any] | None = None,
    every: Any = None,
    start: Any = None,
    method: Method = "linear",
    within: Any = None,
    extrapolate: bool = False,
    shape: Shape = "long",
) -> pd.DataFrame:
    """Each subject's values of ``col`` at common times: the grid ``at``, or every ``every``.

    ``at``: the grid times, in the time column's kind (numbers, datetimes, timedeltas);
    ``every``: a step (a number, or a span such as ``"7D"`` for datetimes) from ``start``
    (default: the earliest time in the frame) up to the latest time.  ``method``:

    - ``"linear"``: straight line between the two observations around the grid time
      (the observed value at an observed time);
    - ``"carry"``: the last observation at or before the grid time;
    - ``"nearest"``: the observation nearest in time (the earlier one on a tie).

    Only non-missing values count as observations.  A subject's *follow-up* for a column
    runs from its first to its last observation of it: outside it the value is missing
    (no extrapolation), unless ``extrapolate=True``, which holds the first observation
    before the follow-up ("linear", "nearest"; "carry" has nothing to carry there) and the
    last one after it (every method).  ``within`` (a number, or a span for datetimes)
    leaves the value missing where the observation it is taken from is farther than
    ``within`` from the grid time: for "carry" the one carried, for "linear" the nearer
    of the two used, for "nearest" the nearest.  Times compare exactly (decimal numbers
    as written; datetimes at the column's resolution, grid times below it rounded down).

    ``shape="long"`` (default): one row per subject and grid time, with the id column(s),
    the time column (the grid time) and one column per value column; subjects in the
    order of :func:`panelfx.subject_summary`, times ascending; index 0, 1, 2, ...
    ``shape="wide"``: one row per subject (index: the id, a MultiIndex for several id
    columns) and one column per grid time (columns ``(col, time)`` for several value
    columns): a matrix ready for clustering.  Output float64.

    >>> import pandas as pd, panelfx as pfx
    >>> df = pd.DataFrame({"pid": [1, 1, 1, 2, 2], "day": [0, 10, 30, 5, 20],
    ...                    "hb": [12.0, 13.0, 15.0, 11.0, 8.0]})
    >>> pfx.grid(df, "hb", id="pid", time="day", every=10, shape="wide")
    day    0     10    20    30
    pid
    1    12.0  13.0  14.0  15.0
    2     NaN  10.0   8.0   NaN
    >>> pfx.grid(df, "hb", id="pid", time="day", at=[0, 25], method="carry", extrapolate=True)
       pid  day    hb
    0    1    0  12.0
    1    1   25  13.0
    2    2    0   NaN
    3    2   25   8.0
    """
    check_choice("method", method, METHODS)
    check_choice("shape", shape, SHAPES)
    check_bool("extrapolate", extrapolate)
    panel = Panel(frame, id=id, time=time)
    columns = [col] if isinstance(col, str) else list(col) if isinstance(col, (list, tuple)) else None
    if not columns or not all(isinstance(c, str) and c for c in columns) or len(set(columns)) != len(columns):
        raise OptionError(f"col must be a column name or a list of different column names, got {col!r}")
    require_columns(frame, columns, "value")
    for c in columns:
        if c in (*panel.id_cols, panel.time_col):
            raise OptionError(f"col includes the id or time column {c!r}")
    rows_t, points, limit, shown = _grid_times(panel, at, every, start, within)
    n_sub, m = panel.n_subjects, len(points)

    values = {}
    for c in columns:
        values[c] = _on_grid(panel, panel.columns.numeric(c), rows_t, points, limit, method, extrapolate)

    first_rows = panel.original_positions(panel.starts)
    if shape == "wide":
        index: pd.Index
        if len(panel.id_cols) == 1:
            index = pd.Index(frame[panel.id_cols[0]].iloc[first_rows], name=panel.id_cols[0])
        else:
            index = pd.MultiIndex.from_frame(frame[panel.id_cols].iloc[first_rows])
        times = pd.Index(shown, name=time)
        if len(columns) == 1:
            return pd.DataFrame(values[columns[0]].reshape(n_sub, m), index=index, columns=times)
        blocks = np.hstack([values[c].reshape(n_sub, m) for c in columns]) if n_sub else np.zeros((0, m * len(columns)))
        cols = pd.MultiIndex.from_product([columns, times], names=[None, time])
        return pd.DataFrame(blocks, index=index, columns=cols)
    out: dict[str, Any] = {}
    rep = np.repeat(first_rows, m)
    for c in panel.id_cols:
        out[c] = frame[c].iloc[rep].reset_index(drop=True)
    out[time] = pd.Series(shown).iloc[np.tile(np.arange(m), n_sub)].reset_index(drop=True)
    for c in columns:
        if c in out:  # pragma: no cover - excluded above
            raise ColumnExistsError(f"column {c!r} would appear twice", column=c, count=1)
        out[c] = values[c]
    return pd.DataFrame(out)


def _grid_times(panel: Panel, at: Any, every: Any, start: Any, within: Any
                ) -> tuple[np.ndarray, np.ndarray, Any, pd.Series | np.ndarray]:
    """(row times, grid times, within limit or None, grid times to show), the first three on
    one exact scale: int64 ticks, or float64 for binary float times."""
    if (at is None) == (every is None):
        raise OptionError("give either at= (the grid times) or every= (a step), not both or neither")
    if start is not None and every is None:
        raise OptionError("start= goes with every=")
    axis = panel.axis
    if at is not None:
        if isinstance(at, (str, bytes)) or not hasattr(at, "__len__") or len(at) == 0:
            raise OptionError(f"at must be a non-empty list of times, got {at!r}")
        at_series = pd.Series(list(at), name="at") if not isinstance(at, pd.Series) else at.rename("at")
    if axis.kind == "number":
        scale = axis.scale if not axis.binary else None
        rows = axis.t.astype(np.float64) / scale if scale and scale != 1 else axis.t.astype(np.float64)
        span = _number("within", within) if within is not None else None
        if at is not None:
            try:
                g = pd.to_numeric(at_series).to_numpy(dtype=np.float64, na_value=np.nan)
                numeric = pd.api.types.is_numeric_dtype(pd.to_numeric(at_series).dtype)
            except (TypeError, ValueError):
                numeric = False
            if not numeric or pd.api.types.is_bool_dtype(at_series.dtype) \
                    or pd.api.types.is_datetime64_any_dtype(at_series.dtype) \
                    or pd.api.types.is_timedelta64_dtype(at_series.dtype):
                raise OptionError(f"at must hold numbers for the numeric time column {axis.column!r}, "
                                  f"got {list(at)!r}")
            if not np.isfinite(g).all():
                raise OptionError(f"at must hold finite numbers, got {list(at)!r}")
            extra: tuple[float, ...] = ()
        else:
            step = _number("every", every)
            first = float(rows.min()) if len(rows) else 0.0
            begin = _number("start", start, positive=False) if start is not None else first
            last = float(rows.max()) if len(rows) else begin
            # points in exact decimals: begin + k * step
            b, s = exact_number(begin), exact_number(step)
            k = max(0, math.floor((exact_number(last) - b) / s)) + 1 if last >= begin else 0
            if k > MAX_POINTS:
                raise OptionError(f"every={every!r} makes {k} grid times (at most {MAX_POINTS})")
            g = np.array([float(b + i * s) for i in range(k)], dtype=np.float64)
            extra = ()
        scale2 = decimal_scale(np.concatenate([rows, g]), extra=(*extra, *(() if span is None else (span,))))
        rows_t: np.ndarray
        points: np.ndarray
        limit: Any
        if scale2 is not None:
            rows_t = np.rint(rows * scale2).astype(np.int64)
            points = np.rint(g * scale2).astype(np.int64)
            limit = None if span is None else int(np.rint(span * scale2))
        else:
            rows_t, points, limit = rows, g, span
        shown_vals: Any = g
        int_time = pd.api.types.is_integer_dtype(panel.frame[axis.column].dtype)
        if int_time and (g == np.rint(g)).all() and np.abs(g).max(initial=0) < 2.0**53:
            shown_vals = g.astype(np.int64)
        order = _ascending(points, shown_vals)
        return rows_t, points[order], limit, shown_vals[order]
    # datetimes and timedeltas: int64 ticks at the column's resolution
    rows_t = axis.t
    lim = None
    if within is not None:
        w: Any = axis.span(within, "within")
        if w < 0:
            raise OptionError(f"within must be 0 or more, got {within!r}")
        lim = math.floor(w)
    if at is not None:
        ticks, missing = axis.reference(at_series)
        if missing.any():
            raise OptionError(f"at holds a missing time: {list(at)!r}")
        points = np.asarray(ticks, dtype=np.int64)
    else:
        tick_step: Any = axis.span(every, "every")
        if tick_step <= 0:
            raise OptionError(f"every must be a positive span, got {every!r}")
        if start is not None:
            ticks, missing = axis.reference(pd.Series([start], name="start"))
            if missing.any():
                raise OptionError("start is missing")
            begin = int(ticks[0])
        else:
            begin = int(rows_t.min()) if len(rows_t) else 0
        last = int(rows_t.max()) if len(rows_t) else begin
        k = math.floor(Fraction(last - begin) / Fraction(tick_step)) + 1 if last >= begin else 0
        if k > MAX_POINTS:
            raise OptionError(f"every={every!r} makes {k} grid times (at most {MAX_POINTS})")
        points = np.array([begin + math.floor(i * Fraction(tick_step)) for i in range(k)], dtype=np.int64)
    shown = axis.to_time(points)
    order = _ascending(points, shown.to_numpy())
    return rows_t, points[order], lim, shown.iloc[order].reset_index(drop=True)


def _ascending(points: np.ndarray, shown: Any) -> np.ndarray:
    order = np.argsort(points, kind="stable")
    p = points[order]
    if len(p) > 1 and (p[1:] == p[:-1]).any():
        raise OptionError(f"at holds the same time twice: {list(shown)!r}")
    return order


def _number(name: str, value: Any, *, positive: bool = True) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float, np.integer, np.floating)) \
            or not math.isfinite(value):
        raise OptionError(f"{name} must be a finite number for a numeric time column, got {value!r}")
    if positive and name == "every" and value <= 0:
        raise OptionError(f"every must be a positive number, got {value!r}")
    if name == "within" and value < 0:
        raise OptionError(f"within must be 0 or more, got {value!r}")
    return float(value)


def _on_grid(panel: Panel, y: np.ndarray, t: np.ndarray, g: np.ndarray, limit: Any, method: str,
             extrapolate: bool) -> np.ndarray:
    """Values at every (subject, grid time), subjects outer: one vectorised search."""
    n_sub, m = panel.n_subjects, len(g)
    out = np.full(n_sub * m, np.nan)
    valid = ~np.isnan(y)
    if not valid.any() or m == 0:
        return out
    tv, yv, gv = t[valid], y[valid], panel.grp[valid]
    # one int64 key over (subject, time): dense ranks of the row and grid times together
    distinct = np.unique(np.concatenate([tv, g]))
    width = len(distinct) + 1
    key = gv * width + np.searchsorted(distinct, tv)
    qs = np.repeat(np.arange(n_sub, dtype=np.int64), m)
    qt = np.tile(g, n_sub)
    qkey = qs * width + np.tile(np.searchsorted(distinct, g), n_sub)
    lo = np.searchsorted(key, qkey, side="right") - 1  # last observation at or before
    hi = np.searchsorted(key, qkey, side="left")  # first observation at or after
    has_lo = lo >= 0
    has_lo[has_lo] = gv[lo[has_lo]] == qs[has_lo]
    has_hi = hi < len(key)
    has_hi[has_hi] = gv[hi[has_hi]] == qs[has_hi]
    lo_c, hi_c = np.maximum(lo, 0), np.minimum(hi, len(key) - 1)
    d_lo = np.where(has_lo, qt - tv[lo_c], 0).astype(np.float64)  # distances, exact on int ticks
    d_hi = np.where(has_hi, tv[hi_c] - qt, 0).astype(np.float64)
    inside = has_lo & has_hi
    if method == "carry":
        take = np.where(has_lo, lo_c, -1)
        if not extrapolate:
            take[~inside] = -1
        dist = d_lo
        value = np.where(take >= 0, yv[np.maximum(take, 0)], np.nan)
    else:
        earlier = d_lo <= d_hi
        near = np.where(inside, np.where(earlier, lo_c, hi_c), np.where(has_lo, lo_c, hi_c))
        dist = np.where(inside, np.minimum(d_lo, d_hi), np.where(has_lo, d_lo, d_hi))
        value = yv[near]
        if method == "linear":
            between = inside & (d_lo > 0)
            with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
                # numpy.interp's form: slope * (x - x_j) + y_j
                slope = (yv[hi_c] - yv[lo_c]) / (d_lo + d_hi)
                value = np.where(between, slope * d_lo + yv[lo_c], value)
        value = np.where(inside if not extrapolate else has_lo | has_hi, value, np.nan)
    if limit is not None:
        value = np.where(dist <= limit, value, np.nan)
    out[:] = value
    return out


__all__ = ["grid"]
