"""carry_forward(): hand-computed values, the reference, bad options."""

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
from panelfx.transforms.carry_forward import CarryForward

NAN = math.nan


def run(df, *trs, **kw):
    return pfx.derive(df, *trs, id="pid", time="t", **kw)


# ---------------------------------------------------------------------------- by hand
def test_limits_by_hand():
    df = pd.DataFrame({"pid": [1] * 6 + [2, 2], "t": [0, 1, 2, 3, 10, 11, 0, 1],
                       "y": [NAN, 5.0, NAN, NAN, NAN, 7.0, NAN, NAN]})
    out = run(df, pfx.carry_forward("y"), pfx.carry_forward("y", limit=2, name="lim2"),
              pfx.carry_forward("y", max_span=2, name="span2"),
              pfx.carry_forward("y", limit=1, max_span=5, name="both"))
    np.testing.assert_array_equal(out["y_locf"], [NAN, 5, 5, 5, 5, 7, NAN, NAN])
    np.testing.assert_array_equal(out["lim2"], [NAN, 5, 5, 5, NAN, 7, NAN, NAN])
    # t = 3 is exactly 2 after the value at t = 1: still carried
    np.testing.assert_array_equal(out["span2"], [NAN, 5, 5, 5, NAN, 7, NAN, NAN])
    np.testing.assert_array_equal(out["both"], [NAN, 5, 5, NAN, NAN, 7, NAN, NAN])


def test_keeps_dtype_unsorted_and_datetime_span():
    df = pd.DataFrame({"pid": ["a", "a", "a", "b"],
                       "t": pd.to_datetime(["2024-02-20", "2024-01-01", "2024-01-05", "2024-01-01"]),
                       "grade": pd.Categorical(["III", "I", None, None], categories=["I", "II", "III"])},
                      index=[4, 3, 2, 1])
    out = run(df, pfx.carry_forward("grade"), pfx.carry_forward("grade", max_span="30D", name="g30"))
    def values(s):
        return [None if pd.isna(v) else v for v in s.tolist()]

    # subject a in time order: 01-01 "I", 01-05 missing (filled "I"), 02-20 "III"; b has no value
    assert values(out["grade_locf"]) == ["III", "I", "I", None]
    assert out["grade_locf"].dtype == df["grade"].dtype
    assert values(out["g30"]) == ["III", "I", "I", None]
    assert list(out.index) == [4, 3, 2, 1]
    text = df.assign(grade=["x", None, None, "y"])
    # a in time order: 01-01 and 01-05 missing, before its only value: nothing to carry
    assert values(run(text, pfx.carry_forward("grade"))["grade_locf"]) == ["x", None, None, "y"]


def test_options_round_trip():
    tr = pfx.carry_forward("y", limit=3, max_span=pd.Timedelta(hours=12))
    assert tr.max_span == "12h" and CarryForward(**tr.options()) == tr
    assert tr.past_only and "at most 3 occasion(s)" in tr.describe()


# ---------------------------------------------------------------------------- reference
@settings(max_examples=120, deadline=None)
@given(case=panels(time_kinds=ALL_TIME_KINDS, value_kinds=VALUE_KINDS), limit=st.sampled_from([None, 1, 2]),
       span=st.sampled_from([None, 1, 12, 40]))
def test_matches_reference(case, limit, span):
    """Carry forward with and without limits equals the per-subject loop reference."""
    numeric = pd.api.types.is_numeric_dtype(case.frame[case.time].dtype)
    max_span = None if span is None else (span if numeric else f"{span}D")
    tr = pfx.carry_forward("y", limit=limit, max_span=max_span)
    got = pfx.derive(case.frame, tr, **case.keys)
    want = reference(case.frame, tr, **case.keys)
    assert_matches_reference(got, want, list(tr.outputs()))


# ---------------------------------------------------------------------------- errors
@pytest.mark.parametrize("kw, words", [
    ({"limit": 0}, "limit must be an integer >= 1"),
    ({"limit": -1}, "limit must be an integer >= 1"),
    ({"limit": 1.5}, "limit must be an integer"),
    ({"limit": True}, "limit must be an integer"),
    ({"max_span": 0}, "max_span must be a positive"),
    ({"max_span": -5.0}, "max_span must be a positive"),
    ({"max_span": "0D"}, "max_span must be a positive"),
    ({"max_span": "90"}, "has no unit"),
])
def test_bad_options(kw, words):
    with pytest.raises(pfx.OptionError, match=words):
        pfx.carry_forward("y", **kw)


def test_window_type_must_fit_the_time_column():
    numeric = pd.DataFrame({"pid": 1, "t": [0, 1], "y": [1.0, NAN]})
    with pytest.raises(pfx.OptionError, match="max_span='90D' does not fit time column 't'"):
        run(numeric, pfx.carry_forward("y", max_span="90D"))
    dated = numeric.assign(t=pd.to_datetime(["2024-01-01", "2024-01-02"]))
    with pytest.raises(pfx.OptionError, match="max_span=90 does not fit"):
        run(dated, pfx.carry_forward("y", max_span=90))


def test_missing_column():
    with pytest.raises(pfx.MissingColumnError, match="'nope'"):
        run(pd.DataFrame({"pid": 1, "t": [0, 1]}), pfx.carry_forward("nope"))
