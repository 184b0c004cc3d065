"""rolling() against two general-purpose reference engines: DuckDB window SQL and pandas' rolling.

The data are an invented home blood-pressure diary (generated below, no real people):
irregular reading days, some readings missing.  Each check names its source beside it.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import panelfx as pfx

duckdb = pytest.importorskip("duckdb")

STATS = ["mean", "sum", "min", "max", "std", "count", "median"]
#: rolling() statistic -> DuckDB aggregate (stddev_samp: divisor n - 1, like ours).
SQL = {"mean": "avg", "sum": "sum", "min": "min", "max": "max", "std": "stddev_samp", "count": "count",
       "median": "median"}


@pytest.fixture(scope="module")
def diary() -> pd.DataFrame:
    """Invented: 120 people reading their blood pressure at home on irregular days."""
    rng = np.random.default_rng(20240611)
    sizes = rng.integers(1, 25, 120)
    pid = np.repeat(np.arange(1, 121), sizes)
    gap = rng.integers(1, 45, pid.size)
    first = np.r_[0, np.cumsum(sizes)[:-1]]
    day = np.cumsum(gap)
    day = day - np.repeat(day[first] - gap[first], sizes)  # each person starts on their own day
    sbp = np.round(rng.normal(135, 14, pid.size), 1)
    sbp[rng.random(pid.size) < 0.15] = np.nan
    frame = pd.DataFrame({"pid": pid, "day": day.astype(np.int64), "sbp": sbp})
    frame["date"] = pd.Timestamp("2023-01-01") + pd.to_timedelta(frame["day"], unit="D")
    # Shuffle the rows: derive must hand results back in this order.
    return frame.sample(frac=1.0, random_state=3).reset_index(drop=True).rename_axis("row").reset_index()


def duck(frame: pd.DataFrame, frame_clause: str, order: str) -> pd.DataFrame:
    """Every statistic over one DuckDB window, by row id.  NaN in a pandas float column
    reaches DuckDB as NULL, which its aggregates skip (the count check below confirms it)."""
    con = duckdb.connect()
    con.register("diary", frame)
    cols = ", ".join(f"{SQL[s]}(sbp) OVER w AS {s}" for s in STATS)
    sql = (f"SELECT row, {cols} FROM diary "
           f"WINDOW w AS (PARTITION BY pid ORDER BY {order} {frame_clause}) ORDER BY row")
    return con.sql(sql).df().set_index("row")


def ours(frame: pd.DataFrame, time: str, **window) -> pd.DataFrame:
    out = pfx.derive(frame, *(pfx.rolling("sbp", s, name=s, **window) for s in STATS), id="pid", time=time)
    return out.set_index("row")[STATS]


def assert_same(got: pd.DataFrame, want: pd.DataFrame, rtol: float = 1e-9) -> None:
    for s in STATS:
        np.testing.assert_allclose(got[s].to_numpy(dtype="float64"), want.loc[got.index, s].to_numpy(dtype="float64"),
                                   rtol=rtol, atol=1e-9, err_msg=s)


# ------------------------------------------------------------------------------- DuckDB
# Source: DuckDB window functions (duckdb Python package).  A RANGE frame
# "BETWEEN s PRECEDING AND CURRENT ROW" is closed at both ends, [t - s, t]; numeric
# offsets need a numeric ORDER BY column, INTERVAL offsets a timestamp.
def test_duckdb_range_frame_numeric_days(diary):
    want = duck(diary, "RANGE BETWEEN 90 PRECEDING AND CURRENT ROW", "day")
    assert_same(ours(diary, "day", span=90, closed="both"), want)


def test_duckdb_range_frame_interval_on_timestamps(diary):
    # Source: DuckDB RANGE frame with INTERVAL 90 DAY on a TIMESTAMP column (naive times:
    # a tz-aware TIMESTAMPTZ would add calendar days in the session's zone).
    want = duck(diary, "RANGE BETWEEN INTERVAL 90 DAY PRECEDING AND CURRENT ROW", "date")
    assert_same(ours(diary, "date", span="90D", closed="both"), want)


def test_duckdb_range_frame_excluding_the_current_row(diary):
    # Source: DuckDB frame EXCLUDE CURRENT ROW (SQL:2011 frame exclusion).
    want = duck(diary, "RANGE BETWEEN 30 PRECEDING AND CURRENT ROW EXCLUDE CURRENT ROW", "day")
    assert_same(ours(diary, "day", span=30, closed="both", exclude_current=True), want)


def test_duckdb_rows_frame_last_occasions(diary):
    # Source: DuckDB ROWS frames; partial windows at a subject's start, like ours.
    want = duck(diary, "ROWS BETWEEN 2 PRECEDING AND CURRENT ROW", "day")
    assert_same(ours(diary, "day", occasions=3), want)


def test_duckdb_rows_frame_before_the_current_occasion(diary):
    # Source: DuckDB ROWS BETWEEN 4 PRECEDING AND 1 PRECEDING: the 4 occasions before.
    want = duck(diary, "ROWS BETWEEN 4 PRECEDING AND 1 PRECEDING", "day")
    assert_same(ours(diary, "day", occasions=4, exclude_current=True), want)


def test_duckdb_rows_frame_history_so_far(diary):
    # Source: DuckDB ROWS BETWEEN UNBOUNDED PRECEDING AND CURRENT ROW (running statistics).
    want = duck(diary, "ROWS BETWEEN UNBOUNDED PRECEDING AND CURRENT ROW", "day")
    assert_same(ours(diary, "date"), want)


# ------------------------------------------------------------------------------- pandas
def pandas_rolling(frame: pd.DataFrame, make) -> pd.DataFrame:
    """pandas' own rolling per person, in time order, brought back to the frame's rows.

    Results come indexed by (pid, date), unique in a panel, which maps back to the rows."""
    ordered = frame.sort_values(["pid", "date"]).set_index("date")
    row = ordered.set_index("pid", append=True).swaplevel()["row"]
    out = {s: getattr(make(ordered.groupby("pid"))["sbp"], s)() for s in STATS}
    return pd.DataFrame(out).set_axis(row.loc[out["mean"].index].to_numpy())


@pytest.mark.parametrize("closed", ["right", "both", "left", "neither"])
def test_pandas_time_based_rolling(diary, closed):
    # Source: pandas DataFrameGroupBy.rolling("90D", closed=...) over a DatetimeIndex (the same
    # windows as rolling("90D", on="date")); its offset windows
    # default to closed="right", (t - 90D, t], and min_periods=1.
    want = pandas_rolling(diary, lambda g: g.rolling("90D", closed=closed))
    # pandas quirk: the count of a window holding no row at all (closed "left" / "neither"
    # at a person's first reading) is NaN there, 0 here (our count is never missing).
    want["count"] = want["count"].fillna(0)
    assert_same(ours(diary, "date", span="90D", closed=closed), want)


def test_pandas_rolling_by_rows(diary):
    # Source: pandas groupby().rolling(3, min_periods=1): the last 3 rows, partial at the start.
    want = pandas_rolling(diary, lambda g: g.rolling(3, min_periods=1))
    assert_same(ours(diary, "day", occasions=3), want)


def test_pandas_expanding_with_a_minimum(diary):
    # Source: pandas groupby().expanding(min_periods=3).  pandas also blanks the count below
    # the minimum; ours is never missing, so the count is compared where pandas gives one.
    want = pandas_rolling(diary, lambda g: g.expanding(min_periods=3))
    got = ours(diary, "day", min_valid=3)
    for s in STATS:
        g, w = got[s].to_numpy(dtype="float64"), want.loc[got.index, s].to_numpy(dtype="float64")
        if s == "count":
            assert (g[np.isnan(w)] < 3).all()
            g, w = g[~np.isnan(w)], w[~np.isnan(w)]
        np.testing.assert_allclose(g, w, rtol=1e-9, err_msg=s)
