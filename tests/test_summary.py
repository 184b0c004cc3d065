"""subject_summary(): hand-computed rows, the reference, outside checks (numpy, scipy), bad inputs."""

from __future__ import annotations

import math
import os

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings

import panelfx as pfx
from panelfx.testing import assert_matches_reference
from panelfx.testing.reference.summary import subject_summary as reference_summary
from panelfx.testing.strategies import ALL_ID_KINDS, ALL_TIME_KINDS, VALUE_KINDS, panels

NAN = math.nan


# ---------------------------------------------------------------------------- by hand
def test_rows_by_hand():
    df = pd.DataFrame({"pid": ["b", "a", "a", "b", "a", "c"], "t": [4, 6, 0, 0, 2, 1],
                       "y": [1.0, 7.0, 1.0, 5.0, NAN, NAN]})
    out = pfx.subject_summary(df, "y", id="pid", time="t")
    assert out["pid"].tolist() == ["b", "a", "c"]  # order of first appearance
    assert out["n_occasions"].tolist() == [2, 3, 1]
    assert out["first_time"].tolist() == [0, 0, 1] and out["last_time"].tolist() == [4, 6, 1]
    np.testing.assert_array_equal(out["follow_up"], [4, 6, 0])
    assert out["y_n"].tolist() == [2, 2, 0]
    np.testing.assert_array_equal(out["y_first"], [5, 1, NAN])
    np.testing.assert_array_equal(out["y_last"], [1, 7, NAN])
    np.testing.assert_array_equal(out["y_mean"], [3, 4, NAN])
    # b: (0, 5) -> (4, 1): slope -1; a skips its missing t = 2: (0, 1) -> (6, 7): slope 1
    np.testing.assert_array_equal(out["y_slope"], [-1, 1, NAN])
    # b: (5 + 1) / 2 * 4 = 12; a: (1 + 7) / 2 * 6 = 24 (a straight line across the missing occasion)
    np.testing.assert_array_equal(out["y_auc"], [12, 24, NAN])


def test_datetimes_several_columns_and_ids():
    df = pd.DataFrame({"site": ["A", "A", "B"], "pid": [1, 1, 1],
                       "t": pd.to_datetime(["2024-01-01", "2024-01-15", "2024-01-01"]).tz_localize("UTC"),
                       "u": [1.0, 2.0, 3.0], "v": [0, 14, 5]})
    out = pfx.subject_summary(df, ["u", "v"], id=["site", "pid"], time="t", unit="W")
    assert list(out.columns[:5]) == ["site", "pid", "n_occasions", "first_time", "last_time"]
    assert out["first_time"].dtype == df["t"].dtype
    np.testing.assert_array_equal(out["follow_up"], [2, 0])
    np.testing.assert_array_equal(out["u_slope"], [0.5, NAN])  # per week
    np.testing.assert_array_equal(out["v_auc"], [14, 0])  # (0 + 14) / 2 * 2 weeks; one value: 0


# ---------------------------------------------------------------------------- reference
@settings(max_examples=100, deadline=None)
@given(case=panels(time_kinds=ALL_TIME_KINDS, value_kinds=VALUE_KINDS, id_kinds=ALL_ID_KINDS))
def test_matches_reference(case):
    """Every summary column equals the per-subject loop reference."""
    got = pfx.subject_summary(case.frame, ["y", "x", "dose"], **case.keys)
    want = reference_summary(case.frame, ["y", "x", "dose"], **case.keys)
    assert list(got.columns) == list(want.columns)
    ids = [case.id] if isinstance(case.id, str) else list(case.id)
    for c in [*ids, "first_time", "last_time"]:
        assert got[c].tolist() == want[c].tolist(), c
    numbers = [c for c in got.columns if c not in (*ids, "first_time", "last_time")]
    assert_matches_reference(got, want, numbers, rtol=1e-9, atol=1e-9)


# ---------------------------------------------------------------------------- outside
def dietox() -> pd.DataFrame:
    """statsmodels' test file dietox.csv: 72 pigs weighed weekly (rows not sorted)."""
    statsmodels = pytest.importorskip("statsmodels")
    path = os.path.join(os.path.dirname(statsmodels.__file__), "regression", "tests", "results", "dietox.csv")
    return pd.read_csv(path)


def test_slope_and_area_against_numpy_and_scipy():
    """Reference libraries: numpy.polyfit (least-squares line) and scipy.integrate.trapezoid,
    pig by pig, on the weights of the statsmodels dietox test file."""
    integrate = pytest.importorskip("scipy.integrate")
    df = dietox()
    out = pfx.subject_summary(df, "Weight", id="Pig", time="Time").set_index("Pig")
    assert len(out) == 72
    for pig, rows in df.groupby("Pig"):
        rows = rows.sort_values("Time")
        slope = np.polyfit(rows["Time"], rows["Weight"], 1)[0]
        area = integrate.trapezoid(rows["Weight"], x=rows["Time"])
        assert out.loc[pig, "Weight_slope"] == pytest.approx(slope, rel=1e-10)
        assert out.loc[pig, "Weight_auc"] == pytest.approx(area, rel=1e-12)
        assert out.loc[pig, "Weight_mean"] == pytest.approx(rows["Weight"].mean(), rel=1e-12)


# ---------------------------------------------------------------------------- errors
def frame():
    return pd.DataFrame({"pid": [1, 1], "t": [0, 1], "y": [1.0, 2.0], "txt": ["a", "b"]})


@pytest.mark.parametrize("cols, error, words", [
    ("txt", pfx.ColumnTypeError, "'txt'"),
    ("nope", pfx.MissingColumnError, "'nope'"),
    ("pid", pfx.OptionError, "id or time column 'pid'"),
    ("t", pfx.OptionError, "id or time column 't'"),
    ([], pfx.OptionError, "cols must be a column name"),
    (["y", "y"], pfx.OptionError, "names a column twice"),
    ([1], pfx.OptionError, "cols must be a column name"),
])
def test_bad_columns(cols, error, words):
    with pytest.raises(error, match=words):
        pfx.subject_summary(frame(), cols, id="pid", time="t")


def test_bad_panel():
    with pytest.raises(pfx.DuplicateOccasionError):
        pfx.subject_summary(frame().assign(t=[0, 0]), "y", id="pid", time="t")
    with pytest.raises(pfx.TimeTypeError):
        pfx.subject_summary(frame(), "y", id="pid", time="txt")
    with pytest.raises(pfx.OptionError, match="unit="):
        pfx.subject_summary(frame(), "y", id="pid", time="t", unit="D")
