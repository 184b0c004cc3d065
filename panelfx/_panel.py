"""The panel: declare (id, time) once, validate once, order once.

A thin facade over the engine's parts, each in its own module:

- :class:`~panelfx._time.TimeAxis` (``panel.axis``): the times in an exact native form,
  spans, durations and thresholds;
- :class:`~panelfx._order.Ordering` (``panel.ordering``): the one sort of the rows;
- :class:`~panelfx._subjects.Subjects` (``panel.subjects``): subject boundaries;
- :class:`~panelfx._columns.Columns` (``panel.columns``): value columns in sorted order.

Transforms compute on sorted arrays and return sorted-order results (or a
:class:`~panelfx._columns.Take`); ``derive`` puts them back in the caller's order once.
"""

from __future__ import annotations

import functools
from collections.abc import Hashable, Sequence
from typing import Any

import numpy as np
import pandas as pd

from . import _kernels as K
from ._columns import Columns, to_float
from ._frames import not_a_frame
from ._order import Ordering, order_rows
from ._subjects import Subjects
from ._time import NAT, UNITS_NS, TimeAxis, time_kind
from .errors import DuplicateOccasionError, MissingColumnError, NullKeyError, OptionError, rows_message

__all__ = ["Panel", "as_id_list", "key_column", "require_columns", "time_kind", "to_float", "UNITS_NS", "NAT"]


def sort_key_with_order(axis: TimeAxis, order: pd.Series, check_null: Any) -> np.ndarray:
    """One int64 per row sorting like (time, order): dense ranks of the pairs (order values of
    any sortable type; physical row order never breaks a tie)."""
    check_null(order.isna().to_numpy(), str(order.name), "missing order value")
    ocode, _ = pd.factorize(order, sort=True)
    by = np.lexsort((ocode, axis.key))
    k, o = axis.key[by], ocode[by]
    new = np.empty(len(by), dtype=bool)
    new[:1] = True
    new[1:] = (k[1:] != k[:-1]) | (o[1:] != o[:-1])
    ranks = np.empty(len(by), dtype=np.int64)
    ranks[by] = np.cumsum(new) - 1
    return ranks


def as_id_list(id: str | Sequence[str]) -> list[str]:
    """``id`` may name one column or several (e.g. site and subject number)."""
    if isinstance(id, str):
        return [id]
    ids = list(id)
    if not ids or not all(isinstance(c, str) for c in ids):
        raise OptionError(f"id must be a column name or a list of column names, got {id!r}")
    return ids


def key_column(frame: pd.DataFrame, name: str) -> pd.Series:
    """A key (id, time, order) as a Series in row order: a column, or else an index level of that name."""
    if name in frame.columns:
        return frame[name]
    return pd.Series(frame.index.get_level_values(name), index=frame.index, name=name)


def require_columns(frame: pd.DataFrame, columns: Sequence[str], what: str, *, levels: bool = False) -> None:
    """Every name is a column (or, with ``levels``, an index level: id and time may sit in a MultiIndex)."""
    names = set(frame.index.names) if levels else set()
    missing = [c for c in columns if c not in frame.columns and c not in names]
    if missing:
        raise MissingColumnError(
            f"{what} column {missing[0]!r} is not in the frame (columns: {list(frame.columns)[:20]})",
            column=missing[0],
            count=len(missing),
        )


class Panel:
    """Rows of a frame in (subject, time) order: ``axis``, ``ordering``, ``subjects``, ``columns``.

    ``t`` is ``axis.t`` (native times, sorted); ``repeated`` marks rows with the same
    subject and time (and ``order`` value) as the row before: an error unless ``strict=False``.
    ``order`` names a column that orders rows sharing a time (tied occasions): rows then sort
    by (subject, time, order), and ``tied`` marks rows with the same subject and time as the
    row before.  ``id`` and ``time`` may name index levels instead of columns.
    """

    def __init__(
        self,
        frame: pd.DataFrame,
        *,
        id: str | Sequence[str],
        time: str,
        unit: str | None = None,
        order: str | None = None,
        time_unit: str | None = None,
        strict: bool = True,
    ) -> None:
        if not isinstance(frame, pd.DataFrame):  # public functions read other frames at the edge (_frames.py)
            raise not_a_frame(frame)
        self.id_cols = as_id_list(id)
        if not isinstance(time, str):
            raise OptionError(f"time must be a column name, got {time!r}")
        if order is not None and (not isinstance(order, str) or order in (*self.id_cols, time)):
            raise OptionError(f"order must name a column other than the id and time columns, got {order!r}")
        self.time_col = time
        self.order_col = order
        require_columns(frame, self.id_cols, "id", levels=True)
        require_columns(frame, [time], "time", levels=True)
        if order is not None:
            require_columns(frame, [order], "order", levels=True)
        if time in self.id_cols:
            raise OptionError(f"time column {time!r} is also an id column")
        self.frame = frame
        self.n = len(frame)
        keys = pd.DataFrame({c: key_column(frame, c).array for c in self.id_cols}, index=frame.index)
        self._keys = keys
        axis, missing = TimeAxis.read(key_column(frame, time), unit, time_unit)
        self._check_null(missing, time, "missing time")
        sort_t, sort_key = axis.t, lambda: axis.key
        if order is not None:
            sort_t = sort_key_with_order(axis, key_column(frame, order), self._check_null)
            sort_key = lambda: sort_t  # noqa: E731 - the combined ranks are the key
        self.ordering: Ordering
        self.ordering, codes = order_rows(keys, self.id_cols, sort_t, sort_key)
        self.axis = axis.take(self.ordering.order)
        self.subjects = Subjects.from_codes(codes)
        self.columns = Columns(frame, self.ordering, self._ids_at_caller, keys={time: key_column(frame, time)})
        self.tables: dict[str, Any] = {}  # name -> _tables.SideTable, set by derive(tables=)
        # tied: same subject and time as the row before; repeated: also the same order value
        self.tied = np.zeros(self.n, dtype=bool)
        if self.n > 1:
            t = self.axis.t
            np.equal(t[1:], t[:-1], out=self.tied[1:])
            self.tied[self.subjects.starts] = False
        self.repeated = self.tied
        if order is not None:
            o = self.ordering.sort(sort_t)
            self.repeated = self.tied.copy()
            self.repeated[1:] &= o[1:] == o[:-1]
        if strict and self.repeated.any():
            where = np.flatnonzero(self.repeated)
            ids = self.ids_at(where)
            if order is None:
                what = (f"duplicate (id, time): {len(where)} repeated occasion(s); keep one row per subject and "
                        f"time, give order= (a column that orders rows sharing a time), or combine them with "
                        f"collapse_ties()")
            else:
                what = (f"duplicate (id, time, {order}): {len(where)} repeated row(s); the order column must "
                        f"tell tied rows apart, or combine them with collapse_ties()")
            raise DuplicateOccasionError(rows_message(what, time, len(where), ids), column=time,
                                         count=len(where), ids=ids)

    def _check_null(self, missing: np.ndarray, col: str, what: str) -> None:
        if missing.any():
            where = np.flatnonzero(missing)
            ids = self._ids_at_caller(where)
            raise NullKeyError(rows_message(what, col, len(where), ids), column=col, count=len(where), ids=ids)

    @functools.cached_property
    def has_ties(self) -> bool:
        return bool(self.tied.any())

    # ------------------------------------------------------------------ shortcuts
    @property
    def t(self) -> np.ndarray:
        return self.axis.t

    @property
    def time_kind(self) -> str:
        return self.axis.kind

    @property
    def unit(self) -> str | None:
        return self.axis.unit

    @property
    def n_subjects(self) -> int:
        return self.subjects.count

    @property
    def starts(self) -> np.ndarray:
        return self.subjects.starts

    @property
    def ends(self) -> np.ndarray:
        return self.subjects.ends

    @property
    def grp(self) -> np.ndarray:
        return self.subjects.grp

    def sort(self, values: np.ndarray) -> np.ndarray:
        """Caller order -> sorted order."""
        return self.ordering.sort(values)

    def original_positions(self, sorted_positions: np.ndarray) -> np.ndarray:
        return self.ordering.positions(sorted_positions)

    # ------------------------------------------------------------------ ids for messages
    def _ids_at_caller(self, positions: np.ndarray, limit: int = 5) -> list[Hashable]:
        """Subject ids (tuples for several id columns) at the first few caller positions, distinct."""
        pos = np.asarray(positions)[: limit * 20]
        cols = [self._keys[c].iloc[pos].tolist() for c in self.id_cols]
        vals = cols[0] if len(cols) == 1 else list(zip(*cols))
        return list(dict.fromkeys(vals))[:limit]

    def ids_at(self, positions: np.ndarray, limit: int = 5) -> list[Hashable]:
        """Subject ids at the first few sorted positions, distinct."""
        return self._ids_at_caller(self.ordering.positions(np.asarray(positions)[: limit * 20]), limit)

    # ------------------------------------------------------------------ time
    def span(self, value: Any, what: str = "span") -> Any:
        """A span option in native units (see :meth:`TimeAxis.span`)."""
        return self.axis.span(value, what)

    def duration(self, delta: np.ndarray) -> np.ndarray:
        return self.axis.duration(delta)

    def elapsed_since(self, source: np.ndarray) -> np.ndarray:
        """Per row: the time since sorted row ``source`` as a float duration, NaN where -1."""
        t = self.axis.t
        out = self.axis.elapsed(t, t[np.maximum(source, 0)])
        out[source < 0] = np.nan
        return out

    @functools.cached_property
    def search_key(self) -> K.SearchKey:
        return K.search_key(self.subjects, self.axis.key)

    def first_at_or_after(self, q: np.ndarray, scratch: bool = False) -> np.ndarray:
        """Per row i: the first row j of i's subject with time key >= q[i] (the subject's end if none).
        ``scratch``: q is the caller's temporary, which the search may overwrite."""
        return K.first_at_or_after(self.subjects, self.axis.key, self.search_key, q, scratch=scratch)

    def reference(self, col: str) -> tuple[np.ndarray, np.ndarray]:
        """A column of times as (r, missing) in sorted order: key <= r means "on or before it"."""
        r, missing = self.axis.reference(self.columns.series(col))
        return self.ordering.sort(r), self.ordering.sort(missing)

    def native_to_time(self, t: np.ndarray) -> pd.Series:
        return self.axis.to_time(t)
