"""Deliberately simple reference implementations of every transform, for cross-checks only.

Slow on purpose: plain Python loops over each subject's rows in time order, written
straight from each transform's documented definition, sharing no code with the
vectorised kernels.  Use them in tests on small frames (hundreds of rows), never in
production.

>>> import pandas as pd, panelfx as pfx
>>> from panelfx.testing import reference
>>> df = pd.DataFrame({"pid": [1, 1, 2], "day": [5, 0, 0], "y": [3.0, 1.0, 7.0]})
>>> reference(df, pfx.change_from_baseline("y"), id="pid", time="day")
   pid  day    y  y_change
0    1    5  3.0       2.0
1    1    0  1.0       0.0
2    2    0  7.0       0.0
"""

from __future__ import annotations

import datetime as _dt
import importlib
import math
import pkgutil
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from decimal import Decimal
from fractions import Fraction
from typing import Any

import numpy as np
import pandas as pd

from ..._transform import Transform

#: type_name -> function(transform, subject) returning one list of values per output.
REFERENCES: dict[str, Callable[[Any, Subject], list[list[Any]]]] = {}

#: nanoseconds per unit, written out again here on purpose (independent of the engine).
_NS = {"ns": 1, "us": 10**3, "ms": 10**6, "s": 10**9, "min": 60 * 10**9, "h": 3600 * 10**9,
       "D": 86400 * 10**9, "W": 7 * 86400 * 10**9, "Y": 31_557_600 * 10**9}
_EPOCH = _dt.date(1970, 1, 1)


def exact(x: Any, decimal: bool) -> Fraction | int:
    """A number as an exact rational: integers as they are; floats as the decimal they print
    as when the panel's times are short decimals (``decimal``), else their exact binary value."""
    if isinstance(x, (int, np.integer)) and not isinstance(x, bool):
        return int(x)
    return Fraction(Decimal(repr(float(x)))) if decimal else Fraction(float(x))


def short_decimals(values: Sequence[Any]) -> bool:
    """True when every float prints with at most 9 decimals (the documented rule for times)."""
    for v in values:
        if isinstance(v, float) and not math.isnan(v):
            exponent = Decimal(repr(v)).as_tuple().exponent
            if not isinstance(exponent, int) or exponent < -9:
                return False
    return True


def register(type_name: str) -> Callable[[Callable], Callable]:
    """Register the reference function of one transform type."""

    def deco(fn: Callable) -> Callable:
        REFERENCES[type_name] = fn
        return fn

    return deco


def is_missing(v: Any) -> bool:
    if v is None or v is pd.NA or v is pd.NaT:
        return True
    try:
        return bool(isinstance(v, float) and math.isnan(v))
    except TypeError:
        return False


@dataclass
class Subject:
    """One subject's rows in time order, as plain Python values."""

    rows: pd.DataFrame  # the subject's rows, sorted by time
    times: list[Any]  # exact: ints or Fractions for numbers, integer nanoseconds for datetimes / timedeltas
    unit: str | None  # unit of durations for datetime times; None for numeric times
    decimal: bool = True  # numeric times (and spans) compared as the decimals they print as
    whole: pd.DataFrame | None = None  # every row of the frame, for means pooled over subjects
    time: str = ""  # the time column's name (its values: ``raw(time)``)
    tables: dict[str, pd.DataFrame] = field(default_factory=dict)  # the subject's records of each side table

    def raw(self, col: str) -> list[Any]:
        """Values as Python objects, None where missing."""
        return [None if is_missing(v) else v for v in self.rows[col].tolist()]

    def values(self, col: str) -> list[float]:
        """Values as floats, NaN where missing."""
        return [math.nan if v is None else float(v) for v in self.raw(col)]

    def duration(self, later: Any, earlier: Any) -> float:
        """Elapsed time between two native times, in the panel's unit (exact, then rounded once)."""
        d = later - earlier
        if self.unit is None:
            return float(d)
        if isinstance(d, float):  # a time computed in floats by a reference (a day added, say)
            return d / _NS[self.unit]
        return float(Fraction(d, _NS[self.unit]))

    def native(self, v: Any) -> Any:
        """A time value (number, Timestamp, Timedelta, date) as an exact number: integer
        nanoseconds for datetimes of any unit and range (Python integers do not overflow)."""
        if isinstance(v, (pd.Timestamp, pd.Timedelta, np.datetime64, np.timedelta64)):
            raw = v.asm8 if isinstance(v, (pd.Timestamp, pd.Timedelta)) else v
            unit = np.datetime_data(raw.dtype)[0]
            return int(raw.astype(np.int64)) * _NS[unit]
        if isinstance(v, _dt.datetime):
            return int(pd.Timestamp(v).asm8.astype(np.int64)) * _NS[np.datetime_data(pd.Timestamp(v).asm8.dtype)[0]]
        if isinstance(v, _dt.date):
            return (v - _EPOCH).days * _NS["D"]
        return exact(v, self.decimal)

    def span(self, value: Any) -> Any:
        """A window length in native units: numbers exactly (see :func:`exact`), strings/timedeltas in ns."""
        if self.unit is None:
            return exact(value, self.decimal)
        return int(pd.Timedelta(value).value)


_loaded = False


def _load_all() -> None:
    """Import every reference module beside this one (each registers its functions)."""
    global _loaded
    if _loaded:
        return
    for mod in sorted(pkgutil.iter_modules(__path__), key=lambda m: m.name):
        importlib.import_module(f"{__name__}.{mod.name}")
    _loaded = True


def missing_references() -> list[str]:
    """Registered transform types (``panelfx._transform.REGISTRY``) that have no reference."""
    import panelfx  # noqa: F401  (importing the package registers every transform)

    from ..._transform import REGISTRY

    _load_all()
    return sorted(set(REGISTRY) - set(REFERENCES))


def reference(
    frame: pd.DataFrame,
    *transforms: Transform,
    id: str | Sequence[str],
    time: str,
    unit: str | None = None,
    order: str | None = None,
    tables: dict[str, pd.DataFrame] | None = None,
) -> pd.DataFrame:
    """What :func:`panelfx.derive` should return, computed the slow, obvious way.

    ``order`` orders rows sharing a time: each subject's rows are taken in (time, order).
    ``tables`` are side tables as for :func:`panelfx.derive`: each subject sees its own
    records of each (``Subject.tables``), found with a plain dictionary of ids.

    Outputs come back as float64 where every value is a number (or missing), else as
    object columns; compare with :func:`panelfx.testing.assert_matches_reference`.
    """
    _load_all()
    id_cols = [id] if isinstance(id, str) else list(id)
    work = frame.copy()
    is_dt = not pd.api.types.is_numeric_dtype(frame[time].dtype) or pd.api.types.is_bool_dtype(frame[time].dtype)
    unit = (unit or "D") if is_dt else None
    decimal = is_dt or short_decimals(frame[time].tolist())
    # Group row positions by subject with a plain dict, then sort each by time.
    groups: dict[Any, list[int]] = {}
    keys = list(zip(*[frame[c].tolist() for c in id_cols]))
    for i, k in enumerate(keys):
        groups.setdefault(k, []).append(i)
    side: dict[str, dict[Any, list[int]]] = {}
    for name, table in (tables or {}).items():
        side[name] = {}
        for i, k in enumerate(zip(*[table[c].tolist() for c in id_cols])):
            side[name].setdefault(k, []).append(i)
    for tr in transforms:
        fn = REFERENCES.get(tr.type_name)
        if fn is None:
            raise NotImplementedError(f"no reference implementation for {tr.type_name!r}")
        outs: list[list[Any]] = [[None] * len(frame) for _ in tr.outputs()]
        for key, positions in groups.items():
            rows = work.iloc[positions]
            mine = {name: table.iloc[side[name].get(key, [])] for name, table in (tables or {}).items()}
            times = [Subject(rows, [], unit, decimal).native(v) for v in rows[time].tolist()]
            seq = rows[order].tolist() if order is not None else [0] * len(positions)
            by = sorted(range(len(positions)), key=lambda j: (times[j], seq[j]))
            subj = Subject(rows.iloc[by], [times[j] for j in by], unit, decimal, whole=work, time=time, tables=mine)
            results = fn(tr, subj)
            for out, res in zip(outs, results):
                for j, v in zip(by, res):
                    out[positions[j]] = v
        for name, values in zip(tr.outputs(), outs):
            cleaned = [math.nan if is_missing(v) else v for v in values]
            if all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in cleaned):
                work[name] = pd.Series(cleaned, index=frame.index, dtype="float64")
            else:
                work[name] = pd.Series(cleaned, index=frame.index, dtype=object)
    return work
