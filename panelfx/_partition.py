"""A stable hash of the subject id, for putting each subject's rows in one partition.

Every transform reads only its own subject's rows, so a panel splits perfectly by subject:
``subject_hash`` gives each row a 64-bit number that depends only on the row's id value(s),
and partition ``hash % n`` then holds whole subjects.  Used by :mod:`panelfx.dask` (shuffle,
side tables, the split-subject check) and by the command line's partitioned ``apply``.

Stable means: the same id gives the same hash in every process, on every run and whatever
the column's dtype, so a side table whose id column was read as ``Int64`` meets the rows of
a frame whose id is ``int64``.  The hash is pandas' ``hash_pandas_object`` (SipHash with a
fixed key, not Python's salted ``hash``) over a canonical form of each id column:

- integers of any width, numpy or nullable or Arrow-backed, and booleans: int64 (uint64
  beyond the int64 range keeps its 64 bits);
- floats: float64 with -0.0 as 0.0;
- text of any string dtype (object, ``str``, ``string``, Arrow strings) and categories:
  their values as Python strings (a category hashes as its value, whatever the categories);
- datetimes: UTC instants in microseconds; timedeltas in microseconds.

A missing id hashes to a fixed value (its rows meet in one partition, where ``derive``
reports them).  Different kinds never meet: the integer 1 and the text "1" are different
subjects, as they are for ``derive``.

>>> import pandas as pd
>>> a = pd.DataFrame({"pid": pd.array([7, 8], dtype="Int64")})
>>> b = pd.DataFrame({"pid": [7, 8]}, dtype="int32")
>>> (subject_hash(a, ["pid"]) == subject_hash(b, ["pid"])).all()
np.True_
>>> subject_hash(pd.DataFrame({"pid": ["7"]}), ["pid"])[0] == subject_hash(b, ["pid"])[0]
np.False_
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pandas as pd

from .errors import ColumnTypeError

__all__ = ["subject_hash", "id_kind", "ROW_BITS"]

#: Row numbers carried through a shuffle are ``partition << ROW_BITS | position``.
ROW_BITS = 40


def id_kind(dtype: object) -> str:
    """The canonical kind an id column hashes as: "int", "float", "text", "datetime", "timedelta"
    (or "other", hashed by pandas as it is).  Two id columns meet only if their kinds match."""
    if isinstance(dtype, pd.CategoricalDtype):
        return id_kind(dtype.categories.dtype)
    if pd.api.types.is_bool_dtype(dtype) or pd.api.types.is_integer_dtype(dtype):
        return "int"
    if pd.api.types.is_float_dtype(dtype):
        return "float"
    if pd.api.types.is_datetime64_any_dtype(dtype):
        return "datetime"
    if pd.api.types.is_timedelta64_dtype(dtype):
        return "timedelta"
    if pd.api.types.is_string_dtype(dtype) or dtype == object:
        return "text"
    return "other"


def _canonical(s: pd.Series) -> pd.Series:
    """One id column in the form its hash is taken of (see the module docstring)."""
    if isinstance(s.dtype, pd.CategoricalDtype):
        s = s.astype(s.dtype.categories.dtype)  # a category is its value, whatever the categories
    kind = id_kind(s.dtype)
    missing = s.isna().to_numpy()
    if kind == "int":
        dtype = getattr(s.dtype, "numpy_dtype", s.dtype)
        if isinstance(dtype, np.dtype) and dtype.kind == "u":
            v = s.to_numpy(dtype=np.uint64, na_value=0).view(np.int64)
        else:
            v = s.to_numpy(dtype=np.int64, na_value=0)
        out = pd.Series(v, index=s.index, copy=False)
    elif kind == "float":
        v = s.to_numpy(dtype=np.float64, na_value=np.nan) + 0.0  # + 0.0 turns -0.0 into 0.0
        v[missing] = 0.0
        out = pd.Series(v, index=s.index, copy=False)
    elif kind in ("datetime", "timedelta"):
        if kind == "datetime" and getattr(s.dt, "tz", None) is not None:
            s = s.dt.tz_convert("UTC").dt.tz_localize(None)
        try:
            v = s.astype(f"{'datetime64' if kind == 'datetime' else 'timedelta64'}[us]").to_numpy()
        except (OverflowError, ValueError) as err:
            raise ColumnTypeError(f"id column {s.name!r} holds times outside the range of microseconds: {err}",
                                  column=str(s.name)) from None
        out = pd.Series(v.view(np.int64), index=s.index, copy=False)
        out[missing] = 0
    elif kind == "text":
        # pandas hashes a text value alike in every string dtype (tests/test_dask_partition.py
        # holds it to that), so the column is hashed as it is: no copy to Python objects.
        out = s.fillna("") if missing.any() else s
    else:
        out = s
    return out


def subject_hash(frame: pd.DataFrame, id_cols: Sequence[str]) -> np.ndarray:
    """Per row: a uint64 hash of the row's id value(s), the same for equal ids in any frame."""
    h: np.ndarray | None = None
    for c in id_cols:
        # Ids repeat on every occasion of a subject: hash each distinct value once.
        codes, uniques = pd.factorize(_canonical(frame[c]), use_na_sentinel=True)
        missing = frame[c].isna().to_numpy()
        if missing.any():
            codes[missing] = -1  # the canonical form filled them in: mark them missing again
        hu = pd.util.hash_pandas_object(pd.Series(uniques), index=False).to_numpy(dtype=np.uint64)
        col = np.append(hu, _MISSING)[codes]  # code -1 (missing) takes the last entry
        # Several id columns: a fixed mixing of the parts (uint64 arithmetic wraps).
        h = col if h is None else _mix(h * _MULT + col)
    return np.zeros(0, dtype=np.uint64) if h is None else h


#: Hash of a missing id part, and the constants of the mixing step (splitmix64's finaliser).
_MISSING = np.uint64(0x9E3779B97F4A7C15)
_MULT = np.uint64(0xBF58476D1CE4E5B9)


def _mix(x: np.ndarray) -> np.ndarray:
    with np.errstate(over="ignore"):
        x = x ^ (x >> np.uint64(30))
        x = x * np.uint64(0xBF58476D1CE4E5B9)
        x = x ^ (x >> np.uint64(27))
        x = x * np.uint64(0x94D049BB133111EB)
        return x ^ (x >> np.uint64(31))
