"""occasion(), gap(), time_since_baseline(): hand-computed values, the reference, bad options."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import panelfx as pfx
from panelfx.testing import assert_matches_reference, reference
from panelfx.testing.strategies import ALL_ID_KINDS, ALL_TIME_KINDS, panels

NAN = math.nan


def test_by_hand_numeric_unsorted():
    df = pd.DataFrame({"pid": [2, 1, 1, 2, 1], "t": [3.5, 10, 2, 0, 4]}, index=list("vwxyz"))
    out = pfx.derive(df, pfx.occasion(), pfx.gap(), pfx.time_since_baseline(), id="pid", time="t")
    assert out["occasion"].tolist() == [2, 3, 1, 1, 2] and out["occasion"].dtype == "int64"
    np.testing.assert_array_equal(out["gap"], [3.5, 6, NAN, NAN, 2])
    np.testing.assert_array_equal(out["time_since_baseline"], [3.5, 8, 0, 0, 2])
    assert list(out.index) == list("vwxyz")


def test_by_hand_tz_aware_datetimes_in_hours():
    t = pd.to_datetime(["2024-03-30 12:00", "2024-03-31 12:00", "2024-04-01 12:00"]).tz_localize("Europe/Berlin")
    df = pd.DataFrame({"pid": "a", "t": t})
    out = pfx.derive(df, pfx.gap(name="hours_since_last"), pfx.time_since_baseline(), id="pid", time="t", unit="h")
    # the clocks go forward on 31 March 2024 in Berlin: that day lasts 23 hours
    np.testing.assert_array_equal(out["hours_since_last"], [NAN, 23, 24])
    np.testing.assert_array_equal(out["time_since_baseline"], [0, 23, 47])


def test_flags():
    for tr in (pfx.occasion(), pfx.gap(), pfx.time_since_baseline()):
        assert tr.inputs() == () and tr.past_only and type(tr)(**tr.options()) == tr and tr.describe()


@settings(max_examples=100, deadline=None)
@given(case=panels(time_kinds=ALL_TIME_KINDS, id_kinds=ALL_ID_KINDS),
       tr=st.sampled_from([pfx.occasion(), pfx.gap(), pfx.time_since_baseline()]))
def test_matches_reference(case, tr):
    """Each helper equals the per-subject loop reference."""
    got = pfx.derive(case.frame, tr, **case.keys)
    want = reference(case.frame, tr, **case.keys)
    assert_matches_reference(got, want, list(tr.outputs()), rtol=1e-12)


@pytest.mark.parametrize("make", [lambda: pfx.occasion(name=""), lambda: pfx.gap(name=3),
                                  lambda: pfx.time_since_baseline(name=["a"])])
def test_bad_name(make):
    with pytest.raises(pfx.OptionError, match="name must be a column name"):
        make()


def test_existing_column_is_not_overwritten():
    df = pd.DataFrame({"pid": 1, "t": [0, 1], "occasion": [1, 2]})
    with pytest.raises(pfx.ColumnExistsError, match="'occasion'"):
        pfx.derive(df, pfx.occasion(), id="pid", time="t")
    assert pfx.derive(df, pfx.occasion(name="visit_no"), id="pid", time="t")["visit_no"].tolist() == [1, 2]
