"""One exact clock for times that come from several columns and options (episodes, snapshots).

Frame-level functions that cut follow-up compare times from many places: the occasion
times, entry and exit columns, event tables, landmarks, and times made from options (an
occasion time plus a latency, a change moved before an event, a band boundary on a second
time scale).  A tie between two of them decides which interval an event closes, so the
comparison must be exact.  :class:`Clock` puts all of them on one integer scale:

- numbers that are short decimals (0.5, 4.5, 365.25): int64 counts of 10**-k, with one k
  large enough for every column and option involved, so 0.1 + 0.2 lands exactly on 0.3;
  numbers that are not short decimals fall back to float64 (compared as binary floats);
- datetimes and timedeltas: int64 nanoseconds (tz-aware ones as UTC instants); results go
  back to the time column's own resolution when they fit it, else to nanoseconds.

:func:`last_at_or_before` is the as-of search used on that scale: for each query (subject,
time), the last row of a sorted table at or before it.
"""

from __future__ import annotations

from collections.abc import Hashable, Sequence
from dataclasses import dataclass
from fractions import Fraction
from typing import Any

import numpy as np
import pandas as pd

from ._columns import to_float
from ._time import UNITS_NS, _datetimes, _timedeltas, decimal_scale, exact_number, span_ns, time_kind
from .errors import OptionError, TimeTypeError, rows_message

__all__ = ["Clock", "last_at_or_before", "NUMBER_SCALE_MAX"]

#: The finest decimal step used for numeric times (10**-9).
NUMBER_SCALE_MAX = 10**9

NS_MAX = 2**63 - 1


def _finite(x: np.ndarray) -> np.ndarray:
    return x[np.isfinite(x)]


@dataclass(frozen=True, eq=False)
class Clock:
    """Times of one kind on one exact scale (see the module docstring)."""

    kind: str  # "number", "datetime" or "timedelta"
    column: str  # the time column, for messages
    scale: int | None  # numbers: ticks are counts of 1/scale; None: float64 ticks (binary floats)
    tz: Any  # datetimes: the time column's zone (None: naive)
    res: str | None  # datetimes/timedeltas: the time column's own resolution (for results)
    unit: str | None  # datetimes/timedeltas: unit of durations (a UNITS_NS key)

    # ------------------------------------------------------------------ making
    @classmethod
    def build(cls, time: pd.Series, *, columns: Sequence[pd.Series] = (), numbers: Sequence[Any] = (),
              products: Sequence[tuple[np.ndarray, float]] = (), unit: str | None = None) -> Clock:
        """A clock for ``time`` (the time column) that also holds ``columns`` (other columns of
        times), ``numbers`` (spans and fixed times given as options) and, for numeric times,
        the products ``values * factor`` of each pair in ``products`` exactly."""
        kind = time_kind(time)
        name = str(time.name)
        for col in columns:
            other = time_kind(col, "column")
            if other != kind:
                raise TimeTypeError(f"column {col.name!r} holds {other} values but the time column {name!r} "
                                    f"holds {kind} values", column=str(col.name))
        if kind != "number":
            if unit is not None and unit not in UNITS_NS:
                raise OptionError(f"unit must be one of {sorted(UNITS_NS)}, got {unit!r}")
            tz = res = None
            if kind == "datetime":
                _, res, tz = _datetimes(time, "time column")
                for col in columns:
                    _, _, ctz = _datetimes(col, "column")
                    if (ctz is None) != (tz is None):
                        which = ("time-zone-aware", "naive") if ctz is not None else ("naive", "time-zone-aware")
                        raise TimeTypeError(
                            f"column {col.name!r} holds {which[0]} datetimes but the time column {name!r} holds "
                            f"{which[1]} ones: localize or convert one of them first", column=str(col.name))
            else:
                _, res = _timedeltas(time)
            return cls(kind=kind, column=name, scale=None, tz=tz, res=res, unit=unit or "D")
        if unit is not None:
            raise OptionError(f"unit={unit!r} applies to datetime or timedelta times only; time column {name!r} "
                              f"holds numbers, whose own units are used")
        parts = [_finite(to_float(s)) for s in (time, *columns)]
        plain = [float(v) for v in numbers]
        scales = [decimal_scale(np.concatenate(parts) if parts else np.zeros(0), tuple(plain))]
        for values, factor in products:
            scales.append(_times(decimal_scale(_finite(np.asarray(values, dtype=np.float64))),
                                 decimal_scale(np.zeros(0), (float(factor),))))
        scale: int | None = None
        if all(s is not None for s in scales):
            scale = max(s for s in scales if s is not None)
            top = max([float(np.abs(p).max()) for p in parts if p.size] + [abs(v) for v in plain] + [0.0])
            if scale > NUMBER_SCALE_MAX or top * scale >= 2.0**62:
                scale = None
        return cls(kind=kind, column=name, scale=scale, tz=None, res=None, unit=None)

    @property
    def binary(self) -> bool:
        return self.kind == "number" and self.scale is None

    # ------------------------------------------------------------------ reading
    def read(self, series: pd.Series) -> tuple[np.ndarray, np.ndarray]:
        """(ticks, missing) of a column of times of this clock's kind (series order)."""
        if self.kind == "number":
            x = to_float(series)
            missing = np.isnan(x)
            if self.scale is None:
                return np.where(missing, 0.0, x), missing
            return np.rint(np.where(missing, 0.0, x) * self.scale).astype(np.int64), missing
        if self.kind == "datetime":
            raw, res, _ = _datetimes(series, "column")
        else:
            raw, res = _timedeltas(series)
        missing = raw == np.iinfo(np.int64).min
        return _to_ns(np.where(missing, 0, raw), UNITS_NS[res], str(series.name)), missing

    def point(self, value: Any, what: str) -> int | float:
        """One time given as an option (a number, a timestamp or a timedelta) in ticks."""
        s = pd.Series([value], name=what)
        try:
            kind = time_kind(s, what)
        except TimeTypeError:
            kind = "text or another type"
        tz = getattr(s.dtype, "tz", None)
        if kind != self.kind or (kind == "datetime" and (tz is None) != (self.tz is None)):
            zone = "" if kind != "datetime" else (" time-zone-aware" if tz is not None else " naive")
            want = "" if self.kind != "datetime" else (" time-zone-aware" if self.tz is not None else " naive")
            raise OptionError(f"{what}={value!r} is a{zone} {kind} value but the time column {self.column!r} "
                              f"holds{want} {self.kind} values")
        ticks, missing = self.read(s)
        if missing[0]:
            raise OptionError(f"{what} must not be missing, got {value!r}")
        return ticks[0].item()

    def span(self, value: Any, what: str) -> int | float:
        """A non-negative span option (a number for numeric times, '30D' or a timedelta for
        datetimes) in ticks; exact, or an :class:`OptionError` saying why it is not."""
        if self.kind == "number":
            if isinstance(value, (bool, str)) or not isinstance(value, (int, float, np.integer, np.floating)):
                raise OptionError(f"{what}={value!r} does not fit time column {self.column!r}, which holds "
                                  f"numbers: give a number in its units")
            if self.scale is None:
                return float(value)
            q = exact_number(value.item() if isinstance(value, np.generic) else value) * self.scale
            if q.denominator != 1:  # pragma: no cover - the scale was chosen to hold every span
                raise OptionError(f"{what}={value!r} is finer than the clock of {self.column!r}")
            return int(q)
        if isinstance(value, (bool, int, float, np.integer, np.floating)):
            raise OptionError(f"{what}={value!r} does not fit time column {self.column!r}, which holds "
                              f"{self.kind} values: give a timedelta or a string such as '90D'")
        try:
            ns = span_ns(value)
        except (ValueError, OverflowError, TypeError):
            raise OptionError(f"{what}={value!r} is not a time span such as '90D'") from None
        if ns.denominator != 1:
            raise OptionError(f"{what}={value!r} is not a whole number of nanoseconds")
        return int(ns)

    def scaled(self, values: np.ndarray, factor: Any, what: str) -> np.ndarray:
        """``values * factor`` as spans in ticks, where ``factor`` is the length of one unit of
        ``values`` (a number for numeric times, a unit such as 'Y' for datetimes): exact for
        numbers on a decimal clock, else rounded to the nearest tick."""
        v = np.asarray(values, dtype=np.float64)
        if self.kind == "number":
            f = float(factor)
            if self.scale is None:
                return v * f
            sv = decimal_scale(_finite(v)) or 1
            sf = decimal_scale(np.zeros(0), (f,)) or 1
            if self.scale % (sv * sf):  # pragma: no cover - build() was given the same products
                raise OptionError(f"{what}: values * {factor!r} are finer than the clock of {self.column!r}")
            iv = np.rint(np.where(np.isfinite(v), v, 0.0) * sv).astype(np.int64)
            step = int(exact_number(f) * sf) * (self.scale // (sv * sf))
            return iv * np.int64(step)
        ns = UNITS_NS[factor]
        s = decimal_scale(_finite(v))
        if s is not None and ns % s == 0:
            iv = np.rint(np.where(np.isfinite(v), v, 0.0) * s).astype(np.int64)
            if iv.size and int(np.abs(iv).max()) > NS_MAX // (ns // s):
                raise TimeTypeError(f"{what}: times beyond the range of nanoseconds", column=what)
            return iv * np.int64(ns // s)
        return np.rint(v * ns).astype(np.int64)

    # ------------------------------------------------------------------ writing
    def native(self, ticks: np.ndarray) -> Any:
        """Ticks as the time column's kind: float64 numbers, or datetimes / timedeltas in the
        column's resolution (nanoseconds where a value falls between its ticks)."""
        if self.kind == "number":
            v = np.asarray(ticks, dtype=np.float64)
            return v / self.scale if self.scale and self.scale != 1 else v
        res = self.res or "ns"
        step = UNITS_NS[res]
        t = np.asarray(ticks, dtype=np.int64)
        if step != 1 and (t % step == 0).all():
            t = t // step
        else:
            res = "ns"
        if self.kind == "timedelta":
            return pd.array(t.view(f"timedelta64[{res}]"))
        out = pd.Series(t.view(f"datetime64[{res}]"))
        if self.tz is not None:
            out = out.dt.tz_localize("UTC").dt.tz_convert(self.tz)
        return out.array

    def duration(self, delta: np.ndarray) -> np.ndarray:
        """Differences of ticks as float64 durations: the time column's units for numbers,
        ``unit`` (default days) for datetimes and timedeltas."""
        d = np.asarray(delta, dtype=np.float64)
        if self.kind == "number":
            return d / self.scale if self.scale and self.scale != 1 else d
        ratio = Fraction(1, UNITS_NS[self.unit or "D"])
        return d / ratio.denominator if ratio.denominator != 1 else d


def _times(a: int | None, b: int | None) -> int | None:
    return None if a is None or b is None else a * b


def _to_ns(raw: np.ndarray, tick_ns: int, name: str) -> np.ndarray:
    """Ticks of ``tick_ns`` nanoseconds as nanoseconds; a :class:`TimeTypeError` beyond int64."""
    if tick_ns == 1:
        return raw
    lim = NS_MAX // tick_ns
    if raw.size and int(np.abs(raw).max()) > lim:
        bad = np.flatnonzero(np.abs(raw) > lim)
        raise TimeTypeError(rows_message("times beyond what nanoseconds hold (years 1678 to 2261)", name,
                                         len(bad), [int(i) for i in bad[:5]], noun="positions"),
                            column=name, count=len(bad))
    return raw * np.int64(tick_ns)


def last_at_or_before(row_grp: np.ndarray, row_t: np.ndarray, q_grp: np.ndarray, q_t: np.ndarray,
                      *, strict: bool = False) -> np.ndarray:
    """Per query: the last row with the query's group and time at or before the query's time
    (``strict``: before it), else -1.  Rows must be sorted by (group, time); groups are
    non-negative integers.  Exact on int64 and float64 times: one int64 key (subject, then
    time as an offset, or as its dense rank among rows and queries) is searched."""
    if len(q_t) == 0:
        return np.zeros(0, dtype=np.int64)
    if len(row_t) == 0:
        return np.full(len(q_t), -1, dtype=np.int64)
    groups = int(max(row_grp.max(), q_grp.max())) + 1
    row_key = q_key = None
    if row_t.dtype.kind == "i" and q_t.dtype.kind == "i":
        # integer ticks: offsets from the smallest time, when subject and offset fit one int64
        lo = min(int(row_t.min()), int(q_t.min()))
        width = max(int(row_t.max()), int(q_t.max())) - lo + 1
        if width.bit_length() + groups.bit_length() <= 62:
            row_key = row_grp.astype(np.int64) * width + (row_t - lo)
            q_key = q_grp.astype(np.int64) * width + (q_t - lo)
    if row_key is None or q_key is None:  # else dense ranks of the times
        uniq, inv = np.unique(np.concatenate([row_t, q_t]), return_inverse=True)
        inv = inv.reshape(-1).astype(np.int64)
        width = len(uniq) + 1
        if width.bit_length() + groups.bit_length() > 62:  # pragma: no cover - beyond any real table
            raise OptionError("too many distinct times and subjects for one search key")
        row_key = row_grp.astype(np.int64) * width + inv[: len(row_t)]
        q_key = q_grp.astype(np.int64) * width + inv[len(row_t):]
    at = np.searchsorted(row_key, q_key, side="left" if strict else "right") - 1
    ok = at >= 0
    ok[ok] = row_grp[at[ok]] == q_grp[ok]
    return np.where(ok, at, -1)


def ids_of(frame: pd.DataFrame, id_cols: Sequence[str], positions: np.ndarray, limit: int = 5) -> list[Hashable]:
    """The first few distinct subject ids at caller positions of ``frame`` (for messages)."""
    pos = np.asarray(positions)[: limit * 20]
    cols = [frame[c].iloc[pos].tolist() for c in id_cols]
    vals = cols[0] if len(cols) == 1 else list(zip(*cols))
    return list(dict.fromkeys(vals))[:limit]
