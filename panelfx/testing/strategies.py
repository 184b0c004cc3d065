"""Hypothesis strategies for long-format panels (hypothesis is an optional dependency).

>>> from hypothesis import given
>>> from panelfx.testing.strategies import panels
>>> @given(case=panels(subjects=(1, 4), time_kinds=("datetime",)))
... def test_my_variable(case):
...     out = my_pipeline(case.frame, **case.keys)          # doctest: +SKIP
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any, NamedTuple

import numpy as np
import pandas as pd

try:
    from hypothesis import strategies as st
except ImportError as err:  # pragma: no cover - exercised only without hypothesis
    raise ImportError(
        "panelfx.testing.strategies needs hypothesis, an optional dependency: "
        "pip install hypothesis (or pip install 'panelfx[test]')"
    ) from err

__all__ = ["panels", "PanelCase", "ID_KINDS", "TIME_KINDS", "ALL_ID_KINDS", "ALL_TIME_KINDS",
           "INDEX_KINDS", "VALUE_KINDS"]


class PanelCase(NamedTuple):
    """A generated panel and its declaration, ready for ``derive(case.frame, ..., **case.keys)``."""

    frame: pd.DataFrame
    id: str | list[str]
    time: str

    @property
    def keys(self) -> dict[str, Any]:
        return {"id": self.id, "time": self.time}


#: Default kinds of subject id: integers, strings, a categorical, two columns (site, number).
ID_KINDS = ("int", "str", "category", "multi")
#: Every id kind: the defaults plus Arrow-backed strings and nullable integers.
ALL_ID_KINDS = (*ID_KINDS, "arrow_str", "nullable_int")
#: Default kinds of time: integers, floats, naive datetimes, tz-aware datetimes (Europe/Berlin).
TIME_KINDS = ("int", "float", "datetime", "datetime_tz")
#: Every time kind: the defaults plus timedeltas, nullable integers and Arrow timestamps.
ALL_TIME_KINDS = (*TIME_KINDS, "timedelta", "nullable_int", "arrow_timestamp")
#: Row labels: the default 0..n-1, strings, non-contiguous descending integers, a two-level MultiIndex.
INDEX_KINDS = ("range", "str", "int", "multi")
#: Storage of the value columns: numpy, pandas nullable (Float64, Int64, boolean), Arrow-backed.
VALUE_KINDS = ("numpy", "nullable", "arrow")

_EXTREMES = [1e12, -1e12, 1e-12, -1e-12, 123456789.123, -0.0]


def _check(name: str, given: Sequence[str], allowed: Sequence[str]) -> list[str]:
    given = list(given)
    bad = [k for k in given if k not in allowed]
    if not given or bad:
        raise ValueError(f"{name} must be a non-empty selection of {list(allowed)}, got {given!r}")
    return given


@st.composite
def panels(
    draw: st.DrawFn,
    *,
    subjects: tuple[int, int] = (1, 6),
    occasions: tuple[int, int] = (1, 6),
    id_kinds: Sequence[str] = ID_KINDS,
    time_kinds: Sequence[str] = TIME_KINDS,
    missing: bool = True,
    shuffle: bool = True,
    all_missing: bool = True,
    extremes: bool = False,
    index_kinds: Sequence[str] | None = None,
    value_kinds: Sequence[str] = ("numpy",),
) -> PanelCase:
    """Long-format panels: one row per subject and occasion, unique occasions per subject,
    irregular times (each subject starts at its own time), values with ties.

    Columns: the id (``pid``; or ``site`` and ``pid`` for ``"multi"``), the time ``t``,
    then ``y`` (float, the main outcome: missing values, ties, optionally extremes),
    ``x`` (small integers, -5..5), ``flag`` (bool) and ``dose`` (non-negative float,
    never missing).

    Options:

    - ``subjects``, ``occasions``: (min, max) numbers of subjects and of occasions per
      subject; a minimum of 1 occasion gives single-occasion subjects.
    - ``id_kinds`` / ``time_kinds``: drawn from; see :data:`ALL_ID_KINDS` and
      :data:`ALL_TIME_KINDS` for every choice.
    - ``missing``: ``y`` has missing values; with ``all_missing`` too some subjects have
      ``y`` missing on every row.
    - ``extremes``: ``y`` also takes very large and very small magnitudes (±1e12,
      ±1e-12) and -0.0.
    - ``shuffle``: rows in random order.
    - ``index_kinds``: the row labels drawn from :data:`INDEX_KINDS`; by default string
      or non-contiguous integer labels when shuffled, 0..n-1 otherwise.
    - ``value_kinds``: storage of ``y``, ``x`` and ``flag`` drawn from
      :data:`VALUE_KINDS` (numpy by default).
    """
    id_kinds = _check("id_kinds", id_kinds, ALL_ID_KINDS)
    time_kinds = _check("time_kinds", time_kinds, ALL_TIME_KINDS)
    value_kinds = _check("value_kinds", value_kinds, VALUE_KINDS)
    if index_kinds is not None:
        index_kinds = _check("index_kinds", index_kinds, INDEX_KINDS)
    n_sub = draw(st.integers(*subjects))
    sizes = draw(st.lists(st.integers(*occasions), min_size=n_sub, max_size=n_sub))
    n = sum(sizes)
    id_kind = draw(st.sampled_from(id_kinds))
    time_kind = draw(st.sampled_from(time_kinds))
    value_kind = draw(st.sampled_from(value_kinds))
    sub = np.repeat(np.arange(n_sub), sizes).astype(np.int64)
    # strictly increasing times within subject: cumulative positive gaps from a subject's own start
    g = np.array(draw(st.lists(st.integers(1, 40), min_size=n, max_size=n)), dtype=np.int64)
    starts = np.r_[0, np.cumsum(sizes)[:-1]].astype(np.int64) if n_sub else np.zeros(0, dtype=np.int64)
    cum = np.cumsum(g)
    offset = np.repeat(cum[starts] - g[starts], sizes) if n else cum
    start_time = np.repeat(np.array(draw(st.lists(st.integers(-20, 20), min_size=n_sub, max_size=n_sub)),
                                    dtype=np.int64), sizes)
    t = cum - offset + start_time

    values = st.one_of(st.floats(-1e3, 1e3, allow_nan=False, width=32).map(float),
                       st.sampled_from([0.0, 1.0, -1.0]))  # the small set makes ties common
    if extremes:
        values = st.one_of(values, st.sampled_from(_EXTREMES))
    if missing:
        values = st.one_of(values, st.just(float("nan")))
    y = np.array(draw(st.lists(values, min_size=n, max_size=n)), dtype="float64")
    if missing and all_missing and n_sub:
        blank = np.array(draw(st.lists(st.sampled_from([False, False, False, True]),
                                       min_size=n_sub, max_size=n_sub)), dtype=bool)
        y[np.repeat(blank, sizes)] = np.nan
    x = draw(st.lists(st.integers(-5, 5), min_size=n, max_size=n))
    flag = draw(st.lists(st.booleans(), min_size=n, max_size=n))
    dose = draw(st.lists(st.sampled_from([0.0, 0.5, 1.0, 2.5, 10.0]), min_size=n, max_size=n))
    if value_kind == "numpy":
        frame = pd.DataFrame({"y": y, "x": np.array(x, dtype=np.int64), "flag": np.array(flag, dtype=bool),
                              "dose": dose})
    elif value_kind == "nullable":
        frame = pd.DataFrame({"y": pd.array([None if np.isnan(v) else v for v in y], dtype="Float64"),
                              "x": pd.array(x, dtype="Int64"), "flag": pd.array(flag, dtype="boolean"),
                              "dose": dose})
    else:
        frame = pd.DataFrame({"y": pd.array([None if np.isnan(v) else v for v in y], dtype="double[pyarrow]"),
                              "x": pd.array(x, dtype="int64[pyarrow]"), "flag": pd.array(flag, dtype="bool[pyarrow]"),
                              "dose": dose})

    if time_kind == "int":
        frame.insert(0, "t", t)
    elif time_kind == "float":
        frame.insert(0, "t", t * 0.5)
    elif time_kind == "nullable_int":
        frame.insert(0, "t", pd.array(t, dtype="Int64"))
    elif time_kind == "timedelta":
        frame.insert(0, "t", pd.to_timedelta(t, unit="h"))
    else:
        ts = pd.Timestamp("2024-01-01") + pd.to_timedelta(t, unit="D")
        if time_kind == "datetime_tz":
            ts = ts.tz_localize("UTC").tz_convert("Europe/Berlin")
        elif time_kind == "arrow_timestamp":
            ts = pd.array(ts, dtype="timestamp[ns][pyarrow]")
        frame.insert(0, "t", ts)

    if id_kind == "int":
        frame.insert(0, "pid", sub * 7 + 3)
        id_: str | list[str] = "pid"
    elif id_kind == "str":
        frame.insert(0, "pid", [f"s{v:03d}" for v in sub])
        id_ = "pid"
    elif id_kind == "category":
        frame.insert(0, "pid", pd.Categorical([f"c{v}" for v in sub]))
        id_ = "pid"
    elif id_kind == "arrow_str":
        frame.insert(0, "pid", pd.array([f"s{v:03d}" for v in sub], dtype="string[pyarrow]"))
        id_ = "pid"
    elif id_kind == "nullable_int":
        frame.insert(0, "pid", pd.array(sub * 7 + 3, dtype="Int64"))
        id_ = "pid"
    else:
        frame.insert(0, "site", np.where(sub % 2 == 0, "A", "B"))
        frame.insert(1, "pid", sub // 2)
        id_ = ["site", "pid"]

    if shuffle and n > 1:
        perm = draw(st.permutations(list(range(n))))
        frame = frame.iloc[list(perm)]
    if index_kinds is None:
        index_kind = draw(st.sampled_from(["str", "int"])) if shuffle and n > 1 else "range"
    else:
        index_kind = draw(st.sampled_from(index_kinds))
    if index_kind == "range":
        frame = frame.reset_index(drop=True)
    elif index_kind == "str":
        frame.index = pd.Index([f"r{i}" for i in range(n)])
    elif index_kind == "int":
        frame.index = pd.Index(1000 - 3 * np.arange(n, dtype=np.int64))
    else:
        frame.index = pd.MultiIndex.from_arrays([np.arange(n) % 2, [f"r{i}" for i in range(n)]],
                                                names=["part", "row"])
    return PanelCase(frame, id_, "t")
