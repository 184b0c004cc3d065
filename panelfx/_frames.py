"""Frames in, same frames out: the edge between the caller's frame library and panelfx's pandas engine.

panelfx computes on pandas.  A public function that takes a frame accepts

- a pandas DataFrame, with numpy, nullable (``Int64``, ``Float64``, ``boolean``, ``string``) or
  Arrow-backed (``pd.ArrowDtype``) columns;
- a polars DataFrame (polars is optional: it is recognised by its module name and never imported
  here unless a polars frame arrives, and then only to hand the result back);
- a pyarrow Table.

and gives its result back in the same library and dtype backend.  Which backend a pandas frame
"has" follows pandas' own ``dtype_backend`` notion (``convert_dtypes``, ``read_csv``, ``read_parquet``):

- ``"pyarrow"``: every column is Arrow-backed (``pd.ArrowDtype``);
- ``"numpy_nullable"``: some column has a nullable dtype (missing values are ``pd.NA``) and none
  has a numpy number or boolean dtype (datetimes, categoricals and objects may sit beside them, as
  pandas' own nullable readers leave them);
- ``"numpy"``: anything else, e.g. a mix (results as they always were).

Derived columns of a numpy dtype are converted to the frame's backend (floats to ``Float64`` or
``double[pyarrow]``, integers, booleans, and for Arrow also datetimes and durations); their missing
values (NaN, NaT) become nulls there.  Categoricals are kept as they are.  Input columns are never
changed: for polars and pyarrow input they are the caller's own arrays, handed back as they came.

polars and pyarrow frames have no index: they are read with a default index 0..n-1 (so a row
label in a report is the row number) and results keep the input's row order; a named index of a
result (a subject per row, say) comes back as leading columns, unnamed row labels are dropped (a
result's ``source_rows`` or ``row`` columns say where rows came from).  ``attrs`` (provenance, the design
effect) go to the schema metadata of a pyarrow Table (key ``panelfx.attrs``, JSON) and are not
kept by polars, which has no frame metadata.
"""

from __future__ import annotations

import functools
import inspect
import json
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any, TypeVar, cast

import numpy as np
import pandas as pd
import pyarrow as pa

from .errors import ColumnTypeError, FrameTypeError

__all__ = ["Incoming", "read_frame", "read_tables", "to_pandas", "frames", "backend_of", "is_polars"]

ACCEPTED = "a pandas DataFrame, a polars DataFrame or a pyarrow Table"

F = TypeVar("F", bound=Callable[..., Any])


def is_polars(obj: object) -> bool:
    """A polars DataFrame, recognised by its class and module names (polars is not imported)."""
    cls = type(obj)
    return cls.__name__ == "DataFrame" and cls.__module__.split(".")[0] == "polars"


def _describe(obj: object) -> str:
    cls = type(obj)
    module = cls.__module__.split(".")[0]
    return f"a {cls.__name__}" if module == "builtins" else f"a {module} {cls.__name__}"


def not_a_frame(obj: object, what: str = "frame") -> FrameTypeError:
    """The typed error for something that is not a frame: what was received, what is accepted."""
    hint = ""
    if type(obj).__name__ == "LazyFrame" and type(obj).__module__.split(".")[0] == "polars":
        hint = " (call .collect() on a polars LazyFrame first)"
    elif isinstance(obj, pd.Series):
        hint = " (a Series: .to_frame() makes it a frame)"
    return FrameTypeError(f"{what} must be {ACCEPTED}, got {_describe(obj)}{hint}", column=None)


def _arrow_to_pandas_type(t: pa.DataType) -> Any:
    # pyarrow's Table.to_pandas(types_mapper=...): every column Arrow-backed, except dictionaries
    # (polars categoricals and enums), which become pandas Categoricals, as pyarrow makes them
    return None if pa.types.is_dictionary(t) else pd.ArrowDtype(t)


def _table_to_pandas(table: pa.Table) -> pd.DataFrame:
    # ignore_metadata: every column of the table is a column (a pandas index saved in the table
    # stays a column), and the index is 0..n-1
    return table.to_pandas(types_mapper=_arrow_to_pandas_type, ignore_metadata=True)


def to_pandas(frame: Any) -> pd.DataFrame:
    """The pandas DataFrame panelfx computes on for ``frame``: a pandas frame as it is, a polars
    DataFrame or a pyarrow Table with Arrow-backed columns (categoricals as pandas Categoricals)
    and a default index 0..n-1, in the same row order.  Anything else is a
    :class:`~panelfx.FrameTypeError`.

    Values are exact: pyarrow's ``Table.to_pandas`` with Arrow-backed dtypes (no integer column
    turns into floats where values are missing, as numpy dtypes would force).

    >>> import pyarrow as pa, panelfx as pfx
    >>> pfx.to_pandas(pa.table({"pid": [1, 1, 2], "day": [0, 7, None]})).dtypes
    pid    int64[pyarrow]
    day    int64[pyarrow]
    dtype: object
    """
    return read_frame(frame).frame


def backend_of(frame: pd.DataFrame) -> str:
    """The dtype backend of a pandas frame: ``"pyarrow"``, ``"numpy_nullable"`` or ``"numpy"``
    (see the module docstring for the rule)."""
    dtypes = list(frame.dtypes)
    if not dtypes:
        return "numpy"
    if all(isinstance(d, pd.ArrowDtype) for d in dtypes):
        return "pyarrow"
    nullable = any(isinstance(d, pd.api.extensions.ExtensionDtype) and d.na_value is pd.NA for d in dtypes)
    numpy_plain = any(isinstance(d, np.dtype) and d.kind in "biuf" for d in dtypes)
    return "numpy_nullable" if nullable and not numpy_plain else "numpy"


# ---------------------------------------------------------------------------- one column to a backend
_NULLABLE = {"f": "Float", "i": "Int", "u": "UInt"}


def _nullable_column(s: pd.Series) -> pd.Series:
    dtype = s.dtype
    if not isinstance(dtype, np.dtype):
        return s
    if dtype.kind == "b":
        return s.astype("boolean")
    if dtype.kind in _NULLABLE:
        # pd.array from a numpy float array takes NaN as missing (pandas' nullable constructors)
        return pd.Series(pd.array(s.to_numpy(), dtype=f"{_NULLABLE[dtype.kind]}{dtype.itemsize * 8}"),
                         index=s.index, name=s.name, copy=False)
    return s


def _arrow_array(s: pd.Series, name: str, struct_names: Mapping[str, Sequence[str]]) -> pa.Array | pa.ChunkedArray:
    """A pandas column as an Arrow array; missing values (NaN, NaT, None, NA) become nulls
    (pyarrow's ``from_pandas`` semantics)."""
    if isinstance(s.dtype, pd.ArrowDtype):
        return pa.array(s.array)  # its own Arrow data (pandas hands it over through __arrow_array__)
    if s.dtype != object:
        return pa.array(s, from_pandas=True)
    try:
        return pa.array(s, from_pandas=True)
    except (pa.ArrowInvalid, pa.ArrowTypeError, pa.ArrowNotImplementedError):
        pass
    kind = pd.api.types.infer_dtype(s, skipna=True)
    values = s.to_numpy(dtype=object)
    present = values[s.notna().to_numpy()] if len(values) else values
    if len(present) and all(isinstance(v, tuple) for v in present):  # several id columns: a struct per row
        width = len(present[0])
        names = list(struct_names.get(name, [f"f{i}" for i in range(width)]))
        if all(len(v) == width for v in present) and len(names) == width:
            parts = [pd.Series([None if not isinstance(v, tuple) else v[i] for v in values], dtype=object)
                     for i in range(width)]
            arrays = [_arrow_array(p, f"{name}.{n}", {}) for p, n in zip(parts, names)]
            arrays = [a.combine_chunks() if isinstance(a, pa.ChunkedArray) else a for a in arrays]
            mask = pa.array(~s.notna().to_numpy())
            return pa.StructArray.from_arrays(arrays, names=names, mask=mask)
    raise ColumnTypeError(f"column {name!r} holds {kind} values that have no Arrow type: "
                          f"call the function with a pandas frame (panelfx.to_pandas) to get them",
                          column=name, count=len(s))


def _arrow_column(s: pd.Series) -> pd.Series:
    """A column Arrow-backed (numpy numbers, booleans, datetimes, durations, nullable dtypes,
    text objects); categoricals and objects Arrow cannot type are left as they are."""
    dtype = s.dtype
    if isinstance(dtype, (pd.ArrowDtype, pd.CategoricalDtype)):
        return s
    if dtype == object:
        try:
            arr = pa.array(s, from_pandas=True)
        except (pa.ArrowInvalid, pa.ArrowTypeError, pa.ArrowNotImplementedError):
            return s
        if pa.types.is_null(arr.type):
            return s
    else:
        arr = pa.array(s, from_pandas=True)
    return pd.Series(pd.arrays.ArrowExtensionArray(arr), index=s.index, name=s.name, copy=False)


def convert_columns(frame: pd.DataFrame, columns: Sequence[Any], backend: str) -> pd.DataFrame:
    """``frame`` with ``columns`` converted to ``backend`` (others untouched); the same frame
    when nothing changes."""
    if backend == "numpy":
        return frame
    convert = _arrow_column if backend == "pyarrow" else _nullable_column
    changed = {}
    for c in columns:
        s = frame[c]
        new = convert(s)
        if new is not s:
            changed[c] = new
    if not changed:
        return frame
    out = frame.copy(deep=False)
    for c, s in changed.items():
        out[c] = s
    return out


# ---------------------------------------------------------------------------- the caller's frame
@dataclass(frozen=True)
class Incoming:
    """An incoming frame as pandas (``frame``), and how to hand results back to its caller."""

    kind: str  # "pandas", "polars" or "arrow"
    backend: str  # pandas' dtype backend of ``frame``
    frame: pd.DataFrame
    original: Any

    def added(self, result: pd.DataFrame, struct_names: Mapping[str, Sequence[str]] | None = None) -> Any:
        """``result`` (``frame``'s columns, then new ones) in the caller's type: the new columns
        converted, the input's own columns untouched."""
        new = [c for c in result.columns[len(self.frame.columns):]]
        if self.kind == "pandas":
            return convert_columns(result, new, self.backend)
        extra = _arrow_table(result[new].reset_index(drop=True), struct_names or {}, result.attrs)
        if self.kind == "arrow":
            table = self.original
            for name, col in zip(extra.column_names, extra.columns):
                table = table.append_column(name, col)
            return _with_attrs(table, result.attrs)
        return self.original.hstack(_polars(extra).get_columns())

    def back(self, result: pd.DataFrame, struct_names: Mapping[str, Sequence[str]] | None = None) -> Any:
        """A new frame (a report, a summary) in the caller's type and backend."""
        if self.kind == "pandas":
            return convert_columns(result, list(result.columns), self.backend)
        # a named index (a subject per row, a level name) becomes leading columns; unnamed row
        # labels (for polars and Arrow input: row numbers) are dropped, as those have no index
        flat = result.reset_index() if any(n is not None for n in result.index.names) else result
        flat = flat.set_axis([str(c) for c in flat.columns], axis=1)  # Arrow and polars name columns by text
        table = _with_attrs(_arrow_table(flat.reset_index(drop=True), struct_names or {}, {}), result.attrs)
        return table if self.kind == "arrow" else _polars(table)


def _arrow_table(frame: pd.DataFrame, struct_names: Mapping[str, Sequence[str]], attrs: Mapping[str, Any]) -> pa.Table:
    names = [str(c) for c in frame.columns]
    arrays = [_arrow_array(frame.iloc[:, i], names[i], struct_names) for i in range(frame.shape[1])]
    return pa.Table.from_arrays(arrays, names=names) if arrays else pa.table({})


def _with_attrs(table: pa.Table, attrs: Mapping[str, Any]) -> pa.Table:
    if not attrs:
        return table
    try:
        text = json.dumps(dict(attrs), default=_json_default)
    except (TypeError, ValueError):  # pragma: no cover - attrs panelfx sets are JSON
        return table
    meta = dict(table.schema.metadata or {})
    meta[b"panelfx.attrs"] = text.encode()
    return table.replace_schema_metadata(meta)


def _json_default(v: Any) -> Any:
    if isinstance(v, np.generic):
        return v.item()
    if isinstance(v, np.ndarray):
        return v.tolist()
    raise TypeError(type(v).__name__)


def _polars(table: pa.Table) -> Any:
    import polars as pl  # only reached when the caller handed in a polars frame

    return pl.from_arrow(table)  # polars' own Arrow import


def read_frame(obj: Any, what: str = "frame") -> Incoming:
    """The incoming frame as pandas, remembering its type and backend; anything else is a
    :class:`~panelfx.FrameTypeError`."""
    if isinstance(obj, pd.DataFrame):
        return Incoming("pandas", backend_of(obj), obj, obj)
    if isinstance(obj, pa.Table):
        return Incoming("arrow", "pyarrow", _table_to_pandas(obj), obj)
    if is_polars(obj):
        # polars' own export to Arrow (shares the buffers), then the Table path
        return Incoming("polars", "pyarrow", _table_to_pandas(obj.to_arrow()), obj)
    raise not_a_frame(obj, what)


def read_tables(tables: Any) -> Any:
    """Side tables (``{"labs": labs}``) with polars and pyarrow tables read as pandas; anything
    that is not a mapping is passed on for the function's own check."""
    if not isinstance(tables, Mapping):
        return tables
    return {name: read_frame(t, f"table {name!r}").frame if isinstance(t, pa.Table) or _from_polars(t) else t
            for name, t in tables.items()}


def _from_polars(obj: object) -> bool:
    return type(obj).__module__.split(".")[0] == "polars"  # a DataFrame, or a LazyFrame refused by read_frame


def frames(*, frame: str = "frame", result: str = "new", tables: str | None = None,
           also: Sequence[str] = (), struct_names: Callable[[dict[str, Any]], Mapping[str, Sequence[str]]]
           | None = None, passthrough: Callable[[Any], bool] | None = None) -> Callable[[F], F]:
    """Decorate a public function whose argument ``frame`` is a frame: it is read as pandas and the
    result handed back in the caller's type (``result="added"``: the input's columns then new ones,
    ``"new"``: a new frame, ``"none"``: not a frame).  ``tables`` names a mapping of side tables,
    ``also`` other arguments that may be frames (read as pandas, nothing handed back for them).
    ``passthrough(obj)`` true: the function takes ``obj`` as it is (dask frames)."""

    def wrap(func: F) -> F:
        sig = inspect.signature(func)

        @functools.wraps(func)
        def inner(*args: Any, **kwargs: Any) -> Any:
            try:
                bound = sig.bind(*args, **kwargs)
            except TypeError:
                return func(*args, **kwargs)  # the function's own message for a wrong call
            given = bound.arguments
            obj = given.get(frame)
            if passthrough is not None and passthrough(obj):
                return func(*args, **kwargs)
            incoming = read_frame(obj, frame)
            given[frame] = incoming.frame
            if tables is not None and given.get(tables) is not None:
                given[tables] = read_tables(given[tables])
            for name in also:
                v = given.get(name)
                if isinstance(v, pa.Table) or is_polars(v):
                    given[name] = read_frame(v, name).frame
            out = func(*bound.args, **bound.kwargs)
            if result == "none" or (incoming.kind == "pandas" and incoming.backend == "numpy"):
                return out
            names = struct_names(dict(given)) if struct_names is not None else None
            return incoming.added(out, names) if result == "added" else incoming.back(out, names)

        return cast(F, inner)

    return wrap
