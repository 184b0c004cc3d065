"""The time axis: one exact representation of the time column, its spans and durations.

What transforms may use: ``kind`` ("number", "datetime", "timedelta"), ``unit`` (of derived
durations), ``t`` (native times), ``key`` (an int64 array that sorts exactly like the times;
every comparison and search within subjects works on it), :meth:`TimeAxis.span` (an option
such as ``"30D"`` or ``2.5`` in native units), :meth:`TimeAxis.back` (per-row thresholds
t - span on the key scale, exact and saturating), :meth:`TimeAxis.duration` and
:meth:`TimeAxis.reference` (another column of times on the key scale).

Representation, chosen so that comparisons are exact on every input the types allow:

- datetimes and timedeltas: int64 ticks in the column's own unit (s, ms, us or ns), never
  converted to nanoseconds, so the whole range pandas holds (years 1 to 9999 in seconds) is
  kept; tz-aware times are instants (UTC ticks);
- integers: int64 as they are (exact beyond 2**53);
- floats that are all short decimals (at most :data:`MAX_DECIMALS` digits after the point,
  as they print: 0.1, 2.35): int64 counts of 10**-k, so they compare as the decimals the
  user wrote, not as their binary approximations;
- other floats: float64, with ``key`` their dense ranks.

Spans are exact too: ``"30D"`` is a whole number of ticks (or a fraction of one, rounded in
the direction that keeps each comparison exact), and numbers are taken as the decimals they
print as.  On binary float axes t - span is computed with its rounding error (TwoSum), so
"at or before t - span" is decided exactly.
"""

from __future__ import annotations

import datetime as _dt
import functools
import re
from dataclasses import dataclass, replace
from decimal import Decimal
from fractions import Fraction
from typing import Any

import numpy as np
import pandas as pd

from .errors import OptionError, TimeTypeError, rows_message

#: Units of derived durations for datetime and timedelta times, in nanoseconds.  "Y" is the
#: Julian year of 365.25 days (common practice for person-years and pack-years).
UNITS_NS: dict[str, int] = {
    "ns": 1,
    "us": 1_000,
    "ms": 1_000_000,
    "s": 1_000_000_000,
    "min": 60 * 1_000_000_000,
    "h": 3_600 * 1_000_000_000,
    "D": 86_400 * 1_000_000_000,
    "W": 7 * 86_400 * 1_000_000_000,
    "Y": 31_557_600 * 1_000_000_000,
}

#: Decimal digits tried for float times before they are taken as binary floats.
MAX_DECIMALS = 9

INT_MIN = int(np.iinfo(np.int64).min)
INT_MAX = int(np.iinfo(np.int64).max)
NAT = INT_MIN

#: Rows probed before a full pass when looking for the decimal scale of float times.
PROBE = 4096


def time_kind(series: pd.Series, what: str = "time column") -> str:
    """'number', 'datetime' or 'timedelta'; anything else is a :class:`TimeTypeError`."""
    dtype = series.dtype
    if pd.api.types.is_bool_dtype(dtype):
        pass
    elif pd.api.types.is_datetime64_any_dtype(dtype):
        return "datetime"
    elif pd.api.types.is_timedelta64_dtype(dtype):
        return "timedelta"
    elif pd.api.types.is_numeric_dtype(dtype) and not pd.api.types.is_complex_dtype(dtype):
        return "number"
    elif isinstance(dtype, pd.ArrowDtype):
        import pyarrow as pa

        if pa.types.is_timestamp(dtype.pyarrow_dtype) or pa.types.is_date(dtype.pyarrow_dtype):
            return "datetime"
        if pa.types.is_duration(dtype.pyarrow_dtype):
            return "timedelta"
    elif dtype == object and pd.api.types.infer_dtype(series, skipna=True) in ("date", "datetime"):
        return "datetime"
    raise TimeTypeError(
        f"{what} {series.name!r} has dtype {dtype}: it must hold numbers or datetimes.{_time_hint(series)}",
        column=str(series.name),
        count=len(series),
    )


def _time_hint(series: pd.Series) -> str:
    """What to do with a column that holds no times: parse text, convert numbers held as
    objects, or (mixed objects) what is there.  Error path only."""
    dtype = series.dtype
    inferred = pd.api.types.infer_dtype(series, skipna=True) if dtype == object else ""
    if inferred == "string" or (dtype != object and pd.api.types.is_string_dtype(dtype)):
        return " Text dates must be parsed first, e.g. frame[col] = pd.to_datetime(frame[col])."
    if inferred in ("integer", "floating", "mixed-integer-float", "decimal"):
        return " It holds numbers as Python objects: convert them first, e.g. pd.to_numeric(frame[col])."
    if dtype != object or inferred == "empty":
        return " It holds no value." if inferred == "empty" else ""
    # other objects: name the Python types there (from a bounded sample: the message only)
    kinds = pd.unique(series.dropna().iloc[:1000].map(lambda v: f"{type(v).__module__}.{type(v).__qualname__}"))
    shown = ", ".join(str(k).removeprefix("builtins.") for k in kinds[:5]) + (" ..." if len(kinds) > 5 else "")
    if len(kinds) == 1:
        return f" It holds {shown} objects: give dates, datetimes or numbers."
    return (f" It holds a mix of {shown}: make it one kind first (dates or datetimes, e.g. "
            f"pd.to_datetime(frame[col]), or numbers).")


def _datetimes(series: pd.Series, what: str) -> tuple[np.ndarray, str, Any]:
    """(int64 ticks in the column's own unit, that unit, tz or None); NaT as INT_MIN."""
    s = series
    dtype = s.dtype
    if dtype == object:
        if pd.api.types.infer_dtype(s, skipna=True) == "date":
            # datetime.date objects: calendar dates, held in seconds (years 1 to 9999 fit)
            vals = s.to_numpy(dtype=object, copy=True)
            vals[s.isna().to_numpy()] = None  # NaN or NaT among the dates: NaT below
            days = vals.astype("datetime64[D]")
            # pandas calls a mix of dates and datetimes "date": keep the datetimes' times of day
            # (microseconds, as datetime.datetime holds them) instead of cutting them to the day
            exact = vals.astype("datetime64[us]")
            if (exact != days).any():
                return exact.view(np.int64), "us", None
            return days.astype("datetime64[s]").view(np.int64), "s", None
        try:
            s = pd.to_datetime(s)
        except (ValueError, TypeError) as err:
            raise TimeTypeError(f"{what} {series.name!r} mixes datetimes that cannot be compared: {err}",
                                column=str(series.name)) from None
        dtype = s.dtype
    if isinstance(dtype, pd.ArrowDtype):
        pa_type = dtype.pyarrow_dtype
        unit = getattr(pa_type, "unit", "s")
        unit = unit if unit in ("s", "ms", "us", "ns") else "s"  # dates: seconds
        tz = getattr(pa_type, "tz", None)
        s = s.astype(pd.DatetimeTZDtype(unit, tz) if tz else f"datetime64[{unit}]")
        dtype = s.dtype
    tz = getattr(dtype, "tz", None)
    if tz is not None:
        s = s.dt.tz_convert("UTC").dt.tz_localize(None)
    arr = s.to_numpy()
    unit = np.datetime_data(arr.dtype)[0]
    return arr.view(np.int64), unit, tz


def _timedeltas(series: pd.Series) -> tuple[np.ndarray, str]:
    s = series
    if isinstance(s.dtype, pd.ArrowDtype):
        unit = getattr(s.dtype.pyarrow_dtype, "unit", "ns")
        s = s.astype(f"timedelta64[{unit}]")
    arr = s.to_numpy()
    return arr.view(np.int64), np.datetime_data(arr.dtype)[0]


def decimal_scale(x: np.ndarray, extra: tuple[float, ...] = ()) -> int | None:
    """The smallest 10**k (k <= MAX_DECIMALS) at which every finite float of ``x`` and ``extra``
    is a whole number of 10**-k as it prints (``rint(x * 10**k) / 10**k == x``) and the scaled
    values fit comfortably in int64; ``None`` when there is none."""
    ex = np.asarray(extra, dtype=np.float64)
    if x.size == 0 and not extra:
        return 1
    top = max(float(np.abs(x).max()) if x.size else 0.0, float(np.abs(ex).max()) if ex.size else 0.0)
    probe = x[:PROBE]
    for k in range(MAX_DECIMALS + 1):
        s = 10**k
        if top * s >= 2.0**62:
            return None
        # rint(x * s) is monotone in x; q / s == x proves the map is one to one.
        if not (np.rint(probe * s) / s == probe).all() or not (np.rint(ex * s) / s == ex).all():
            continue
        if (np.rint(x * s) / s == x).all():
            return s
    return None


def exact_number(value: float | int) -> Fraction:
    """A number option as the decimal it prints as (0.1 is one tenth, not its binary neighbour)."""
    if isinstance(value, (int, np.integer)):
        return Fraction(int(value))
    return Fraction(Decimal(repr(float(value))))


_SPAN = re.compile(r"^\s*(\d+(?:\.\d*)?)\s*(W|D|days?|h|hours?|min|minutes?|s|seconds?|ms|us|ns)\s*$")
_SPAN_NS = {"W": UNITS_NS["W"], "D": UNITS_NS["D"], "day": UNITS_NS["D"], "days": UNITS_NS["D"],
            "h": UNITS_NS["h"], "hour": UNITS_NS["h"], "hours": UNITS_NS["h"], "min": UNITS_NS["min"],
            "minute": UNITS_NS["min"], "minutes": UNITS_NS["min"], "s": UNITS_NS["s"],
            "second": UNITS_NS["s"], "seconds": UNITS_NS["s"], "ms": UNITS_NS["ms"], "us": UNITS_NS["us"],
            "ns": 1}


def span_ns(value: Any) -> Fraction:
    """A time span (text such as ``"30D"``, a timedelta) in nanoseconds, exactly.

    Spans longer than pandas' Timedelta holds (about 292 years) are read as number + unit,
    since datetimes in seconds reach much further.
    """
    if isinstance(value, (pd.Timedelta, _dt.timedelta, np.timedelta64)):
        return Fraction(int(pd.Timedelta(value).value))
    try:
        return Fraction(int(pd.Timedelta(value).value))
    except (ValueError, OverflowError):
        m = _SPAN.match(str(value))
        if m is None:
            raise
        return Fraction(Decimal(m.group(1))) * _SPAN_NS[m.group(2)]


def _sub_saturating(t: np.ndarray, m: int) -> np.ndarray:
    """t - m for an int64 array and a Python integer, clamped to the int64 range (no wrap)."""
    if m >= 0:
        lim = INT_MIN + m
        if lim > INT_MAX:
            return np.full_like(t, INT_MIN)
        if t.size and int(t.min()) < lim:
            return np.where(t < lim, INT_MIN, t - np.int64(min(m, INT_MAX)))
        return t - np.int64(m)
    lim = INT_MAX + m
    if lim < INT_MIN:
        return np.full_like(t, INT_MAX)
    if t.size and int(t.max()) > lim:
        return np.where(t > lim, INT_MAX, t + np.int64(min(-m, INT_MAX)))
    return t + np.int64(-m)


def two_diff(a: np.ndarray, b: float) -> tuple[np.ndarray, np.ndarray]:
    """(d, e) with d = fl(a - b) and a - b = d + e exactly (Knuth's TwoSum); e is 0 where d is infinite."""
    c = -float(b)
    with np.errstate(invalid="ignore", over="ignore"):
        d = a + c
        bb = d - a
        e = (a - (d - bb)) + (c - bb)
    e[~np.isfinite(e)] = 0.0
    return d, e


@dataclass(frozen=True, eq=False)
class TimeAxis:
    """Times of one column in an exact native form (see the module docstring)."""

    kind: str
    column: str
    unit: str | None  # unit of durations: time-column units for numbers (None), else a UNITS_NS key
    res: str | None  # datetime/timedelta: the column's own unit (tick), e.g. "s"
    scale: int | None  # numbers: times are counts of 1/scale; None for binary floats
    tz: Any  # datetimes: the column's zone, None when naive
    t: np.ndarray  # int64 ticks, or float64 for binary floats
    time_unit: str | None = None  # numbers: the unit the user declared for them (a UNITS_NS key), if any

    # ------------------------------------------------------------------ reading
    @classmethod
    def read(cls, series: pd.Series, unit: str | None = None,
             time_unit: str | None = None) -> tuple[TimeAxis, np.ndarray]:
        """(axis with times in the series' row order, missing-time mask).

        ``time_unit`` declares the unit of numeric times ("D": days since randomisation, say);
        then ``unit`` converts durations as it does for datetimes, and spans such as "30D" fit.
        """
        kind = time_kind(series)
        name = str(series.name)
        if time_unit is not None:
            if kind != "number":
                raise OptionError(f"time_unit={time_unit!r} declares the unit of numeric times; time column "
                                  f"{name!r} holds {kind} values, which carry their own")
            if time_unit not in UNITS_NS:
                raise OptionError(f"time_unit must be one of {sorted(UNITS_NS)}, got {time_unit!r}")
            unit = time_unit if unit is None else unit
        unit = _check_unit(unit, kind, name, time_unit)
        tz = res = None
        scale: int | None = 1
        if kind == "datetime":
            t, res, tz = _datetimes(series, "time column")
            missing = t == NAT
        elif kind == "timedelta":
            t, res = _timedeltas(series)
            missing = t == NAT
        else:
            t, scale, missing = _numbers(series)
        return cls(kind=kind, column=name, unit=unit, res=res, scale=scale, tz=tz, t=t, time_unit=time_unit), missing

    def take(self, order: np.ndarray | None) -> TimeAxis:
        """The axis with its times in another row order (``None``: unchanged)."""
        if order is None:
            return self
        out = replace(self, t=self.t[order])
        if "distinct" in self.__dict__:  # the same set of times, whatever their order
            out.__dict__["distinct"] = self.__dict__["distinct"]
        return out

    @property
    def binary(self) -> bool:
        """True for float times compared in binary (no whole-tick form)."""
        return self.t.dtype.kind == "f"

    @property
    def tick_ns(self) -> Fraction:
        """Nanoseconds per tick (numbers with a declared unit: that unit over the decimal scale)."""
        if self.res:
            return Fraction(UNITS_NS[self.res])
        if self.time_unit is not None:
            return Fraction(UNITS_NS[self.time_unit], self.scale or 1)
        return Fraction(1)

    # ------------------------------------------------------------------ key scale
    @functools.cached_property
    def distinct(self) -> np.ndarray:
        """The distinct times, sorted (binary float axes and rank searches)."""
        return np.unique(self.t)

    @functools.cached_property
    def key(self) -> np.ndarray:
        """int64 that sorts exactly like the times: the ticks, or dense ranks of binary floats."""
        if not self.binary:
            return self.t
        return np.searchsorted(self.distinct, self.t).astype(np.int64)

    def back(self, span: Fraction | float, *, strict: bool, rows: np.ndarray | None = None) -> np.ndarray:
        """Per row i: the least key q_i such that key_j >= q_i exactly when t_j >= t_i - span
        (``strict``: t_j > t_i - span).  Saturates instead of wrapping; ``rows`` restricts to some rows."""
        t = self.t if rows is None else self.t[rows]
        if not self.binary:
            s = Fraction(span)
            # integers: t_j >= t - s  <=>  t_j >= t - floor(s);  t_j > t - s  <=>  t_j >= t - ceil(s) + 1
            m = s.numerator // s.denominator if not strict else -((-s.numerator) // s.denominator) - 1
            return _sub_saturating(t, m)
        d, e = two_diff(t, float(span))
        u = self.distinct
        if not strict:  # t_j >= d + e
            r = np.searchsorted(u, d, side="left")
            bump = (e > 0) & (r < len(u))
            bump &= u[np.minimum(r, len(u) - 1)] == d
            return (r + bump).astype(np.int64)
        r = np.searchsorted(u, d, side="right")  # t_j > d + e
        drop = (e < 0) & (r > 0)
        drop &= u[np.maximum(r - 1, 0)] == d
        return (r - drop).astype(np.int64)

    # ------------------------------------------------------------------ spans and durations
    def span(self, value: Any, what: str = "span") -> Fraction | float:
        """A window length or offset in native units: an exact fraction of ticks, or a float on
        binary float axes.  Checked against the time column's kind."""
        if self.kind == "number":
            if self.time_unit is not None and isinstance(value, (str, pd.Timedelta, _dt.timedelta, np.timedelta64)):
                try:
                    ticks = span_ns(value) / UNITS_NS[self.time_unit] * (self.scale or 1)
                except (ValueError, OverflowError):
                    raise OptionError(f"{what}={value!r} is not a time span such as '90D'") from None
                return float(ticks) if self.binary else ticks
            if isinstance(value, (str, pd.Timedelta, _dt.timedelta, np.timedelta64, bool)) \
                    or not isinstance(value, (int, float, np.integer, np.floating)):
                raise OptionError(f"{what}={value!r} does not fit time column {self.column!r}, which holds "
                                  f"numbers: give a number in its units (or declare them with time_unit=)")
            if self.binary:
                return float(value)
            return exact_number(value.item() if isinstance(value, np.generic) else value) * (self.scale or 1)
        if isinstance(value, (str, pd.Timedelta, _dt.timedelta, np.timedelta64)):
            try:
                return span_ns(value) / self.tick_ns
            except (ValueError, OverflowError):
                raise OptionError(f"{what}={value!r} is not a time span such as '90D'") from None
        raise OptionError(f"{what}={value!r} does not fit time column {self.column!r}, which holds {self.kind} "
                          f"values: give a timedelta or a string such as '90D'")

    def between(self, later: np.ndarray, earlier: np.ndarray) -> np.ndarray:
        """``later - earlier`` in native units as float64, for ``later >= earlier`` (sorted rows):
        exact integer arithmetic on integer axes even where the difference passes the int64 range
        (taken modulo 2**64 as unsigned), then rounded once."""
        if self.binary:
            return later - earlier
        return (later.view(np.uint64) - earlier.view(np.uint64)).astype(np.float64)

    def elapsed(self, later: np.ndarray, earlier: np.ndarray) -> np.ndarray:
        """Durations ``later - earlier`` (``later >= earlier``) in ``unit``: :meth:`between`, scaled."""
        if self.binary:
            return self.duration(later - earlier)
        return self.duration(later.view(np.uint64) - earlier.view(np.uint64))

    def duration(self, delta: np.ndarray) -> np.ndarray:
        """Differences of native times as float64 durations: time-column units for numbers,
        ``unit`` (default days) for datetimes and timedeltas.  Exact while the difference is
        below 2**53 ticks, else correctly rounded from the exact integer difference."""
        d = delta.astype(np.float64)
        if self.kind == "number" and self.time_unit is None:
            return d if not self.scale or self.scale == 1 else d / self.scale
        ratio = Fraction(self.tick_ns, UNITS_NS[self.unit or "D"])
        if ratio.numerator == 1:
            return d / ratio.denominator if ratio.denominator != 1 else d
        if ratio.denominator == 1:
            return d * ratio.numerator
        return d * ratio.numerator / ratio.denominator

    def to_time(self, native: np.ndarray) -> pd.Series:
        """Native times back to the time column's kind (numbers, or timestamps in its zone)."""
        if self.kind == "number":
            v = native.astype(np.float64)
            return pd.Series(v / self.scale if self.scale and self.scale != 1 else v)
        if self.kind == "timedelta":
            return pd.Series(native.view(f"timedelta64[{self.res}]"))
        out = pd.Series(native.view(f"datetime64[{self.res}]"))
        return out.dt.tz_localize("UTC").dt.tz_convert(self.tz) if self.tz is not None else out

    # ------------------------------------------------------------------ other columns of times
    def reference(self, series: pd.Series) -> tuple[np.ndarray, np.ndarray]:
        """Another column of times (a reference date, say) as (r, missing): key_j <= r exactly
        when t_j is at or before the reference.  A reference between two ticks counts as the
        earlier one, which keeps "on or before" exact; beyond the axis' range it saturates."""
        col = str(series.name)
        try:
            kind = time_kind(series, "column")
        except TimeTypeError as err:
            raise TimeTypeError(str(err), column=col) from None
        if kind != self.kind:
            raise TimeTypeError(f"column {col!r} holds {kind} values but the time column {self.column!r} "
                                f"holds {self.kind} values", column=col)
        if kind == "number":
            return self._reference_numbers(series)
        if kind == "datetime":
            raw, res, tz = _datetimes(series, "column")
            if (tz is None) != (self.tz is None):
                which = ("time-zone-aware", "naive") if tz is not None else ("naive", "time-zone-aware")
                raise TimeTypeError(
                    f"column {col!r} holds {which[0]} datetimes but the time column {self.column!r} holds "
                    f"{which[1]} ones: localize or convert one of them first (e.g. .dt.tz_localize)", column=col)
        else:
            raw, res = _timedeltas(series)
        missing = raw == NAT
        return _rescale_floor(raw, UNITS_NS[res], int(self.tick_ns)), missing

    def _reference_numbers(self, series: pd.Series) -> tuple[np.ndarray, np.ndarray]:
        x = series.to_numpy(dtype=np.float64, na_value=np.nan) if not _is_int(series) \
            else series.to_numpy()
        if x.dtype.kind != "f":  # integers: exact, scaled to the axis' decimal ticks
            none = np.zeros(len(x), dtype=bool)
            if self.binary:
                return self._floor_rank(x.astype(np.float64)), none
            return _rescale_floor(x.astype(np.int64), self.scale or 1, 1), none
        missing = np.isnan(x)
        if self.binary:
            return self._floor_rank(x), missing
        scale = self.scale or 1
        with np.errstate(invalid="ignore", over="ignore"):
            q = x * scale
            r = np.rint(q)
            r = np.where(r / scale == x, r, np.floor(q))  # decimals as they print, else floor
        r = np.clip(np.nan_to_num(r, nan=0.0), -(2.0**63), 2.0**63 - 1024)
        return r.astype(np.int64), missing

    def _floor_rank(self, x: np.ndarray) -> np.ndarray:
        with np.errstate(invalid="ignore"):
            return (np.searchsorted(self.distinct, x, side="right") - 1).astype(np.int64)


def _is_int(series: pd.Series) -> bool:
    return pd.api.types.is_integer_dtype(series.dtype) and not series.isna().any()


def _rescale_floor(raw: np.ndarray, from_ns: int, to_ns: int) -> np.ndarray:
    """Ticks of one unit as ticks of another, rounded down and clamped to int64 (NaT stays INT_MIN)."""
    if from_ns == to_ns:
        return raw
    if from_ns > to_ns:  # coarser to finer: multiply, saturating
        f = from_ns // to_ns
        lim = INT_MAX // f
        out = raw * f if raw.size == 0 or int(np.abs(raw[raw != NAT]).max(initial=0)) <= lim else \
            np.where(raw > lim, INT_MAX, np.where(raw < -lim, INT_MIN + 1, raw * f))
        return np.where(raw == NAT, NAT, out)
    return np.where(raw == NAT, NAT, raw // (to_ns // from_ns))


def _numbers(series: pd.Series) -> tuple[np.ndarray, int | None, np.ndarray]:
    """(native times, decimal scale or None, missing mask) of a numeric time column."""
    name = str(series.name)
    dtype = series.dtype
    if pd.api.types.is_integer_dtype(dtype):
        missing = series.isna().to_numpy()
        raw = series.to_numpy(dtype=dtype.numpy_dtype if hasattr(dtype, "numpy_dtype") else None,
                              na_value=0) if missing.any() or not isinstance(dtype, np.dtype) else series.to_numpy()
        if raw.dtype.kind == "u" and raw.size and int(raw.max()) > INT_MAX:
            bad = np.flatnonzero(raw > INT_MAX)
            raise TimeTypeError(rows_message("time beyond the int64 range", name, len(bad),
                                             list(series.index[bad[:5]]), noun="row labels"),
                                column=name, count=len(bad))
        return raw.astype(np.int64), 1, missing
    x = series.to_numpy(dtype=np.float64, na_value=np.nan)
    missing = np.isnan(x)
    inf = np.isinf(x)
    if inf.any():
        bad = np.flatnonzero(inf)
        raise TimeTypeError(rows_message("infinite time", name, len(bad), list(series.index[bad[:5]]),
                                         noun="row labels"), column=name, count=len(bad))
    ok = x[~missing] if missing.any() else x
    scale = decimal_scale(ok)
    if scale is None:
        return x, None, missing
    t = np.rint(np.where(missing, 0.0, x) * scale).astype(np.int64)
    return t, scale, missing


def _check_unit(unit: str | None, kind: str, column: str, time_unit: str | None = None) -> str | None:
    if unit is None:
        return "D" if kind != "number" else None
    if kind == "number" and time_unit is None:
        raise OptionError(f"unit={unit!r} converts durations of datetime times, or of numeric times whose unit is "
                          f"declared with time_unit= (e.g. time_unit='D'); time column {column!r} holds numbers "
                          f"of no declared unit, whose own units are used")
    if unit not in UNITS_NS:
        raise OptionError(f"unit must be one of {sorted(UNITS_NS)}, got {unit!r}")
    return unit
