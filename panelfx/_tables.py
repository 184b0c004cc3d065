"""Side tables: laboratory results, doses, events or dispensing records beside the panel.

``derive(frame, ..., tables={"labs": labs})`` hands named side tables to the transforms
that read them (:func:`~panelfx.as_of`, :func:`~panelfx.table_window`,
:func:`~panelfx.exposure`, ...).  A side table carries the panel's id columns under the
same names and any number of records per subject, at any times (not only at visits).

What transforms may use: ``panel.tables[name]`` is a :class:`SideTable`, validated once
per ``derive`` call (id columns present and never missing, subjects matched to the
panel's); :meth:`SideTable.view` orders it by (subject, a time column) once per time
column and returns a :class:`SideView`:

- ``subjects``: boundaries of each subject's records in time order, numbered like the
  panel's subjects (``g`` gives, per sorted panel row, its subject's record group or -1);
  records of subjects absent from the panel are left out, panel subjects absent from the
  table have no records;
- ``key`` / ``t``: the records' times on a time key shared with the panel rows
  (``qkey`` / ``qt``): both columns are put on one exact scale (the finer tick of two
  datetime columns, the finer decimal scale of two number columns, or the ranks of the
  union of binary floats), so "at or before", "equal" and distances are exact;
- ``axis``: that common :class:`~panelfx._time.TimeAxis` (spans, thresholds, durations in
  the panel's unit); ``ends``: further time columns (the end of a dosing record) on it;
- ``columns``: the table's value columns in record order (errors name them ``labs.alt``);
- ``runs``: records that share subject and time (tied records) grouped for tie rules.

:class:`SideTake` is the dtype-keeping result "column C of the table at these records",
as :class:`~panelfx._columns.Take` is for the panel's own columns.
"""

from __future__ import annotations

import functools
from collections.abc import Hashable, Mapping, Sequence
from dataclasses import dataclass, replace
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from . import _kernels as K
from ._columns import EXACT_FLOAT_INT, Columns, Deferred
from ._frames import not_a_frame
from ._order import Ordering, _sort
from ._subjects import Subjects
from ._time import INT_MAX, NAT, UNITS_NS, TimeAxis, _rescale_floor
from .errors import (
    ColumnTypeError,
    MissingColumnError,
    MissingTableError,
    NullKeyError,
    OptionError,
    TimeTypeError,
    rows_message,
)

if TYPE_CHECKING:
    from ._panel import Panel

__all__ = ["TableUse", "SideTable", "SideView", "SideTake", "side_tables", "check_table_name"]


@dataclass(frozen=True)
class TableUse:
    """What one transform reads from one side table: its ``time`` column (records are ordered
    by it), further time columns (``ends``, e.g. the end of a dosing record) and value
    ``columns``.  Used to check names before any work, to name sources ``labs.alt`` in the
    data dictionary, and by the testing kit to cut a table at a time."""

    name: str
    time: str
    ends: tuple[str, ...] = ()
    columns: tuple[str, ...] = ()

    def all_columns(self) -> tuple[str, ...]:
        return tuple(dict.fromkeys((*self.columns, self.time, *self.ends)))


def check_table_name(value: Any) -> None:
    if not isinstance(value, str) or not value:
        raise OptionError(f"table must be the name of a side table (a non-empty string), got {value!r}")


def check_table_uses(uses: Sequence[TableUse], tables: Mapping[str, Sequence[str]], what: str,
                     id_cols: Sequence[str]) -> None:
    """Every table a transform reads was given, with every column it reads (``plan``)."""
    for use in uses:
        if use.name not in tables:
            given = sorted(tables) if tables else "none"
            raise MissingTableError(f"{what} reads side table {use.name!r}, which was not given "
                                    f"(tables given: {given}); pass tables={{{use.name!r}: ...}}",
                                    column=use.name, count=1)
        cols = list(tables[use.name])
        for col in use.all_columns():
            if col not in cols:
                raise MissingColumnError(f"column {col!r} needed by {what} is not in side table {use.name!r} "
                                         f"(columns: {cols[:20]})", column=f"{use.name}.{col}", count=1)
        for col in (use.time, *use.ends):
            if col in id_cols:
                raise OptionError(f"{what} uses the id column {col!r} of side table {use.name!r} as a time")


# ---------------------------------------------------------------------------------- tables


def side_tables(panel: Panel, tables: Mapping[str, Any] | None) -> dict[str, SideTable]:
    """Validate each named side table against the panel (ids present and never missing,
    subjects matched).  Ordering by a time column is done later, once, on first use."""
    if tables is None:
        return {}
    if not isinstance(tables, Mapping):
        raise OptionError(f"tables must be a mapping of names to data frames, e.g. {{'labs': labs}}, "
                          f"got {type(tables).__name__}")
    out = {}
    for name, frame in tables.items():
        check_table_name(name)
        out[name] = SideTable(name, frame, panel)
    return out


def _family(s: pd.Series) -> str:
    """Coarse kind of an id column, to refuse ids that can never match (numbers vs text)."""
    dtype = s.dtype
    if isinstance(dtype, pd.CategoricalDtype):
        return _family(pd.Series(dtype.categories))
    if pd.api.types.is_bool_dtype(dtype):
        return "true/false"
    if pd.api.types.is_numeric_dtype(dtype):
        return "numbers"
    if pd.api.types.is_datetime64_any_dtype(dtype):
        return "datetimes"
    if dtype == object:
        kind = pd.api.types.infer_dtype(s, skipna=True)
        if kind in ("integer", "floating", "mixed-integer-float", "decimal"):
            return "numbers"
        if kind == "empty":
            return "any"
    return "text"


class SideTable:
    """One named side table, validated against a panel (see the module docstring)."""

    def __init__(self, name: str, frame: Any, panel: Panel) -> None:
        if not isinstance(frame, pd.DataFrame):
            raise not_a_frame(frame, f"side table {name!r}")
        self.name = name
        self.frame = frame
        self.panel = panel
        self.m = len(frame)
        id_cols = panel.id_cols
        missing = [c for c in id_cols if c not in frame.columns]
        if missing:
            raise MissingColumnError(
                f"side table {name!r} lacks the panel's id column {missing[0]!r} (a side table carries the id "
                f"columns under the same names; columns: {list(frame.columns)[:20]})",
                column=f"{name}.{missing[0]}", count=len(missing))
        nulls = np.zeros(self.m, dtype=bool)
        for c in id_cols:
            nulls |= frame[c].isna().to_numpy()
        if nulls.any():
            where = np.flatnonzero(nulls)
            labels = list(frame.index[where[:5]])
            raise NullKeyError(rows_message(f"missing subject id in side table {name!r}", id_cols[0], len(where),
                                            labels, noun="row labels"),
                               column=f"{name}.{id_cols[0]}", count=len(where), ids=labels)
        self.psub = self._match(panel, id_cols)  # panel subject number of each record, -1 when absent
        self.keep = np.flatnonzero(self.psub >= 0)
        self._views: dict[tuple[str, tuple[str, ...]], SideView] = {}

    def _match(self, panel: Panel, id_cols: Sequence[str]) -> np.ndarray:
        """Per record: the panel subject (0 .. subjects - 1, in the panel's subject order) or -1."""
        count = panel.subjects.count
        firsts = panel.ordering.positions(panel.subjects.starts)
        if len(id_cols) == 1:
            mine_s, theirs_s = panel.frame[id_cols[0]], self.frame[id_cols[0]]
            if isinstance(mine_s.dtype, np.dtype) and isinstance(theirs_s.dtype, np.dtype) \
                    and mine_s.dtype.kind in "iu" and theirs_s.dtype.kind in "iu":
                # plain integer ids: one hash lookup of each record's id among the panel's subjects
                index = pd.Index(mine_s.to_numpy()[firsts])
                return index.get_indexer(theirs_s.to_numpy()).astype(np.int64, copy=False)
        codes: np.ndarray | None = None
        for c in id_cols:
            mine = panel.frame[c].iloc[firsts].reset_index(drop=True)
            theirs = self.frame[c].reset_index(drop=True)
            fm, ft = _family(mine), _family(theirs)
            if "any" not in (fm, ft) and fm != ft and self.m and count:
                raise ColumnTypeError(f"id column {c!r} of side table {self.name!r} holds {ft} but the panel's "
                                      f"holds {fm}: no subject could match", column=f"{self.name}.{c}",
                                      count=self.m)
            if mine.dtype != theirs.dtype and not (isinstance(mine.dtype, pd.CategoricalDtype)
                                                   and isinstance(theirs.dtype, pd.CategoricalDtype)):
                both = pd.Series(np.concatenate([mine.to_numpy(dtype=object), theirs.to_numpy(dtype=object)]),
                                 dtype=object)
            else:
                both = pd.concat([mine, theirs], ignore_index=True)
            k, uniq = pd.factorize(both, sort=False)
            k = k.astype(np.int64, copy=False)
            codes = k if codes is None else pd.factorize(codes * (len(uniq) + 1) + k, sort=False)[0].astype(np.int64)
        assert codes is not None
        if count and not np.array_equal(codes[:count], np.arange(count)):  # pragma: no cover - distinct subjects
            raise AssertionError("panel subjects did not factorise to distinct codes")
        side = codes[count:]
        return np.where(side < count, side, -1)

    def view(self, time: str, ends: Sequence[str] = ()) -> SideView:
        """The records ordered by (subject, ``time``), with ``ends`` on the same time scale (cached)."""
        key = (time, tuple(ends))
        if key not in self._views:
            self._views[key] = SideView(self, time, tuple(ends))
        return self._views[key]

    def ids_at(self, positions: np.ndarray, limit: int = 5) -> list[Hashable]:
        """Subject ids of the table at the first few caller positions, distinct."""
        pos = np.asarray(positions)[: limit * 20]
        cols = [self.frame[c].iloc[pos].tolist() for c in self.panel.id_cols]
        vals = cols[0] if len(cols) == 1 else list(zip(*cols))
        return list(dict.fromkeys(vals))[:limit]


# ---------------------------------------------------------------------------------- one time scale


def _read_time(series: pd.Series, table: str, like: TimeAxis | None = None) -> tuple[TimeAxis, np.ndarray]:
    """A time column of a side table; an empty one (no record of a panel subject) takes the
    panel's kind whatever its dtype (an empty frame's columns hold objects)."""
    if len(series) == 0 and like is not None:
        return replace(like, column=str(series.name), t=like.t[:0]), np.zeros(0, dtype=bool)
    try:
        return TimeAxis.read(series)
    except TimeTypeError as err:
        raise TimeTypeError(f"side table {table!r}: {err}", column=f"{table}.{series.name}",
                            count=err.count) from None


def common_axis(base: TimeAxis, others: Sequence[tuple[TimeAxis, str]]) -> tuple[TimeAxis, list[np.ndarray]]:
    """Put ``base`` (the panel's times) and other time columns on one exact native scale.

    Returns the common axis (its ``t`` is base then every other, concatenated; its unit of
    durations is the base's) and the converted times of each part.  Datetimes and
    timedeltas go to the finer tick; numbers to the finer decimal scale, or to binary
    floats when one of them is binary (or the scaled integers would not fit)."""
    for ax, what in others:
        if ax.kind != base.kind:
            raise TimeTypeError(f"{what} holds {ax.kind} values but the panel's time column {base.column!r} holds "
                                f"{base.kind} values", column=what)
        if ax.kind == "datetime" and (ax.tz is None) != (base.tz is None):
            which = ("time-zone-aware", "naive") if ax.tz is not None else ("naive", "time-zone-aware")
            raise TimeTypeError(f"{what} holds {which[0]} datetimes but the panel's time column {base.column!r} "
                                f"holds {which[1]} ones: localize or convert one of them first", column=what)
    axes = [base, *(a for a, _ in others)]
    if base.kind != "number":
        tick = min(int(a.tick_ns) for a in axes)
        res = next(r for r, ns in UNITS_NS.items() if ns == tick)
        parts = []
        for a, what in zip(axes, [base.column, *(w for _, w in others)]):
            t = _rescale_floor(a.t, int(a.tick_ns), tick)
            if int(a.tick_ns) != tick and ((t == INT_MAX) | (t == NAT + 1)).any():
                raise TimeTypeError(f"{what}: times cannot be held in {res} ticks beside the panel's times "
                                    f"(beyond the int64 range)", column=what)
            parts.append(t)
        joint = TimeAxis(kind=base.kind, column=base.column, unit=base.unit, res=res, scale=None, tz=base.tz,
                         t=np.concatenate(parts))
        return joint, parts
    scales = [a.scale for a in axes]
    parts = []
    scale: int | None = None
    if all(s is not None for s in scales):
        scale = max(s for s in scales if s is not None)
        for a in axes:
            f = scale // (a.scale or 1)
            if f != 1 and a.t.size and int(np.abs(a.t).max()) >= 2**62 // f:
                scale = None
                break
            parts.append(a.t * f if f != 1 else a.t)
    if scale is None:
        parts = [a.t.astype(np.float64) / a.scale if a.scale and a.scale != 1 else a.t.astype(np.float64)
                 for a in axes]
    joint = TimeAxis(kind="number", column=base.column, unit=base.unit, res=None, scale=scale, tz=None,
                     t=np.concatenate(parts))
    return joint, parts


# ---------------------------------------------------------------------------------- one ordering


class _SideColumns(Columns):
    """The table's value columns in record order; messages name them ``table.col``."""

    def __init__(self, table: SideTable, ordering: Ordering) -> None:
        super().__init__(table.frame, ordering, table.ids_at)
        self.table = table

    def series(self, col: str) -> pd.Series:
        if col not in self.frame.columns:
            raise MissingColumnError(f"column {col!r} is not in side table {self.table.name!r}",
                                     column=f"{self.table.name}.{col}", count=1)
        s = self.frame[col].copy(deep=False)
        s.name = f"{self.table.name}.{col}"
        return s

    def any_missing(self, col: str) -> bool:
        """Whether the column has a missing value among the table's records (no reordering)."""
        return self._cached(col, "any_missing", lambda: bool(self.frame[col].isna().to_numpy()[
            self.ordering.order].any()) if self.ordering.order is not None else bool(self.frame[col].isna().any()))

    def codes(self, col: str) -> np.ndarray:
        """Equality codes of a column in record order (any dtype; -1 where missing)."""
        return self._cached(col, "codes", lambda: self.ordering.sort(pd.factorize(self.frame[col])[0]))

    def ranks(self, col: str) -> np.ndarray:
        """Sort ranks of an orderable column in record order (-1 where missing)."""
        def make() -> np.ndarray:
            try:
                codes = pd.factorize(self.frame[col], sort=True)[0]
            except TypeError:
                raise ColumnTypeError(f"column {self.table.name}.{col} holds values that cannot be ordered",
                                      column=f"{self.table.name}.{col}") from None
            return self.ordering.sort(codes)
        return self._cached(col, "ranks", make)


class SideView:
    """The records of one side table ordered by (subject, one time column); see the module docstring."""

    def __init__(self, table: SideTable, time: str, ends: tuple[str, ...]) -> None:
        panel = table.panel
        self.table = table
        self.name = table.name
        self.time = time
        keep = table.keep
        full = len(keep) == table.m

        def column(col: str) -> pd.Series:
            s = table.frame[col]
            return s if full else s.iloc[keep]

        main, missing = _read_time(column(time), table.name, panel.axis)
        if missing.any():
            where = np.flatnonzero(missing)
            labels = list(column(time).index[where[:5]])
            raise NullKeyError(rows_message(f"missing time in side table {table.name!r}", time, len(where), labels,
                                            noun="row labels"),
                               column=f"{table.name}.{time}", count=len(where), ids=labels)
        others = [(main, f"column {time!r} of side table {table.name!r}")]
        end_missing = []
        for col in ends:
            ax, miss = _read_time(column(col), table.name, panel.axis)
            if ax.kind == "number" and miss.any():  # placeholders that stay out of the key's ranks
                ax = replace(ax, t=np.where(miss, 0, ax.t).astype(ax.t.dtype))
            others.append((ax, f"column {col!r} of side table {table.name!r}"))
            end_missing.append(miss)
        joint, parts = common_axis(panel.axis, others)
        n, m = panel.n, len(keep)
        if m:
            _check_span_fits(joint.t, np.zeros(len(joint.t), dtype=bool) if not end_missing else
                             np.concatenate([np.zeros(n + m, dtype=bool), *end_missing]), table.name)
        self.axis = joint
        key = joint.key
        qkey, skey = key[:n], key[n:n + m]
        psub = table.psub[keep]
        order, sorted_psub = _record_order(psub, skey)
        self.order = keep if order is None else keep[order]  # caller positions of the records, in order
        take = (lambda a: a) if order is None else (lambda a: a[order])
        self.key = take(skey)
        self.t = self.key if joint.key is joint.t else take(parts[1])  # integer axes: the key is the time
        self.qkey = qkey
        self.qt = parts[0]
        self.n, self.m = n, m
        self.ends: dict[str, tuple[np.ndarray, np.ndarray, np.ndarray]] = {}
        for k, col in enumerate(ends):
            lo = n + m * (k + 1)
            self.ends[col] = (take(parts[2 + k]), take(key[lo:lo + m]), take(end_missing[k]))
        self.subjects = Subjects.from_codes(sorted_psub)
        self.side_of = np.full(panel.subjects.count, -1, dtype=np.int64)
        if m:
            self.side_of[sorted_psub[self.subjects.starts]] = np.arange(self.subjects.count)
        self.columns = _SideColumns(table, Ordering(self.order, "side"))
        self.panel = panel

    # -------------------------------------------------------------- queries from the panel
    @functools.cached_property
    def g(self) -> np.ndarray:
        """Per sorted panel row: its subject's record group, -1 when the subject has no record."""
        return self.side_of[self.panel.subjects.grp]

    def back(self, span: Any, *, strict: bool) -> np.ndarray:
        """Per panel row: the least record key q with key >= q exactly when the record's time is at or
        after t - span (``strict``: after).  ``span`` in native units (see :meth:`span`)."""
        return self.axis.back(span, strict=strict, rows=np.arange(self.n))

    def span(self, value: Any, what: str = "span") -> Any:
        return self.axis.span(value, what)

    @functools.cached_property
    def search_key(self) -> K.SearchKey:
        return K.search_key(self.subjects, self.key)

    def first_at_or_after(self, q: np.ndarray, rows: np.ndarray | None = None) -> np.ndarray:
        """Per panel row (or the panel rows ``rows``): the first record of its subject with key >= q,
        the subject's end when there is none; 0 for rows whose subject has no record."""
        g = self.g if rows is None else self.g[rows]
        out = np.zeros(len(g), dtype=np.int64)
        has = g >= 0
        if has.all():
            return K.first_at_or_after(self.subjects, self.key, self.search_key, q, grp=g)
        if has.any():
            out[has] = K.first_at_or_after(self.subjects, self.key, self.search_key, q[has], grp=g[has])
        return out

    # -------------------------------------------------------------- tied records
    @functools.cached_property
    def runs(self) -> Runs:
        """Records grouped by (subject, time): one run per distinct time of a subject."""
        m = self.m
        is_start = np.ones(m, dtype=bool)
        if m > 1:
            np.not_equal(self.key[1:], self.key[:-1], out=is_start[1:])
            is_start[self.subjects.starts] = True
        if is_start.all():  # no tied records: each record is its own run (the common case, no copies)
            return Runs(rows=Subjects(n=m, starts=np.arange(m), ends=np.arange(1, m + 1), grp=np.arange(m)),
                        groups=self.subjects, key=self.key, t=self.t, search=self.search_key)
        runs = Subjects.from_starts(is_start)
        groups = Subjects.from_codes(self.subjects.grp[runs.starts]) if m else Subjects.from_codes(
            np.zeros(0, dtype=np.int64))
        key = self.key[runs.starts]
        return Runs(rows=runs, groups=groups, key=key, t=self.t[runs.starts], search=K.search_key(groups, key))

    def run_first_at_or_after(self, q: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Per panel row: (first run of its subject with key >= q or the subject's end of runs, has records)."""
        r = self.runs
        g = self.g
        has = g >= 0
        out = np.zeros(self.n, dtype=np.int64)
        if has.all():
            return K.first_at_or_after(r.groups, r.key, r.search, q, grp=g), has
        if has.any():
            out[has] = K.first_at_or_after(r.groups, r.key, r.search, q[has], grp=g[has])
        return out, has

    def ids_of_records(self, records: np.ndarray) -> list[Hashable]:
        return self.table.ids_at(self.order[np.asarray(records)[:100]])


@dataclass(frozen=True, eq=False)
class Runs:
    """Records that share subject and time: ``rows`` (runs over the records), ``groups`` (runs of
    each subject, numbered like the record groups), the runs' ``key`` / native ``t`` and a search key."""

    rows: Subjects
    groups: Subjects
    key: np.ndarray
    t: np.ndarray
    search: K.SearchKey


def _record_order(psub: np.ndarray, key: np.ndarray) -> tuple[np.ndarray | None, np.ndarray]:
    """Sort records by (panel subject, time key): (the order, ``None`` when already in that order;
    the subjects in that order)."""
    m = len(psub)
    if m < 2:
        return None, psub
    same = psub[1:] == psub[:-1]
    if not (psub[1:] < psub[:-1]).any() and not ((key[1:] < key[:-1]) & same).any():
        return None, psub
    ordering, sorted_psub = _sort(psub, key, None)
    assert ordering.order is not None
    return ordering.order, sorted_psub


# ---------------------------------------------------------------------------------- results


@dataclass(frozen=True, eq=False)
class SideTake(Deferred):
    """Result "column ``col`` of a side table at records ``rows``" per sorted panel row (-1: missing),
    in the column's own dtype (upcast by pandas where it cannot hold a missing value)."""

    view: SideView
    col: str
    rows: np.ndarray

    def resolve(self, panel: Any) -> Any:
        rows = self.rows
        frame = self.view.table.frame
        s = frame[self.col]
        if isinstance(s.dtype, np.dtype) and s.dtype == np.float64:
            out = self.view.columns.numeric(self.col)[np.maximum(rows, 0)] if self.view.m else \
                np.full(len(rows), np.nan)
            out[rows < 0] = np.nan
            return panel.ordering.unsort(out)
        values = s.to_numpy() if isinstance(s.dtype, np.dtype) else s.array
        if isinstance(values, np.ndarray) and values.dtype.kind in "iu" and (rows < 0).any() \
                and values.size and (values.max() > EXACT_FLOAT_INT or values.min() < -EXACT_FLOAT_INT):
            values = pd.array(values, dtype=f"{'U' if values.dtype.kind == 'u' else ''}Int64")
        src = np.where(rows >= 0, self.view.order[np.maximum(rows, 0)] if self.view.m else 0, -1)
        return pd.api.extensions.take(values, panel.ordering.unsort(src), allow_fill=True)


@dataclass(frozen=True, eq=False)
class Values(Deferred):
    """Sorted-order values already computed (floats, booleans); put back in the caller's order."""

    values: np.ndarray

    def resolve(self, panel: Any) -> Any:
        return panel.ordering.unsort(self.values)


@dataclass(frozen=True, eq=False)
class Flags(Deferred):
    """Sorted-order true/false values with missing ones: a nullable boolean column (plain
    booleans when none is missing)."""

    values: np.ndarray
    missing: np.ndarray

    def resolve(self, panel: Any) -> Any:
        v = panel.ordering.unsort(self.values)
        if not self.missing.any():
            return v
        return pd.arrays.BooleanArray(v, panel.ordering.unsort(self.missing))



@dataclass(frozen=True, eq=False)
class NativeTimes(Deferred):
    """Sorted-order native times of a common axis (``missing`` where there is none), returned as
    times of the panel's kind (numbers, or datetimes in the panel's zone)."""

    axis: TimeAxis
    values: np.ndarray
    missing: np.ndarray

    def resolve(self, panel: Any) -> Any:
        v = panel.ordering.unsort(self.values)
        miss = panel.ordering.unsort(self.missing)
        if self.axis.kind == "number":
            out = self.axis.to_time(v).to_numpy(dtype=np.float64, copy=True)
            out[miss] = np.nan
            return out
        v = np.where(miss, NAT, v)
        return self.axis.to_time(v).array


def float_key(x: np.ndarray) -> np.ndarray:
    """int64 keys that sort exactly like the float64 values (-0.0 as 0.0; NaN not allowed)."""
    bits = (x + 0.0).view(np.int64)
    return bits ^ ((bits >> 63) & np.int64(0x7FFFFFFFFFFFFFFF))


def _check_span_fits(t: np.ndarray, missing: np.ndarray, name: str) -> None:
    """Side-table lookups take differences of times in int64: their range must fit it."""
    ok = t[~missing] if missing.any() else t
    if ok.dtype.kind == "i" and ok.size and int(ok.max()) - int(ok.min()) > INT_MAX:
        raise TimeTypeError(f"times of side table {name!r} and the panel span more than 2**63 - 1 ticks: "
                            f"differences cannot be exact", column=name, count=len(t))


def day_ticks(axis: TimeAxis) -> Any:
    """One day (datetime / timedelta times) or one time unit (numbers) in the axis' native units."""
    if axis.kind == "number":
        return 1.0 if axis.binary else int(axis.scale or 1)
    tick = int(axis.tick_ns)
    return UNITS_NS["D"] // tick if UNITS_NS["D"] % tick == 0 else None
