"""The panel engine: declare (id, time) once, validate once, order once.

A :class:`Panel` holds the frame's rows in (subject, time) order as plain numpy arrays
together with the subject boundaries.  Transforms read sorted columns from it, compute
on the sorted arrays and hand back results that :meth:`Panel.unsort` scatters into the
caller's row order.  When the rows already come grouped by subject and in time order
(checked in O(n)), no sort and no scatter happen at all.
"""

from __future__ import annotations

import datetime as _dt
import functools
from typing import Any, Hashable, Sequence

import numpy as np
import pandas as pd

from .errors import (
    ColumnTypeError,
    DuplicateOccasionError,
    MissingColumnError,
    NullKeyError,
    OptionError,
    TimeTypeError,
    rows_message,
)

#: Units accepted for datetime time columns, in nanoseconds.  "Y" is the Julian year of
#: 365.25 days (common practice for person-years and pack-years).
UNITS_NS: dict[str, int] = {
    "ns": 1,
    "us": 1_000,
    "ms": 1_000_000,
    "s": 1_000_000_000,
    "min": 60 * 1_000_000_000,
    "h": 3_600 * 1_000_000_000,
    "D": 86_400 * 1_000_000_000,
    "W": 7 * 86_400 * 1_000_000_000,
    "Y": int(365.25 * 86_400) * 1_000_000_000,
}


def as_id_list(id: str | Sequence[str]) -> list[str]:
    """``id`` may name one column or several (e.g. site and subject number)."""
    if isinstance(id, str):
        return [id]
    ids = list(id)
    if not ids or not all(isinstance(c, str) for c in ids):
        raise OptionError(f"id must be a column name or a list of column names, got {id!r}")
    return ids


def require_columns(frame: pd.DataFrame, columns: Sequence[str], what: str) -> None:
    missing = [c for c in columns if c not in frame.columns]
    if missing:
        raise MissingColumnError(
            f"{what} column {missing[0]!r} is not in the frame (columns: {list(frame.columns)[:20]})",
            column=missing[0],
            count=len(missing),
        )


def time_kind(series: pd.Series) -> str:
    """'number', 'datetime' or 'timedelta'; anything else is a :class:`TimeTypeError`."""
    dtype = series.dtype
    if pd.api.types.is_bool_dtype(dtype):
        pass
    elif pd.api.types.is_datetime64_any_dtype(dtype):
        return "datetime"
    elif pd.api.types.is_timedelta64_dtype(dtype):
        return "timedelta"
    elif pd.api.types.is_numeric_dtype(dtype):
        return "number"
    elif isinstance(dtype, pd.ArrowDtype):
        import pyarrow as pa

        if pa.types.is_timestamp(dtype.pyarrow_dtype) or pa.types.is_date(dtype.pyarrow_dtype):
            return "datetime"
        if pa.types.is_duration(dtype.pyarrow_dtype):
            return "timedelta"
    hint = ""
    if pd.api.types.is_string_dtype(dtype) or dtype == object:
        hint = " Text dates must be parsed first, e.g. frame[col] = pd.to_datetime(frame[col])."
    raise TimeTypeError(
        f"time column {series.name!r} has dtype {dtype}: it must hold numbers or datetimes.{hint}",
        column=str(series.name),
        count=len(series),
    )


def time_to_native(series: pd.Series, kind: str) -> np.ndarray:
    """Numbers as float64; datetimes (naive or tz-aware, as instants) and timedeltas as int64 ns."""
    if kind == "number":
        return series.to_numpy(dtype="float64", na_value=np.nan)
    if kind == "datetime":
        s = series
        if isinstance(s.dtype, pd.ArrowDtype):
            s = pd.Series(pd.to_datetime(s), index=s.index)
        if getattr(s.dtype, "tz", None) is not None:
            s = s.dt.tz_convert("UTC").dt.tz_localize(None)
        arr = s.to_numpy(dtype="datetime64[ns]")
    else:
        s = series
        if isinstance(s.dtype, pd.ArrowDtype):
            s = pd.Series(pd.to_timedelta(s), index=s.index)
        arr = s.to_numpy(dtype="timedelta64[ns]")
    return arr.view("int64")


NAT = np.iinfo("int64").min

#: Steps tried, coarsest first, for times that are whole multiples of a unit: days, hours,
#: minutes, seconds, ms, us, ns for native int64 nanoseconds; 1, 1/10, ... for numbers.
_NS_STEPS = (86_400 * 10**9, 3_600 * 10**9, 60 * 10**9, 10**9, 10**6, 10**3, 1)
_DECIMAL_SCALES = (1, 10, 100, 1000, 10_000, 100_000, 1_000_000)


def time_ranks(t: np.ndarray) -> tuple[np.ndarray, int, int, int] | None:
    """Times as small non-negative integers in the same order (equal exactly when the times
    are equal), or ``None`` when no such whole-step form is found.

    Returns (ranks, bound, origin, step): ranks lie in [0, bound); a number x maps to
    rank x * step - origin (float times, step a power of ten), a native integer time to
    (x - origin) / step (nanosecond times, step a unit).  Integer days, whole seconds or
    decimals with a few digits all qualify; the sort then needs one integer key instead
    of two, and searches within subjects need one global search.
    """
    if t.dtype.kind == "f":
        if not np.isfinite(t).all():
            return None
        tmin, tmax = float(t.min()), float(t.max())
        probe = t[:4096]
        for s in _DECIMAL_SCALES:
            if (tmax - tmin) * s >= 2**53:
                return None
            # rint(t * s) is monotone in t; q / s == t proves the map is one to one.
            if not (np.rint(probe * s) / s == probe).all():
                continue
            q = np.rint(t * s)
            if (q / s == t).all():
                origin = np.rint(tmin * s)
                q -= origin
                return q.astype(np.int64), int(q.max()) + 1, int(origin), s
        return None
    tmin, tmax = int(t.min()), int(t.max())
    if tmax - tmin >= 2**63:
        return None
    d = t - tmin
    probe = d[:4096]
    for u in _NS_STEPS:
        if (probe % u == 0).all() and (d % u == 0).all():
            if u > 1:
                d //= u
            return d, (tmax - tmin) // u + 1, tmin, u
    return d, tmax - tmin + 1, tmin, 1  # pragma: no cover - u = 1 always divides


def dense_ranks(t: np.ndarray) -> tuple[np.ndarray, int]:
    """0, 1, 2, ... for the distinct times in increasing order (one argsort)."""
    by_time = np.argsort(t)
    st = t[by_time]
    new = np.empty(len(t), dtype=bool)
    new[:1] = True
    np.not_equal(st[1:], st[:-1], out=new[1:])
    del st
    ranks = np.empty(len(t), dtype=np.int64)
    ranks[by_time] = np.cumsum(new) - 1
    return ranks, int(ranks.max()) + 1 if len(t) else 1


def sort_order(codes: np.ndarray, t: np.ndarray, *, fallback: bool = True) -> Any:
    """Stable order of rows by (subject code, time), and the codes in that order when the
    packed sort made them.

    Subject code, time rank and row number are packed into one int64 and sorted in place
    with ``np.sort`` (about five times faster than ``np.lexsort`` on two keys; the row
    number in the low bits keeps ties in their original order).  Times that are whole
    steps rank for free; others take one argsort for their ranks.  ``np.lexsort`` only
    when the three do not fit in 63 bits (billions of rows, or codes that are raw id
    values spread widely); with ``fallback=False`` ``None`` then.
    """
    n = len(codes)
    code_bits = int(codes.max()).bit_length()
    row_bits = (n - 1).bit_length()
    ranks = time_ranks(t)
    if ranks is None or code_bits + max(ranks[1] - 1, 1).bit_length() + row_bits > 63:
        ranks = dense_ranks(t)
    q, bound = ranks[0], ranks[1]
    time_bits = max(bound - 1, 1).bit_length()
    if code_bits + time_bits + row_bits > 63:
        return (np.lexsort((t, codes)), None) if fallback else None
    key = codes << time_bits
    key |= q
    del q, ranks
    key <<= row_bits
    key |= np.arange(n)
    key.sort()
    order = key & ((1 << row_bits) - 1)
    key >>= time_bits + row_bits
    return order, key


class Panel:
    """Rows of a frame in (subject, time) order, with subject boundaries.

    Attributes (all in sorted order):
        n: number of rows.  order: original positions of the sorted rows, or ``None``
        when the input was already in order.  t: times (float64, or int64 ns for
        datetime/timedelta times).  grp: subject number per row.  starts / ends: first
        and one-past-last row of each subject.  pos: position within subject (0, 1, ...).
        size: the subject's number of occasions, per row.
    """

    def __init__(
        self,
        frame: pd.DataFrame,
        *,
        id: str | Sequence[str],
        time: str,
        unit: str | None = None,
        strict: bool = True,
    ) -> None:
        if not isinstance(frame, pd.DataFrame):
            raise TypeError(f"expected a pandas DataFrame, got {type(frame).__name__}")
        self.id_cols = as_id_list(id)
        if not isinstance(time, str):
            raise OptionError(f"time must be a column name, got {time!r}")
        self.time_col = time
        require_columns(frame, self.id_cols, "id")
        require_columns(frame, [time], "time")
        if time in self.id_cols:
            raise OptionError(f"time column {time!r} is also an id column")
        self.frame = frame
        self.index = frame.index
        self.n = len(frame)
        self.time_kind = time_kind(frame[time])
        self.unit = self._check_unit(unit)
        self._extra: dict[str, Any] = {}
        self._cache: dict[tuple[str, str], np.ndarray] = {}

        raw = self._integer_ids()
        codes = self._subject_codes() if raw is None else raw
        t = time_to_native(frame[time], self.time_kind)
        self._check_null_time(t)
        if raw is None:
            self.order, sorted_codes = self._ordering(codes, t)
        else:
            self.order, sorted_codes = self._ordering_by_value(raw, t)
        if self.order is not None:
            codes = codes[self.order] if sorted_codes is None else sorted_codes
            t = t[self.order]
        self.t = t
        is_start = np.empty(self.n, dtype=bool)
        if self.n:
            is_start[0] = True
            np.not_equal(codes[1:], codes[:-1], out=is_start[1:])
        self.starts = np.flatnonzero(is_start)
        # an empty frame has no subjects: no end either
        self.ends = np.append(self.starts[1:], self.n)[: len(self.starts)].astype(self.starts.dtype)
        self.n_subjects = len(self.starts)
        self.grp = np.cumsum(is_start, dtype=np.int64)
        self.grp -= 1
        self.repeated = np.zeros(self.n, dtype=bool)  # same subject and time as the row before
        if self.n > 1:
            self.repeated[1:] = (~is_start[1:]) & (self.t[1:] == self.t[:-1])
        if strict:
            self._check_duplicates()

    @functools.cached_property
    def pos(self) -> np.ndarray:
        """Position of each sorted row within its subject (0, 1, ...); made on first use."""
        return np.arange(self.n) - self.starts[self.grp]

    @functools.cached_property
    def rank_key(self) -> tuple[np.ndarray, int, int, int, int] | None:
        """(subject * width + time rank, bound, origin, step, width) for whole-step times, made
        once per panel for the searches within subjects; ``None`` when times are not whole steps
        or the key would not fit in int64."""
        if self.n == 0:
            return None
        ranks = time_ranks(self.t)
        if ranks is None:
            return None
        q, bound, origin, step = ranks
        width = bound + 1
        if int(self.grp[-1]).bit_length() + int(width).bit_length() > 62:
            return None
        key = self.grp * width
        key += q
        return key, bound, origin, step, width

    @functools.cached_property
    def size(self) -> np.ndarray:
        """The subject's number of occasions on each sorted row; made on first use."""
        return (self.ends - self.starts)[self.grp]

    # ------------------------------------------------------------------ set-up
    def _check_unit(self, unit: str | None) -> str | None:
        if unit is None:
            return "D" if self.time_kind != "number" else None
        if self.time_kind == "number":
            raise OptionError(
                f"unit={unit!r} applies to datetime or timedelta times only; time column "
                f"{self.time_col!r} holds numbers, whose own units are used"
            )
        if unit not in UNITS_NS:
            raise OptionError(f"unit must be one of {sorted(UNITS_NS)}, got {unit!r}")
        return unit

    def _subject_codes(self) -> np.ndarray:
        """Integer subject codes numbered in order of first appearance."""
        frame = self.frame
        nulls = np.zeros(self.n, dtype=bool)
        for c in self.id_cols:
            nulls |= frame[c].isna().to_numpy()
        if nulls.any():
            bad = self.index[nulls]
            raise NullKeyError(
                rows_message("missing subject id", self.id_cols[0] if len(self.id_cols) == 1 else str(self.id_cols),
                             int(nulls.sum()), list(bad), noun="row labels"),
                column=self.id_cols[0],
                count=int(nulls.sum()),
                ids=list(bad),
            )
        if len(self.id_cols) == 1:
            codes, _ = pd.factorize(frame[self.id_cols[0]], sort=False)
            return codes.astype(np.int64, copy=False)
        combined = np.zeros(self.n, dtype=np.int64)
        for c in self.id_cols:
            k, uniq = pd.factorize(frame[c], sort=False)
            combined = combined * (len(uniq) + 1) + k
        codes, _ = pd.factorize(combined, sort=False)
        return codes.astype(np.int64, copy=False)

    def _integer_ids(self) -> np.ndarray | None:
        """One id column of numpy integers, as int64 offsets from the smallest id, when they
        fit the packed sort; ``None`` otherwise (then ids are factorised)."""
        if len(self.id_cols) != 1 or self.n < 2:
            return None
        s = self.frame[self.id_cols[0]]
        if not isinstance(s.dtype, np.dtype) or s.dtype.kind not in "iu":
            return None
        ids = s.to_numpy()
        lo, hi = int(ids.min()), int(ids.max())
        if (hi - lo).bit_length() + (self.n - 1).bit_length() > 62:
            return None
        return (ids - lo).astype(np.int64, copy=False) if lo else ids.astype(np.int64, copy=False)

    def _ordering_by_value(self, ids: np.ndarray, t: np.ndarray) -> tuple[np.ndarray | None, np.ndarray]:
        """:meth:`_ordering` for integer ids, without factorising them: the same order.

        Rows are sorted by (id value, time, row), then the subjects are put back in order
        of first appearance, as the factorised codes number them (one permutation of whole
        subjects, skipped when ids already appear in increasing order).
        """
        same = ids[1:] == ids[:-1]
        back = t[1:] < t[:-1]
        back &= same
        times_in_order = not back.any()
        del back
        if times_in_order and not (ids[1:] < ids[:-1]).any():
            return None, ids
        runs = self.n - int(np.count_nonzero(same))
        del same
        packed = sort_order(ids, t, fallback=False)
        if packed is None:  # id values too spread out to pack: number them instead
            return self._ordering(self._subject_codes(), t)
        order, sorted_ids = packed
        is_start = np.empty(self.n, dtype=bool)
        is_start[0] = True
        np.not_equal(sorted_ids[1:], sorted_ids[:-1], out=is_start[1:])
        del sorted_ids
        starts = np.flatnonzero(is_start)
        if times_in_order and runs == len(starts):
            return None, ids  # each subject's rows were contiguous and in time order already
        sizes = np.diff(np.append(starts, self.n))
        first_seen = np.minimum.reduceat(order, starts)
        if (first_seen[1:] < first_seen[:-1]).any():
            by_first = np.argsort(first_seen)
            new_sizes = sizes[by_first]
            new_starts = np.cumsum(new_sizes) - new_sizes
            rows = np.repeat(starts[by_first] - new_starts, new_sizes)
            rows += np.arange(self.n)
            order = order[rows]
            sizes = new_sizes
        return order, np.repeat(np.arange(len(starts)), sizes)

    def _check_null_time(self, t: np.ndarray) -> None:
        null = self.is_time_missing(t)
        if null.any():
            ids = self.ids_at(np.flatnonzero(null), sorted_=False)
            count = int(null.sum())
            raise NullKeyError(rows_message("missing time", self.time_col, count, ids),
                               column=self.time_col, count=count, ids=ids)

    def _ordering(self, codes: np.ndarray, t: np.ndarray) -> tuple[np.ndarray | None, np.ndarray | None]:
        """(order, sorted codes): order ``None`` when rows already come grouped by subject
        and in time order (O(n) check); sorted codes ``None`` when not at hand."""
        if self.n < 2:
            return None, None
        # First-appearance codes are non-decreasing exactly when each subject's rows are contiguous.
        # Ties in time are left in place: they are duplicates, reported by the caller.
        if not (codes[1:] < codes[:-1]).any():
            back = t[1:] < t[:-1]
            back &= codes[1:] == codes[:-1]
            if not back.any():
                return None, None
        return sort_order(codes, t)

    def _check_duplicates(self) -> None:
        dup = self.repeated
        if dup.any():
            where = np.flatnonzero(dup)
            ids = self.ids_at(where)
            raise DuplicateOccasionError(
                rows_message(
                    f"duplicate (id, time): {len(where)} repeated occasion(s); keep one row per subject and time",
                    self.time_col, int(dup.sum()), ids,
                ),
                column=self.time_col,
                count=int(dup.sum()),
                ids=ids,
            )

    # ------------------------------------------------------------------ access
    def original_positions(self, sorted_positions: np.ndarray) -> np.ndarray:
        return sorted_positions if self.order is None else self.order[sorted_positions]

    def ids_at(self, positions: np.ndarray, *, sorted_: bool = True, limit: int = 5) -> list[Hashable]:
        """Subject ids (tuples for several id columns) at the first few positions, distinct."""
        pos = np.asarray(positions)[: max(limit * 20, limit)]
        if sorted_:
            pos = self.original_positions(pos)
        cols = [self.frame[c].iloc[pos].tolist() for c in self.id_cols]
        vals = cols[0] if len(cols) == 1 else list(zip(*cols))
        return list(dict.fromkeys(vals))[:limit]

    def add_column(self, name: str, values: Any) -> None:
        """Make a column computed by an earlier transform visible to later ones."""
        self._extra[name] = values

    def series(self, col: str) -> pd.Series:
        """A column in the caller's row order (input or derived so far)."""
        if col in self._extra:
            return self._extra[col]
        if col not in self.frame.columns:
            raise MissingColumnError(f"column {col!r} is not in the frame", column=col, count=1)
        return self.frame[col]

    def sort(self, values: np.ndarray) -> np.ndarray:
        """Original row order -> sorted order."""
        return values if self.order is None else values[self.order]

    def unsort(self, values: np.ndarray) -> np.ndarray:
        """Sorted order -> the caller's row order."""
        if self.order is None:
            return values
        out = np.empty_like(values)
        out[self.order] = values
        return out

    def missing(self, col: str) -> np.ndarray:
        """Missing-value mask of any column, sorted order."""
        key = (col, "missing")
        if key not in self._cache:
            self._cache[key] = self.sort(self.series(col).isna().to_numpy())
        return self._cache[key]

    def numeric(self, col: str) -> np.ndarray:
        """A column as float64 in sorted order, missing values as NaN; text is an error."""
        key = (col, "numeric")
        if key not in self._cache:
            self._cache[key] = self.sort(to_float(self.series(col), self))
        return self._cache[key]

    def flags(self, col: str) -> tuple[np.ndarray, np.ndarray]:
        """A true/false column in sorted order as (is_true, is_missing) boolean arrays.

        Accepts booleans (numpy or nullable) and numbers where 0 is false and any other
        number true; text is an error.
        """
        s = self.series(col)
        if pd.api.types.is_bool_dtype(s.dtype):
            missing = s.isna().to_numpy()
            true = s.to_numpy(dtype=bool, na_value=False)
        else:
            v = to_float(s, self)
            missing = np.isnan(v)
            true = (v != 0) & ~missing
        return self.sort(true), self.sort(missing)

    def gather(self, col: str, source: np.ndarray) -> Any:
        """Values of ``col`` taken from sorted positions ``source`` (-1: missing), in caller order.

        Keeps the column's dtype (upcast by pandas where it cannot hold a missing value).
        """
        s = self.series(col)
        if isinstance(s.dtype, np.dtype) and s.dtype == np.float64:
            # Plain floats: take from the sorted copy (cached, shared with other transforms)
            # and scatter once, instead of mapping positions back and taking from the input.
            out = self.numeric(col)[np.maximum(source, 0)]
            out[source < 0] = np.nan
            return self.unsort(out)
        # numpy-backed columns as ndarrays: pandas 2.2 warns (FutureWarning) when take gets
        # the NumpyExtensionArray that .array returns for them
        values = s.to_numpy() if isinstance(s.dtype, np.dtype) else s.array
        src = np.where(source >= 0, self.original_positions(np.maximum(source, 0)), -1)
        return pd.api.extensions.take(values, self.unsort(src), allow_fill=True)

    # ------------------------------------------------------------------ time
    def time_values(self, col: str) -> np.ndarray:
        """Another column holding times (e.g. a reference date) in native units, sorted order."""
        s = self.series(col)
        try:
            kind = time_kind(s)
        except TimeTypeError as err:
            raise TimeTypeError(str(err).replace("time column", "column"), column=col) from None
        if kind != self.time_kind:
            raise TimeTypeError(
                f"column {col!r} holds {kind} values but the time column {self.time_col!r} holds {self.time_kind} values",
                column=col,
            )
        return self.sort(time_to_native(s, kind))

    def native_to_time(self, t: np.ndarray) -> pd.Series:
        """Native times back to the time column's kind (numbers, or timestamps in its zone)."""
        if self.time_kind == "number":
            return pd.Series(t, dtype="float64")
        if self.time_kind == "timedelta":
            return pd.Series(t.view("timedelta64[ns]"))
        out = pd.Series(t.view("datetime64[ns]"))
        tz = getattr(self.frame[self.time_col].dtype, "tz", None)
        return out.dt.tz_localize("UTC").dt.tz_convert(tz) if tz is not None else out

    def is_time_missing(self, t: np.ndarray) -> np.ndarray:
        return np.isnan(t) if t.dtype.kind == "f" else (t == NAT)

    def duration(self, delta: np.ndarray) -> np.ndarray:
        """Differences of native times as float64 durations: time-column units for numbers,
        ``unit`` (default days) for datetimes and timedeltas."""
        if self.time_kind == "number":
            return delta.astype("float64", copy=False)
        return delta.astype("float64") / UNITS_NS[self.unit or "D"]

    def span(self, value: Any, what: str = "span") -> float | int:
        """A window length or offset in native time units, checked against the time column's type."""
        if self.time_kind == "number":
            if isinstance(value, (str, pd.Timedelta, _dt.timedelta, np.timedelta64)) or isinstance(value, bool) \
                    or not isinstance(value, (int, float, np.integer, np.floating)):
                raise OptionError(
                    f"{what}={value!r} does not fit time column {self.time_col!r}, which holds numbers: "
                    f"give a number in its units"
                )
            return float(value)
        if isinstance(value, (str, pd.Timedelta, _dt.timedelta, np.timedelta64)):
            try:
                return int(pd.Timedelta(value).value)
            except ValueError:
                raise OptionError(f"{what}={value!r} is not a time span such as '90D'") from None
        raise OptionError(
            f"{what}={value!r} does not fit time column {self.time_col!r}, which holds {self.time_kind} values: "
            f"give a timedelta or a string such as '90D'"
        )


def to_float(s: pd.Series, panel: Panel | None = None) -> np.ndarray:
    """Numbers (numpy, nullable or Arrow-backed; booleans as 0/1) as float64 with NaN for missing.

    Text is never parsed: a column of strings, or objects that are not all numbers, is a
    :class:`ColumnTypeError` naming the count and first ids of the text values.
    """
    dtype = s.dtype
    if pd.api.types.is_bool_dtype(dtype) or (
        pd.api.types.is_numeric_dtype(dtype) and not pd.api.types.is_complex_dtype(dtype)
    ):
        return s.to_numpy(dtype="float64", na_value=np.nan)
    if dtype == object:
        kind = pd.api.types.infer_dtype(s, skipna=True)
        if kind in ("integer", "floating", "mixed-integer-float", "decimal", "empty", "boolean"):
            return pd.to_numeric(s).to_numpy(dtype="float64", na_value=np.nan)
    if pd.api.types.is_datetime64_any_dtype(dtype) or pd.api.types.is_timedelta64_dtype(dtype):
        raise ColumnTypeError(
            f"column {s.name!r} holds {dtype} values where numbers are needed", column=str(s.name), count=len(s)
        )
    bad = s.notna().to_numpy()
    if dtype == object:
        # not in place: under copy-on-write to_numpy() may hand back a read-only view
        bad = bad & (~pd.to_numeric(s, errors="coerce").notna().to_numpy() | s.str.len().notna().to_numpy())
    where = np.flatnonzero(bad)
    ids = panel.ids_at(where, sorted_=False) if panel is not None else list(s.index[where[:5]])
    raise ColumnTypeError(
        rows_message(
            f"text where numbers are needed (dtype {dtype}); panelfx does not parse text, convert it first "
            f"(e.g. pd.to_numeric)",
            str(s.name), len(where), ids,
        ),
        column=str(s.name),
        count=len(where),
        ids=ids,
    )
