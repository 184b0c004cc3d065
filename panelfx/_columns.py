"""Column view: value columns read in sorted order, and the derived columns made so far.

What transforms may use: :meth:`Columns.numeric` (float64, NaN for missing), :meth:`Columns.missing`,
:meth:`Columns.flags` (true/false columns), :meth:`Columns.integers` (exact int64 reads) and
:meth:`Columns.series` (a column as the caller gave it).  A transform that must keep a
column's dtype (lag, baseline, carry forward) returns :class:`Take` instead of an array:
"column C at these sorted rows", which ``derive`` resolves with one dtype-preserving take.
Reads are cached per column, so several transforms on one column sort it once.
"""

from __future__ import annotations

from collections.abc import Callable, Hashable
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from ._order import Ordering
from .errors import ColumnTypeError, MissingColumnError, PrecisionError, rows_message

#: Integers beyond this magnitude are not all exact in float64.
EXACT_FLOAT_INT = 2**53


class Deferred:
    """A transform's result that ``derive`` turns into caller-order values itself (dtype kept)."""

    def resolve(self, panel: Any) -> Any:
        """The values in the caller's row order: an array or extension array of ``panel.n``."""
        raise NotImplementedError


@dataclass(frozen=True)
class Take(Deferred):
    """A transform's result "column ``col`` at sorted rows ``rows``" (-1: missing), dtype kept."""

    col: str
    rows: np.ndarray

    def resolve(self, panel: Any) -> Any:
        return panel.columns.take(self.col, self.rows)


class Columns:
    """Input and derived columns of one panel, read in sorted order (see the module docstring)."""

    def __init__(self, frame: pd.DataFrame, ordering: Ordering,
                 ids_at: Callable[[np.ndarray], list[Hashable]], keys: dict[str, pd.Series] | None = None) -> None:
        self.frame = frame
        self._keys = keys or {}  # key columns that may sit in the index (the time column)
        self.ordering = ordering
        self._ids_at = ids_at  # caller positions -> first few subject ids, for messages
        self._derived: dict[str, pd.Series] = {}
        self._cache: dict[tuple[str, str], Any] = {}

    def add(self, name: str, values: pd.Series) -> None:
        """Make a column computed by an earlier transform visible to later ones."""
        self._derived[name] = values

    def series(self, col: str) -> pd.Series:
        """A column in the caller's row order (input or derived so far)."""
        if col in self._derived:
            return self._derived[col]
        if col not in self.frame.columns and col in self._keys:
            return self._keys[col]
        if col not in self.frame.columns:
            raise MissingColumnError(f"column {col!r} is not in the frame", column=col, count=1)
        return self.frame[col]

    def _cached(self, col: str, what: str, make: Callable[[], Any]) -> Any:
        key = (col, what)
        if key not in self._cache:
            self._cache[key] = make()
        return self._cache[key]

    def missing(self, col: str) -> np.ndarray:
        """Missing-value mask of any column, sorted order."""
        return self._cached(col, "missing", lambda: self.ordering.sort(self.series(col).isna().to_numpy()))

    def numeric(self, col: str) -> np.ndarray:
        """A column as float64 in sorted order, missing values as NaN.

        Text is a :class:`ColumnTypeError`; integers beyond 2**53 in magnitude, which float64
        cannot all hold exactly, a :class:`PrecisionError`.
        """
        return self._cached(col, "numeric", lambda: self.ordering.sort(self._to_float(col)))

    def integers(self, col: str) -> np.ndarray | None:
        """An integer column (numpy, nullable or Arrow; no missing value) in sorted order as int64,
        or uint64 when its values pass the int64 range; ``None`` for any other column.  For exact
        arithmetic on integers beyond 2**53."""
        def make() -> np.ndarray | None:
            s = self.series(col)
            if not pd.api.types.is_integer_dtype(s.dtype) or s.isna().any():
                return None
            np_type = s.dtype if isinstance(s.dtype, np.dtype) else getattr(s.dtype, "numpy_dtype", None)
            v = s.to_numpy(dtype=np_type)
            wide = v.dtype.kind == "u" and v.size and int(v.max()) > np.iinfo(np.int64).max
            return self.ordering.sort(v.astype(np.uint64 if wide else np.int64, copy=False))
        return self._cached(col, "integers", make)

    def flags(self, col: str, *, any_nonzero: bool = False) -> tuple[np.ndarray, np.ndarray]:
        """A true/false column in sorted order as (is_true, is_missing) boolean arrays.

        Accepts booleans (numpy, nullable or Arrow) and numbers that are all 0 or 1 (any
        integer or float dtype).  Other numbers (a lab value, an event number) are a
        :class:`ColumnTypeError`, unless ``any_nonzero`` says that any non-zero number is true.
        Text is an error.
        """
        return self._cached(col, f"flags{any_nonzero}", lambda: self._flags(col, any_nonzero))

    def _flags(self, col: str, any_nonzero: bool) -> tuple[np.ndarray, np.ndarray]:
        s = self.series(col)
        if pd.api.types.is_bool_dtype(s.dtype):
            missing = s.isna().to_numpy()
            true = s.to_numpy(dtype=bool, na_value=False)
        else:
            v = self._to_float(col)
            missing = np.isnan(v)
            if not any_nonzero:
                other = ~missing & (v != 0) & (v != 1)
                if other.any():
                    where = np.flatnonzero(other)
                    shown = ", ".join(f"{x:g}" for x in np.unique(v[where])[:5])
                    raise ColumnTypeError(
                        rows_message(f"a true/false column must hold booleans or 0/1; found other numbers ({shown}). "
                                     f"Derive a flag first (e.g. frame[{col!r}] > 0), or pass any_nonzero=True if "
                                     f"every non-zero number means true", col, len(where), self._ids_at(where)),
                        column=col, count=len(where), ids=self._ids_at(where))
            true = (v != 0) & ~missing
        return self.ordering.sort(true), self.ordering.sort(missing)

    def condition(self, col: str) -> np.ndarray:
        """A ``where=`` column in sorted order as one boolean array: true rows may serve as
        sources; a missing value counts as false.  Booleans or 0/1 only."""
        true, _ = self.flags(col)
        return true

    def take(self, col: str, rows: np.ndarray) -> Any:
        """Values of ``col`` at sorted rows ``rows`` (-1: missing), in caller order, dtype kept
        (upcast by pandas where it cannot hold a missing value)."""
        s = self.series(col)
        if isinstance(s.dtype, np.dtype) and s.dtype == np.float64:
            # Plain floats: take from the sorted copy (cached, shared with other transforms).
            out = self.numeric(col)[np.maximum(rows, 0)]
            out[rows < 0] = np.nan
            return self.ordering.unsort(out)
        # numpy-backed columns as ndarrays: pandas 2.2 warns (FutureWarning) when take gets
        # the NumpyExtensionArray that .array returns for them
        values = s.to_numpy() if isinstance(s.dtype, np.dtype) else s.array
        if isinstance(values, np.ndarray) and values.dtype.kind in "iu" and (rows < 0).any() \
                and values.size and (values.max() > EXACT_FLOAT_INT or values.min() < -EXACT_FLOAT_INT):
            # float64 would round these; the nullable integer type holds them and a missing value
            values = pd.array(values, dtype=f"{'U' if values.dtype.kind == 'u' else ''}Int64")
        src = np.where(rows >= 0, self.ordering.positions(np.maximum(rows, 0)), -1)
        return pd.api.extensions.take(values, self.ordering.unsort(src), allow_fill=True)

    def _to_float(self, col: str) -> np.ndarray:
        return to_float(self.series(col), self._ids_at)


def to_float(s: pd.Series, ids_at: Callable[[np.ndarray], list[Hashable]] | None = None) -> np.ndarray:
    """Numbers (numpy, nullable or Arrow-backed; booleans as 0/1) as float64 with NaN for missing.

    Text is never parsed: a column of strings, or objects that are not all numbers, is a
    :class:`ColumnTypeError` naming the count and first ids of the text values.  Integers
    beyond 2**53 in magnitude are a :class:`PrecisionError`: float64 would round them.
    """
    dtype = s.dtype
    name = str(s.name)

    def ids(where: np.ndarray) -> list[Hashable]:
        return ids_at(where) if ids_at is not None else list(s.index[where[:5]])

    if pd.api.types.is_integer_dtype(dtype):
        np_type = dtype if isinstance(dtype, np.dtype) else getattr(dtype, "numpy_dtype", np.dtype(np.int64))
        exact = s.to_numpy(dtype=np_type, na_value=0)  # compared as integers: 2**53 + 1 is not a float
        big = (exact > EXACT_FLOAT_INT) | (exact < -EXACT_FLOAT_INT) if exact.dtype.kind == "i" else \
            exact > EXACT_FLOAT_INT
        v = s.to_numpy(dtype=np.float64, na_value=np.nan)
        if big.any():
            where = np.flatnonzero(big)
            raise PrecisionError(
                rows_message("integers beyond 2**53 cannot all be held exactly as float64, which this "
                             "computation uses; rescale them (e.g. subtract an origin) first",
                             name, len(where), ids(where)),
                column=name, count=len(where), ids=ids(where))
        return v
    if pd.api.types.is_bool_dtype(dtype) or (
        pd.api.types.is_numeric_dtype(dtype) and not pd.api.types.is_complex_dtype(dtype)
    ):
        return s.to_numpy(dtype="float64", na_value=np.nan)
    if dtype == object:
        kind = pd.api.types.infer_dtype(s, skipna=True)
        if kind in ("integer", "floating", "mixed-integer-float", "decimal", "empty", "boolean"):
            return to_float(pd.to_numeric(s), ids_at)
    if pd.api.types.is_datetime64_any_dtype(dtype) or pd.api.types.is_timedelta64_dtype(dtype):
        raise ColumnTypeError(f"column {name!r} holds {dtype} values where numbers are needed",
                              column=name, count=len(s))
    bad = s.notna().to_numpy()
    if dtype == object:
        # not in place: under copy-on-write to_numpy() may hand back a read-only view
        bad = bad & (~pd.to_numeric(s, errors="coerce").notna().to_numpy() | s.str.len().notna().to_numpy())
    where = np.flatnonzero(bad)
    raise ColumnTypeError(
        rows_message(f"text where numbers are needed (dtype {dtype}); panelfx does not parse text, convert it "
                     f"first (e.g. pd.to_numeric)", name, len(where), ids(where)),
        column=name, count=len(where), ids=ids(where),
    )
