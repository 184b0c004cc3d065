"""As of: a value from a side table (laboratory results, say) at each row's time."""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from typing import Any, Literal

import numpy as np

from .. import _kernels as K
from .._panel import Panel
from .._tables import SideTake, SideView, TableUse, check_table_name
from .._transform import Transform, check_bool, check_choice, check_column_name, check_name
from ..errors import NullKeyError, OptionError, TiedRecordsError, rows_message
from ._spans import check_span, span_words

DIRECTIONS = ("backward", "forward", "nearest")
TIES = ("error", "mean", "min", "max", "first", "last")
KEEP = ("value", "time", "age")
#: Default names: <col>_asof (backward), <col>_next (forward), <col>_nearest.
WORDS = {"backward": "asof", "forward": "next", "nearest": "nearest"}


def check_columns(name: str, value: Any, *, allow_none: bool) -> str | tuple[str, ...] | None:
    """One column name, or a list of distinct names (kept as a tuple so the transform stays hashable)."""
    if value is None and allow_none:
        return None
    if isinstance(value, str):
        check_column_name(name, value)
        return value
    if isinstance(value, (list, tuple)) and value and all(isinstance(c, str) and c for c in value) \
            and len(set(value)) == len(value):
        return tuple(value)
    raise OptionError(f"{name} must be a column name or a list of distinct column names, got {value!r}")


def check_names(name: str | None, names: Any, outputs: int) -> tuple[str, ...] | None:
    """``name`` for a single output, ``names`` (as many distinct names as outputs) for several."""
    check_name(name)
    if names is None:
        if name is not None and outputs != 1:
            raise OptionError(f"name= names a single output; this makes {outputs}: give names= (a list of {outputs})")
        return None
    if name is not None:
        raise OptionError("give name= (one output) or names= (several), not both")
    if not isinstance(names, (list, tuple)) or not all(isinstance(n, str) and n for n in names) \
            or len(set(names)) != len(names) or len(names) != outputs or outputs < 2:
        hint = "use name= for a single output" if outputs == 1 else f"{outputs} distinct column names"
        raise OptionError(f"names must be {hint}, got {names!r}")
    return tuple(names)


@dataclasses.dataclass(frozen=True, kw_only=True)
class AsOf(Transform):
    """Configured :func:`as_of`."""

    type_name = "as_of"
    table: str
    col: str | tuple[str, ...] | None = None
    time: str
    within: str | float | None = None
    direction: Literal["backward", "forward", "nearest"] = "backward"
    include_current: bool = True
    skip_missing: bool = True
    together: bool = False
    ties: Literal["error", "mean", "min", "max", "first", "last"] = "error"
    order: str | None = None
    keep: tuple[str, ...] = ("value",)
    name: str | None = None
    names: tuple[str, ...] | None = None

    def __post_init__(self) -> None:
        check_table_name(self.table)
        object.__setattr__(self, "col", check_columns("col", self.col, allow_none=True))
        check_column_name("time", self.time)
        if self.within is not None:
            object.__setattr__(self, "within", check_span("within", self.within, allow_zero=True))
        check_choice("direction", self.direction, DIRECTIONS)
        for opt in ("include_current", "skip_missing", "together"):
            check_bool(opt, getattr(self, opt))
        if self.direction == "nearest" and not self.include_current:
            raise OptionError("include_current=False applies to direction 'backward' or 'forward', not 'nearest'")
        check_choice("ties", self.ties, TIES)
        if self.ties in ("first", "last"):
            if self.order is None:
                raise OptionError(f"ties={self.ties!r} needs order= (a column of the side table that orders tied "
                                  f"records); physical row order is never used")
            check_column_name("order", self.order)
        elif self.order is not None:
            raise OptionError(f"order= is used only with ties='first' or 'last', not ties={self.ties!r}")
        keep = self.keep
        if isinstance(keep, str) or not isinstance(keep, (list, tuple)) or not keep \
                or any(k not in KEEP for k in keep) or len(set(keep)) != len(keep):
            raise OptionError(f"keep must be a non-empty list of distinct items from {list(KEEP)}, got {keep!r}")
        object.__setattr__(self, "keep", tuple(keep))
        if self.col is None and "value" in self.keep:
            raise OptionError("col=None reads no value: keep must list 'time' and/or 'age' only "
                              "(e.g. keep=('age',) for the time since the last record)")
        if self.col is None and (self.ties != "error" or self.together):
            raise OptionError("ties= and together= concern values: they need col=")
        object.__setattr__(self, "names", check_names(self.name, self.names, len(self._default_outputs())))

    # ------------------------------------------------------------------ protocol
    @property
    def cols(self) -> tuple[str, ...]:
        return () if self.col is None else (self.col,) if isinstance(self.col, str) else self.col

    def inputs(self) -> tuple[str, ...]:
        return ()

    def tables(self) -> tuple[TableUse, ...]:
        extra = (self.order,) if self.order else ()
        return (TableUse(self.table, self.time, (), (*self.cols, *extra)),)

    def _default_outputs(self) -> list[str]:
        w = WORDS[self.direction]
        stamps = [k for k in self.keep if k != "value"]
        out = []
        for c in self.cols:
            for k in self.keep:
                if k == "value":
                    out.append(f"{c}_{w}")
                elif not self.together:
                    out.append(f"{c}_{w}_{k}")
        if not self.cols or self.together:
            out += [f"{self.table}_{w}_{k}" for k in stamps]
        return out

    def outputs(self) -> tuple[str, ...]:
        if self.name:
            return (self.name,)
        if self.names:
            return self.names
        return tuple(self._default_outputs())

    @property
    def past_only(self) -> bool:
        return self.direction == "backward"

    def describe(self) -> str:
        what = ", ".join(repr(c) for c in self.cols) if self.cols else "the record"
        where = {
            "backward": "latest record at or before" if self.include_current else "latest record strictly before",
            "forward": "earliest record at or after" if self.include_current else "earliest record strictly after",
            "nearest": "nearest record in time (the earlier one on equal distance) to",
        }[self.direction]
        words = f"{what} of side table {self.table!r} (time {self.time!r}) from the subject's {where} the row's time"
        if self.skip_missing and self.cols:
            words += ", each column from its own latest non-missing record" if not self.together else \
                ", all from one record where every column is present"
        if self.within is not None:
            words += f", if that record is at most {span_words(self.within)} away from the row's time"
        if self.ties != "error":
            words += f"; tied records: {self.ties}" + (f" by {self.order!r}" if self.order else "")
        stamps = [k for k in self.keep if k != "value"]
        if stamps:
            words += f"; also the record's {' and '.join(stamps)}"
        if not self.past_only:
            words += " (uses the future)"
        return words

    # ------------------------------------------------------------------ computation
    def compute(self, panel: Panel) -> Sequence[Any]:
        view = panel.tables[self.table].view(self.time)
        groups: list[tuple[str, ...]] = [(c,) for c in self.cols] if not self.together else [self.cols]
        if not self.cols:
            groups = [()]
        search = _Search(view, self)
        results: dict[tuple[str, str], Any] = {}
        stamps: dict[str, Any] = {}
        for cols in groups:
            found, rep, means = resolve_ties(view, cols, self.skip_missing, self.ties, self.order)
            src = search.source(found)
            for c in cols:
                if self.ties == "mean":
                    results[(c, "value")] = K.take(means[c], src) if means[c].size else np.full(view.n, np.nan)
                else:
                    r = rep[c]
                    rows = np.where(src >= 0, r[np.maximum(src, 0)] if r.size else -1, -1)
                    results[(c, "value")] = SideTake(view, c, rows)
            first = view.runs.rows.starts
            when = SideTake(view, self.time, np.where(src >= 0, first[np.maximum(src, 0)] if first.size else -1, -1))
            age = view.axis.duration(view.qt - view.runs.t[np.maximum(src, 0)]) if first.size else \
                np.full(view.n, np.nan)
            if first.size:
                age[src < 0] = np.nan
            for c in cols or ("",):
                results[(c, "time")] = when
                results[(c, "age")] = age
            stamps = {"time": when, "age": age}
        out: list[Any] = []
        for c in self.cols:
            for k in self.keep:
                if k == "value" or not self.together:
                    out.append(results[(c, k)])
        if not self.cols or self.together:
            out += [stamps[k] for k in self.keep if k != "value"]
        return out


class _Search:
    """The record search of one as_of, shared by its columns: positions among the runs of tied
    records, then per "found" mask the run each row takes (-1: none)."""

    def __init__(self, view: SideView, tr: AsOf) -> None:
        self.view = view
        self.tr = tr
        runs = view.runs
        self.empty = runs.rows.count == 0
        g = np.maximum(view.g, 0)
        self.lo = runs.groups.starts[g] if not self.empty else g
        self.hi = runs.groups.ends[g] if not self.empty else g
        within = tr.within
        span = view.span(within, "within") if within is not None else None
        qkey = view.qkey
        if tr.direction in ("backward", "nearest"):
            q = _plus_one(qkey) if tr.include_current else qkey
            p, has = view.run_first_at_or_after(q)
            self.back = np.where(has & (p - 1 >= self.lo), p - 1, -1)
            self.back_thr = view.back(span, strict=False) if span is not None else None
        if tr.direction in ("forward", "nearest"):
            q = qkey if tr.include_current else _plus_one(qkey)
            p, has = view.run_first_at_or_after(q)
            self.fwd = np.where(has & (p < self.hi), p, -1)
            self.fwd_thr = view.back(-span, strict=True) if span is not None else None

    def source(self, found: np.ndarray) -> np.ndarray:
        """Per panel row: the run of tied records it takes, among runs where ``found`` holds."""
        n = self.view.n
        if self.empty:
            return np.full(n, -1, dtype=np.int64)
        runs = self.view.runs
        direction = self.tr.direction
        b = f = None
        every = bool(found.all())  # every run offers a value: no search back past missing ones
        if direction in ("backward", "nearest"):
            if every:
                b = self.back
            else:
                last = K.last_index_upto(runs.groups, found)
                b = np.where(self.back >= 0, last[np.maximum(self.back, 0)], -1)
            if self.back_thr is not None:
                b = np.where((b >= 0) & (runs.key[np.maximum(b, 0)] >= self.back_thr), b, -1)
            if direction == "backward":
                return b
        if direction in ("forward", "nearest"):
            if every:
                f = self.fwd
            else:
                nxt = next_index_from(runs.groups, found)
                f = np.where(self.fwd >= 0, nxt[np.maximum(self.fwd, 0)], -1)
            if self.fwd_thr is not None:
                f = np.where((f >= 0) & (runs.key[np.maximum(f, 0)] < self.fwd_thr), f, -1)
            if direction == "forward":
                return f
        assert b is not None and f is not None
        t = self.view.qt
        tb = runs.t[np.maximum(b, 0)]
        tf = runs.t[np.maximum(f, 0)]
        take_back = (b >= 0) & ((f < 0) | not_farther(t, tb, tf))
        return np.where(take_back, b, f)


def _plus_one(key: np.ndarray) -> np.ndarray:
    """key + 1 without wrapping (the largest int64 stays: no record can lie beyond it)."""
    out = key + 1
    top = key == np.iinfo(np.int64).max
    if top.any():
        out[top] = key[top]
    return out


def next_index_from(s: Any, mask: np.ndarray) -> np.ndarray:
    """Per row: the first row at or after it, in the same group, where ``mask`` holds, else -1."""
    n = s.n
    if n == 0:
        return np.zeros(0, dtype=np.int64)
    cand = np.where(mask, np.arange(n), n)
    nxt = np.minimum.accumulate(cand[::-1])[::-1]
    return np.where(nxt < s.ends[s.grp], nxt, -1)


def not_farther(t: np.ndarray, before: np.ndarray, after: np.ndarray) -> np.ndarray:
    """Exactly: t - before <= after - t (the earlier record wins on equal distance)."""
    if t.dtype.kind != "f":
        return (t - before) <= (after - t)
    # Binary floats: each distance as d + e exactly (TwoSum), compared without rounding.
    db, eb = _two_sum_diff(t, before)
    df, ef = _two_sum_diff(after, t)
    with np.errstate(invalid="ignore", over="ignore"):
        close = (db - df) + (eb - ef)
    return (db < df) | ((db == df) & (eb <= ef)) | ((db > df) & (close <= 0))


def _two_sum_diff(a: np.ndarray, b: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    with np.errstate(invalid="ignore", over="ignore"):
        d = a - b
        bb = d - a
        e = (a - (d - bb)) + (-b - bb)
    e[~np.isfinite(e)] = 0.0
    return d, e


# ---------------------------------------------------------------------------------- tied records


def resolve_ties(view: SideView, cols: tuple[str, ...], skip_missing: bool, ties: str,
                 order: str | None) -> tuple[np.ndarray, dict[str, np.ndarray], dict[str, np.ndarray]]:
    """Records that share subject and time (runs) made into one record per run.

    Returns ``found`` (per run: it counts as a record for the search: with ``skip_missing``,
    it has a record where every column of ``cols`` is present), ``rep`` (per column, per
    run: the record giving the value, -1 where the value is missing) and, for
    ``ties="mean"``, the per-run means.  Never physical row order: tied records that
    disagree are an error unless a rule (mean, min, max, or first/last by ``order``) is chosen.
    """
    runs = view.runs.rows
    m, r = runs.n, runs.count
    considered = np.ones(m, dtype=bool)
    if skip_missing:
        for c in cols:
            if view.columns.any_missing(c):
                considered &= ~view.columns.missing(c)
    if r == m and considered.all():  # no tied records, every value present: each record is its own
        rep_all = np.arange(m)
        direct = {c: view.columns.numeric(c) for c in cols} if ties == "mean" else {}
        return np.ones(r, dtype=bool), {c: rep_all for c in cols}, direct
    if r == 0:
        empty = np.zeros(0, dtype=np.int64)
        return np.zeros(0, dtype=bool), {c: empty for c in cols}, {c: np.zeros(0) for c in cols}
    idx = np.arange(m)
    first = np.minimum.reduceat(np.where(considered, idx, m), runs.starts)
    found = first < m
    if not cols:
        return np.ones(r, dtype=bool), {}, {}
    if not skip_missing:
        found = np.ones(r, dtype=bool)
    tied = r < m  # some subject has two records at one time
    rep: dict[str, np.ndarray] = {}
    means: dict[str, np.ndarray] = {}
    if ties == "error" or not tied:
        shared = np.where(first < m, first, -1)
        if tied:
            for c in cols:
                _refuse_conflicts(view, c, considered, shared)
        for c in cols:
            rep[c] = shared
            if ties == "mean":
                means[c] = K.take(view.columns.numeric(c), shared)
        return found, rep, means
    if ties in ("first", "last"):
        assert order is not None
        rank = view.columns.ranks(order)
        key = rank if ties == "first" else -rank
        pick, second = _pick(runs, considered, key)
        bad_rank = considered & (rank < 0) & (runs.size > 1)
        if bad_rank.any():
            where = np.flatnonzero(bad_rank)
            ids = view.ids_of_records(where)
            raise NullKeyError(rows_message(f"tied records in side table {view.name!r} with no order value",
                                            f"{view.name}.{order}", len(where), ids),
                               column=f"{view.name}.{order}", count=len(where), ids=ids)
        same = (second >= 0) & (key[np.maximum(second, 0)] == key[np.maximum(pick, 0)]) & (pick >= 0)
        if same.any():
            where = runs.starts[same]
            ids = view.ids_of_records(where)
            raise TiedRecordsError(
                rows_message(f"order column {order!r} does not separate tied records of side table {view.name!r} "
                             f"(same subject, time and order value)", f"{view.name}.{order}", len(where), ids),
                column=f"{view.name}.{order}", count=len(where), ids=ids)
        for c in cols:
            rep[c] = pick
        return found, rep, means
    for c in cols:
        v = view.columns.numeric(c)
        present = considered & ~np.isnan(v)
        if ties == "mean":
            total = np.add.reduceat(np.where(present, v, 0.0), runs.starts)
            count = np.add.reduceat(present.astype(np.int64), runs.starts)
            with np.errstate(invalid="ignore", divide="ignore"):
                means[c] = np.where(count > 0, total / np.maximum(count, 1), np.nan)
            rep[c] = np.where(count > 0, first, -1)
        else:
            pick, _ = _pick(runs, present, v if ties == "min" else -v)
            rep[c] = pick
    return found, rep, means


def _pick(runs: Any, eligible: np.ndarray, key: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Per run: the eligible record with the smallest ``key`` (-1: none), and the next one (-1: none)."""
    m = runs.n
    order = np.lexsort((key, ~eligible, runs.grp))
    best = order[runs.starts]
    pick = np.where(eligible[best], best, -1)
    nxt = np.minimum(runs.starts + 1, m - 1)
    second = order[nxt]
    second = np.where((runs.starts + 1 < runs.ends) & eligible[second], second, -1)
    return pick, second


def _refuse_conflicts(view: SideView, col: str, considered: np.ndarray, shared: np.ndarray) -> None:
    runs = view.runs.rows
    codes = view.columns.codes(col)
    big = np.iinfo(np.int64).max
    lo = np.minimum.reduceat(np.where(considered, codes, big), runs.starts)
    hi = np.maximum.reduceat(np.where(considered, codes, -2), runs.starts)
    bad = (shared >= 0) & (lo != hi)
    if bad.any():
        where = runs.starts[bad]
        ids = view.ids_of_records(where)
        raise TiedRecordsError(
            rows_message(f"side table {view.name!r} has tied records that disagree (same subject and time, "
                         f"different values); choose ties='mean', 'min', 'max', or 'first'/'last' with order=",
                         f"{view.name}.{col}", int(bad.sum()), ids),
            column=f"{view.name}.{col}", count=int(bad.sum()), ids=ids)


def as_of(
    table: str,
    col: str | Sequence[str] | None = None,
    *,
    time: str,
    within: str | float | None = None,
    direction: Literal["backward", "forward", "nearest"] = "backward",
    include_current: bool = True,
    skip_missing: bool = True,
    together: bool = False,
    ties: Literal["error", "mean", "min", "max", "first", "last"] = "error",
    order: str | None = None,
    keep: Sequence[str] = ("value",),
    name: str | None = None,
    names: Sequence[str] | None = None,
) -> AsOf:
    """The value of ``col`` in side table ``table`` as of each row's time: a laboratory result
    drawn on another day, the latest weight, the time since the last record.

    For each row (subject i, time t) the record of subject i in ``table`` (passed as
    ``derive(..., tables={table: frame})``; ``time`` names its time column) chosen by
    ``direction``: ``"backward"`` the latest record at or before t (strictly before with
    ``include_current=False``), ``"forward"`` the earliest at or after t (strictly after),
    ``"nearest"`` the one at the smallest distance, the earlier one on equal distance.
    ``within`` (a number, or a span such as ``"30D"``; may be 0) is the largest distance
    allowed, measured from the record's own time to t, inclusive.

    Missing values: with ``skip_missing`` (default) each column takes its own latest (or
    earliest, nearest) record where it is present; ``together=True`` takes all columns
    from one record where all are present.  Without it the chosen record's value is taken
    even when missing.  Rows whose subject has no qualifying record get a missing value.

    Tied records (same subject and time, different values) are an error by default;
    ``ties="mean"``, ``"min"`` or ``"max"`` combine them, ``"first"`` / ``"last"`` take the
    one with the smallest / largest ``order`` value; physical row order is never used.

    ``keep`` lists what to return per column: ``"value"`` (in the column's dtype, as
    :func:`lag` keeps it; a float for ``ties="mean"``), ``"time"`` (the record's time, in
    the time column's dtype) and ``"age"`` (t minus the record's time, in the panel's unit;
    negative for later records).  ``col=None`` with ``keep=("age",)`` gives the time since
    the last record.  Default names: ``<col>_asof`` (``_next`` forward, ``_nearest``),
    ``<col>_asof_time``, ``<col>_asof_age``; ``<table>_asof_age`` without a column or
    with ``together``.  Past-only for ``"backward"``; ``"forward"`` and ``"nearest"`` use the future.

    >>> import pandas as pd, panelfx as pfx
    >>> visits = pd.DataFrame({"pid": [1, 1, 1, 2], "day": [0, 10, 20, 0]})
    >>> labs = pd.DataFrame({"pid": [1, 1, 1, 2], "drawn": [-3, 8, 15, 5], "alt": [30.0, 45.0, None, 22.0]})
    >>> pfx.derive(visits, pfx.as_of("labs", "alt", time="drawn", within=7, keep=("value", "age")),
    ...            id="pid", time="day", tables={"labs": labs})
       pid  day  alt_asof  alt_asof_age
    0    1    0      30.0           3.0
    1    1   10      45.0           2.0
    2    1   20       NaN           NaN
    3    2    0       NaN           NaN

    At day 20 the latest result present (day 8) is 12 days old, beyond ``within=7``: the
    age is measured from the result itself, not from the later record (day 15) that lacks it.
    """
    return AsOf(table=table, col=col if col is None or isinstance(col, str) else tuple(col), time=time,
                within=within, direction=direction, include_current=include_current, skip_missing=skip_missing,
                together=together, ties=ties, order=order, keep=tuple(keep),  # a str is refused by the checks
                name=name, names=tuple(names) if names is not None else None)


__all__ = ["as_of", "AsOf"]
