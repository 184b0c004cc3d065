"""Cumulative exposure checked against the outside world.

Sources: scipy.integrate.cumulative_trapezoid (reference library); the cumulative feed
intake column of the statsmodels test file dietox.csv (data whose authors accumulated the
weekly amounts themselves); the US National Cancer Institute's definition of pack-years
(a published epidemiological definition).  The time-since-event, event count and carry
forward checks against DuckDB window SQL live in tests/test_duckdb.py.
"""

from __future__ import annotations

import os

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings

import panelfx as pfx
from panelfx.testing.strategies import panels

integrate = pytest.importorskip("scipy.integrate")


def sorted_groups(frame, id_, time):
    ids = [id_] if isinstance(id_, str) else list(id_)
    return frame.sort_values([*ids, time]).groupby(ids, observed=True, sort=False)


def x_of(times: pd.Series) -> np.ndarray:
    """Times as numbers: as they are, or days for datetimes (panelfx's default unit)."""
    if pd.api.types.is_numeric_dtype(times.dtype):
        return times.to_numpy(dtype="float64")
    return (times - times.iloc[0]).dt.total_seconds().to_numpy() / 86400.0


# ---------------------------------------------------------------------------- scipy
def test_scipy_documented_example():
    """scipy: cumulative_trapezoid(y, x=t, initial=0) on t = 0, 1, 3, 6 and y = 2, 4, 4, 1
    gives 0, 3, 11, 18.5 (verified in CHECK-SOURCES.md); panelfx gives the same."""
    t, y = [0, 1, 3, 6], [2.0, 4.0, 4.0, 1.0]
    want = integrate.cumulative_trapezoid(y, x=t, initial=0)
    got = pfx.derive(pd.DataFrame({"pid": 1, "t": t, "y": y}), pfx.cumulative("y", "trapezoid"), id="pid", time="t")
    np.testing.assert_array_equal(got["y_auc"], want)
    np.testing.assert_array_equal(want, [0, 3, 11, 18.5])


@settings(max_examples=100, deadline=None)
@given(case=panels())
def test_trapezoid_matches_scipy(case):
    """scipy.integrate.cumulative_trapezoid, subject by subject in time order.  scipy lets a
    NaN spread to every later area, which is panelfx's missing="propagate"."""
    out = pfx.derive(case.frame, pfx.cumulative("dose", "trapezoid", name="a"),
                    pfx.cumulative("y", "trapezoid", missing="propagate", name="b"), **case.keys)
    for _, rows in sorted_groups(out, case.id, case.time):
        x = x_of(rows[case.time])
        for col, got in (("dose", "a"), ("y", "b")):
            want = integrate.cumulative_trapezoid(rows[col].to_numpy(dtype="float64"), x=x, initial=0)
            np.testing.assert_allclose(rows[got].to_numpy(), want, rtol=1e-12, atol=1e-9)


def dietox() -> pd.DataFrame:
    """statsmodels test file dietox.csv: 72 pigs, weekly weight and cumulative feed intake."""
    statsmodels = pytest.importorskip("statsmodels")
    path = os.path.join(os.path.dirname(statsmodels.__file__), "regression", "tests", "results", "dietox.csv")
    return pd.read_csv(path)


def test_weight_area_matches_scipy_on_dietox():
    """scipy.integrate.cumulative_trapezoid of each pig's weight over weeks (statsmodels dietox.csv)."""
    df = dietox()
    out = pfx.derive(df, pfx.cumulative("Weight", "trapezoid"), id="Pig", time="Time")
    assert out.index.equals(df.index)
    for _, rows in sorted_groups(out, "Pig", "Time"):
        want = integrate.cumulative_trapezoid(rows["Weight"], x=rows["Time"], initial=0)
        np.testing.assert_allclose(rows["Weight_auc"], want, rtol=1e-13)


# ---------------------------------------------------------------------------- dietox feed
def test_cumulative_sum_rebuilds_dietox_feed():
    """statsmodels dietox.csv: ``Feed`` is each pig's cumulative feed intake (missing at the
    first weighing, non-decreasing).  Its first differences are the weekly amounts (the
    first weighing's intake taken as 0, nothing recorded yet); their running sum by panelfx
    must give the published column back, on the file's own (unsorted) row order."""
    df = dietox()
    feed0 = df["Feed"].fillna(0.0)
    by_pig = df.assign(feed0=feed0).sort_values(["Pig", "Time"])
    weekly = by_pig.groupby("Pig")["feed0"].diff().reindex(df.index)  # missing at each pig's first week
    assert weekly.isna().sum() == df["Pig"].nunique()
    out = pfx.derive(df.assign(weekly=weekly), pfx.cumulative("weekly"), id="Pig", time="Time")
    np.testing.assert_allclose(out["weekly_cum"], feed0, rtol=0, atol=1e-9)
    assert (out["weekly_cum"][df["Feed"].isna()] == 0).all()  # a missing amount contributes nothing


# ---------------------------------------------------------------------------- pack-years
def test_pack_years_nci_examples():
    """Pack-years (US National Cancer Institute definition): packs per day (cigarettes per
    day / 20) x years smoked, the step integral of the daily amount held until it changes.
    NCI's examples: 15 a day for 40 years = 30 pack-years; 2 packs a day for 4 years then
    3 packs a day for 10 years = 38."""
    df = pd.DataFrame({"person": ["p1", "p1", "p2", "p2", "p2"], "age": [20, 60, 18, 22, 32],
                       "cig_per_day": [15, 0, 40, 60, 0]})
    df["packs"] = df["cig_per_day"] / 20
    out = pfx.derive(df, pfx.cumulative("packs", "step", name="pack_years"), id="person", time="age")
    assert out["pack_years"].tolist() == [0, 30, 0, 8, 38]


def test_pack_years_with_dates_in_years():
    """The same 38 pack-years from calendar dates with unit="Y" (365.25-day years)."""
    start = pd.Timestamp("1990-03-01")
    year = pd.Timedelta(days=365.25)
    df = pd.DataFrame({"person": "p2", "visit": [start, start + 4 * year, start + 14 * year],
                       "packs": [2.0, 3.0, 0.0]})
    out = pfx.derive(df, pfx.cumulative("packs", "step", name="pack_years"), id="person", time="visit", unit="Y")
    np.testing.assert_allclose(out["pack_years"], [0, 8, 38], rtol=1e-12)
