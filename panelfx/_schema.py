"""The output schema of a partitioned run, predicted before any data is read, and held to.

A run in parts (:mod:`panelfx.dask`, the command line's partitioned ``apply``) must give
every part the same columns and dtypes, known before it computes (Dask's *meta*).  They
are predicted from the input schema and the transforms: the engine runs on an empty frame
of the input's dtypes, which gives every output's name and dtype and refuses bad options
and missing or ill-typed columns at once, before any data is touched.

One thing an empty frame cannot tell: a transform that copies values of a column (``lag``,
``baseline``, ``carry_forward``: the engine's :class:`~panelfx._columns.Take`) gives the
column's own dtype when no row comes out missing, and pandas' upcast when one does (int64
to float64, bool to object).  Which happens depends on the data of each partition, so the
prediction takes the dtype with a missing value, the one pandas gives on almost any real
panel (every subject's first occasion has no lag).  Nullable (``Int64``, ``boolean``),
float, datetime, text and categorical columns keep their dtype either way.

``conform`` then holds each computed partition to the prediction: a column whose dtype
differs is cast, and the cast is checked to be exact (int64 values beyond 2**53 are not
float64: a :class:`~panelfx.errors.PrecisionError` names the column; use ``Int64``).
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np
import pandas as pd

from ._columns import Take
from ._panel import Panel
from .derive import plan
from .errors import PrecisionError, rows_message

__all__ = ["predict_outputs", "conform", "same_dtype"]


def predict_outputs(meta: pd.DataFrame, transforms: Sequence[Any], id_cols: Sequence[str], time: str,
                    unit: str | None) -> dict[str, Any]:
    """name -> dtype of each derived column, from the empty input ``meta`` (no data read)."""
    panel = Panel(meta.iloc[:0], id=list(id_cols), time=time, unit=unit)
    plan(list(meta.columns), transforms, panel.id_cols, panel.time_col)
    out: dict[str, Any] = {}
    for tr in transforms:
        for name, v in zip(tr.outputs(), tr.compute(panel)):
            if isinstance(v, Take):
                source = panel.columns.series(v.col)
                values = source.to_numpy() if isinstance(source.dtype, np.dtype) else source.array
                # pandas' own upcast for "taken with a missing value" (int64 -> float64, bool -> object)
                dtype = pd.api.extensions.take(values[:0], np.array([-1]), allow_fill=True).dtype
            else:
                dtype = np.asarray(v).dtype
            out[name] = dtype
            panel.columns.add(name, pd.Series(pd.array([], dtype=dtype), index=panel.frame.index[:0], name=name))
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
        cast = s.astype(want)
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
