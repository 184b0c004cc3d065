"""lag(offset=, tolerance=): hand-computed values, the reference, bad options."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import panelfx as pfx
from panelfx.testing import assert_matches_reference, reference
from panelfx.testing.strategies import ALL_TIME_KINDS, VALUE_KINDS, panels
from panelfx.transforms.lag import Lag

NAN = math.nan


def run(df, *trs, **kw):
    return pfx.derive(df, *trs, id="pid", time="t", **kw)


# ---------------------------------------------------------------------------- by hand
def test_offset_and_tolerance_by_hand():
    df = pd.DataFrame({"pid": 1, "t": [0, 5, 8, 16, 30], "y": [10.0, 20.0, NAN, 40.0, 50.0]})
    out = run(df, pfx.lag("y", offset=7), pfx.lag("y", offset=7, tolerance=3, name="tol3"),
              pfx.lag("y", offset=8, tolerance=0, name="exact8"))
    # targets t - 7: -7, -2, 1, 9, 23 -> sources none, none, t=0, t=8 (missing value), t=16
    np.testing.assert_array_equal(out["y_lag_7"], [NAN, NAN, 10, NAN, 40])
    # t=16 -> t=8 lies within [9 - 3, 9]; t=30 -> t=16 lies before 23 - 3
    np.testing.assert_array_equal(out["tol3"], [NAN, NAN, 10, NAN, NAN])
    # exactly 8 earlier: only t = 8 -> t = 0 and t = 16 -> t = 8
    np.testing.assert_array_equal(out["exact8"], [NAN, NAN, 10, NAN, NAN])


def test_datetimes_keep_dtype_and_row_order():
    df = pd.DataFrame({"pid": ["a", "a", "b", "a"],
                       "t": pd.to_datetime(["2024-03-01", "2024-01-01", "2024-01-01", "2024-01-20"]),
                       "arm": ["c", "a", "z", "b"]}, index=["w", "x", "y", "z"])
    out = run(df, pfx.lag("arm", offset="30D"),
              pfx.lag("arm", offset="30D", tolerance=pd.Timedelta(days=5), name="tol5"),
              pfx.lag("arm", offset="30D", tolerance="15D", name="tol15"))
    # 2024-03-01 - 30 days = 2024-01-31: the latest occasion at or before it is 2024-01-20 ("b"),
    # 11 days older than the target: kept with 15 days' tolerance, dropped with 5
    assert out["arm_lag_30d"].isna().tolist() == [False, True, True, True]
    assert out.loc["w", "arm_lag_30d"] == "b" and out.loc["w", "tol15"] == "b"
    assert out["tol5"].isna().all() and out["tol15"].isna().tolist() == [False, True, True, True]
    assert out["arm_lag_30d"].dtype == df["arm"].dtype
    assert list(out.index) == ["w", "x", "y", "z"]


def test_tolerance_as_timedelta_is_stored_as_text():
    tr = pfx.lag("y", offset=pd.Timedelta(days=14), tolerance=pd.Timedelta(hours=36))
    assert (tr.offset, tr.tolerance, tr.periods) == ("14D", "36h", None)
    assert tr.outputs() == ("y_lag_14d",)
    assert Lag(**tr.options()) == tr
    assert tr.past_only and "older than the target" in tr.describe()


def test_periods_default_unchanged():
    assert pfx.lag("y").periods == 1 and pfx.lag("y").outputs() == ("y_lag1",)
    assert pfx.lag("y", -2).outputs() == ("y_lead2",) and not pfx.lag("y", -2).past_only
    assert Lag(col="y") == pfx.lag("y")


# ---------------------------------------------------------------------------- reference
@settings(max_examples=120, deadline=None)
@given(case=panels(time_kinds=ALL_TIME_KINDS, value_kinds=VALUE_KINDS), col_=st.sampled_from(["y", "x", "flag"]),
       offset=st.sampled_from([1, 3, 10, 30]), tolerance=st.sampled_from([None, 0, 2, 15]))
def test_matches_reference(case, col_, offset, tolerance):
    """Lag by a time offset (with or without tolerance) equals the per-subject loop reference."""
    numeric = pd.api.types.is_numeric_dtype(case.frame[case.time].dtype)
    unit = "" if numeric else "D"
    off = offset if numeric else f"{offset}{unit}"
    tol = None if tolerance is None else (tolerance if numeric else f"{tolerance}{unit}")
    tr = pfx.lag(col_, offset=off, tolerance=tol)
    got = pfx.derive(case.frame, tr, **case.keys)
    want = reference(case.frame, tr, **case.keys)
    assert_matches_reference(got, want, list(tr.outputs()))


# ---------------------------------------------------------------------------- errors
@pytest.mark.parametrize("kw, words", [
    ({"periods": 1, "offset": 7}, "either periods= .* or offset="),
    ({"tolerance": 3}, "tolerance= applies only to a lag by time"),
    ({"periods": 2, "tolerance": 3}, "tolerance= applies only"),
    ({"offset": -0.5}, "offset must be a non-negative"),  # offset=0 is "as of now"
    ({"offset": -7}, "offset must be a non-negative"),
    ({"offset": "-7D"}, "offset must be a non-negative"),
    ({"offset": "7"}, "has no unit"),
    ({"offset": True}, "offset must be a non-negative"),
    ({"offset": float("nan")}, "offset must be a non-negative"),
    ({"offset": 7, "tolerance": -1}, "tolerance must be a non-negative"),
    ({"offset": "7D", "tolerance": "a while"}, "not a time span"),
    ({"periods": 0}, "periods must be a non-zero integer"),
])
def test_bad_options(kw, words):
    with pytest.raises(pfx.OptionError, match=words):
        pfx.lag("y", **kw)


def test_window_type_must_fit_the_time_column():
    numeric = pd.DataFrame({"pid": 1, "t": [0.0, 1.0], "y": [1.0, 2.0]})
    with pytest.raises(pfx.OptionError, match="offset='7D' does not fit time column 't'"):
        run(numeric, pfx.lag("y", offset="7D"))
    with pytest.raises(pfx.OptionError, match="tolerance='1D' does not fit"):
        run(numeric, pfx.lag("y", offset=7, tolerance="1D"))
    dated = numeric.assign(t=pd.to_datetime(["2024-01-01", "2024-01-02"]))
    with pytest.raises(pfx.OptionError, match="offset=7 does not fit .* datetime values"):
        run(dated, pfx.lag("y", offset=7))


def test_missing_column():
    with pytest.raises(pfx.MissingColumnError, match="'nope'"):
        run(pd.DataFrame({"pid": 1, "t": [0, 1]}), pfx.lag("nope", offset=1))
