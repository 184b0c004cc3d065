"""exposure, first_dose / last_dose and table_window: hand-computed rules, an independent route
(one row per covered day, then sums), DuckDB interval and window SQL."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import panelfx as pfx

D = pd.to_datetime


def ex_run(visits, *trs, ex, **kw):
    return pfx.derive(visits, *trs, id="pid", time="day", tables={"ex": ex}, **kw)


VISITS = pd.DataFrame({"pid": [1, 1, 1, 1], "day": D(["2024-01-02", "2024-01-03", "2024-01-16", "2024-01-17"])})
ONE = pd.DataFrame({"pid": [1], "start": D(["2024-01-03"]), "end": D(["2024-01-16"]), "mg": [10.0]})


def test_dates_are_inclusive():
    """3 to 16 January is 14 days (common practice for dosing records: both days count)."""
    out = ex_run(VISITS, pfx.exposure("ex", start="start", end="end", stat="days_on"),
                 pfx.exposure("ex", dose="mg", start="start", end="end"),
                 pfx.exposure("ex", dose="mg", start="start", end="end", inclusive=False, name="open"), ex=ONE)
    assert out["ex_days_on"].tolist() == [0.0, 1.0, 14.0, 14.0]
    assert out["mg_cumulative"].tolist() == [0.0, 10.0, 140.0, 140.0]
    assert out["open"].tolist() == [0.0, 0.0, 130.0, 130.0]  # [3 Jan, 16 Jan): 13 days


def test_same_day_dose_and_sample():
    """A sample drawn before the dose on a dosing day: include_current=False counts up to the day before."""
    out = ex_run(VISITS, pfx.exposure("ex", dose="mg", start="start", end="end", include_current=False),
                 pfx.exposure("ex", dose="mg", start="start", end="end", stat="current"),
                 pfx.exposure("ex", dose="mg", start="start", end="end", stat="intensity"), ex=ONE)
    assert out["mg_cumulative"].tolist() == [0.0, 0.0, 130.0, 140.0]
    assert out["mg_current"].tolist() == [0.0, 10.0, 10.0, 0.0]
    assert np.isnan(out["mg_intensity"][0]) and out["mg_intensity"].tolist()[1:] == [10.0, 10.0, 140.0 / 15]


def test_overlap_sum_latest_error():
    """A: 1-30 at 10/day; B: 10-12 at 5/day.  sum: 30*10 + 3*5; latest: B supersedes A from the
    10th, so A covers 1-9 (9 days) and B 10-12; days on: union 30 days, or 12 under latest."""
    ex = pd.DataFrame({"pid": [1, 1], "start": [10, 1], "end": [12, 30], "mg": [5.0, 10.0]})
    visits = pd.DataFrame({"pid": [1, 1], "day": [11, 40]})
    out = ex_run(visits, pfx.exposure("ex", dose="mg", start="start", end="end"),
                 pfx.exposure("ex", dose="mg", start="start", end="end", overlap="latest", name="latest"),
                 pfx.exposure("ex", dose="mg", start="start", end="end", stat="current", name="now"),
                 pfx.exposure("ex", start="start", end="end", stat="days_on"),
                 pfx.exposure("ex", start="start", end="end", stat="days_on", overlap="latest", name="days_latest"),
                 ex=ex)
    assert out["mg_cumulative"].tolist() == [11 * 10 + 2 * 5.0, 315.0]
    assert out["latest"].tolist() == [9 * 10 + 2 * 5.0, 90.0 + 15.0]
    assert out["now"].tolist() == [15.0, 0.0]
    assert out["ex_days_on"].tolist() == [11.0, 30.0]
    assert out["days_latest"].tolist() == [11.0, 12.0]
    with pytest.raises(pfx.IntervalError, match="overlapping records in side table 'ex'"):
        ex_run(visits, pfx.exposure("ex", dose="mg", start="start", end="end", overlap="error"), ex=ex)
    touching = pd.DataFrame({"pid": [1, 1], "start": [1, 11], "end": [10, 12], "mg": [1.0, 1.0]})
    ok = ex_run(visits, pfx.exposure("ex", dose="mg", start="start", end="end", overlap="error"), ex=touching)
    assert ok["mg_cumulative"].tolist() == [11.0, 12.0]
    same_start = pd.DataFrame({"pid": [1, 1], "start": [1, 1], "end": [10, 12], "mg": [1.0, 2.0]})
    with pytest.raises(pfx.TiedRecordsError, match="start at the same time"):
        ex_run(visits, pfx.exposure("ex", dose="mg", start="start", end="end", overlap="latest"), ex=same_start)


def test_grace_open_ends_supply_and_lag():
    ex = pd.DataFrame({"pid": [1, 1], "start": [1, 20], "end": [10, np.nan], "mg": [2.0, 3.0], "days": [10, 5]})
    visits = pd.DataFrame({"pid": [1, 1, 1, 1], "day": [10, 12, 13, 30]})
    with pytest.raises(pfx.NullKeyError, match="without an end"):
        ex_run(visits, pfx.exposure("ex", dose="mg", start="start", end="end"), ex=ex)
    out = ex_run(visits, pfx.exposure("ex", start="start", end="end", stat="on_treatment", grace=2,
                                      open_end="until_time"),
                 pfx.exposure("ex", dose="mg", start="start", end="end", open_end="until_time"),
                 pfx.exposure("ex", dose="mg", start="start", supply="days", name="by_supply"),
                 pfx.exposure("ex", dose="mg", start="start", supply="days", lag=5, name="lagged"), ex=ex)
    # covered to day 10, grace 2 more days (11, 12): day 13 is off; the open record runs on
    assert out["ex_on_treatment"].tolist() == [True, True, False, True]
    assert out["mg_cumulative"].tolist() == [20.0, 20.0, 20.0, 20.0 + 11 * 3.0]
    # supply: 10 days from day 1 (days 1-10), 5 days from day 20 (20-24)
    assert out["by_supply"].tolist() == [20.0, 20.0, 20.0, 35.0]
    assert out["lagged"].tolist() == [10.0, 14.0, 16.0, 35.0]  # as of day 5, 7, 8, 25


def test_missing_dose_and_subjects_without_records():
    ex = pd.DataFrame({"pid": [1, 1], "start": [1, 10], "end": [5, 12], "mg": [1.0, np.nan]})
    visits = pd.DataFrame({"pid": [1, 1, 1, 2], "day": [6, 10, 20, 6]})
    out = ex_run(visits, pfx.exposure("ex", dose="mg", start="start", end="end"),
                 pfx.exposure("ex", dose="mg", start="start", end="end", stat="current"),
                 pfx.exposure("ex", start="start", end="end", stat="on_treatment"), ex=ex)
    assert out["mg_cumulative"].tolist()[0] == 5.0 and out["mg_cumulative"].isna().tolist() == [False, True, True,
                                                                                                   False]
    assert np.isnan(out["mg_current"][1]) and out["mg_current"][2] == 0.0
    assert out["mg_cumulative"][3] == 0.0 and out["ex_on_treatment"].tolist() == [False, True, False, False]


def test_bad_records_and_options():
    visits = pd.DataFrame({"pid": [1], "day": [3]})
    with pytest.raises(pfx.IntervalError, match="end before they start"):
        ex_run(visits, pfx.exposure("ex", dose="mg", start="start", end="end"),
               ex=pd.DataFrame({"pid": [1], "start": [5], "end": [3], "mg": [1.0]}))
    for kw, message in [({"end": None}, "exactly one"), ({"dose": None}, "needs dose="),
                        ({"grace": 2}, "grace= applies to stat='on_treatment'"), ({"overlap": "max"}, "overlap must"),
                        ({"lag": "3"}, "has no unit")]:
        with pytest.raises(pfx.OptionError, match=message):
            pfx.exposure("ex", **{"dose": "mg", "start": "start", "end": "end", **kw})


def test_first_and_last_dose_as_references():
    """first_dose feeds baseline(last_before): the last value on or before the first dose."""
    visits = pd.DataFrame({"pid": [1, 1, 1, 2], "day": D(["2024-01-01", "2024-01-05", "2024-02-01", "2024-01-01"]),
                           "hb": [12.0, 11.0, 13.0, 14.0]})
    ex = pd.DataFrame({"pid": [1, 1], "start": D(["2024-01-20", "2024-01-06"]), "end": D(["2024-01-25", "2024-01-10"]),
                       "days": [3, 30]})
    out = ex_run(visits, pfx.first_dose("ex", start="start"), pfx.last_dose("ex", start="start", end="end"),
                 pfx.last_dose("ex", start="start", supply="days", name="last_by_supply"),
                 pfx.baseline("hb", "last_before", reference="ex_first_dose"), ex=ex)
    assert out["ex_first_dose"].tolist()[:3] == [pd.Timestamp("2024-01-06")] * 3
    assert out["ex_last_dose"].tolist()[:3] == [pd.Timestamp("2024-01-25")] * 3
    assert out["last_by_supply"].tolist()[0] == pd.Timestamp("2024-02-04")  # 30 days from 6 Jan: 6 Jan .. 4 Feb
    assert pd.isna(out["ex_first_dose"][3])
    assert out["hb_baseline"].tolist()[:3] == [11.0] * 3


def test_table_window_events_between_visits():
    visits = pd.DataFrame({"pid": [1, 1, 1], "day": [0, 10, 20]})
    ae = pd.DataFrame({"pid": [1, 1, 1, 1], "onset": [0, 5, 10, 15], "serious": [False, True, np.nan, False],
                       "grade": [1.0, 3.0, np.nan, 2.0]})
    out = pfx.derive(visits, pfx.table_window("ae", time="onset", span=10),
                     pfx.table_window("ae", "grade", "count", time="onset", span=10, closed="both", name="both"),
                     pfx.table_window("ae", "serious", "any", time="onset", span=10),
                     pfx.table_window("ae", "grade", "mean", time="onset", min_valid=2),
                     pfx.table_window("ae", time="onset", closed="left", name="before"),
                     id="pid", time="day", tables={"ae": ae})
    assert out["ae_count_10"].tolist() == [1, 2, 1]  # (t - 10, t]
    assert out["both"].tolist() == [1, 2, 1]  # non-missing grades in [t - 10, t]
    assert out["serious_any_10"].tolist() == [False, True, False]
    assert np.isnan(out["grade_mean_sofar"][0]) and out["grade_mean_sofar"].tolist()[1:] == [2.0, 2.0]
    assert out["before"].tolist() == [0, 2, 4]


# ------------------------------------------------------------------ independent routes
@st.composite
def dosing(draw):
    n_sub = draw(st.integers(1, 3))
    visits, ex = [], []
    for s in range(n_sub):
        visits += [(s, d) for d in draw(st.lists(st.integers(0, 60), min_size=1, max_size=6, unique=True))]
        for _ in range(draw(st.integers(0, 5))):
            a = draw(st.integers(0, 50))
            ex.append((s, a, a + draw(st.integers(0, 15)), draw(st.sampled_from([0.5, 1.0, 2.5, 10.0, 0.1]))))
    v = pd.DataFrame(visits, columns=["pid", "day"])
    e = pd.DataFrame(ex, columns=["pid", "start", "end", "mg"]).astype(
        {"pid": "int64", "start": "int64", "end": "int64", "mg": "float64"})
    return v, e


def _daily(ex: pd.DataFrame) -> pd.DataFrame:
    """Each record as one row per covered day (both ends included): the independent route."""
    days = [(r.pid, d, r.mg) for r in ex.itertuples() for d in range(r.start, r.end + 1)]
    return pd.DataFrame(days, columns=["pid", "d", "mg"]).astype({"pid": "int64", "d": "int64", "mg": "float64"})


@settings(max_examples=60, deadline=None)
@given(data=dosing(), current=st.booleans())
def test_cumulative_and_days_on_match_the_daily_expansion(data, current):
    visits, ex = data
    out = ex_run(visits, pfx.exposure("ex", dose="mg", start="start", end="end", include_current=current),
                 pfx.exposure("ex", start="start", end="end", stat="days_on", include_current=current),
                 pfx.exposure("ex", dose="mg", start="start", end="end", stat="current"), ex=ex)
    daily = _daily(ex)
    m = visits.reset_index().merge(daily, on="pid", how="left")
    upto = (m["d"] <= m["day"]) if current else (m["d"] < m["day"])
    cum = m[upto].groupby("index")["mg"].sum().reindex(visits.index, fill_value=0.0)
    on = m[upto].drop_duplicates(["index", "d"]).groupby("index")["d"].count().reindex(visits.index, fill_value=0)
    now = m[m["d"] == m["day"]].groupby("index")["mg"].sum().reindex(visits.index, fill_value=0.0)
    np.testing.assert_allclose(out["mg_cumulative"].to_numpy(), cum.to_numpy(), rtol=1e-12, atol=1e-9)
    np.testing.assert_array_equal(out["ex_days_on"].to_numpy(), on.to_numpy(dtype=float))
    np.testing.assert_allclose(out["mg_current"].to_numpy(), now.to_numpy(), rtol=1e-12, atol=0)


@settings(max_examples=30, deadline=None)
@given(data=dosing())
def test_cumulative_matches_duckdb_interval_sql(data):
    """DuckDB: sum of dose x overlap of [start, end + 1) with (-inf, day + 1), per visit."""
    duckdb = pytest.importorskip("duckdb")
    visits, ex = data
    out = ex_run(visits, pfx.exposure("ex", dose="mg", start="start", end="end"), ex=ex)
    con = duckdb.connect()
    con.register("v", visits.reset_index())
    con.register("e", ex)
    want = con.execute("""
        SELECT v.index AS i, COALESCE(SUM(e.mg * GREATEST(0, LEAST(e."end" + 1, v.day + 1) - e.start)), 0) AS cum
        FROM v LEFT JOIN e ON e.pid = v.pid GROUP BY v.index ORDER BY v.index""").df()
    np.testing.assert_allclose(out["mg_cumulative"].to_numpy(), want["cum"].to_numpy(), rtol=1e-12, atol=1e-9)


@settings(max_examples=30, deadline=None)
@given(data=dosing(), span=st.integers(1, 20))
def test_table_window_matches_duckdb_range_join(data, span):
    """DuckDB: count and sum of records with start in (day - span, day], per visit."""
    duckdb = pytest.importorskip("duckdb")
    visits, ex = data
    out = ex_run(visits, pfx.table_window("ex", time="start", span=span),
                 pfx.table_window("ex", "mg", "sum", time="start", span=span, min_valid=0), ex=ex)
    con = duckdb.connect()
    con.register("v", visits.reset_index())
    con.register("e", ex)
    want = con.execute(f"""
        SELECT v.index AS i, COUNT(e.mg) AS n, COALESCE(SUM(e.mg), 0) AS s FROM v LEFT JOIN e
        ON e.pid = v.pid AND e.start > v.day - {span} AND e.start <= v.day GROUP BY v.index ORDER BY v.index""").df()
    np.testing.assert_array_equal(out[f"ex_count_{span}"].to_numpy(), want["n"].to_numpy())
    np.testing.assert_allclose(out[f"mg_sum_{span}"].to_numpy(), want["s"].to_numpy(), rtol=1e-12, atol=1e-12)


@settings(max_examples=30, deadline=None)
@given(data=dosing())
def test_first_and_last_dose_match_duckdb_group_by(data):
    duckdb = pytest.importorskip("duckdb")
    visits, ex = data
    out = ex_run(visits, pfx.first_dose("ex", start="start"), pfx.last_dose("ex", start="start", end="end"), ex=ex)
    con = duckdb.connect()
    con.register("v", visits.reset_index())
    con.register("e", ex)
    want = con.execute("""SELECT v.index AS i, MIN(e.start) AS f, MAX(e."end") AS l FROM v LEFT JOIN e
                          ON e.pid = v.pid GROUP BY v.index ORDER BY v.index""").df()
    np.testing.assert_array_equal(out["ex_first_dose"].to_numpy(dtype=float), want["f"].to_numpy(dtype=float))
    np.testing.assert_array_equal(out["ex_last_dose"].to_numpy(dtype=float), want["l"].to_numpy(dtype=float))
