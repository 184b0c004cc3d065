"""The output schema of a partitioned run, predicted before any data is read, and held to.

A run in parts (:mod:`panelfx.dask`, the command line's partitioned ``apply``) must give
every part the same columns and dtypes, known before it computes (Dask's *meta*).  They
are predicted from the input schema and the transforms: the engine runs on an empty frame
of the input's dtypes, which gives every output's name and dtype and refuses bad options
and missing or ill-typed columns at once, before any data is touched.

One thing an empty frame cannot tell: a transform that copies values of a column (``lag``,
``baseline``, ``carry_forward``, a side table's values: the engine's ``Take`` and
``SideTake``) gives the column's own dtype when no row comes out missing, and pandas' upcast
when one does (int64 to float64, bool to object); true/false results (``Flags``) are bool
without a missing value and nullable ``boolean`` with one.  Which happens depends on the
data of each partition, so the prediction takes the dtype with a missing value, the one
pandas gives on almost any real panel (every subject's first occasion has no lag).
Nullable (``Int64``, ``boolean``), float, datetime, text and categorical columns keep their
dtype either way.

``conform`` then holds each computed partition to the prediction: a column whose dtype
differs is cast, and the cast is checked to be exact (int64 values beyond 2**53 are not
float64: a :class:`~panelfx.errors.PrecisionError` names the column; use ``Int64``).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np
import pandas as pd

from ._columns import Deferred
from ._panel import Panel
from .derive import plan
from .errors import ColumnTypeError, PrecisionError, rows_message

__all__ = ["predict_outputs", "conform", "same_dtype", "widen"]


def predict_outputs(meta: pd.DataFrame, transforms: Sequence[Any], id_cols: Sequence[str], time: str,
                    unit: str | None, order: str | None = None, time_unit: str | None = None,
                    tables: Mapping[str, pd.DataFrame] | None = None) -> dict[str, Any]:
    """name -> dtype of each derived column, from the empty input ``meta`` (and empty side
    tables of the tables' dtypes): no data read."""
    from ._tables import side_tables
    from .derive import table_columns

    empty_tables = {k: t.iloc[:0] for k, t in tables.items()} if tables else None
    plan(list(meta.columns), transforms, list(id_cols), time, table_columns(empty_tables))
    panel = Panel(meta.iloc[:0], id=list(id_cols), time=time, unit=unit, order=order, time_unit=time_unit)
    panel.tables = side_tables(panel, empty_tables)
    out: dict[str, Any] = {}
    for tr in transforms:
        for name, v in zip(tr.outputs(), tr.compute(panel)):
            kind = type(v).__name__
            if isinstance(v, Deferred):
                resolved = v.resolve(panel)
                if kind in ("Take", "SideTake"):
                    # a column's values at other rows: pandas' own upcast for "taken with a missing
                    # value" (int64 -> float64, bool -> object), as on almost any real panel
                    dtype = pd.api.extensions.take(resolved[:0], np.array([-1]), allow_fill=True).dtype
                elif kind == "Flags":
                    dtype = pd.BooleanDtype()  # true/false with missing ones
                else:
                    dtype = pd.Series(resolved).dtype
            else:
                dtype = pd.Series(v).dtype if isinstance(v, pd.api.extensions.ExtensionArray) else np.asarray(v).dtype
            out[name] = dtype
            panel.columns.add(name, pd.Series(pd.array([], dtype=dtype), index=panel.frame.index[:0], name=name))
    return out


def widen(meta: pd.DataFrame) -> pd.DataFrame:
    """``meta`` with numpy integer and boolean columns made nullable (Int64, boolean): for
    results whose dtype depends on whether a partition has a missing value."""
    out = meta.copy()
    for name, dtype in meta.dtypes.items():
        if isinstance(dtype, np.dtype) and dtype.kind in "iu":
            out[name] = out[name].astype("UInt64" if dtype.kind == "u" else "Int64")
        elif isinstance(dtype, np.dtype) and dtype.kind == "b":
            out[name] = out[name].astype("boolean")
    return out


def same_dtype(got: Any, want: Any) -> bool:
    """Equal dtypes; categoricals match whatever their categories (Dask's meta may not know them)."""
    if isinstance(want, pd.CategoricalDtype) and isinstance(got, pd.CategoricalDtype):
        return True
    return bool(got == want)


def conform(frame: pd.DataFrame, meta: pd.DataFrame, ids: Any = None) -> pd.DataFrame:
    """``frame`` with the columns and dtypes of ``meta``; every cast checked to be exact."""
    if list(frame.columns) != list(meta.columns):  # pragma: no cover - the engine made other columns
        raise AssertionError(f"partition has columns {list(frame.columns)}, predicted {list(meta.columns)}")
    fixed: dict[str, Any] = {}
    for name, want in meta.dtypes.items():
        s = frame[name]
        if same_dtype(s.dtype, want):
            continue
        try:
            cast = s.astype(want)
        except (TypeError, ValueError) as err:  # e.g. a missing value where int64 was predicted
            raise ColumnTypeError(
                f"column {name!r} is {s.dtype} in this partition, which cannot be held as {want}, the dtype "
                f"predicted for the whole result ({err}); pass meta= with a nullable dtype (Int64, boolean)",
                column=str(name), count=int(s.isna().sum())) from None
        back = cast.astype(s.dtype)
        same = (back == s) | (back.isna() & s.isna())
        if not bool(np.asarray(same.fillna(False), dtype=bool).all()) or cast.isna().sum() != s.isna().sum():
            where = np.flatnonzero(~np.asarray(same.fillna(False), dtype=bool))
            first = list(frame.index[where[:5]])
            raise PrecisionError(
                rows_message(f"derived column {name!r} is {s.dtype} in this partition and cannot be held exactly "
                             f"as {want}, the dtype predicted for the whole result (integers beyond 2**53 are "
                             f"not float64): convert the source column to a nullable type such as Int64 first",
                             name, len(where), first, noun="row labels"),
                column=str(name), count=len(where), ids=first)
        fixed[str(name)] = cast
    return frame.assign(**fixed) if fixed else frame
