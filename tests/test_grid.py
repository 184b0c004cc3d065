"""grid: trajectories on common times.

Outside references: ``numpy.interp`` per subject for method="linear" (it holds the end
values outside the data, which is what extrapolate=True does); ``pandas.merge_asof``
(direction="backward", with ``tolerance``) per subject for method="carry" on tie-free
tables (CHECK-SOURCES.md); a deliberately simple loop for method="nearest".
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import panelfx as pfx
from panelfx.errors import DuplicateOccasionError, OptionError, TimeTypeError
from panelfx.testing.strategies import panels


def _subjects(case) -> list[tuple[object, np.ndarray, np.ndarray]]:
    """(id, times as float, values) per subject, sorted by time, missing values dropped."""
    f = case.frame
    t = f[case.time]
    if pd.api.types.is_datetime64_any_dtype(t.dtype):
        tf = (t - pd.Timestamp("2024-01-01", tz=getattr(t.dt, "tz", None))).dt.total_seconds().to_numpy() / 86400
    else:
        tf = t.to_numpy(dtype=float)
    ids = list(zip(*[f[c].tolist() for c in ([case.id] if isinstance(case.id, str) else case.id)]))
    y = f["y"].to_numpy(dtype=float)
    out = []
    for key in dict.fromkeys(ids):
        rows = [i for i, k in enumerate(ids) if k == key]
        rows = [i for i in sorted(rows, key=lambda i: tf[i]) if not math.isnan(y[i])]
        out.append((key, tf[rows], y[rows]))
    return out


def _grid_values(case, g: np.ndarray) -> list:
    """Grid times in the time column's kind (days after 2024-01-01 for datetimes)."""
    t = case.frame[case.time]
    if pd.api.types.is_datetime64_any_dtype(t.dtype):
        return list(pd.Timestamp("2024-01-01", tz=getattr(t.dt, "tz", None)) + pd.to_timedelta(g, unit="D"))
    return list(g)


def _by_subject(out: pd.DataFrame, case) -> dict:
    cols = [case.id] if isinstance(case.id, str) else case.id
    keys = list(zip(*[out[c].tolist() for c in cols]))
    res: dict = {}
    for k, v in zip(keys, out["y"].to_numpy()):
        res.setdefault(k, []).append(v)
    return {k: np.array(v) for k, v in res.items()}


GRID = np.array([-25.0, -3.0, 0.0, 2.5, 7.0, 13.0, 40.0, 90.0, 200.0])


@settings(max_examples=80, deadline=None)
@given(case=panels(time_kinds=("int", "float", "datetime", "datetime_tz")), extrapolate=st.booleans())
def test_linear_is_numpy_interp_within_follow_up(case, extrapolate):
    out = pfx.grid(case.frame, "y", **case.keys, at=_grid_values(case, GRID), extrapolate=extrapolate)
    got = _by_subject(out, case)
    for key, t, y in _subjects(case):
        if len(t) == 0:
            assert np.isnan(got[key]).all()
            continue
        want = np.interp(GRID, t, y)  # numpy.interp holds the end values outside [t0, tn]
        if not extrapolate:
            want[(GRID < t[0]) | (GRID > t[-1])] = np.nan
        np.testing.assert_allclose(got[key], want, rtol=1e-12, atol=1e-9)


@settings(max_examples=80, deadline=None)
@given(case=panels(time_kinds=("int", "float")), within=st.sampled_from([None, 0, 3, 12.5]),
       extrapolate=st.booleans())
def test_carry_is_merge_asof_backward(case, within, extrapolate):
    out = pfx.grid(case.frame, "y", **case.keys, at=list(GRID), method="carry", within=within,
                   extrapolate=extrapolate)
    got = _by_subject(out, case)
    for key, t, y in _subjects(case):
        left = pd.DataFrame({"g": GRID})
        right = pd.DataFrame({"g": t, "y": y})
        want = pd.merge_asof(left, right, on="g", direction="backward", tolerance=within)["y"].to_numpy(copy=True)
        if len(t) and not extrapolate:
            want[GRID > t[-1]] = np.nan
        np.testing.assert_array_equal(got[key], want)


def _nearest(t: np.ndarray, y: np.ndarray, g: float, within, extrapolate: bool) -> float:
    if len(t) == 0 or (not extrapolate and not t[0] <= g <= t[-1]):
        return math.nan
    best = None
    for ti, yi in zip(t, y):  # earlier observation wins a tie: strict < keeps the first
        if best is None or abs(ti - g) < abs(best[0] - g):
            best = (ti, yi)
    assert best is not None
    return best[1] if within is None or abs(best[0] - g) <= within else math.nan


@settings(max_examples=80, deadline=None)
@given(case=panels(time_kinds=("int", "float")), within=st.sampled_from([None, 0, 2.5, 6]),
       extrapolate=st.booleans())
def test_nearest_against_a_simple_loop(case, within, extrapolate):
    out = pfx.grid(case.frame, "y", **case.keys, at=list(GRID), method="nearest", within=within,
                   extrapolate=extrapolate)
    got = _by_subject(out, case)
    for key, t, y in _subjects(case):
        want = [_nearest(t, y, g, within, extrapolate) for g in GRID]
        np.testing.assert_array_equal(got[key], want)


def test_linear_within_uses_the_nearer_observation_and_decimals_compare_exactly():
    df = pd.DataFrame({"pid": [1, 1, 1], "t": [0.1, 0.3, 1.1], "y": [1.0, 3.0, 11.0]})
    out = pfx.grid(df, "y", id="pid", time="t", at=[0.1, 0.2, 0.5, 0.8, 1.1], within=0.3)
    # 0.8 is 0.3 from 1.1 exactly (in binary, 1.1 - 0.8 is 0.30000000000000004)
    np.testing.assert_allclose(out["y"], [1.0, 2.0, 5.0, 8.0, 11.0])
    out = pfx.grid(df, "y", id="pid", time="t", at=[0.6, 0.7], within=0.3)
    assert out["y"].isna().tolist() == [False, True]  # 0.7 is 0.4 from both neighbours
    carry = pfx.grid(df, "y", id="pid", time="t", at=[0.5, 0.6], method="carry", within=0.2)
    assert carry["y"].tolist()[0] == 3.0 and np.isnan(carry["y"].iloc[1])


def test_every_on_datetimes_with_time_zone_and_within():
    df = pd.DataFrame({"pid": ["a", "a", "a", "b", "b"],
                       "when": pd.to_datetime(["2024-03-01", "2024-03-08", "2024-03-29", "2024-03-03",
                                               "2024-03-17"]).tz_localize("Europe/Berlin"),
                       "y": [1.0, 8.0, 29.0, 10.0, 24.0]})
    out = pfx.grid(df, "y", id="pid", time="when", every="7D")
    assert out["when"].dt.tz is not None
    assert list(out["when"].iloc[:5].dt.strftime("%m-%d")) == ["03-01", "03-08", "03-15", "03-22", "03-29"]
    a = out[out["pid"] == "a"]["y"].to_numpy()
    b = out[out["pid"] == "b"]["y"].to_numpy()
    np.testing.assert_allclose(a, [1.0, 8.0, 15.0, 22.0, 29.0])
    np.testing.assert_allclose(b, [np.nan, 15.0, 22.0, np.nan, np.nan])  # b's follow-up: 03-03 .. 03-17
    near = pfx.grid(df, "y", id="pid", time="when", every="7D", method="nearest", within="2D", extrapolate=True)
    np.testing.assert_allclose(near[near["pid"] == "b"]["y"], [10.0, np.nan, 24.0, np.nan, np.nan])


def test_wide_matrix_several_columns_and_two_id_columns():
    df = pd.DataFrame({"site": ["x", "x", "y", "y"], "pid": [1, 1, 1, 1], "day": [0, 10, 0, 20],
                       "a": [0.0, 10.0, 5.0, 5.0], "b": [1.0, 1.0, np.nan, 3.0]})
    wide = pfx.grid(df, ["a", "b"], id=["site", "pid"], time="day", at=[0, 10, 20], shape="wide")
    assert wide.index.names == ["site", "pid"] and list(wide.index) == [("x", 1), ("y", 1)]
    assert list(wide.columns) == [("a", 0), ("a", 10), ("a", 20), ("b", 0), ("b", 10), ("b", 20)]
    np.testing.assert_allclose(wide.loc[("x", 1)], [0, 10, np.nan, 1, 1, np.nan])
    np.testing.assert_allclose(wide.loc[("y", 1)], [5, 5, 5, np.nan, np.nan, 3])
    long = pfx.grid(df, ["a", "b"], id=["site", "pid"], time="day", at=[20, 0, 10])
    assert list(long.columns) == ["site", "pid", "day", "a", "b"] and long["day"].tolist() == [0, 10, 20] * 2
    assert long["day"].dtype == np.int64
    np.testing.assert_allclose(long[["a", "b"]].to_numpy().reshape(2, 3, 2).transpose(0, 2, 1).reshape(2, 6),
                               wide.to_numpy())


def test_options_and_errors():
    df = pd.DataFrame({"pid": [1, 1], "t": [0, 4], "y": [1.0, 2.0]})
    before = df.copy()
    for kw, message in [({}, "either at= .* or every="), ({"at": [0], "every": 1}, "not both"),
                        ({"at": []}, "non-empty"), ({"at": [1, 1]}, "same time twice"),
                        ({"every": 0}, "positive"), ({"every": "2D"}, "finite number"),
                        ({"at": [0], "within": -1}, "within must be 0 or more"),
                        ({"at": [0], "start": 0}, "start= goes with every="),
                        ({"at": [0], "method": "spline"}, "method must be one of"),
                        ({"at": [0], "shape": "tall"}, "shape must be one of"),
                        ({"at": [pd.Timestamp("2024-01-01")]}, "must hold numbers"),
                        ({"every": 1e-6}, "grid times \\(at most")]:
        with pytest.raises(OptionError, match=message):
            pfx.grid(df, "y", id="pid", time="t", **kw)
    with pytest.raises(OptionError, match="id or time column"):
        pfx.grid(df, "t", id="pid", time="t", at=[0])
    with pytest.raises(DuplicateOccasionError):
        pfx.grid(pd.concat([df, df]), "y", id="pid", time="t", at=[0])
    dated = df.assign(t=pd.to_datetime(["2024-01-01", "2024-01-05"]))
    with pytest.raises(TimeTypeError):
        pfx.grid(dated, "y", id="pid", time="t", at=[3])
    pd.testing.assert_frame_equal(df, before)
    assert pfx.grid(df, "y", id="pid", time="t", every=3, start=-3)["t"].tolist() == [-3, 0, 3]
