"""time_since(), events_so_far(), ever(): hand-computed values, the reference, bad inputs."""

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

NAN = math.nan


def run(df, *trs, **kw):
    return pfx.derive(df, *trs, id="pid", time="t", **kw)


def events_frame():
    # one subject: events at t = 2 and t = 7; the flag is missing at t = 5
    return pd.DataFrame({"pid": 1, "t": [0, 2, 5, 7, 9],
                         "ev": pd.array([False, True, None, True, False], dtype="boolean")})


# ---------------------------------------------------------------------------- by hand
def test_time_since_by_hand():
    out = run(events_frame(),
              pfx.time_since("ev"), pfx.time_since("ev", "first"),
              pfx.time_since("ev", include_current=False, name="prior_last"),
              pfx.time_since("ev", "first", include_current=False, name="prior_first"))
    np.testing.assert_array_equal(out["ev_time_since"], [NAN, 0, 3, 0, 2])
    np.testing.assert_array_equal(out["ev_time_since_first"], [NAN, 0, 3, 5, 7])
    np.testing.assert_array_equal(out["prior_last"], [NAN, NAN, 3, 5, 2])
    np.testing.assert_array_equal(out["prior_first"], [NAN, NAN, 3, 5, 7])
    assert out["ev_time_since"].dtype == "float64"


def test_counts_and_ever_by_hand():
    out = run(events_frame(), pfx.events_so_far("ev"), pfx.events_so_far("ev", include_current=False, name="prior"),
              pfx.ever("ev"), pfx.ever("ev", include_current=False, name="ever_before"))
    assert out["ev_events"].tolist() == [0, 1, 1, 2, 2]
    assert out["prior"].tolist() == [0, 0, 1, 1, 2]
    assert out["ev_ever"].tolist() == [False, True, True, True, True]
    assert out["ever_before"].tolist() == [False, False, True, True, True]
    assert out["ev_events"].dtype == "int64" and out["ev_ever"].dtype == bool


def test_numeric_flags_datetimes_and_unsorted_rows():
    # numbers with any_nonzero: 0 is no event, any other number (here 2 and -1) an event, NaN no event
    df = pd.DataFrame({"pid": ["b", "a", "a", "a", "b"],
                       "t": pd.to_datetime(["2024-01-03", "2024-01-08", "2024-01-01", "2024-01-02", "2024-01-01"]),
                       "n": [0, 2, -1, np.nan, 0]}, index=[10, 11, 12, 13, 14])
    out = run(df, pfx.time_since("n", any_nonzero=True), pfx.events_so_far("n", any_nonzero=True),
              pfx.time_since("n", "first", any_nonzero=True), unit="h")
    np.testing.assert_array_equal(out["n_time_since"], [NAN, 0, 0, 24, NAN])
    np.testing.assert_array_equal(out["n_time_since_first"], [NAN, 7 * 24, 0, 24, NAN])
    assert out["n_events"].tolist() == [0, 2, 1, 1, 0]
    assert list(out.index) == [10, 11, 12, 13, 14]


def test_options_and_descriptions():
    for tr in (pfx.time_since("ev", "first", include_current=False), pfx.events_so_far("ev"), pfx.ever("ev")):
        assert type(tr)(**tr.options()) == tr
        assert tr.past_only
        assert "missing flag is not an event" in tr.describe()


# ---------------------------------------------------------------------------- reference
FLAGS = st.sampled_from(["flag", "x", "y", "flag_na"])


def with_missing_flags(frame: pd.DataFrame) -> pd.DataFrame:
    """A nullable boolean flag missing wherever y is missing, true where y > 0."""
    y = frame["y"].to_numpy(dtype="float64", na_value=np.nan)
    flag = pd.array(np.where(np.isnan(y), None, y > 0).tolist(), dtype="boolean")
    return frame.assign(flag_na=flag)


@settings(max_examples=120, deadline=None)
@given(case=panels(time_kinds=ALL_TIME_KINDS, value_kinds=VALUE_KINDS), col_=FLAGS,
       which=st.sampled_from(["last", "first"]), current=st.booleans(), kind=st.sampled_from(["since", "count", "ever"]))
def test_matches_reference(case, col_, which, current, kind):
    """Each event transform equals the per-subject loop reference, missing flags included."""
    frame = with_missing_flags(case.frame)
    nz = col_ not in ("flag", "flag_na")  # numeric columns: opt in to "non-zero is an event"
    tr = {"since": pfx.time_since(col_, which, include_current=current, any_nonzero=nz),
          "count": pfx.events_so_far(col_, include_current=current, any_nonzero=nz),
          "ever": pfx.ever(col_, include_current=current, any_nonzero=nz)}[kind]
    got = pfx.derive(frame, tr, **case.keys)
    want = reference(frame, tr, **case.keys)
    assert_matches_reference(got, want, list(tr.outputs()), rtol=1e-12)


@settings(max_examples=60, deadline=None)
@given(case=panels())
def test_consistency_between_the_three(case):
    """ever == (count > 0), time since the last event is missing exactly where ever is False,
    and it never exceeds the time since the first event."""
    out = pfx.derive(case.frame, pfx.events_so_far("flag"), pfx.ever("flag"), pfx.time_since("flag"),
                    pfx.time_since("flag", "first"), **case.keys)
    assert (out["flag_ever"] == (out["flag_events"] > 0)).all()
    assert (out["flag_time_since"].isna() == ~out["flag_ever"]).all()
    both = out["flag_time_since"].notna()
    assert (out.loc[both, "flag_time_since"] <= out.loc[both, "flag_time_since_first"]).all()


# ---------------------------------------------------------------------------- errors
@pytest.mark.parametrize("make, words", [
    (lambda: pfx.time_since("ev", "latest"), "which must be one of"),
    (lambda: pfx.time_since("ev", include_current="yes"), "include_current must be True or False"),
    (lambda: pfx.events_so_far("ev", include_current=1), "include_current must be True or False"),
    (lambda: pfx.ever("ev", include_current=None), "include_current must be True or False"),
    (lambda: pfx.time_since(3), "col must be a column name"),
    (lambda: pfx.ever("ev", name=5), "name must be a column name"),
])
def test_bad_options(make, words):
    with pytest.raises(pfx.OptionError, match=words):
        make()


@pytest.mark.parametrize("tr", [pfx.time_since("txt"), pfx.events_so_far("txt"), pfx.ever("txt"),
                                pfx.time_since("when")])
def test_wrong_dtype(tr):
    df = events_frame().assign(txt=list("yynny"), when=pd.Timestamp("2024-01-01"))
    with pytest.raises(pfx.ColumnTypeError):
        run(df, tr)
