"""``person_time``: events, person-time, rates and exact Poisson confidence intervals per stratum."""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np
import pandas as pd

from ._frames import frames
from ._options import checked_options
from ._panel import require_columns
from ._poisson import poisson_limits
from ._time import UNITS_NS, _datetimes, _timedeltas, time_kind
from .errors import ColumnExistsError, ColumnTypeError, FollowUpError, OptionError, TimeTypeError, rows_message

__all__ = ["person_time", "RATE_COLUMNS"]

#: Columns after the strata, in order.
RATE_COLUMNS = ("events", "person_time", "rate", "rate_lower", "rate_upper")


@checked_options
@frames(frame="episodes")
def person_time(
    episodes: pd.DataFrame,
    by: str | Sequence[str] = (),
    *,
    event: str = "event",
    start: str = "start",
    stop: str = "stop",
    unit: str | float | None = None,
    per: float = 1000,
    alpha: float = 0.05,
) -> pd.DataFrame:
    """Events, person-time, rate and exact Poisson confidence interval per stratum.

    ``episodes`` holds (``start``, ``stop``] intervals, e.g. from :func:`panelfx.episodes`,
    with a count of events on each (``event``: 0/1 flags or whole counts).  Per stratum of
    the ``by`` columns (all rows when empty; a missing value is a stratum of its own):

    - ``events``: the number of events;
    - ``person_time``: the sum of stop - start, in ``unit``: for numeric times the number of
      time units in one unit of person-time (e.g. 365.25 to count days as years; default 1),
      for datetimes a unit such as ``"Y"`` (365.25 days) or ``"D"`` (the default, days);
    - ``rate``: events per ``per`` units of person-time (per 1000 by default);
    - ``rate_lower``, ``rate_upper``: the exact (Garwood) two-sided 1 - ``alpha`` interval of
      the rate, from the chi-square (gamma) quantiles of the Poisson count: lower = 0 when
      there is no event.

    Strata come sorted by the ``by`` columns.  Missing start, stop or event values and
    intervals with stop at or before start are errors (:class:`~panelfx.FollowUpError`);
    so are negative or fractional event counts.  Not a transform: it summarises rows.

    >>> import pandas as pd, panelfx as pfx
    >>> ep = pd.DataFrame({"arm": ["a", "a", "b", "b"], "start": [0, 100, 0, 50],
    ...                    "stop": [100, 250, 50, 250], "event": [1, 9, 0, 2]})
    >>> pfx.person_time(ep, "arm", per=1)
      arm  events  person_time   rate  rate_lower  rate_upper
    0   a      10        250.0  0.040    0.019182    0.073561
    1   b       2        250.0  0.008    0.000969    0.028899
    """
    by_cols = [by] if isinstance(by, str) else list(by)
    if not all(isinstance(c, str) for c in by_cols):
        raise OptionError(f"by must be a column name or a list of column names, got {by!r}")
    for name, value in (("event", event), ("start", start), ("stop", stop)):
        if not isinstance(value, str) or not value:
            raise OptionError(f"{name} must be a column name, got {value!r}")
    if isinstance(per, bool) or not isinstance(per, (int, float, np.integer, np.floating)) or not per > 0 \
            or not np.isfinite(per):
        raise OptionError(f"per must be a positive number, got {per!r}")
    if isinstance(alpha, bool) or not isinstance(alpha, (int, float, np.floating)) or not 0 < alpha < 1:
        raise OptionError(f"alpha must be a number between 0 and 1, got {alpha!r}")
    require_columns(episodes, [start, stop, event, *by_cols], "person_time")
    clash = [c for c in by_cols if c in RATE_COLUMNS]
    if clash:
        raise ColumnExistsError(f"by column {clash[0]!r} has the name of an output column", column=clash[0], count=1)

    length = _lengths(episodes, start, stop, unit)
    count = _counts(episodes, event)
    work = pd.DataFrame({"_events": count, "_time": length}, index=episodes.index)
    if by_cols:
        keys = [episodes[c] for c in by_cols]
        sums = work.groupby(keys, sort=True, dropna=False, observed=True).sum()
        out = sums.index.to_frame(index=False)
        out.columns = by_cols
    else:
        sums = work.sum().to_frame().T
        out = pd.DataFrame(index=range(1))
    k = sums["_events"].to_numpy(dtype=np.float64)
    pt = sums["_time"].to_numpy(dtype=np.float64)
    lower, upper = poisson_limits(k, float(alpha))
    scale = float(per) / pt
    out["events"] = np.rint(k).astype(np.int64)
    out["person_time"] = pt
    out["rate"] = k * scale
    out["rate_lower"] = lower * scale
    out["rate_upper"] = upper * scale
    return out


def _lengths(frame: pd.DataFrame, start: str, stop: str, unit: Any) -> np.ndarray:
    """stop - start per row as float64 person-time in ``unit``; exact integer differences for datetimes."""
    s, e = frame[start], frame[stop]
    kind = time_kind(s, "start column")
    if time_kind(e, "stop column") != kind:
        raise TimeTypeError(f"columns {start!r} and {stop!r} hold different kinds of times", column=stop)
    if kind == "number":
        if unit is not None and (isinstance(unit, (bool, str)) or not isinstance(unit, (int, float, np.integer,
                                                                                        np.floating))
                                 or not unit > 0 or not np.isfinite(unit)):
            raise OptionError(f"unit must be a positive number of time units (numeric times), got {unit!r}")
        a = s.to_numpy(dtype=np.float64, na_value=np.nan)
        b = e.to_numpy(dtype=np.float64, na_value=np.nan)
        missing = np.isnan(a) | np.isnan(b)
        d = b - a
        factor = float(unit) if unit is not None else 1.0
    else:
        if unit is None:
            unit = "D"
        if not isinstance(unit, str) or unit not in UNITS_NS:
            raise OptionError(f"unit must be one of {sorted(UNITS_NS)} for datetime times, got {unit!r}")
        if (getattr(s.dtype, "tz", None) is None) != (getattr(e.dtype, "tz", None) is None):
            raise TimeTypeError(f"columns {start!r} and {stop!r} mix naive and time-zone-aware datetimes",
                                column=stop)
        ra, rb = _ns(s), _ns(e)
        missing = (ra == np.iinfo(np.int64).min) | (rb == np.iinfo(np.int64).min)
        d = (rb - ra).astype(np.float64)  # int64 nanoseconds: exact below 2**53 ns (104 days), then rounded once
        factor = float(UNITS_NS[unit])
    if missing.any():
        where = np.flatnonzero(missing)
        labels = list(frame.index[where[:5]])
        raise FollowUpError(rows_message("missing start or stop", stop, len(where), labels, noun="row labels"),
                            column=stop, count=len(where), ids=labels)
    bad = ~(d > 0)
    if bad.any():
        where = np.flatnonzero(bad)
        labels = list(frame.index[where[:5]])
        raise FollowUpError(rows_message("stop at or before start", stop, len(where), labels, noun="row labels"),
                            column=stop, count=len(where), ids=labels)
    return d / factor


def _ns(s: pd.Series) -> np.ndarray:
    if pd.api.types.is_timedelta64_dtype(s.dtype) or (isinstance(s.dtype, pd.ArrowDtype)
                                                      and "duration" in str(s.dtype)):
        raw, res = _timedeltas(s)
    else:
        raw, res, _ = _datetimes(s, "column")
    nat = raw == np.iinfo(np.int64).min
    return np.where(nat, raw, raw * np.int64(UNITS_NS[res]))


def _counts(frame: pd.DataFrame, event: str) -> np.ndarray:
    s = frame[event]
    if not (pd.api.types.is_bool_dtype(s.dtype) or pd.api.types.is_numeric_dtype(s.dtype)):
        raise ColumnTypeError(f"event column {event!r} has dtype {s.dtype}: it must hold 0/1 flags or counts",
                              column=event, count=len(s))
    v = s.to_numpy(dtype=np.float64, na_value=np.nan)
    bad = np.isnan(v) | (v < 0) | (v != np.floor(v)) | ~np.isfinite(v)
    if bad.any():
        where = np.flatnonzero(bad)
        labels = list(frame.index[where[:5]])
        raise FollowUpError(rows_message("event count missing, negative or not a whole number", event, len(where),
                                         labels, noun="row labels"), column=event, count=len(where), ids=labels)
    return v
