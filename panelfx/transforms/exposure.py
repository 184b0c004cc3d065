"""Exposure: cumulative dose, current dose, days on treatment from interval records (dosing, dispensing)."""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from fractions import Fraction
from typing import Any, Literal

import numpy as np

from .. import _kernels as K
from .._options import checked_options
from .._panel import Panel
from .._subjects import Subjects
from .._tables import SideView, TableUse, check_table_name, day_ticks, float_key
from .._time import INT_MAX, decimal_scale
from .._transform import Transform, check_bool, check_choice, check_column_name, check_name
from ..errors import IntervalError, NullKeyError, OptionError, TiedRecordsError, rows_message
from ._spans import check_span, span_label, span_words
from .as_of import _plus_one

STATS = ("cumulative", "current", "days_on", "on_treatment", "intensity")
OVERLAP = ("sum", "latest", "error")
OPEN_END = ("error", "until_time")
_WORDS = {
    "cumulative": "cumulative dose (dose rate x covered time) up to",
    "current": "summed dose rate of the records covering",
    "days_on": "length of the union of covered time up to",
    "on_treatment": "whether a record covers",
    "intensity": "cumulative dose divided by the time since the first dose, at",
}


@dataclasses.dataclass(frozen=True, kw_only=True)
class Exposure(Transform):
    """Configured :func:`exposure`."""

    type_name = "exposure"
    table: str
    dose: str | None = None
    start: str
    end: str | None = None
    supply: str | None = None
    stat: Literal["cumulative", "current", "days_on", "on_treatment", "intensity"] = "cumulative"
    inclusive: bool = True
    include_current: bool = True
    grace: str | float | None = None
    overlap: Literal["sum", "latest", "error"] = "sum"
    open_end: Literal["error", "until_time"] = "error"
    lag: str | float | None = None
    name: str | None = None

    def __post_init__(self) -> None:
        check_table_name(self.table)
        check_column_name("start", self.start)
        for opt in ("dose", "end", "supply"):
            if getattr(self, opt) is not None:
                check_column_name(opt, getattr(self, opt))
        if (self.end is None) == (self.supply is None):
            raise OptionError("give end= (a column of end times) or supply= (a column of days' supply), exactly one")
        check_choice("stat", self.stat, STATS)
        if self.stat in ("cumulative", "current", "intensity") and self.dose is None:
            raise OptionError(f"stat={self.stat!r} needs dose= (a column of dose rates per time unit)")
        check_bool("inclusive", self.inclusive)
        check_bool("include_current", self.include_current)
        if self.grace is not None:
            if self.stat != "on_treatment":
                raise OptionError(f"grace= applies to stat='on_treatment' only, not stat={self.stat!r}")
            object.__setattr__(self, "grace", check_span("grace", self.grace, allow_zero=True))
        check_choice("overlap", self.overlap, OVERLAP)
        check_choice("open_end", self.open_end, OPEN_END)
        if self.lag is not None:
            object.__setattr__(self, "lag", check_span("lag", self.lag, allow_zero=True))
        check_name(self.name)

    def inputs(self) -> tuple[str, ...]:
        return ()

    def tables(self) -> tuple[TableUse, ...]:
        cols = tuple(c for c in (self.dose, self.supply) if c is not None)
        return (TableUse(self.table, self.start, (self.end,) if self.end else (), cols),)

    def outputs(self) -> tuple[str, ...]:
        if self.name:
            return (self.name,)
        lag = f"_lag{span_label(self.lag)}" if self.lag is not None else ""
        return (f"{self.dose or self.table}_{self.stat}{lag}",)

    @property
    def past_only(self) -> bool:
        # Counting the whole day of t (inclusive days, current day included) takes in records
        # that start later that day: with times of day that is the future, so it is not
        # claimed.  The day before (include_current=False) or inclusive=False are past-only.
        whole_day = self.inclusive and self.include_current and self.stat in ("cumulative", "days_on", "intensity")
        return not whole_day

    def describe(self) -> str:
        when = "t" if self.lag is None else f"t - {span_words(self.lag)}"
        if self.stat in ("cumulative", "days_on", "intensity"):
            when += " (that day included)" if self.include_current and self.inclusive else \
                " (the day before)" if self.inclusive else ""
        src = f"{self.table}.{self.dose}" if self.dose else f"records of side table {self.table!r}"
        cover = f"[{self.start}, {self.end}]" if self.end else f"{self.supply} days' supply from {self.start}"
        words = f"{_WORDS[self.stat]} {when}; {src}, each covering {cover}"
        if self.inclusive:
            words += " (end day included)"
        if self.grace is not None:
            words += f", extended by {span_words(self.grace)}"
        words += {"sum": "; overlapping records add up", "latest": "; a new record supersedes earlier ones",
                  "error": "; overlapping records are an error"}[self.overlap]
        if self.open_end == "until_time":
            words += "; a record without an end runs on"
        return words

    # ------------------------------------------------------------------ computation
    def compute(self, panel: Panel) -> Sequence[Any]:
        view = panel.tables[self.table].view(self.start, (self.end,) if self.end else ())
        iv = intervals(view, self)
        t = view.qt
        if self.lag is not None:
            t = t - whole_ticks(view, self.lag, "lag")
        step = iv.step if self.include_current else _zero(iv.step)
        cut = t + step if self.stat in ("cumulative", "days_on", "intensity") else t
        n = view.n
        stat = self.stat
        if stat == "on_treatment":
            real = iv.end > iv.start  # an empty record covers nothing, grace or not
            end = iv.end[real]
            if self.grace is not None:
                end = _add_saturating(end, whole_ticks(view, self.grace, "grace"))
            tl = Timeline(view, iv.start[real], end, np.ones(int(real.sum()), dtype=np.int64),
                          grp=view.subjects.grp[real])
            rate, _ = tl.at(t, area=False)
            return [rate > 0]
        if stat == "days_on":
            s, e, grp = union(view, iv.start, iv.end)
            tl = Timeline(view, s, e, np.ones(len(s), dtype=np.int64), grp=grp)
            _, area = tl.at(cut, area=True)
            return [area]
        d = view.columns.numeric(self.dose) if self.dose else np.ones(iv.m)
        unknown = np.isnan(d)
        tl = Timeline(view, iv.start, iv.end, np.where(unknown, 0.0, d))
        if stat == "current":
            rate, _ = tl.at(t, area=False)
            if unknown.any():
                u, _ = Timeline(view, iv.start, iv.end, unknown.astype(np.int64)).at(t, area=False)
                rate = np.where(u > 0, np.nan, rate)
            return [rate]
        _, area = tl.at(cut, area=True)
        if unknown.any():
            # unknown dose of a record that started before the cut-off: the total is unknown
            first_unknown = _first_start(view, iv, unknown)
            area = np.where(_before(first_unknown, cut), np.nan, area)
        if stat == "cumulative":
            return [area]
        first = _first_start(view, iv, np.ones(iv.m, dtype=bool))
        started = _before(first, cut)
        with np.errstate(invalid="ignore", divide="ignore"):
            out = area / view.axis.duration(cut - np.where(started, first, cut))
        out[~started] = np.nan
        return [out if n else np.zeros(0)]


def _zero(step: Any) -> Any:
    return 0.0 if isinstance(step, float) else 0


def _add_saturating(a: np.ndarray, b: Any) -> np.ndarray:
    if a.dtype.kind == "f":
        return a + b
    lim = INT_MAX - int(b)
    return np.where(a > lim, INT_MAX, a + np.int64(b))


def _before(first: np.ndarray, cut: np.ndarray) -> np.ndarray:
    """first < cut, where ``first`` holds INT_MAX / inf for "none"."""
    return first < cut


def _first_start(view: SideView, iv: Intervals, mask: np.ndarray) -> np.ndarray:
    """Per panel row: the subject's earliest start among records where ``mask`` holds (INT_MAX/inf: none)."""
    none = np.inf if iv.start.dtype.kind == "f" else INT_MAX
    out = np.full(view.n, none, dtype=iv.start.dtype)
    if iv.m == 0:
        return out
    first = K.first_index(view.subjects, mask)[view.subjects.starts]
    per_group = np.where(first >= 0, iv.start[np.maximum(first, 0)], none)
    g = view.g
    return np.where(g >= 0, per_group[np.maximum(g, 0)], none)


def whole_ticks(view: SideView, value: Any, what: str) -> Any:
    """A span option in the common axis' native units; whole ticks on integer axes."""
    span = view.span(value, what)
    if isinstance(span, Fraction):
        if span.denominator != 1:
            raise OptionError(f"{what}={value!r} is not a whole number of the time column's ticks")
        return int(span)
    return float(span)


# ---------------------------------------------------------------------------------- intervals


@dataclasses.dataclass(frozen=True, eq=False)
class Intervals:
    """The records as half-open intervals [start, end) in native units, ends made effective by the
    overlap rule (INT_MAX / inf: open end).  ``step`` is the day added to an inclusive end."""

    start: np.ndarray
    end: np.ndarray
    step: Any
    m: int


def intervals(view: SideView, tr: Any) -> Intervals:
    """Covered intervals of the records of ``view`` for an exposure-like transform ``tr``
    (fields end / supply / inclusive / open_end / overlap)."""
    name = view.name
    start = view.t
    m = view.m
    step = day_ticks(view.axis)
    if step is None:
        raise OptionError("the time column's ticks do not divide a day: exposure needs whole days")
    if not tr.inclusive:
        step = _zero(step)
    binary = start.dtype.kind == "f"
    open_value: Any = np.inf if binary else INT_MAX
    if tr.end is not None:
        end_t, _, missing = view.ends[tr.end]
        what = f"{name}.{tr.end}"
        backwards = ~missing & (end_t < start)
        end = _add_saturating(end_t, step) if step else end_t.copy()
    else:
        sup = view.columns.numeric(tr.supply)
        missing = np.isnan(sup)
        what = f"{name}.{tr.supply}"
        day = day_ticks(view.axis)
        ticks = np.where(missing, 0.0, sup) * day
        if not binary:
            whole = np.rint(ticks)
            bad = (whole != ticks) | (sup < 0)
            if bad.any():
                where = np.flatnonzero(bad)
                ids = view.ids_of_records(where)
                raise IntervalError(rows_message("days' supply that is negative or not a whole number of the time "
                                                 "column's ticks", what, len(where), ids),
                                    column=what, count=len(where), ids=ids)
            end = start + whole.astype(np.int64)
        else:
            end = start + ticks
        backwards = np.zeros(m, dtype=bool)
    if missing.any():
        if tr.open_end == "error":
            where = np.flatnonzero(missing)
            ids = view.ids_of_records(where)
            raise NullKeyError(rows_message(f"records of side table {name!r} without an end (open_end='until_time' "
                                            f"lets them run on)", what, len(where), ids),
                               column=what, count=len(where), ids=ids)
        end = np.where(missing, open_value, end)
    if backwards.any():
        where = np.flatnonzero(backwards)
        ids = view.ids_of_records(where)
        raise IntervalError(rows_message(f"records of side table {name!r} that end before they start", what,
                                         len(where), ids), column=what, count=len(where), ids=ids)
    if m > 1 and tr.overlap != "sum":
        s = view.subjects
        same_subject = s.grp[1:] == s.grp[:-1]
        if tr.overlap == "latest":
            tie = same_subject & (start[1:] == start[:-1])
            if tie.any():
                where = np.flatnonzero(tie)
                ids = view.ids_of_records(where)
                what = f"{name}.{tr.start}"
                raise TiedRecordsError(rows_message(f"records of side table {name!r} start at the same time: "
                                                    f"overlap='latest' cannot tell which supersedes", what,
                                                    len(where), ids), column=what, count=len(where), ids=ids)
            nxt = np.where(same_subject, start[1:], end[:-1])
            end = end.copy()
            end[:-1] = np.minimum(end[:-1], nxt)
        else:
            reach = _running_max(s, end)  # latest end among the subject's records so far
            bad = same_subject & (start[1:] < reach[:-1])
            if bad.any():
                where = np.flatnonzero(bad) + 1
                ids = view.ids_of_records(where)
                raise IntervalError(rows_message(f"overlapping records in side table {name!r} (overlap='error'; "
                                                 f"'sum' adds them, 'latest' lets a new record supersede)",
                                                 f"{name}.{tr.start}", len(where), ids),
                                    column=f"{name}.{tr.start}", count=len(where), ids=ids)
    return Intervals(start=start, end=end, step=step, m=m)


def _running_max(s: Subjects, v: np.ndarray) -> np.ndarray:
    """Per-subject running maximum (no loop): values ranked, offset by subject, accumulated."""
    if s.n == 0:
        return v.copy()
    uniq, rank = np.unique(v, return_inverse=True)
    width = len(uniq) + 1
    key = s.grp * width + rank.reshape(-1)
    np.maximum.accumulate(key, out=key)
    return uniq[key - s.grp * width]


def union(view: SideView, start: np.ndarray, end: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Per subject, the union of [start, end) as disjoint blocks (records in start order):
    (block starts, block ends, record group of each block)."""
    s = view.subjects
    if s.n == 0:
        return start, end, s.grp
    reach = _running_max(s, end)
    new = np.ones(s.n, dtype=bool)
    new[1:] = start[1:] > reach[:-1]
    new[s.starts] = True
    blocks = np.flatnonzero(new)
    bend = np.maximum.reduceat(end, blocks)
    return start[blocks], bend, s.grp[blocks]


class Timeline:
    """Dose rate as a step function of time per subject: +rate at each start, -rate at each
    end (effective ends; open ends never end).  ``at(c)`` gives per panel row the rate just
    after c and, with ``area``, the integral of the rate up to c (in the panel's unit)."""

    def __init__(self, view: SideView, start: np.ndarray, end: np.ndarray, rate: np.ndarray,
                 grp: np.ndarray | None = None) -> None:
        self.view = view
        grp_rec = view.subjects.grp if grp is None else grp
        keep = end > start  # an empty interval covers nothing
        closes = keep & (end != (np.inf if end.dtype.kind == "f" else INT_MAX))
        times = np.concatenate([start[keep], end[closes]])
        grp = np.concatenate([grp_rec[keep], grp_rec[closes]])
        exact, scale = _exact_rates(rate)
        delta = np.concatenate([exact[keep], -exact[closes]])
        self.key = float_key(times) if times.dtype.kind == "f" else times
        order = np.lexsort((self.key, grp))
        self.times = times[order]
        self.key = self.key[order]
        grp = grp[order]
        delta = delta[order]
        self.events = Subjects.from_codes(grp)
        count = view.subjects.count
        self.of_group = np.full(count, -1, dtype=np.int64)
        if len(grp):
            self.of_group[grp[self.events.starts]] = np.arange(self.events.count)
        if delta.dtype.kind == "i":  # exact integer running sums, scaled back once
            c = np.cumsum(delta)
            before = (c[self.events.starts] - delta[self.events.starts]) if len(c) else c
            r = c - before[self.events.grp] if len(c) else c
            self.rate = r.astype(np.float64) / scale if rate.dtype.kind == "f" else r
        else:
            self.rate = K.cumsum(self.events, delta)
        self.search = K.search_key(self.events, self.key)

    def at(self, c: np.ndarray, *, area: bool) -> tuple[np.ndarray, np.ndarray]:
        view = self.view
        n = view.n
        g = view.g
        rate = np.zeros(n, dtype=self.rate.dtype if self.rate.size else np.float64)
        total = np.zeros(n)
        if self.of_group.size == 0:
            return rate, total
        e = np.where(g >= 0, self.of_group[np.maximum(g, 0)], -1)
        has = e >= 0
        if not has.any():
            return rate, total
        rows = np.flatnonzero(has)
        ck = float_key(c[rows].astype(np.float64)) if self.times.dtype.kind == "f" else c[rows]
        p = K.first_at_or_after(self.events, self.key, self.search, _plus_one(ck), grp=e[rows])
        j = p - 1
        ok = j >= self.events.starts[e[rows]]
        jj = np.maximum(j, 0)
        rate[rows] = np.where(ok, self.rate[jj], 0)
        if area:
            dur = self.view.axis.duration
            prev = K.shift_index(self.events, 1)
            width = dur(self.times - self.times[np.maximum(prev, 0)])
            piece = np.where(prev >= 0, self.rate[np.maximum(prev, 0)] * width, 0.0)
            at_event = K.cumsum(self.events, piece)
            tail = self.rate[jj] * dur(c[rows] - self.times[jj])
            total[rows] = np.where(ok, at_event[jj] + tail, 0.0)
        return rate, total


def _exact_rates(rate: np.ndarray) -> tuple[np.ndarray, int]:
    """Rates as int64 multiples of 1/scale when they are short decimals (sums then exact), else floats."""
    if rate.dtype.kind in "iu":
        return rate.astype(np.int64), 1
    finite = rate[np.isfinite(rate)]
    if finite.size != rate.size:
        return rate, 1
    scale = decimal_scale(finite)
    if scale is None or (finite.size and float(np.abs(finite).sum()) * scale >= 2.0**62):
        return rate, 1
    return np.rint(rate * scale).astype(np.int64), scale


@checked_options
def exposure(
    table: str,
    *,
    dose: str | None = None,
    start: str,
    end: str | None = None,
    supply: str | None = None,
    stat: Literal["cumulative", "current", "days_on", "on_treatment", "intensity"] = "cumulative",
    inclusive: bool = True,
    include_current: bool = True,
    grace: str | float | None = None,
    overlap: Literal["sum", "latest", "error"] = "sum",
    open_end: Literal["error", "until_time"] = "error",
    lag: str | float | None = None,
    name: str | None = None,
) -> Exposure:
    """Exposure at each row's time from interval records in side table ``table`` (dosing,
    dispensing): cumulative dose, current dose, days on treatment, on treatment or not, intensity.

    Each record covers [``start``, ``end``]: with ``inclusive`` (default) both days count,
    so 3 to 16 January is 14 days (numbers: the end plus one time unit); ``supply`` (days'
    supply, instead of ``end``) covers ``supply`` days from the start.  ``dose`` is a rate
    per time unit (per day for datetime times with the default ``unit``).  Inclusive ends
    read times as days (each time the start of its day); for times of day (an infusion from
    08:00 to 12:00) use ``inclusive=False``, where a record covers [start, end).  Statistics at
    each row's time t:

    - ``"cumulative"``: dose x covered time up to t, the day of t included; with
      ``include_current=False`` up to the day before (a sample drawn before the dose on a
      dosing day does not count that day);
    - ``"current"``: the summed dose of the records covering t;
    - ``"days_on"``: the length of the union of covered time so far (overlaps once);
    - ``"on_treatment"``: whether t is covered, after extending each record by ``grace``;
    - ``"intensity"``: cumulative / time since the first start (missing before it).

    ``overlap``: ``"sum"`` (overlapping records add up), ``"latest"`` (a new record
    supersedes: each record runs until its end or the next record's start), ``"error"``.
    A record without an end is an error, or with ``open_end="until_time"`` runs on.
    ``lag`` computes the exposure as of t - lag (latency).  Subjects without records
    have 0 (never on treatment); a missing dose makes the totals from its start on (and
    the current dose while it runs) missing.  Past-only, except "cumulative", "days_on" and
    "intensity" with inclusive days and the current day included (the defaults): they count
    the whole day of t, so a record starting later that day counts, which with times of day
    is the future; with whole-day times nothing later than t is used, but the claim is not
    made.  ``include_current=False`` (up to the day before) or ``inclusive=False`` are
    past-only.  Default name:
    ``<dose or table>_<stat>``, ``_lag<span>`` added with ``lag``.

    >>> import pandas as pd, panelfx as pfx
    >>> visits = pd.DataFrame({"pid": [1, 1, 1], "day": pd.to_datetime(["2024-01-03", "2024-01-16", "2024-02-01"])})
    >>> ex = pd.DataFrame({"pid": [1], "start": pd.to_datetime(["2024-01-03"]),
    ...                    "end": pd.to_datetime(["2024-01-16"]), "mg": [10.0]})
    >>> pfx.derive(visits, pfx.exposure("ex", dose="mg", start="start", end="end"),
    ...            pfx.exposure("ex", start="start", end="end", stat="on_treatment"),
    ...            id="pid", time="day", tables={"ex": ex})
       pid        day  mg_cumulative  ex_on_treatment
    0    1 2024-01-03           10.0             True
    1    1 2024-01-16          140.0             True
    2    1 2024-02-01          140.0            False
    """
    return Exposure(table=table, dose=dose, start=start, end=end, supply=supply, stat=stat, inclusive=inclusive,
                    include_current=include_current, grace=grace, overlap=overlap, open_end=open_end, lag=lag,
                    name=name)


__all__ = ["exposure", "Exposure", "intervals", "Intervals"]
