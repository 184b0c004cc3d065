"""subject_summary's statistics on request: peak and time of peak, area from a start, time
above / below a threshold, last value before a time.

Outside references: scipy's ``cumulative_trapezoid`` worked values (t = [0, 1, 3, 6],
y = [2, 4, 4, 1] gives 18.5; CHECK-SOURCES.md) and ``scipy.integrate.trapezoid`` with
``numpy.interp`` for the value at the start; pandas ``groupby`` max / ``idxmax`` (first
occurrence) for the peak on statsmodels' dietox test file; DuckDB ``arg_max(x, t) FILTER
(WHERE t <= ref AND x IS NOT NULL)`` for the last value on or before a time
(CHECK-SOURCES.md); a fine ``numpy.interp`` grid for the time above a threshold; the
per-subject loop reference (panelfx.testing.reference.summary) on generated panels.
"""

from __future__ import annotations

import math
import os

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import panelfx as pfx
from panelfx.errors import NotConstantError, OptionError
from panelfx.testing import assert_matches_reference
from panelfx.testing.reference.summary import subject_summary as reference_summary
from panelfx.testing.strategies import panels

NAN = math.nan


def dietox() -> pd.DataFrame:
    statsmodels = pytest.importorskip("statsmodels")
    path = os.path.join(os.path.dirname(statsmodels.__file__), "regression", "tests", "results", "dietox.csv")
    return pd.read_csv(path)


def test_area_from_zero_is_scipys_worked_value():
    """scipy cumulative_trapezoid(y, x=t, initial=0) on t = [0, 1, 3, 6], y = [2, 4, 4, 1]
    ends at 18.5 (CHECK-SOURCES.md); from t = 2 the value there is 4 (interpolated): 11.5."""
    df = pd.DataFrame({"pid": [7] * 4, "t": [0, 1, 3, 6], "y": [2.0, 4.0, 4.0, 1.0]})
    assert pfx.subject_summary(df, "y", id="pid", time="t", stats=["auc_from"])["y_auc_from"].iloc[0] == 18.5
    out = pfx.subject_summary(df, "y", id="pid", time="t", area_from=2)
    assert out["y_auc_from"].iloc[0] == 11.5
    assert list(out.columns[-7:]) == ["y_n", "y_first", "y_last", "y_mean", "y_slope", "y_auc", "y_auc_from"]


def test_pharmacokinetic_profile_without_hand_code():
    """Peak, time of peak and area from the dose, with no sample at time 0 (value_at_start=0:
    nothing in the blood before the dose) and with one."""
    pk = pd.DataFrame({"pid": [1, 1, 1, 2, 2, 2, 2], "h": [0.5, 2.0, 6.0, 0.0, 1.0, 3.0, 8.0],
                       "conc": [4.0, 10.0, 2.0, 0.0, 6.0, 6.0, 1.0]})
    out = pfx.subject_summary(pk, "conc", id="pid", time="h", stats=["max", "time_of_max", "auc_from"],
                              value_at_start=0.0)
    assert out["conc_max"].tolist() == [10.0, 6.0]
    assert out["conc_time_of_max"].tolist() == [2.0, 1.0]  # the first time the peak is reached
    # 1: 0.5 * 4 / 2 + 1.5 * 14 / 2 + 4 * 12 / 2 = 1 + 10.5 + 24; 2: 3 + 12 + 17.5
    assert out["conc_auc_from"].tolist() == [35.5, 32.5]
    no_start = pfx.subject_summary(pk, "conc", id="pid", time="h", stats=["auc_from"])
    assert np.isnan(no_start["conc_auc_from"].iloc[0]) and no_start["conc_auc_from"].iloc[1] == 32.5


def test_peak_time_of_peak_and_area_on_dietox():
    """Pig by pig against pandas (groupby max, idxmax: first occurrence) and scipy.integrate.trapezoid
    from week 3 (the weight at week 3 from numpy.interp)."""
    integrate = pytest.importorskip("scipy.integrate")
    df = dietox()
    out = pfx.subject_summary(df, "Weight", id="Pig", time="Time", stats="all", area_from=3).set_index("Pig")
    out = out.sort_index()
    ordered = df.sort_values(["Pig", "Time"])
    g = ordered.groupby("Pig")
    pd.testing.assert_series_equal(out["Weight_max"], g["Weight"].max(), check_names=False)
    pd.testing.assert_series_equal(out["Weight_min"], g["Weight"].min(), check_names=False)
    want_t = ordered.loc[g["Weight"].idxmax(), ["Pig", "Time"]].set_index("Pig")["Time"]
    pd.testing.assert_series_equal(out["Weight_time_of_max"], want_t, check_names=False)
    for pig, rows in g:
        t, w = rows["Time"].to_numpy(float), rows["Weight"].to_numpy(float)
        keep = t > 3
        tt, ww = np.r_[3.0, t[keep]], np.r_[np.interp(3.0, t, w), w[keep]]
        assert out.loc[pig, "Weight_auc_from"] == pytest.approx(integrate.trapezoid(ww, tt), rel=1e-12)


def test_time_above_and_below_a_threshold():
    df = pd.DataFrame({"pid": [1, 1, 1, 1], "t": [0, 2, 4, 10], "y": [1.0, 5.0, 3.0, 3.0]})
    out = pfx.subject_summary(df, "y", id="pid", time="t", threshold=3.0)
    # above 3 from t = 1 (crossing of 1 -> 5) to t = 4 (5 -> 3 reaches 3 at 4): 3; flat at 3 after it
    assert out["y_time_above"].iloc[0] == 3.0
    assert out["y_time_below"].iloc[0] == 1.0
    # a fine numpy.interp grid agrees (outside check of the crossings)
    fine = np.linspace(0, 10, 1_000_001)
    line = np.interp(fine, df["t"], df["y"])
    assert out["y_time_above"].iloc[0] == pytest.approx((line > 3).mean() * 10, abs=1e-4)
    assert out["y_time_below"].iloc[0] == pytest.approx((line < 3).mean() * 10, abs=1e-4)


def test_last_value_before_a_time_against_duckdb():
    duckdb = pytest.importorskip("duckdb")
    df = dietox()
    df["ref"] = 4 + (df["Pig"] % 5)
    df.loc[df.index % 7 == 0, "Weight"] = np.nan
    out = pfx.subject_summary(df, "Weight", id="Pig", time="Time", before="ref").set_index("Pig")
    con = duckdb.connect()
    con.register("d", df)
    want = con.execute("SELECT Pig, arg_max(Weight, Time) FILTER (WHERE Time <= ref AND Weight IS NOT NULL) AS w "
                       "FROM d GROUP BY Pig ORDER BY Pig").df().set_index("Pig")["w"]
    pd.testing.assert_series_equal(out["Weight_last_before"].sort_index(), want, check_names=False)
    fixed = pfx.subject_summary(df, "Weight", id="Pig", time="Time", before=0)
    assert fixed["Weight_last_before"].isna().all()  # nothing on or before time 0 (weeks start at 1)


@settings(max_examples=80, deadline=None)
@given(case=panels(time_kinds=("int", "float")), start=st.sampled_from([0, 3, 2.5, "ref"]),
       value_at_start=st.sampled_from([None, 0.0, 2.0]), threshold=st.sampled_from([0.0, 0.5, -3.0]),
       before=st.sampled_from([5, "ref", -100]))
def test_matches_the_reference(case, start, value_at_start, threshold, before):
    frame = case.frame
    first = frame.groupby(case.id, sort=False, observed=True)[case.time].transform("min")
    frame = frame.assign(ref=first + 7)
    kw = {"area_from": start, "value_at_start": value_at_start, "threshold": threshold, "before": before}
    got = pfx.subject_summary(frame, ["y", "x"], **case.keys, stats="all", **kw)
    want = reference_summary(frame, ["y", "x"], **case.keys, stats="all", **kw)
    for c in ("y", "x"):
        for stat in ("time_of_min", "time_of_max"):
            assert [None if pd.isna(v) else v for v in got[f"{c}_{stat}"]] == \
                [None if pd.isna(v) else v for v in want[f"{c}_{stat}"]]
    numbers = [f"{c}_{s}" for c in ("y", "x") for s in ("min", "max", "auc_from", "time_above", "time_below",
                                                       "last_before")]
    assert_matches_reference(got, want, numbers, rtol=1e-9, atol=1e-9)


def test_datetimes_and_columns_of_times():
    df = pd.DataFrame({"pid": ["a", "a", "a", "b", "b"],
                       "when": pd.to_datetime(["2024-01-01", "2024-01-03", "2024-01-07", "2024-01-02",
                                               "2024-01-04"]),
                       "dose_at": pd.to_datetime(["2024-01-02"] * 3 + ["2024-01-01"] * 2),
                       "y": [2.0, 6.0, 4.0, 1.0, 3.0]})
    out = pfx.subject_summary(df, "y", id="pid", time="when", stats=["time_of_max", "auc_from", "last_before"],
                              area_from="dose_at", before=pd.Timestamp("2024-01-03"), value_at_start=0.0)
    assert out["y_time_of_max"].tolist() == [pd.Timestamp("2024-01-03"), pd.Timestamp("2024-01-04")]
    assert out["y_time_of_max"].dtype == df["when"].dtype
    # a: value 4 at Jan 2 (between 2 and 6), (4 + 6) / 2 * 1 + (6 + 4) / 2 * 4 = 25 (days)
    # b: no occasion before Jan 1: value_at_start 0, (0 + 1) / 2 * 1 + (1 + 3) / 2 * 2 = 4.5
    assert out["y_auc_from"].tolist() == [25.0, 4.5]
    assert out["y_last_before"].tolist() == [6.0, 1.0]
    weeks = pfx.subject_summary(df, "y", id="pid", time="when", stats=["auc_from"], area_from="dose_at",
                                value_at_start=0.0, unit="W")
    np.testing.assert_allclose(weeks["y_auc_from"], [25 / 7, 4.5 / 7])


def test_options_are_checked():
    df = pd.DataFrame({"pid": [1, 1, 2], "t": [0, 1, 0], "y": [1.0, 2.0, 3.0], "r": [0, 1, 0]})
    for kw, message in [({"stats": ["peak"]}, "unknown statistic 'peak'"), ({"stats": []}, "stats must be"),
                        ({"stats": ["max", "max"]}, "stats must be"),
                        ({"stats": ["time_above"]}, "needs threshold="),
                        ({"stats": ["last_before"]}, "needs before="),
                        ({"threshold": "high"}, "threshold must be a finite number"),
                        ({"area_from": "nowhere"}, "not a column")]:
        with pytest.raises(OptionError, match=message):
            pfx.subject_summary(df, "y", id="pid", time="t", **kw)
    with pytest.raises(NotConstantError, match="area_from column varies within subject"):
        pfx.subject_summary(df, "y", id="pid", time="t", area_from="r")
    dated = df.assign(t=pd.to_datetime(["2024-01-01", "2024-01-02", "2024-01-01"]))
    with pytest.raises(OptionError, match="needs area_from="):
        pfx.subject_summary(dated, "y", id="pid", time="t", stats=["auc_from"])
    # "all" on datetimes leaves out what needs an option not given
    cols = pfx.subject_summary(dated, "y", id="pid", time="t", stats="all").columns
    assert "y_auc_from" not in cols and "y_time_of_max" in cols and "y_time_above" not in cols
