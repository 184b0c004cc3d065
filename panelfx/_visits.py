"""Kernels of planned visits: calendar days, window assignment, one record per window.

Shared by :func:`panelfx.study_day`, :func:`panelfx.analysis_visit`,
:func:`panelfx.visit_pick`, :func:`panelfx.visit_grid` and :func:`panelfx.check`, so that
all of them match days to windows by one rule.  Vectorised: loops run only over the few
windows a day can fall in.
"""

from __future__ import annotations

from collections.abc import Callable, Hashable

import numpy as np
import pandas as pd

from ._subjects import Subjects
from ._time import NAT, TimeAxis, decimal_scale, time_kind
from .errors import NotConstantError, rows_message
from .visit_windows import Windows

#: Ticks per day, per datetime/timedelta unit.
DAY_TICKS = {"s": 86_400, "ms": 86_400_000, "us": 86_400_000_000, "ns": 86_400_000_000_000}

INT_MIN = np.iinfo(np.int64).min
INT_MAX = np.iinfo(np.int64).max


# ---------------------------------------------------------------------- calendar days
def calendar_days(series: pd.Series) -> tuple[str, np.ndarray, np.ndarray]:
    """(kind, values, missing) of a column of dates or numbers, in the caller's row order.

    Datetimes become whole calendar days since 1970-01-01 (int64) *in their own time zone*:
    an aware timestamp counts on the date its own clock shows, whatever the UTC date.
    Timedeltas become whole days (rounded down).  Numbers are returned as float64 (NaN
    for missing).  Text raises :class:`~panelfx.TimeTypeError` as for the time column.
    """
    kind = time_kind(series, "column")
    if kind == "number":
        return kind, _floats(series), series.isna().to_numpy()
    axis, missing = TimeAxis.read(series.rename(series.name))
    ticks, res = axis.t, axis.res
    assert res is not None
    if kind == "datetime" and axis.tz is not None:
        # UTC instants -> the wall clock of their own zone, then the date it shows
        utc = pd.Series(np.where(missing, NAT, ticks).view(f"datetime64[{res}]"))
        local = utc.dt.tz_localize("UTC").dt.tz_convert(axis.tz).dt.tz_localize(None)
        ticks = local.to_numpy().view(np.int64)
    days = np.where(missing, 0, ticks) // DAY_TICKS[res]  # floor: days before 1970 stay whole days
    return kind, days.astype(np.int64), missing


def _floats(series: pd.Series) -> np.ndarray:
    from ._columns import to_float

    return to_float(series)


def subject_reference(values: np.ndarray, missing: np.ndarray, s: Subjects, column: str,
                      ids_at: Callable[[np.ndarray], list[Hashable]]) -> tuple[np.ndarray, np.ndarray]:
    """The subject's reference on every sorted row, as (values, missing): the value of its
    non-missing rows, which must agree (:class:`NotConstantError` otherwise; rows where it
    is missing take the subject's value, as :func:`panelfx.baseline` does); missing for a
    subject with none."""
    if s.n == 0:
        return values, missing
    from ._kernels import first_index

    first = first_index(s, ~missing)
    src = np.maximum(first, 0)
    differs = ~missing & (values != values[src])
    if differs.any():
        where = np.flatnonzero(differs)
        bad = np.unique(s.grp[where])
        ids = ids_at(s.starts[bad])
        raise NotConstantError(
            rows_message(f"reference must be constant within subject; it varies in {len(bad)} subject(s)",
                         column, len(where), ids),
            column=column, count=len(where), ids=ids)
    return values[src], first < 0


# ---------------------------------------------------------------------- exact numbers
def exact_scale(day: np.ndarray, numbers: np.ndarray) -> tuple[np.ndarray, np.ndarray, int | None]:
    """``day`` (float64, NaN missing) and ``numbers`` (float64, +-inf allowed) on one exact scale.

    When every finite value is a short decimal (as it prints), both become int64 counts of
    10**-k (missing and -inf as INT_MIN, +inf as INT_MAX), so that bounds, targets and
    distances compare as the decimals written; otherwise they stay float64 (scale None).
    """
    ok = ~np.isnan(day)
    fin = numbers[np.isfinite(numbers)]
    scale = decimal_scale(day[ok], tuple(fin.tolist()))
    if scale is None:
        return day, numbers, None
    d = np.full(len(day), INT_MIN, dtype=np.int64)
    d[ok] = np.rint(day[ok] * scale).astype(np.int64)
    n = np.where(np.isfinite(numbers), np.rint(np.nan_to_num(numbers, posinf=0.0, neginf=0.0) * scale), 0.0)
    m = n.astype(np.int64)
    m[numbers == -np.inf] = INT_MIN
    m[numbers == np.inf] = INT_MAX
    return d, m, scale


def _abs_diff(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    return np.abs(a - b)


# ---------------------------------------------------------------------- window assignment
def assign(day: np.ndarray, win: Windows) -> np.ndarray:
    """Window index (0-based) of each day (float64, NaN missing); -1 outside every window or missing.

    Bounds are inclusive.  Where windows overlap (``overlap="nearest_target"``) the day goes
    to the window whose target is nearest, the earlier one on a tie.
    """
    lows, highs, targets = win.bounds()
    d, num, scale = exact_scale(day, np.concatenate([lows, highs, targets]))
    k = len(win)
    lo, hi, tg = num[:k], num[k:2 * k], num[2 * k:]
    present = ~np.isnan(day)
    first = np.searchsorted(hi, d, side="left")  # first window whose high >= day
    stop = np.searchsorted(lo, d, side="right")  # windows [0, stop) have low <= day
    best = np.where(present & (first < stop), first, -1)
    if win.overlap == "nearest_target" and len(d):
        depth = int(np.max(np.where(present, stop - first, 0), initial=0))
        cand_ok = best >= 0
        with np.errstate(invalid="ignore"):
            for j in range(1, depth):  # a handful: how many windows overlap at one day
                cand = first + j
                ok = cand_ok & (cand < stop)
                if not ok.any():
                    continue
                c = np.minimum(cand, k - 1)
                b = np.maximum(best, 0)
                closer = _abs_diff(d, tg[c]) < _abs_diff(d, tg[b])  # strict: the earlier window keeps ties
                best = np.where(ok & closer, c, best)
    return best.astype(np.int64)


def distance(day: np.ndarray, index: np.ndarray, win: Windows) -> np.ndarray:
    """|day - target| of each day's window (float64; NaN where index is -1), exact for decimals."""
    _, _, targets = win.bounds()
    ok = index >= 0
    t = targets[np.maximum(index, 0)]
    d, tt, scale = exact_scale(np.where(ok, day, np.nan), t)
    out = np.full(len(day), np.nan)
    if scale is None:
        out[ok] = np.abs(d[ok] - tt[ok])
    else:
        out[ok] = np.abs(d[ok] - tt[ok]) / scale
    return out


# ---------------------------------------------------------------------- one record per window
PICK_RULES = ("nearest", "first", "last", "max", "min", "last_on_or_before_target")
#: Rules under which two records can tie: ``prefer`` is required there.
TIE_RULES = ("nearest", "max", "min")
#: Rules that read the day and the target.
TARGET_RULES = ("nearest", "last_on_or_before_target")


def pick(s: Subjects, visit: np.ndarray, eligible: np.ndarray, rule: str, prefer: str | None,
         value: np.ndarray | None = None, day: np.ndarray | None = None,
         target: np.ndarray | None = None) -> np.ndarray:
    """True on exactly one eligible row per (subject, visit code); sorted rows in time order.

    ``visit`` holds int64 visit codes (-1: no visit, never picked).  ``value`` is needed by
    "max"/"min", ``day`` and ``target`` by "nearest" and "last_on_or_before_target".
    Ties (equal distance or value) go to the earlier or later row as ``prefer`` says.
    """
    out = np.zeros(s.n, dtype=bool)
    ok = eligible & (visit >= 0)
    if rule in TARGET_RULES:
        assert day is not None and target is not None
        ok &= ~np.isnan(day) & ~np.isnan(target)
        d, t, _ = exact_scale(np.where(ok, day, np.nan), np.where(ok, target, 0.0))
        if rule == "last_on_or_before_target":
            ok &= d <= t
    rows = np.flatnonzero(ok)
    if not len(rows):
        return out
    later_first = -rows  # time order within subject is row order
    if rule == "first":
        keys: tuple[np.ndarray, ...] = (rows,)
    elif rule in ("last", "last_on_or_before_target"):
        keys = (later_first,)
    else:
        tie = rows if prefer == "earlier" else later_first
        if rule == "nearest":
            main = np.abs(d[rows] - t[rows])
        else:
            assert value is not None
            v = value[rows]
            main = v if rule == "min" else -v
        keys = (tie, main)
    order = np.lexsort((*keys, visit[rows], s.grp[rows]))
    g, v = s.grp[rows][order], visit[rows][order]
    head = np.ones(len(order), dtype=bool)
    head[1:] = (g[1:] != g[:-1]) | (v[1:] != v[:-1])
    out[rows[order[head]]] = True
    return out
