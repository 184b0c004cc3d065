"""``episodes``: visit data to counting-process data, one row per (start, stop] stretch of constant covariates.

Time-varying Cox models and Poisson rate models take follow-up cut into intervals during
which the covariates do not change, with an event indicator on the interval that the event
closes.  Building those intervals from visit data decides which covariate value describes
which stretch of time, so the rules are fixed here and pinned by tests:

- **held until the next occasion**: a value measured at an occasion describes the time from
  that occasion to the next one (the same rule as the step integral of ``cumulative``);
- **no reverse causation**: a value measured at an event time never describes the interval
  that the event closes; it describes the time after the event;
- **ties**: a covariate change at exactly an event time goes after the event (``tie_shift``
  moves such changes a little earlier instead, the convention of some published data sets);
- **latency** (``lag``): a change takes effect that much later, never beyond exit.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any, Literal

import numpy as np
import pandas as pd

from ._clock import Clock, last_at_or_before
from ._frames import frames
from ._options import checked_options
from ._panel import Panel, as_id_list, require_columns
from ._side import SideRows, side_rows, side_time_column
from ._transform import check_bool, check_choice
from .errors import (
    ColumnExistsError,
    FollowUpError,
    MissingColumnError,
    NotConstantError,
    OptionError,
    UnknownSubjectError,
    rows_message,
)
from .transforms._spans import check_span

__all__ = ["episodes", "OUTPUT_COLUMNS"]

#: Fixed output columns besides the ids, covariates and bands (gap times only with ``gap_time``).
OUTPUT_COLUMNS = ("start", "stop", "event", "gap_start", "gap_stop", "episode", "row")

_BAND_KEYS = ("since", "at_entry", "bands", "unit", "name")


@checked_options
@frames(tables="tables", also=("events",))
def episodes(
    frame: pd.DataFrame,
    *,
    id: str | Sequence[str],
    time: str,
    exit: str,
    entry: str | None = None,
    event: str | None = None,
    covariates: str | Sequence[str] = (),
    events: str | pd.DataFrame | None = None,
    split_at: Any = None,
    lag: Any = None,
    merge: bool = True,
    missing: Literal["carry", "keep"] = "carry",
    tables: Mapping[str, pd.DataFrame] | None = None,
    gap_time: bool = False,
    tie_shift: str | float | None = None,
    unit: str | None = None,
) -> pd.DataFrame:
    """Cut each subject's follow-up (entry, exit] into (start, stop] intervals of constant covariates.

    ``frame`` holds visits: one row per subject (``id``) and occasion (``time``, numbers or
    datetimes), with the ``covariates`` measured there.  Follow-up runs from ``entry``
    (a column, constant within subject; default: the subject's first occasion) to ``exit``
    (a column, constant within subject); an exit at or before entry is a
    :class:`~panelfx.FollowUpError` listing the ids.  ``event`` (a true/false column,
    constant within subject) says whether follow-up ends in an event at exit.

    Rules, in the order they apply:

    - each occasion strictly inside follow-up starts a new interval carrying the values
      measured there, **held until the next occasion** (with no covariate it still starts
      one, which ``merge`` joins back); the value on the first interval is
      the one measured at the last occasion at or before entry (missing if there is none);
      occasions at or after exit are ignored;
    - **reverse-causation guard**: a value measured at an event time never describes the
      interval that the event closes; it describes the time after it.  So a covariate
      change at exactly an event time goes after the event.  ``tie_shift`` (a span, e.g.
      0.5 for half a day) instead moves such a change that much earlier, so that it
      describes the end of the event's interval: the convention of some published data
      sets, to be used only when the change is known to have come first that day;
    - ``events``: recurrent events inside follow-up, each closing an interval: a true/false
      column of the frame (an event at that occasion's time; a missing flag is no event), a side table (a DataFrame, or
      the name of one in ``tables``) with the id columns and a column of event times (named
      like ``time``, or its only other column).  Events outside (entry, exit] are left out;
      two events of a subject at one time are an error.  ``gap_time=True`` adds
      ``gap_start`` and ``gap_stop``: the times since the subject's previous event (or entry);
    - ``lag``: latency, a span for every covariate or a mapping ``{covariate: span}``: a
      value measured at t takes effect at t + lag (until then the earlier value holds, or
      missing when there is none); changes that would take effect at or after exit are
      dropped;
    - ``missing``: ``"carry"`` (default) carries a covariate's last non-missing value over an
      occasion where it is missing; ``"keep"`` lets the missing value describe the interval;
    - ``merge=True`` joins consecutive intervals with identical covariate values (missing
      equals missing), never across an event or a ``split_at`` cut;
    - ``split_at`` cuts at fixed analysis times (a list of times), at every event time of
      the data (``"events"``: the risk-set times of a Cox model), or on a second time scale
      (a Lexis split: a dict ``{"since": col or "at_entry": col, "bands": [...], "unit":
      ..., "name": ...}``, see below); a list may mix them.

    A Lexis split adds a column (``name``, default ``<col>_band``) with the band of each
    interval on the second scale: an ordered categorical with labels ``"<=40"``,
    ``"(40, 50]"``, ``">50"`` for bands ``[40, 50]``.  The scale is the time since the
    times in column ``since`` (a birth date, say), or ``at_entry`` (numbers: its value at
    entry, an age at entry), in units of ``unit`` (for datetimes a unit such as ``"Y"``,
    365.25 days, required; for numeric times the number of time units in one unit of the
    scale, default 1).  Band edges fall on the nearest tick when not exact.

    ``tables`` maps names to side tables (the id columns, a column of times named like
    ``time``, and covariates): a covariate found in a side table is measured at that
    table's times, a stream of its own with the same rules; rows of subjects not in the
    frame are not used.

    Output, one row per interval, subjects in order of first appearance, intervals in time
    order: the id columns, ``start``, ``stop`` (the time column's kind; floats for numbers),
    ``event`` (0/1), ``gap_start``/``gap_stop`` (floats: time units, or ``unit``, default
    days, for datetimes), the covariates (dtypes kept where no value is missing), the band
    columns, ``episode`` (1, 2, ... within subject) and ``row``: the label of the latest
    frame row any covariate's value comes from (the last occasion at or before the start
    when there are no covariates; missing when none).  Never start >= stop.  Past-only by
    construction: each interval's values come from occasions at or before its start (but
    for the changes that ``tie_shift`` moves earlier, by that span).

    >>> import pandas as pd, panelfx as pfx
    >>> visits = pd.DataFrame({"pid": [1, 1, 1, 2, 2], "day": [0, 10, 20, 0, 8],
    ...                        "on_drug": [0, 1, 1, 0, 1], "end": [25, 25, 25, 8, 8],
    ...                        "died": [1, 1, 1, 1, 1]})
    >>> pfx.episodes(visits, id="pid", time="day", exit="end", event="died", covariates=["on_drug"])
       pid  start  stop  event  on_drug  episode  row
    0    1    0.0  10.0      0        0        1    0
    1    1   10.0  25.0      1        1        2    1
    2    2    0.0   8.0      1        0        1    3

    Subject 2 started the drug at the visit where death was recorded (day 8): that value
    never describes the interval the death closes.  The row at day 20 repeats the value of
    day 10, so the two intervals are merged (``merge=False`` keeps them apart).
    """
    spec = _Spec.read(frame, id=id, time=time, entry=entry, exit=exit, event=event, covariates=covariates,
                      events=events, split_at=split_at, lag=lag, merge=merge, missing=missing, tables=tables,
                      gap_time=gap_time, tie_shift=tie_shift, unit=unit)
    return _build(spec)


# ---------------------------------------------------------------------------------- options
@dataclass
class _Band:
    since: str | None
    at_entry: str | None
    bands: list[float]
    unit: Any
    name: str


@dataclass
class _Spec:
    """The options, checked, with the columns and tables they name."""

    frame: pd.DataFrame
    id_cols: list[str]
    time: str
    entry: str | None
    exit: str
    event: str | None
    covariates: list[str]
    source: dict[str, str | None]  # covariate -> table name (None: the frame)
    lags: dict[str, Any]
    events: str | pd.DataFrame | None
    events_is_column: bool
    fixed: list[Any]
    split_events: bool
    bands: list[_Band]
    merge: bool
    missing: str
    tables: dict[str, pd.DataFrame]
    gap_time: bool
    tie_shift: Any
    unit: str | None
    table_time: dict[str, str] = field(default_factory=dict)

    @classmethod
    def read(cls, frame: pd.DataFrame, *, id: Any, time: Any, entry: Any, exit: Any, event: Any, covariates: Any,
             events: Any, split_at: Any, lag: Any, merge: Any, missing: Any, tables: Any, gap_time: Any,
             tie_shift: Any, unit: Any) -> _Spec:
        id_cols = as_id_list(id)
        for name, value in (("time", time), ("exit", exit)):
            if not isinstance(value, str) or not value:
                raise OptionError(f"{name} must be a column name, got {value!r}")
        for name, value in (("entry", entry), ("event", event)):
            if value is not None and (not isinstance(value, str) or not value):
                raise OptionError(f"{name} must be a column name or None, got {value!r}")
        check_bool("merge", merge)
        check_bool("gap_time", gap_time)
        check_choice("missing", missing, ["carry", "keep"])
        covs = [covariates] if isinstance(covariates, str) else list(covariates)
        if not all(isinstance(c, str) and c for c in covs):
            raise OptionError(f"covariates must be a list of column names, got {covariates!r}")
        if len(set(covs)) != len(covs):
            raise OptionError(f"covariates names a column twice: {covs}")
        if tables is None:
            tables = {}
        if not isinstance(tables, Mapping) or not all(isinstance(k, str) and isinstance(v, pd.DataFrame)
                                                      for k, v in tables.items()):
            raise OptionError("tables must map names to DataFrames")
        keys = [*id_cols, time]
        require_columns(frame, [time, *(c for c in (entry, exit, event) if c is not None)], "follow-up")
        for c in covs:
            if c in keys:
                raise OptionError(f"covariate {c!r} is the id or time column")
        source = _sources(frame, covs, tables, keys)
        lags = _lags(lag, covs)
        if tie_shift is not None:
            tie_shift = check_span("tie_shift", tie_shift)
        events_is_column = False
        if isinstance(events, str):
            in_frame, in_tables = events in frame.columns, events in tables
            if in_frame and in_tables:
                raise OptionError(f"events={events!r} names both a column of the frame and a table in tables")
            if in_tables:
                events = tables[events]
            elif in_frame:
                events_is_column = True
                if events in keys:
                    raise OptionError(f"events={events!r} is the id or time column")
            else:
                raise MissingColumnError(f"events={events!r} is neither a column of the frame nor a table in "
                                         f"tables", column=events, count=1)
        elif events is not None and not isinstance(events, pd.DataFrame):
            raise OptionError(f"events must be a column name, a table name or a DataFrame, got "
                              f"{type(events).__name__}")
        fixed, split_events, bands = _split_spec(split_at)
        spec = cls(frame=frame, id_cols=id_cols, time=time, entry=entry, exit=exit, event=event, covariates=covs,
                   source=source, lags=lags, events=events, events_is_column=events_is_column, fixed=fixed,
                   split_events=split_events, bands=bands, merge=merge, missing=missing, tables=dict(tables),
                   gap_time=gap_time, tie_shift=tie_shift, unit=unit)
        for b in bands:
            col = b.since or b.at_entry
            assert col is not None
            require_columns(frame, [col], "split_at band")
        spec._check_names()
        for name in {t for t in source.values() if t is not None}:
            spec.table_time[name] = side_time_column(tables[name], id_cols, time, f"table {name!r}")
            if spec.table_time[name] != time:
                raise MissingColumnError(f"table {name!r} has no column {time!r}: side tables of covariates hold "
                                         f"their times in a column named like the time column", column=time, count=1)
        return spec

    def _check_names(self) -> None:
        names = [*self.id_cols, "start", "stop", "event"]
        if self.gap_time:
            names += ["gap_start", "gap_stop"]
        names += [*self.covariates, *(b.name for b in self.bands), "episode", "row"]
        seen: set[str] = set()
        for n in names:
            if n in seen:
                raise ColumnExistsError(f"output column {n!r} would appear twice (a covariate, band or id column "
                                        f"has the name of an output column); rename it first", column=n, count=1)
            seen.add(n)


def _sources(frame: pd.DataFrame, covs: list[str], tables: Mapping[str, pd.DataFrame],
             keys: list[str]) -> dict[str, str | None]:
    """Where each covariate is measured: the frame (None) or one side table."""
    out: dict[str, str | None] = {}
    for c in covs:
        where: list[str | None] = [None] if c in frame.columns else []
        where += [name for name, tab in tables.items() if c in tab.columns and c not in keys]
        if not where:
            raise MissingColumnError(f"covariate {c!r} is neither in the frame nor in a side table", column=c, count=1)
        if len(where) > 1:
            places = ["the frame" if w is None else f"table {w!r}" for w in where]
            raise OptionError(f"covariate {c!r} is in {' and '.join(places)}: rename one of them")
        out[c] = where[0]
    return out


def _lags(lag: Any, covs: list[str]) -> dict[str, Any]:
    if lag is None:
        return {}
    if isinstance(lag, Mapping):
        unknown = [k for k in lag if k not in covs]
        if unknown:
            raise OptionError(f"lag names {unknown[0]!r}, which is not among the covariates {covs}")
        return {k: check_span(f"lag[{k!r}]", v, allow_zero=True) for k, v in lag.items()}
    value = check_span("lag", lag, allow_zero=True)
    return {c: value for c in covs}


def _split_spec(split_at: Any) -> tuple[list[Any], bool, list[_Band]]:
    """(fixed times, split at event times?, bands) from ``split_at``."""
    if split_at is None:
        return [], False, []
    items = list(split_at) if isinstance(split_at, (list, tuple, np.ndarray, pd.Index, pd.Series)) else [split_at]
    fixed: list[Any] = []
    split_events = False
    bands: list[_Band] = []
    for item in items:
        if isinstance(item, str):
            if item != "events":
                raise OptionError(f"split_at: the only word allowed is 'events' (cut at every event time), "
                                  f"got {item!r}")
            split_events = True
        elif isinstance(item, Mapping):
            bands.append(_band(item))
        elif item is None or isinstance(item, bool) or (isinstance(item, float) and not np.isfinite(item)):
            raise OptionError(f"split_at: {item!r} is not a time")
        else:
            fixed.append(item)
    names = [b.name for b in bands]
    if len(set(names)) != len(names):
        raise OptionError(f"split_at: two bandings are named alike: {names}")
    return fixed, split_events, bands


def _band(item: Mapping[str, Any]) -> _Band:
    unknown = [k for k in item if k not in _BAND_KEYS]
    if unknown:
        raise OptionError(f"split_at band: unknown key {unknown[0]!r} (keys: {list(_BAND_KEYS)})")
    since, at_entry = item.get("since"), item.get("at_entry")
    if (since is None) == (at_entry is None):
        raise OptionError("split_at band: give exactly one of 'since' (a column of times where the scale is 0) "
                          "and 'at_entry' (a column of the scale's values at entry)")
    col = since if since is not None else at_entry
    if not isinstance(col, str) or not col:
        raise OptionError(f"split_at band: 'since' / 'at_entry' must be a column name, got {col!r}")
    raw = item.get("bands")
    values = list(raw) if isinstance(raw, (list, tuple, np.ndarray)) else None
    if not values or not all(isinstance(v, (int, float, np.integer, np.floating)) and not isinstance(v, bool)
                             and np.isfinite(v) for v in values):
        raise OptionError(f"split_at band: 'bands' must be a non-empty list of numbers, got {raw!r}")
    fl = [float(v) for v in values]
    if any(b <= a for a, b in zip(fl, fl[1:])):
        raise OptionError(f"split_at band: 'bands' must increase, got {raw!r}")
    name = item.get("name", f"{col}_band")
    if not isinstance(name, str) or not name:
        raise OptionError(f"split_at band: 'name' must be a column name, got {name!r}")
    return _Band(since=since, at_entry=at_entry, bands=fl, unit=item.get("unit"), name=name)


def _fmt(x: float) -> str:
    return str(int(x)) if float(x).is_integer() else repr(float(x))


def _band_labels(bands: list[float]) -> list[str]:
    inner = [f"({_fmt(a)}, {_fmt(b)}]" for a, b in zip(bands, bands[1:])]
    return [f"<={_fmt(bands[0])}", *inner, f">{_fmt(bands[-1])}"]


# ---------------------------------------------------------------------------------- building
def _is_number(v: Any) -> bool:
    return isinstance(v, (int, float, np.integer, np.floating)) and not isinstance(v, bool)


def _clock(spec: _Spec, events_table: pd.DataFrame | None, events_tcol: str | None) -> Clock:
    f = spec.frame
    columns = [f[c] for c in (spec.entry, spec.exit) if c is not None]
    columns += [spec.tables[name][spec.time] for name in spec.table_time]
    if events_table is not None and events_tcol is not None:
        columns.append(events_table[events_tcol])
    columns += [f[b.since] for b in spec.bands if b.since is not None]
    numbers = [v for v in [*spec.lags.values(), spec.tie_shift, *spec.fixed] if _is_number(v)]
    products: list[tuple[np.ndarray, float]] = []
    for b in spec.bands:
        if _is_number(b.unit):
            products.append((np.asarray(b.bands), float(b.unit)))
            if b.at_entry is not None:
                products.append((f[b.at_entry].to_numpy(dtype=np.float64, na_value=np.nan), float(b.unit)))
        elif b.unit is None:
            products.append((np.asarray(b.bands), 1.0))
            if b.at_entry is not None:
                products.append((f[b.at_entry].to_numpy(dtype=np.float64, na_value=np.nan), 1.0))
    return Clock.build(f[spec.time], columns=columns, numbers=numbers, products=products, unit=spec.unit)


def _per_subject(panel: Panel, values: np.ndarray, missing: np.ndarray, col: str, what: str) -> np.ndarray:
    """A column that must be constant within subject and present: its value per subject."""
    s = panel.subjects
    if missing.any():
        where = np.flatnonzero(missing)
        ids = panel.ids_at(where)
        raise FollowUpError(rows_message(f"missing {what}", col, len(where), ids), column=col,
                            count=len(where), ids=ids)
    first = values[s.starts]
    differs = values != first[s.grp]
    if differs.any():
        where = np.flatnonzero(differs)
        ids = panel.ids_at(where)
        raise NotConstantError(rows_message(f"{what} must be constant within subject", col, len(where), ids),
                               column=col, count=len(where), ids=ids)
    return first


@dataclass
class _Stream:
    """One source of measurements (the frame or a side table), rows in (subject, time) order."""

    frame: pd.DataFrame
    grp: np.ndarray
    t: np.ndarray
    pos: np.ndarray  # the source's own positions of the sorted rows
    is_frame: bool


def _build(spec: _Spec) -> pd.DataFrame:
    f = spec.frame
    panel = Panel(f, id=spec.id_cols, time=spec.time)
    events_table: pd.DataFrame | None = None
    events_tcol: str | None = None
    if isinstance(spec.events, pd.DataFrame):
        events_table = spec.events
        events_tcol = side_time_column(events_table, spec.id_cols, spec.time, "events table")
    clock = _clock(spec, events_table, events_tcol)
    s = panel.subjects
    m = s.count
    sort = panel.ordering.sort
    t = sort(clock.read(f[spec.time])[0])

    # ---- follow-up (entry, exit] and the terminal event, one value per subject
    if spec.entry is None:
        E = t[s.starts] if m else t[:0]
    else:
        e, miss = clock.read(f[spec.entry])
        E = _per_subject(panel, sort(e), sort(miss), spec.entry, "entry")
    x, miss = clock.read(f[spec.exit])
    X = _per_subject(panel, sort(x), sort(miss), spec.exit, "exit")
    bad = np.flatnonzero(X <= E)
    if len(bad):
        ids = panel.ids_at(s.starts[bad])
        raise FollowUpError(rows_message("exit at or before entry", spec.exit, len(bad), ids), column=spec.exit,
                            count=len(bad), ids=ids)
    if spec.event is not None:
        true, miss = panel.columns.flags(spec.event)
        D = _per_subject(panel, true, miss, spec.event, "event flag")
    else:
        D = np.zeros(m, dtype=bool)

    # ---- event times inside follow-up, sorted by (subject, time)
    ev_grp, ev_t = _event_times(spec, panel, clock, t, E, X, D, events_table, events_tcol)

    # ---- measurement streams and the effective change times of each (stream, lag) group
    streams: dict[str | None, _Stream] = {None: _Stream(f, s.grp, t, panel.ordering.positions(np.arange(panel.n)),
                                                         True)}
    for name in spec.table_time:
        side: SideRows = side_rows(spec.tables[name], spec.time, panel, clock, f"table {name!r}")
        streams[name] = _Stream(spec.tables[name], side.grp, side.t, side.pos, False)
    groups: dict[tuple[str | None, Any], np.ndarray] = {}
    for c in spec.covariates:
        key = (spec.source[c], spec.lags.get(c, 0))
        if key not in groups:
            st = streams[key[0]]
            groups[key] = st.t + _as_ticks(clock.span(key[1], "lag"), st.t) if key[1] else st.t
    if not any(spec.source[c] is None for c in spec.covariates):
        groups[(None, 0)] = t  # no covariate from the frame: its occasions still open intervals
    shifted = _shift_ties(spec, panel, clock, groups, streams, E, X, ev_grp, ev_t)

    # ---- cut points: entry, exit, changes, events, splits
    pts = _Points()
    subj = np.arange(m)
    pts.add(subj, E, hard=True)
    pts.add(subj, X, hard=True)
    for key, eff in shifted.items():
        g = streams[key[0]].grp
        inside = (eff > E[g]) & (eff < X[g])
        pts.add(g[inside], eff[inside], hard=False)
    inside = ev_t < X[ev_grp]
    pts.add(ev_grp[inside], ev_t[inside], hard=True, event=True)
    pts.add(ev_grp[~inside], ev_t[~inside], hard=True, event=True)  # events at exit
    fixed = np.array([clock.point(v, "split_at") for v in spec.fixed], dtype=t.dtype)
    if spec.split_events:
        fixed = np.concatenate([fixed, ev_t])
    if len(fixed):
        g, v = _inside_each(np.unique(fixed), E, X)
        pts.add(g, v, hard=True)
    band_cuts = [_band_cuts(b, panel, clock, E) for b in spec.bands]
    for cuts in band_cuts:
        for k in range(cuts.shape[1]):  # a handful of band edges
            ok = (cuts[:, k] > E) & (cuts[:, k] < X)
            pts.add(subj[ok], cuts[ok, k], hard=True)
    p_grp, p_t, p_hard, p_event = pts.unique()

    # ---- intervals between consecutive points of a subject
    last = np.r_[p_grp[1:] != p_grp[:-1], True] if len(p_grp) else np.zeros(0, dtype=bool)
    first_i = np.flatnonzero(~last)  # every point but a subject's last starts an interval
    i_grp, i_start, i_stop = p_grp[first_i], p_t[first_i], p_t[first_i + 1]
    i_event = p_event[first_i + 1]
    i_hard_start = p_hard[first_i]  # an interval opened by an event, a split or entry is never merged back

    # ---- covariate values: the source row of each covariate on each interval
    src: dict[str, np.ndarray] = {}
    codes: list[np.ndarray] = []
    for c in spec.covariates:
        key = (spec.source[c], spec.lags.get(c, 0))
        st = streams[key[0]]
        eff = shifted[key]
        col_codes, na = _codes(st.frame[c], st.pos)
        rows = np.flatnonzero(~na) if spec.missing == "carry" else np.arange(len(st.grp))
        at = last_at_or_before(st.grp[rows], eff[rows], i_grp, i_start)
        src[c] = _take(rows, at, -1)
        codes.append(_take(col_codes, src[c], -1))
    band_idx = [(cuts[i_grp] <= i_start[:, None]).sum(axis=1) for cuts in band_cuts]
    frame_src = [src[c] for c in spec.covariates if spec.source[c] is None]
    if frame_src:
        row_src = np.max(np.vstack(frame_src), axis=0)
    elif spec.covariates:
        row_src = np.full(len(i_grp), -1, dtype=np.int64)
    else:
        row_src = last_at_or_before(s.grp, t, i_grp, i_start)

    # ---- merge consecutive intervals with the same values (never across an event or a split)
    keep = np.ones(len(i_grp), dtype=bool)
    if spec.merge and len(i_grp) > 1:
        same = (i_grp[1:] == i_grp[:-1]) & ~i_hard_start[1:]
        for v in (*codes, *band_idx):
            same &= v[1:] == v[:-1]
        keep[1:] = ~same
    run = np.flatnonzero(keep)
    run_last = np.r_[run[1:] - 1, len(i_grp) - 1] if len(run) else run
    o_grp, o_start, o_stop = i_grp[run], i_start[run], i_stop[run_last]
    o_event = i_event[run_last]

    # ---- output
    first_pos = panel.ordering.positions(s.starts)  # caller position of each subject's first row
    out: dict[str, Any] = {}
    for c in spec.id_cols:
        out[c] = f[c].take(first_pos[o_grp]).array
    out["start"] = clock.native(o_start)
    out["stop"] = clock.native(o_stop)
    out["event"] = o_event.astype(np.int64)
    if spec.gap_time:
        at = last_at_or_before(ev_grp, ev_t, o_grp, o_start)
        origin = _take(ev_t, at, E[o_grp])
        out["gap_start"] = clock.duration(o_start - origin)
        out["gap_stop"] = clock.duration(o_stop - origin)
    for c in spec.covariates:
        st = streams[spec.source[c]]
        rows = src[c][run]
        taken = _take(st.pos, rows, -1)
        out[c] = pd.api.extensions.take(_values(st.frame[c]), taken, allow_fill=True)
    for b, idx in zip(spec.bands, band_idx):
        labels = _band_labels(b.bands)
        out[b.name] = pd.Categorical.from_codes(idx[run], categories=labels, ordered=True)
    out["episode"] = (np.arange(len(run)) - np.r_[0, np.flatnonzero(o_grp[1:] != o_grp[:-1]) + 1][
        np.cumsum(np.r_[True, o_grp[1:] != o_grp[:-1]]) - 1] + 1).astype(np.int64) if len(run) else \
        np.zeros(0, dtype=np.int64)
    rs = row_src[run]
    out["row"] = _labels(f.index, np.where(rs >= 0, panel.ordering.positions(np.maximum(rs, 0)), -1))
    return pd.DataFrame(out)


def _take(values: np.ndarray, index: np.ndarray, fill: Any) -> np.ndarray:
    """``values[index]`` with ``fill`` where the index is -1 (``values`` may be empty)."""
    if len(values) == 0:
        return np.broadcast_to(np.asarray(fill, dtype=values.dtype), index.shape).copy()
    return np.where(index >= 0, values[np.maximum(index, 0)], fill)


def _as_ticks(value: int | float, like: np.ndarray) -> Any:
    return np.asarray(value, dtype=like.dtype) if like.dtype.kind == "f" else np.int64(value)


def _values(s: pd.Series) -> Any:
    # numpy-backed columns as ndarrays (pandas 2.2 warns when take gets a NumpyExtensionArray)
    return s.to_numpy() if isinstance(s.dtype, np.dtype) else s.array


def _codes(s: pd.Series, pos: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(value codes, missing) of a column at the sorted rows ``pos``: equal codes, equal values."""
    codes, _ = pd.factorize(s, use_na_sentinel=True)
    c = np.asarray(codes, dtype=np.int64)[pos]
    return c, c < 0


def _labels(index: pd.Index, positions: np.ndarray) -> Any:
    """Row labels at caller positions (-1: missing), nullable integers for integer labels."""
    missing = positions < 0
    if isinstance(index, pd.MultiIndex) or not pd.api.types.is_integer_dtype(index.dtype):
        out = np.asarray(index, dtype=object)[np.maximum(positions, 0)] if len(index) else \
            np.empty(len(positions), dtype=object)
        out = out.copy()
        out[missing] = None
        return out
    vals = index.to_numpy(dtype=np.int64)[np.maximum(positions, 0)] if len(index) else \
        np.zeros(len(positions), dtype=np.int64)
    return pd.arrays.IntegerArray(vals, missing) if missing.any() else vals


class _Points:
    """Cut points collected from several sources, reduced to one per (subject, time)."""

    def __init__(self) -> None:
        self.parts: list[tuple[np.ndarray, np.ndarray, bool, bool]] = []

    def add(self, grp: np.ndarray, t: np.ndarray, *, hard: bool, event: bool = False) -> None:
        self.parts.append((np.asarray(grp, dtype=np.int64), np.asarray(t), hard, event))

    def unique(self) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        grp = np.concatenate([p[0] for p in self.parts])
        t = np.concatenate([p[1] for p in self.parts])
        hard = np.concatenate([np.full(len(p[0]), p[2]) for p in self.parts])
        event = np.concatenate([np.full(len(p[0]), p[3]) for p in self.parts])
        if len(grp) == 0:
            return grp, t, hard, event
        order = np.lexsort((t, grp))
        grp, t, hard, event = grp[order], t[order], hard[order], event[order]
        new = np.r_[True, (grp[1:] != grp[:-1]) | (t[1:] != t[:-1])]
        at = np.flatnonzero(new)
        return grp[at], t[at], np.logical_or.reduceat(hard, at), np.logical_or.reduceat(event, at)


def _inside_each(times: np.ndarray, E: np.ndarray, X: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Every (subject, time) with a time of the sorted ``times`` strictly inside (E, X)."""
    lo = np.searchsorted(times, E, side="right")
    hi = np.searchsorted(times, X, side="left")
    n = np.maximum(hi - lo, 0)
    grp = np.repeat(np.arange(len(E)), n)
    k = np.arange(int(n.sum())) - np.repeat(np.cumsum(n) - n, n)
    return grp, times[np.repeat(lo, n) + k]


def _event_times(spec: _Spec, panel: Panel, clock: Clock, t: np.ndarray, E: np.ndarray, X: np.ndarray,
                 D: np.ndarray, table: pd.DataFrame | None, tcol: str | None) -> tuple[np.ndarray, np.ndarray]:
    """(subject, time) of every event in (entry, exit], sorted; the terminal event at exit included."""
    s = panel.subjects
    if spec.events_is_column:
        assert isinstance(spec.events, str)
        true, _ = panel.columns.flags(spec.events)  # a missing flag is no event, as in time_since
        g, v = s.grp[true], t[true]
    elif table is not None and tcol is not None:
        rows = side_rows(table, tcol, panel, clock, "events table")
        if len(rows.unknown):
            ids = [table[c].iloc[rows.unknown[:5]].tolist() for c in spec.id_cols]
            shown = ids[0] if len(ids) == 1 else list(zip(*ids))
            raise UnknownSubjectError(rows_message("events of subjects not in the frame", tcol, len(rows.unknown),
                                                   shown), column=tcol, count=len(rows.unknown), ids=shown)
        g, v = rows.grp, rows.t
    else:
        g, v = np.zeros(0, dtype=np.int64), t[:0]
    inside = (v > E[g]) & (v <= X[g])
    g, v = g[inside], v[inside]
    term = np.flatnonzero(D)
    g = np.concatenate([g, term])
    v = np.concatenate([v, X[term]])
    order = np.lexsort((v, g))
    g, v = g[order], v[order]
    keep = np.r_[True, (g[1:] != g[:-1]) | (v[1:] != v[:-1])] if len(g) else np.zeros(0, dtype=bool)
    return g[keep], v[keep]


def _shift_ties(spec: _Spec, panel: Panel, clock: Clock, groups: dict[tuple[str | None, Any], np.ndarray],
                streams: dict[str | None, _Stream], E: np.ndarray, X: np.ndarray, ev_grp: np.ndarray,
                ev_t: np.ndarray) -> dict[tuple[str | None, Any], np.ndarray]:
    """With ``tie_shift``: changes at exactly an event time of their subject moved that much earlier.

    A moved change must still come after every other cut of its subject before the event
    (entry, another change, an earlier event), else the order of the changes would be
    lost: that is an :class:`OptionError` naming the subjects.
    """
    if spec.tie_shift is None or not len(ev_t):
        return groups
    shift = _as_ticks(clock.span(spec.tie_shift, "tie_shift"), ev_t)
    # the cuts a moved change may not reach: entry, events and the other changes (a split in
    # between reorders nothing: the new value then holds on both sides of it)
    cut_g = [np.arange(len(E)), ev_grp]
    cut_t = [E, ev_t]
    for key, eff in groups.items():
        cut_g.append(streams[key[0]].grp)
        cut_t.append(eff)
    cg, ct = np.concatenate(cut_g), np.concatenate(cut_t)
    order = np.lexsort((ct, cg))
    cg, ct = cg[order], ct[order]
    out = {}
    for key, eff in groups.items():
        g = streams[key[0]].grp
        at = last_at_or_before(ev_grp, ev_t, g, eff)
        tie = (at >= 0) & (eff > E[g]) & (eff <= X[g])
        tie[tie] = ev_t[at[tie]] == eff[tie]
        if not tie.any():
            out[key] = eff
            continue
        moved = eff.copy()
        moved[tie] = eff[tie] - shift
        prev = last_at_or_before(cg, ct, g[tie], eff[tie], strict=True)
        bad = moved[tie] <= ct[prev]
        if bad.any():
            pos = streams[key[0]].pos[np.flatnonzero(tie)[bad]]
            fr = streams[key[0]].frame
            ids = [fr[c].iloc[pos[:5]].tolist() for c in spec.id_cols]
            shown = ids[0] if len(ids) == 1 else list(zip(*ids))
            raise OptionError(rows_message(f"tie_shift={spec.tie_shift!r} moves a change at an event time to or "
                                           f"before an earlier cut of the subject (entry, a change or an event)",
                                           None, int(bad.sum()), shown), count=int(bad.sum()), ids=shown)
        out[key] = moved
    return out


def _band_cuts(b: _Band, panel: Panel, clock: Clock, E: np.ndarray) -> np.ndarray:
    """Per subject (rows) and band edge (columns): the time at which the second scale reaches the edge."""
    f = panel.frame
    s = panel.subjects
    if clock.kind != "number":
        if b.unit is None:
            raise OptionError(f"split_at band {b.name!r}: give 'unit' (e.g. 'Y' for years), the unit of the "
                              f"second time scale, for datetime times")
        if not isinstance(b.unit, str) or b.unit not in ("ns", "us", "ms", "s", "min", "h", "D", "W", "Y"):
            raise OptionError(f"split_at band {b.name!r}: 'unit' must be a unit such as 'D' or 'Y', got {b.unit!r}")
    elif b.unit is not None and (not _is_number(b.unit) or not b.unit > 0):
        raise OptionError(f"split_at band {b.name!r}: 'unit' must be a positive number of time units "
                          f"(numeric times), got {b.unit!r}")
    factor = b.unit if b.unit is not None else 1.0
    if b.since is not None:
        v, miss = clock.read(f[b.since])
        origin = _per_subject(panel, panel.sort(v), panel.sort(miss), b.since, "band origin ('since')")
    else:
        assert b.at_entry is not None
        raw = panel.columns.numeric(b.at_entry)
        at0 = _per_subject(panel, raw, np.isnan(raw), b.at_entry, "scale value at entry ('at_entry')")
        origin = E - clock.scaled(at0, factor, b.at_entry) if s.count else E
    edges = clock.scaled(np.asarray(b.bands), factor, b.name)
    return origin[:, None] + edges[None, :]
