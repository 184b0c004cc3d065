"""Edges of the value types: the behaviours engine v2 promises (spec items 1-13) and more.

Black-box tests: only the public API (``pfx.derive`` and the transform constructors, the
error classes).  Every expected value comes from something that shares no code with
panelfx: a hand computation (in the comment beside the check), Python's ``datetime`` /
``decimal`` / ``fractions``, or a plain per-subject Python loop written in this file.
"""

from __future__ import annotations

import datetime as dt
import math
import warnings
from decimal import Decimal
from fractions import Fraction

import numpy as np
import pandas as pd
import pyarrow as pa
import pytest
from hypothesis import Phase, given, settings
from hypothesis import strategies as st

import panelfx as pfx
import panelfx.errors as pxe

NAN = math.nan
INF = math.inf
BIG = 2**60

# Not in panelfx.errors before the rewrite: looked up here so the rest of the file still runs.
PrecisionError = getattr(pxe, "PrecisionError", None)


def run(df, *trs, **kw):
    return pfx.derive(df, *trs, id="pid", time="t", **kw)


def floats(out, name):
    return out[name].to_numpy(dtype="float64", na_value=np.nan)


def same(got, want):
    """Exact equality, NaN == NaN, and 0.0 != -0.0 (compares bits)."""
    got = np.asarray(got, dtype="float64")
    want = np.asarray(want, dtype="float64")
    assert got.shape == want.shape, (got, want)
    both_nan = np.isnan(got) & np.isnan(want)
    ok = both_nan | (got.view(np.int64) == want.view(np.int64))
    assert ok.all(), f"got {got.tolist()}, want {want.tolist()}"


def days(a: dt.date | dt.datetime, b: dt.date | dt.datetime) -> float:
    """(b - a) in days, by Python's datetime (independent of numpy and pandas)."""
    return (b - a) / dt.timedelta(days=1)


# ============================================================================ item 1
# Datetimes in any unit, full range: no conversion to nanoseconds.
FAR = [dt.datetime(1000, 1, 1), dt.datetime(2000, 1, 1), dt.datetime(9999, 12, 31)]


@pytest.mark.parametrize("unit", ["s", "ms", "us"])
@pytest.mark.parametrize("tz", [None, "UTC", "Asia/Kolkata"])
def test_item01_far_dates_order_and_difference_in_their_own_unit(unit, tz):
    t = pd.Series(np.array([np.datetime64(d, unit) for d in FAR]))
    if tz is not None:
        t = t.dt.tz_localize("UTC").dt.tz_convert(tz)  # same instants, shown in another zone
    # one subject, rows given newest first
    df = pd.DataFrame({"pid": 1, "t": t.iloc[::-1].set_axis([7, 8, 9]), "y": [3.0, 2.0, 1.0]}, index=[7, 8, 9])
    assert df["t"].dt.unit == unit
    out = run(df, pfx.occasion(), pfx.gap(), pfx.time_since_baseline(),
              pfx.lag("y", offset="36500D"), pfx.rolling("y", "count", span="36500D"),
              pfx.cumulative("y", "step"))
    g1 = days(FAR[0], FAR[1])  # 365242.0 by Python datetime
    g2 = days(FAR[1], FAR[2])  # 2921939.0 by Python datetime
    assert out["occasion"].tolist() == [3, 2, 1]
    same(floats(out, "gap"), [g2, g1, NAN])
    same(floats(out, "time_since_baseline"), [g1 + g2, g1, 0.0])
    # 2000-01-01 - 36500 days = 1900-01-25: latest occasion at or before it is 1000-01-01 (1.0);
    # 9999-12-31 - 36500 days is in 9900: latest occasion at or before it is 2000-01-01 (2.0)
    same(floats(out, "y_lag_36500d"), [2.0, 1.0, NAN])
    # (t - 36500 days, t] holds the occasion itself only
    assert out["y_count_36500d"].tolist() == [1, 1, 1]
    # step integral: 1.0 * g1, then + 2.0 * g2 (value held until the next occasion)
    same(floats(out, "y_cum_step"), [1.0 * g1 + 2.0 * g2, 1.0 * g1, 0.0])


@pytest.mark.skipif(int(pd.__version__.split(".")[0]) < 3,
                    reason="pandas 2 holds these Timestamps as objects it cannot convert: a typed error there")
def test_item01_default_pandas3_datetimes_before_1677():
    # pd.Timestamp('1500-01-01') is stored as datetime64[us] by pandas 3: a plain user frame.
    t = pd.Series([pd.Timestamp("1500-01-01"), pd.Timestamp("2024-01-01"), pd.Timestamp("1600-01-01")])
    df = pd.DataFrame({"pid": 1, "t": t, "y": [1.0, 3.0, 2.0]})
    out = run(df, pfx.occasion(), pfx.gap(), pfx.lag("y"))
    assert out["occasion"].tolist() == [1, 3, 2]
    # Python datetime: 1500-01-01 -> 1600-01-01 = 36524 days; 1600-01-01 -> 2024-01-01 = 154863 days
    same(floats(out, "gap"), [NAN, days(dt.date(1600, 1, 1), dt.date(2024, 1, 1)),
                              days(dt.date(1500, 1, 1), dt.date(1600, 1, 1))])
    same(floats(out, "y_lag1"), [NAN, 2.0, 1.0])


def test_item01_nanosecond_gap_longer_than_292_years():
    # Both dates lie inside the ns range, but their distance (584 years) exceeds 2**63 ns.
    df = pd.DataFrame({"pid": 1, "t": pd.to_datetime(["1678-01-01", "2262-01-01"]).as_unit("ns"),
                       "y": [1.0, NAN]})
    out = run(df, pfx.gap(), pfx.time_since_baseline(), pfx.carry_forward("y", max_span="3650D"),
              pfx.cumulative("y", restart_after="3650D", name="cum_restart"), pfx.cumulative("y", "step"))
    g = days(dt.date(1678, 1, 1), dt.date(2262, 1, 1))  # 213301.0 by Python datetime
    same(floats(out, "gap"), [NAN, g])
    same(floats(out, "time_since_baseline"), [0.0, g])
    same(floats(out, "y_locf"), [1.0, NAN])  # 213301 days is far more than 3650: not carried
    same(floats(out, "cum_restart"), [1.0, 0.0])  # gap > 3650 days: restarts, missing adds 0
    same(floats(out, "y_cum_step"), [0.0, 1.0 * g])


def test_item01_timedelta_seconds_full_range():
    # timedelta64[s] of +-2000 years: outside what int64 nanoseconds can hold.
    d = np.array([-730000, 0, 730000], dtype="int64") * 86400
    df = pd.DataFrame({"pid": 1, "t": pd.Series(d[::-1].astype("timedelta64[s]")), "y": [3.0, 2.0, 1.0]})
    out = run(df, pfx.occasion(), pfx.gap(), pfx.time_since_baseline())
    assert out["occasion"].tolist() == [3, 2, 1]
    same(floats(out, "gap"), [730000.0, 730000.0, NAN])  # by hand: 730000 days apart each
    same(floats(out, "time_since_baseline"), [1460000.0, 730000.0, 0.0])


def test_item01_reference_column_in_seconds_far_future():
    # Time and reference both datetime64[s] in the 24th-25th centuries.
    t = np.array(["2300-01-01", "2400-01-01", "2500-01-01"], dtype="datetime64[s]")
    df = pd.DataFrame({"pid": 1, "t": t, "y": [1.0, 2.0, 3.0],
                       "ref": np.array(["2400-01-01"] * 3, dtype="datetime64[s]")})
    out = run(df, pfx.baseline("y", "last_before", reference="ref"))
    same(floats(out, "y_baseline"), [2.0, 2.0, 2.0])  # last visit on or before 2400-01-01: 2.0


# ============================================================================ item 2
def test_item02_five_id_parts_with_65535_values_each_never_merge():
    n = 65_535
    k = np.arange(n)
    parts = {c: np.append(k, [1 if c == "a" else 0]) for c in "abcde"}
    # last row: (1, 0, 0, 0, 0), a subject of its own; row 0 is (0, 0, 0, 0, 0), row 1 (1, 1, 1, 1, 1)
    df = pd.DataFrame({**parts, "t": np.append(np.zeros(n, dtype=np.int64), 1), "y": np.arange(n + 1.0)})
    out = pfx.derive(df, pfx.occasion(), pfx.lag("y"), id=list("abcde"), time="t")
    assert out["occasion"].iloc[-1] == 1  # by hand: its only occasion
    assert math.isnan(out["y_lag1"].iloc[-1])
    assert (out["occasion"] == 1).all() and out["y_lag1"].isna().all()  # every subject has one row


# ============================================================================ item 3
@pytest.mark.parametrize("dtype", ["int64", "uint64", "Int64"])
def test_item03_integer_times_beyond_2_53_are_distinct(dtype):
    t = pd.array([BIG + 2, BIG, BIG + 1], dtype=dtype)
    df = pd.DataFrame({"pid": 1, "t": t, "y": [3.0, 1.0, 2.0]})
    out = run(df, pfx.occasion(), pfx.gap(), pfx.time_since_baseline(), pfx.lag("y", offset=1),
              pfx.rolling("y", "count", span=1), pfx.change_from_previous("y", "rate"))
    assert out["occasion"].tolist() == [3, 1, 2]
    same(floats(out, "gap"), [1.0, NAN, 1.0])  # by hand: consecutive integers
    same(floats(out, "time_since_baseline"), [2.0, 0.0, 1.0])
    same(floats(out, "y_lag_1"), [2.0, NAN, 1.0])
    assert out["y_count_1"].tolist() == [1, 1, 1]  # (t - 1, t] holds t only
    same(floats(out, "y_rate"), [1.0, NAN, 1.0])  # (3 - 2) / 1, (2 - 1) / 1


def test_item03_duration_wider_than_int64_is_correctly_rounded():
    lo, hi = -(2**62) - 1, 2**62 + 1
    df = pd.DataFrame({"pid": 1, "t": np.array([lo, hi], dtype=np.int64), "y": [1.0, 2.0]})
    out = run(df, pfx.gap(), pfx.time_since_baseline())
    # Python int arithmetic: hi - lo = 2**63 + 2, rounded to float64 by float()
    want = float(hi - lo)
    same(floats(out, "gap"), [NAN, want])
    same(floats(out, "time_since_baseline"), [0.0, want])


def test_item03_duration_beyond_2_53_rounded_once():
    df = pd.DataFrame({"pid": 1, "t": np.array([-100, BIG + 100], dtype=np.int64), "y": [1.0, 2.0]})
    out = run(df, pfx.gap())
    # exact difference 2**60 + 200, correctly rounded by Python's float(int): 2**60 + 256
    # (rounding each time first would give 2**60 + 100 -> 2**60)
    assert float(BIG + 200) == float(BIG + 256)
    same(floats(out, "gap"), [NAN, float(BIG + 200)])


# ============================================================================ item 4
def test_item04_lag_baseline_carry_forward_keep_big_integers_exact():
    x = np.array([BIG + 1, BIG + 3, BIG + 8], dtype=np.int64)
    df = pd.DataFrame({"pid": 1, "t": [0, 1, 2], "x": x, "xn": pd.array([BIG + 1, None, BIG + 8], dtype="Int64")})
    out = run(df, pfx.baseline("x"), pfx.carry_forward("x"), pfx.lag("xn"), pfx.carry_forward("xn"),
              pfx.baseline("xn", "last_before", reference=1))
    assert out["x_baseline"].dtype == np.int64 and out["x_baseline"].tolist() == [BIG + 1] * 3
    assert out["x_locf"].dtype == np.int64 and out["x_locf"].tolist() == [BIG + 1, BIG + 3, BIG + 8]
    assert out["xn_lag1"].dtype == "Int64" and out["xn_lag1"].tolist() == [pd.NA, BIG + 1, pd.NA]
    assert out["xn_locf"].tolist() == [BIG + 1, BIG + 1, BIG + 8]
    assert out["xn_baseline"].tolist() == [BIG + 1] * 3  # last non-missing value at t <= 1: t = 0


@pytest.mark.parametrize("dtype", ["int64", "Int64", "int64[pyarrow]"])
def test_item04_differences_of_big_integers_are_exact(dtype):
    vals = [BIG + 1, BIG + 3, BIG + 8, -BIG]
    df = pd.DataFrame({"pid": 1, "t": [0, 1, 2, 3], "x": pd.array(vals, dtype=dtype)})
    out = run(df, pfx.change_from_previous("x"), pfx.change_from_baseline("x"),
              pfx.change_from_previous("x", skip_missing=True, name="d2"))
    # Python ints, then float(): 2, 5, -(2**61 + 8) rounded
    same(floats(out, "x_diff"), [NAN, 2.0, 5.0, float(-BIG - (BIG + 8))])
    same(floats(out, "d2"), [NAN, 2.0, 5.0, float(-BIG - (BIG + 8))])
    same(floats(out, "x_change"), [0.0, 2.0, 7.0, float(-BIG - (BIG + 1))])


@pytest.mark.parametrize("dtype, vals, want", [
    # small integer types must not wrap: Python ints by hand
    ("int8", [100, -100, 127, -128], [NAN, -200.0, 227.0, -255.0]),
    ("uint8", [0, 255, 1, 0], [NAN, 255.0, -254.0, -1.0]),
    ("uint64", [2**64 - 1, 0, 2**63 + 1, 2**63 + 3], [NAN, float(-(2**64 - 1)), float(2**63 + 1), 2.0]),
])
def test_item04_differences_of_small_and_unsigned_integers_do_not_wrap(dtype, vals, want):
    df = pd.DataFrame({"pid": 1, "t": [0, 1, 2, 3], "x": np.array(vals, dtype=dtype)})
    out = run(df, pfx.change_from_previous("x"), pfx.change_from_baseline("x"))
    same(floats(out, "x_diff"), want)
    base = vals[0]
    same(floats(out, "x_change"), [float(v - base) for v in vals])  # Python ints


PRECISION_CASES = [
    pfx.cumulative("x"), pfx.cumulative("x", "step"), pfx.rolling("x", "sum"), pfx.rolling("x", "mean", occasions=2),
    pfx.rolling("x", "max", span=5), pfx.change_from_previous("x", "percent"), pfx.change_from_previous("x", "rate"),
    pfx.change_from_baseline("x", "percent"), pfx.change_from_baseline("x", "ratio"), pfx.within_between("x"),
]


@pytest.mark.parametrize("tr", PRECISION_CASES, ids=lambda tr: repr(tr)[:60])
def test_item04_other_numeric_use_of_big_integers_raises_precision_error(tr):
    # |v| > 2**53 on 3 rows of subjects 1 and 2; exactly 2**53 (subject 3) is exact and does not count.
    df = pd.DataFrame({"pid": [1, 1, 2, 2, 3, 3], "t": [0, 1, 0, 1, 0, 1],
                       "x": np.array([BIG, 5, 2**53 + 1, -(2**60), 2**53, -(2**53)], dtype=np.int64)})
    assert PrecisionError is not None, "panelfx.errors.PrecisionError does not exist"
    assert issubclass(PrecisionError, pfx.ColumnTypeError) and issubclass(PrecisionError, TypeError)
    with pytest.raises(PrecisionError) as info:
        run(df, tr)
    assert info.value.column == "x" and info.value.count == 3
    assert set(info.value.ids) == {1, 2}


def test_item04_big_integers_in_unsigned_and_nullable_columns_also_raise():
    assert PrecisionError is not None, "panelfx.errors.PrecisionError does not exist"
    for x in (np.array([1, 2**63 + 5], dtype=np.uint64), pd.array([None, BIG], dtype="Int64")):
        df = pd.DataFrame({"pid": 9, "t": [0, 1], "x": x})
        with pytest.raises(PrecisionError) as info:
            run(df, pfx.cumulative("x"))
        assert info.value.column == "x" and info.value.count == 1 and info.value.ids == [9]


# ============================================================================ item 5
def _naive_and_aware():
    naive = pd.to_datetime(["2024-01-01", "2024-01-05"])
    return naive, naive.tz_localize("UTC")


@pytest.mark.parametrize("time_aware", [False, True])
@pytest.mark.parametrize("make", [
    lambda: pfx.baseline("y", "last_before", reference="ref"),
    lambda: pfx.change_from_baseline("y", rule="last_before", reference="ref"),
])
def test_item05_naive_time_against_aware_reference_is_an_error(time_aware, make):
    naive, aware = _naive_and_aware()
    t, ref = (aware, naive) if time_aware else (naive, aware)
    df = pd.DataFrame({"pid": 1, "t": t, "y": [1.0, 2.0], "ref": ref[[1, 1]]})
    with pytest.raises(pfx.TimeTypeError) as info:
        run(df, make())
    assert info.value.column == "ref" and "ref" in str(info.value)


def test_item05_aware_columns_in_different_zones_compare_as_instants():
    t = pd.to_datetime(["2024-03-01 00:00", "2024-03-01 12:00", "2024-03-02 00:00"]).tz_localize("UTC")
    # 2024-03-01 21:00 in Tokyo (UTC+9) is 12:00 UTC: exactly the second visit, so it counts (on or before)
    ref = pd.Series([pd.Timestamp("2024-03-01 21:00", tz="Asia/Tokyo")] * 3)
    df = pd.DataFrame({"pid": 1, "t": t, "y": [1.0, 2.0, 3.0], "ref": ref})
    out = run(df, pfx.baseline("y", "last_before", reference="ref"))
    same(floats(out, "y_baseline"), [2.0, 2.0, 2.0])


# ============================================================================ item 6
def test_item06_decimal_hours_rolling_window():
    df = pd.DataFrame({"pid": 1, "t": [0.1, 0.2, 0.3], "y": [1.0, 2.0, 4.0]})
    out = run(df, pfx.rolling("y", "count", span=0.2), pfx.rolling("y", "sum", span=0.2))
    # Decimal: window (t - 0.2, t]; at 0.3 -> (0.1, 0.3] holds 0.2, 0.3; at 0.2 -> (0.0, 0.2] holds 0.1, 0.2
    assert out["y_count_0p2"].tolist() == [1, 2, 2]
    same(floats(out, "y_sum_0p2"), [1.0, 3.0, 6.0])


def test_item06_decimal_lag_by_time():
    df = pd.DataFrame({"pid": 1, "t": [0.1, 0.3, 0.4], "y": [1.0, 3.0, 4.0]})
    out = run(df, pfx.lag("y", offset=0.2), pfx.lag("y", offset=0.3, tolerance=0.0, name="l3"))
    # Decimal: 0.3 - 0.2 = 0.1 -> value at 0.1; 0.4 - 0.2 = 0.2 -> latest at or before: 0.1
    same(floats(out, "y_lag_0p2"), [NAN, 1.0, 1.0])
    # 0.4 - 0.3 = 0.1 exactly, tolerance 0 keeps a source exactly there; 0.3 - 0.3 = 0.0: none
    same(floats(out, "l3"), [NAN, NAN, 1.0])


def test_item06_decimal_limits():
    df = pd.DataFrame({"pid": 1, "t": [0.1, 0.4, 0.8], "y": [1.0, NAN, 5.0]})
    out = run(df, pfx.carry_forward("y", max_span=0.3), pfx.cumulative("y", restart_after=0.3),
              pfx.lag("y", offset=0.1, tolerance=0.2, name="tol"))
    same(floats(out, "y_locf"), [1.0, 1.0, 5.0])  # 0.4 - 0.1 = 0.3 <= 0.3: carried
    same(floats(out, "y_cum"), [1.0, 1.0, 5.0])  # gap 0.3 (not longer): no restart; gap 0.4: restart
    # at 0.4: target 0.3, latest at or before is 0.1, exactly 0.2 older than the target: kept
    same(floats(out, "tol"), [NAN, 1.0, NAN])  # at 0.8: target 0.7 -> 0.4, older than 0.7 - 0.2: dropped


def test_item06_integer_times_with_decimal_span():
    t = np.array([10**16, 10**16 + 2, 10**16 + 3], dtype=np.int64)
    df = pd.DataFrame({"pid": 1, "t": t, "y": [1.0, 2.0, 4.0]})
    out = run(df, pfx.rolling("y", "count", span=2.5), pfx.lag("y", offset=2.5),
              pfx.rolling("y", "count", span=2.0, closed="both", name="both2"))
    # (t - 2.5, t]: at 1e16+2 -> (1e16 - 0.5, ...] holds 1e16 and 1e16+2; at 1e16+3 -> (1e16+0.5, ...]: 2 rows
    assert out["y_count_2p5"].tolist() == [1, 2, 2]
    # at 1e16+3: latest at or before 1e16+0.5 is 1e16; at 1e16+2: at or before 1e16-0.5: none
    same(floats(out, "y_lag_2p5"), [NAN, NAN, 1.0])
    assert out["both2"].tolist() == [1, 2, 2]  # [t-2, t]: 1e16+2 reaches back to 1e16 exactly


def test_item06_other_floats_compare_exactly_in_binary():
    # 4/3 and 3/7 have no short decimal form.  b = fl(4/3 + 3/7) exceeds 4/3 + 3/7 slightly:
    a, s = 4 / 3, 3 / 7
    b = a + s
    gap = Fraction(b) - Fraction(s) - Fraction(a)  # fractions: b - s - a = 2**-54 > 0, so a < b - s
    assert gap > 0
    df = pd.DataFrame({"pid": 1, "t": [a, b], "y": [1.0, NAN]})
    out = run(df, pfx.rolling("y", "count", span=s, closed="both", name="both"),
              pfx.lag("y", offset=s, tolerance=0.0, name="exact"), pfx.carry_forward("y", max_span=s))
    assert out["both"].tolist() == [1, 0]  # [b - s, b] holds only b (y missing there): a is not reached
    same(floats(out, "exact"), [NAN, NAN])  # a is older than b - s: tolerance 0 drops it
    same(floats(out, "y_locf"), [1.0, NAN])  # b - a > s: not carried


# ============================================================================ item 7
def test_item07_lag_offset_saturates_near_lower_bound():
    t = pd.to_datetime(["1677-09-22", "1677-09-23", "2000-01-01"]).as_unit("ns")
    df = pd.DataFrame({"pid": 1, "t": t, "y": [1.0, 2.0, 3.0]})
    out = run(df, pfx.lag("y", offset="36500D"), pfx.lag("y", offset="36500D", tolerance="36500D", name="tol"),
              pfx.rolling("y", "count", span="36500D"))
    # 1677 - 100 years is before any representable ns time: no occasion that early
    # 2000-01-01 - 36500 days = 1900-01-25 (Python datetime): latest at or before is 1677-09-23 (2.0)
    assert dt.date(2000, 1, 1) - dt.timedelta(days=36500) == dt.date(1900, 1, 25)
    same(floats(out, "y_lag_36500d"), [NAN, NAN, 2.0])
    # tolerance: 1677-09-23 is 81207 days older than 1900-01-25 (Python dates), more than 36500: dropped
    same(floats(out, "tol"), [NAN, NAN, NAN])
    assert out["y_count_36500d"].tolist() == [1, 2, 1]


def test_item07_huge_span_strings_are_spans():
    # 1,000,000 days (about 2738 years) is longer than any nanosecond time range: the whole history.
    t = pd.to_datetime(["2000-01-01", "2001-01-01", "2002-01-01"])
    for unit in ("ns", "s"):
        df = pd.DataFrame({"pid": 1, "t": t.as_unit(unit), "y": [1.0, NAN, 4.0]})
        out = run(df, pfx.rolling("y", "sum", span="1000000D"), pfx.lag("y", offset="1000000D"),
                  pfx.carry_forward("y", max_span="1000000D"))
        same(floats(out, "y_sum_1000000d"), [1.0, 1.0, 5.0])  # running sums by hand, missing skipped
        same(floats(out, "y_lag_1000000d"), [NAN, NAN, NAN])  # nothing 2738 years earlier
        same(floats(out, "y_locf"), [1.0, 1.0, 4.0])  # carried one year, far less than the limit


# ============================================================================ item 8
def test_item08_running_sum_recovers_after_overflow():
    df = pd.DataFrame({"pid": 1, "t": [0, 1, 2, 3], "y": [1e308, 1e308, -1e308, 1.0]})
    out = run(df, pfx.cumulative("y"))
    # spec: intermediate 2e308 overflows (inf shown), 2e308 - 1e308 = 1e308 is representable again,
    # 1e308 + 1.0 rounds to 1e308
    same(floats(out, "y_cum"), [1e308, INF, 1e308, 1e308])


def test_item08_rolling_sums_after_overflow():
    df = pd.DataFrame({"pid": 1, "t": [0, 1, 2, 3], "y": [1e308, 1e308, -1e308, 1.0]})
    out = run(df, pfx.rolling("y", "sum", occasions=2))
    # windows by hand: [1e308], [1e308, 1e308] = inf, [1e308, -1e308] = 0.0, [-1e308, 1.0] = -1e308
    same(floats(out, "y_sum_2occ"), [1e308, INF, 0.0, -1e308 + 1.0])


def test_item08_long_windows_after_overflow_are_not_nan():
    y = [1e308, 1e308, -1e308, 1.0, 2.0, 3.0, 4.0, 5.0]
    df = pd.DataFrame({"pid": 1, "t": range(8), "y": y})
    out = run(df, pfx.rolling("y", "sum", occasions=6), pfx.rolling("y", "mean", occasions=6))
    # sequential float sums of the last two windows (Python floats): they hold no overflowing pair
    w6 = 0.0
    for v in y[1:7]:
        w6 += v  # 1e308 - 1e308 + 1 + 2 + 3 + 4 = 10.0
    w7 = 0.0
    for v in y[2:8]:
        w7 += v  # -1e308 + 1 + ... + 5 = -1e308
    assert (w6, w7) == (10.0, -1e308)
    same(floats(out, "y_sum_6occ")[6:], [w6, w7])
    same(floats(out, "y_mean_6occ")[6:], [w6 / 6, w7 / 6])


# ============================================================================ item 9
def test_item09_offset_below_float_spacing():
    df = pd.DataFrame({"pid": 1, "t": [1e16, 1e16 + 2], "y": [1.0, 2.0]})
    out = run(df, pfx.lag("y", offset=0.5))
    # 1e16 + 2 - 0.5 is between the two times (spacing of floats there is 2): the value at 1e16
    same(floats(out, "y_lag_0p5"), [NAN, 1.0])


@pytest.mark.parametrize("offset", [0.5, 1e-300, 5e-324])
def test_item09_lag_by_offset_never_returns_the_row_itself(offset):
    df = pd.DataFrame({"pid": 1, "t": [1.0, 1e16, 1e300], "y": [1.0, 2.0, 3.0]})
    out = run(df, pfx.lag("y", offset=offset, name="l"))
    # each row's own time is later than t - offset; the previous occasion is the latest before it
    same(floats(out, "l"), [NAN, 1.0, 2.0])


# ============================================================================ item 10
def loop_running_sum(values):
    """Plain Python: s = 0.0; s += v over non-missing values, reported on every row."""
    s = 0.0
    out = []
    for v in values:
        if not math.isnan(v):
            s += v
        out.append(s)
    return out


def test_item10_running_sum_is_the_plain_loop_bit_for_bit():
    # two subjects; -0.0 alone sums to +0.0 in the loop (0.0 + -0.0 == +0.0)
    y = [0.1, 0.2, 0.3, 1e16, 1.0, -1e16, NAN, -0.0, -0.0, 1e-300]
    df = pd.DataFrame({"pid": [1] * 7 + [2] * 3, "t": list(range(7)) + [0, 1, 2], "y": y})
    out = run(df, pfx.cumulative("y"))
    same(floats(out, "y_cum"), loop_running_sum(y[:7]) + loop_running_sum(y[7:]))


def test_item10_subject_after_huge_subjects_is_unchanged():
    small = pd.DataFrame({"pid": 9, "t": [0, 1, 2, 3], "y": [0.1, 0.7, 1e-3, 3.3]})
    big = pd.DataFrame({"pid": np.repeat(np.arange(8), 3), "t": np.tile([0, 1, 2], 8),
                        "y": np.tile([1e300, -1e300, 3e299], 8) * np.repeat([1, -1] * 4, 3)})
    mid = pd.DataFrame({"pid": 20, "t": [0, 1], "y": [1e12, -1e12 + 1]})
    trs = [pfx.cumulative("y"), pfx.rolling("y", "sum", occasions=3), pfx.rolling("y", "mean", span=2),
           pfx.rolling("y", "var"), pfx.within_between("y")]
    alone = run(small, *trs)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # var of the 1e300 subjects overflows: not checked
        together = run(pd.concat([big, mid, small], ignore_index=True), *trs).iloc[-4:]
    for name in alone.columns[3:]:
        same(floats(together, name), floats(alone, name))
    same(floats(alone, "y_cum"), loop_running_sum([0.1, 0.7, 1e-3, 3.3]))


def test_item10_running_sum_of_a_tiny_first_value_after_another_subject():
    df = pd.DataFrame({"pid": [1, 1, 1, 2, 2], "t": [0, 1, 2, 0, 1], "y": [0.1, 0.1, -0.7, 1e-200, 1.0]})
    out = run(df, pfx.cumulative("y"))
    # plain loop per subject: subject 2 starts at its own value 1e-200, then 1e-200 + 1.0 = 1.0
    same(floats(out, "y_cum"), loop_running_sum([0.1, 0.1, -0.7]) + loop_running_sum([1e-200, 1.0]))
    assert floats(out, "y_cum")[3] == 1e-200


def test_item10_window_variance_does_not_depend_on_other_subjects():
    a = pd.DataFrame({"pid": 1, "t": [0, 100, 101], "y": [1e300, 1.0, 3.0]})
    b = pd.DataFrame({"pid": 2, "t": [0, 1, 2, 3, 4, 5], "y": [1.0, 2.0, 3.0, 4.0, 5.0, 6.0]})
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # windows holding 1e300 may overflow; not checked here
        alone = run(a, pfx.rolling("y", "var", span=10))
        together = run(pd.concat([b, a], ignore_index=True), pfx.rolling("y", "var", span=10)).iloc[-3:]
    # at t = 101 the window (91, 101] holds 1.0 and 3.0: sample variance ((1-2)^2 + (3-2)^2) / 1 = 2.0
    assert floats(alone, "y_var_10")[2] == 2.0
    same(floats(together, "y_var_10"), floats(alone, "y_var_10"))


def _property_transforms(datetime_time: bool):
    s = (lambda k: f"{k}D") if datetime_time else (lambda k: k)
    return [
        pfx.lag("y"), pfx.lag("y", offset=s(3)), pfx.lag("y", offset=s(2), tolerance=s(1), name="lag_tol"),
        *(pfx.rolling("y", stat, occasions=3) for stat in ("sum", "mean", "var", "min", "max", "median")),
        *(pfx.rolling("y", stat, span=s(4)) for stat in ("sum", "mean", "var", "min", "max", "median")),
        pfx.rolling("y", "sum"), pfx.rolling("y", "std", span=s(5), closed="both"),
        pfx.cumulative("y"), pfx.cumulative("y", "step"), pfx.cumulative("y", "trapezoid"),
        pfx.cumulative("y", "step", restart_after=s(3), name="step_restart"),
        pfx.change_from_previous("y"), pfx.change_from_previous("y", "rate", skip_missing=True),
        pfx.change_from_baseline("y"), pfx.change_from_baseline("y", "percent"),
        pfx.carry_forward("y"), pfx.carry_forward("y", max_span=s(2), name="cf2"),
        pfx.within_between("y"), pfx.time_since_baseline(), pfx.gap(),
    ]


VALUES = st.one_of(
    st.sampled_from([1e300, -1e300, 3e299, 1e-300, -1e-300, 5e-324, NAN, 0.0, -0.0, 1e12, 0.1, 1.0]),
    st.floats(min_value=-1e6, max_value=1e6, allow_nan=False),
    st.floats(allow_nan=False, allow_infinity=False, min_value=-1e300, max_value=1e300),
)


@st.composite
def panels(draw):
    n_subj = draw(st.integers(1, 5))
    pids = draw(st.lists(st.integers(-50, 10**6), min_size=n_subj, max_size=n_subj, unique=True))
    rows = []
    for pid in pids:
        times = draw(st.lists(st.integers(0, 40), min_size=1, max_size=7, unique=True))
        for t in times:
            rows.append((pid, t, draw(VALUES)))
    datetime_time = draw(st.booleans())
    df = pd.DataFrame(rows, columns=["pid", "t", "y"])
    if datetime_time:
        # whole days, or a few hours off whole days (other tick sizes), far from 1970
        hours = draw(st.sampled_from([0, 6]))
        df["t"] = pd.Timestamp("2150-06-01") + pd.to_timedelta(df["t"] * 24 + (df["t"] % 3) * hours, unit="h")
    df.index = pd.Index(draw(st.permutations(range(len(df))))) * 3 + 100  # labels unrelated to order
    perm = draw(st.permutations(range(len(df))))
    return df, datetime_time, perm


def _derive_quiet(df, trs):
    # Overflow warnings (squares of 1e300) are pinned by item 8's tests; here only values matter.
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        return run(df, *trs)


def _assert_rows_identical(a: pd.DataFrame, b: pd.DataFrame, cols):
    b = b.loc[a.index]
    for c in cols:
        if a[c].dtype.kind == "f":
            try:
                same(floats(b, c), floats(a, c))
            except AssertionError as err:
                raise AssertionError(f"column {c}: {err}") from None
        else:
            assert a[c].tolist() == b[c].tolist(), c


# No shrinking phase: a failing example is reported at once instead of after a long search.
@settings(max_examples=50, deadline=None, phases=[Phase.explicit, Phase.reuse, Phase.generate])
@given(case=panels())
def test_item10_row_order_and_other_subjects_do_not_change_a_bit(case):
    df, datetime_time, perm = case
    trs = _property_transforms(datetime_time)
    ordered = df.sort_values(["pid", "t"])
    base = _derive_quiet(ordered, trs)
    cols = list(base.columns[3:])
    for variant in (ordered.iloc[::-1], df.iloc[list(perm)], df):
        _assert_rows_identical(base, _derive_quiet(variant, trs), cols)
    for pid, sub in df.groupby("pid", sort=False):
        alone = _derive_quiet(sub, trs)
        _assert_rows_identical(alone, base, cols)
        # the running sum is the plain loop, bit for bit (few values: no overflow here)
        in_order = ordered[ordered["pid"] == pid]
        same(floats(base.loc[in_order.index], "y_cum"), loop_running_sum(in_order["y"].tolist()))


# ============================================================================ item 11
def test_item11_date_objects_as_time_column():
    d = [dt.date(2024, 3, 1), dt.date(2024, 1, 1), dt.date(2024, 1, 31)]
    df = pd.DataFrame({"pid": 1, "t": pd.Series(d, dtype=object), "y": [3.0, 1.0, 2.0]})
    out = run(df, pfx.occasion(), pfx.gap(), pfx.lag("y", offset="30D"), pfx.rolling("y", "sum", span="30D"))
    assert out["occasion"].tolist() == [3, 1, 2]
    same(floats(out, "gap"), [days(d[2], d[0]), NAN, days(d[1], d[2])])  # 30.0, 30.0 by datetime
    # 2024-03-01 - 30 days = 2024-01-31 (on an occasion, included); 2024-01-31 - 30 = 2024-01-01
    same(floats(out, "y_lag_30d"), [2.0, NAN, 1.0])
    same(floats(out, "y_sum_30d"), [3.0, 1.0, 2.0])  # (t - 30D, t]: the edge occasion is left out


@pytest.mark.parametrize("time_kind", ["datetime", "date_objects", "date32"])
@pytest.mark.parametrize("ref_kind", ["date_objects", "date32"])
def test_item11_date_reference_columns(time_kind, ref_kind):
    d = [dt.date(2024, 1, 1), dt.date(2024, 1, 10), dt.date(2024, 1, 20)]
    t = {"datetime": pd.Series(pd.to_datetime(d)),
         "date_objects": pd.Series(d, dtype=object),
         "date32": pd.Series(d, dtype=pd.ArrowDtype(pa.date32()))}[time_kind]
    r = [dt.date(2024, 1, 10)] * 3
    ref = pd.Series(r, dtype=object) if ref_kind == "date_objects" else pd.Series(r, dtype=pd.ArrowDtype(pa.date32()))
    df = pd.DataFrame({"pid": 1, "t": t, "y": [1.0, 2.0, 3.0], "ref": ref})
    out = run(df, pfx.baseline("y", "last_before", reference="ref"), pfx.gap())
    same(floats(out, "y_baseline"), [2.0, 2.0, 2.0])  # a visit on the reference day counts
    same(floats(out, "gap"), [NAN, 9.0, 10.0])  # Python dates: Jan 1 -> 10 -> 20


# ============================================================================ item 12
def test_item12_many_lags_raise_no_warning():
    df = pd.DataFrame({"pid": [1] * 4 + [2] * 2, "t": [0, 1, 2, 3, 0, 1], "y": [1.0, 2.0, 3.0, 4.0, 5.0, 6.0]})
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        out = run(df, *(pfx.lag("y", k) for k in range(1, 121)))
    assert out.shape == (6, 3 + 120)
    same(floats(out, "y_lag1"), [NAN, 1.0, 2.0, 3.0, NAN, 5.0])
    same(floats(out, "y_lag3"), [NAN, NAN, NAN, 1.0, NAN, NAN])
    assert out["y_lag120"].isna().all()


# ============================================================================ item 13
# Boundaries, exactly on the edge.  Times built from whole "units": integers, decimals (unit 0.1),
# naive datetimes (unit one day) and datetimes in unit "s" in the year 9000 (beyond the ns range).
KINDS = ["int", "decimal", "datetime", "far_s"]


def T(kind, units):
    if kind == "int":
        return np.array(units, dtype=np.int64)
    if kind == "decimal":
        return np.array([float(Decimal(u) / 10) for u in units])  # 1 -> 0.1, 4 -> 0.4
    start = np.datetime64("2024-01-01", "s") if kind == "datetime" else np.datetime64("9000-01-01", "s")
    out = pd.Series(start + np.array(units, dtype="int64") * np.timedelta64(86400, "s"))
    return out.astype("datetime64[ns]") if kind == "datetime" else out


def S(kind, units):
    if kind == "int":
        return units
    if kind == "decimal":
        return float(Decimal(units) / 10)
    return f"{units}D"


# (a, b): the two pairs make the float difference b - a round below and above the decimal one:
# 0.3 - 0.1 -> 0.19999999999999998 and 0.4 - 0.1 -> 0.30000000000000004
PAIRS = [(1, 3), (1, 4)]


def frame(kind, units, y):
    return pd.DataFrame({"pid": 1, "t": T(kind, units), "y": y})


@pytest.mark.parametrize("a, b", PAIRS)
@pytest.mark.parametrize("kind", KINDS)
def test_item13_lag_offset_includes_an_occasion_exactly_at_t_minus_d(kind, a, b):
    out = run(frame(kind, [a, b], [1.0, 2.0]), pfx.lag("y", offset=S(kind, b - a), name="l"),
              pfx.lag("y", offset=S(kind, b - a), tolerance=S(kind, 0), name="l0"),
              pfx.lag("y", offset=S(kind, b - a + 1), name="too_far"))
    same(floats(out, "l"), [NAN, 1.0])  # t_b - d = t_a exactly: included
    same(floats(out, "l0"), [NAN, 1.0])  # tolerance 0: the source exactly at the target qualifies
    same(floats(out, "too_far"), [NAN, NAN])  # one unit further back there is nothing


@pytest.mark.parametrize("kind", KINDS)
def test_item13_tolerance_keeps_a_source_exactly_k_older(kind):
    # times a=1, b=4; offset 1 -> target 3; the source a=1 is exactly 2 older than the target
    df = frame(kind, [1, 4], [1.0, 2.0])
    out = run(df, pfx.lag("y", offset=S(kind, 1), tolerance=S(kind, 2), name="k2"),
              pfx.lag("y", offset=S(kind, 1), tolerance=S(kind, 1), name="k1"))
    same(floats(out, "k2"), [NAN, 1.0])  # exactly k older: kept
    same(floats(out, "k1"), [NAN, NAN])  # 2 older than the target, tolerance 1: dropped


@pytest.mark.parametrize("closed, sums, counts", [
    ("right", [1.0, 10.0], [1, 1]),  # (t-s, t]: at b, a = b - s is left out
    ("both", [1.0, 11.0], [1, 2]),  # [t-s, t]: a included
    ("left", [NAN, 1.0], [0, 1]),  # [t-s, t): a included, b itself left out
    ("neither", [NAN, NAN], [0, 0]),  # (t-s, t): neither
])
@pytest.mark.parametrize("a, b", PAIRS)
@pytest.mark.parametrize("kind", KINDS)
def test_item13_rolling_span_closed_ends(kind, a, b, closed, sums, counts):
    out = run(frame(kind, [a, b], [1.0, 10.0]),
              pfx.rolling("y", "sum", span=S(kind, b - a), closed=closed, name="s"),
              pfx.rolling("y", "count", span=S(kind, b - a), closed=closed, name="c"))
    same(floats(out, "s"), sums)
    assert out["c"].tolist() == counts


@pytest.mark.parametrize("a, b", PAIRS)
@pytest.mark.parametrize("kind", KINDS)
def test_item13_carry_forward_max_span_carries_a_value_exactly_s_old(kind, a, b):
    out = run(frame(kind, [a, b], [1.0, NAN]), pfx.carry_forward("y", max_span=S(kind, b - a), name="s"),
              pfx.carry_forward("y", max_span=S(kind, b - a - 1), name="short"))
    same(floats(out, "s"), [1.0, 1.0])  # b - a = s: carried
    same(floats(out, "short"), [1.0, NAN])  # one unit too short: not carried


def test_item13_carry_forward_limit_counts_occasions():
    df = pd.DataFrame({"pid": 1, "t": [0, 1, 2, 3], "y": [1.0, NAN, NAN, NAN]})
    out = run(df, pfx.carry_forward("y", limit=2))
    same(floats(out, "y_locf"), [1.0, 1.0, 1.0, NAN])  # carried to exactly 2 later occasions


@pytest.mark.parametrize("a, b", PAIRS)
@pytest.mark.parametrize("kind", KINDS)
def test_item13_restart_after_needs_a_gap_strictly_longer(kind, a, b):
    out = run(frame(kind, [a, b], [1.0, 10.0]), pfx.cumulative("y", restart_after=S(kind, b - a), name="eq"),
              pfx.cumulative("y", restart_after=S(kind, b - a - 1), name="lt"))
    same(floats(out, "eq"), [1.0, 11.0])  # gap exactly s: no restart, 1 + 10
    same(floats(out, "lt"), [1.0, 10.0])  # gap longer than s: restart from the value itself


@pytest.mark.parametrize("kind", KINDS)
def test_item13_baseline_last_before_includes_the_reference_time(kind):
    df = frame(kind, [1, 3, 4], [1.0, 3.0, 4.0])
    df["ref"] = T(kind, [3, 3, 3])
    trs = [pfx.baseline("y", "last_before", reference="ref"),
           pfx.change_from_baseline("y", rule="last_before", reference="ref", after_baseline_only=True)]
    if kind in ("int", "decimal"):
        trs.append(pfx.baseline("y", "last_before", reference=float(df["t"].iloc[1]), name="num_ref"))
    out = run(df, *trs)
    same(floats(out, "y_baseline"), [3.0, 3.0, 3.0])  # the visit at the reference time itself
    same(floats(out, "y_change"), [NAN, NAN, 1.0])  # up to and including the baseline occasion: missing
    if "num_ref" in out:
        same(floats(out, "num_ref"), [3.0, 3.0, 3.0])


def test_item13_occasion_windows_min_valid_and_include_current():
    df = pd.DataFrame({"pid": 1, "t": [0, 1, 2, 3], "y": [1.0, NAN, 4.0, 8.0], "f": [1, 0, 1, 1]})
    out = run(df, pfx.rolling("y", "sum", occasions=3, min_valid=2, name="s3"),
              pfx.time_since("f", include_current=False, name="prior"), pfx.events_so_far("f"),
              pfx.events_so_far("f", include_current=False, name="n_prior"))
    same(floats(out, "s3"), [NAN, NAN, 5.0, 12.0])  # windows {1}, {1, -}, {1, -, 4}, {-, 4, 8}; 2 values needed
    same(floats(out, "prior"), [NAN, 1.0, 2.0, 1.0])  # strictly earlier events at t = 0, then 2
    assert out["f_events"].tolist() == [1, 1, 2, 3] and out["n_prior"].tolist() == [0, 1, 1, 2]


# ============================================================================ beyond the spec
def test_extra_infinite_times_are_rejected_or_never_return_the_row_itself():
    df = pd.DataFrame({"pid": 1, "t": [-INF, 0.0, INF], "y": [1.0, 2.0, 3.0]})
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)  # inf - inf; the values are what is checked
            out = run(df, pfx.lag("y", offset=7), pfx.time_since_baseline())
    except pfx.PanelError:
        return  # a clear error is a fine answer
    assert math.isnan(out["y_lag_7"].iloc[0])  # nothing before -inf
    assert out["y_lag_7"].iloc[2] != 3.0  # a lag by time is strictly earlier than the row
    assert out["time_since_baseline"].iloc[0] == 0.0  # documented: 0 on the first occasion, never missing


def test_extra_variance_of_windows_after_a_huge_value_in_the_subject():
    y = [1e300, 0.0, 0.0, 0.0, 0.0, 1.0, 2.0]
    df = pd.DataFrame({"pid": 1, "t": range(7), "y": y})
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # the windows holding 1e300 may overflow
        out = run(df, pfx.rolling("y", "var", occasions=5), pfx.rolling("y", "std", span=4.5, name="sd"))
    # windows of the last two rows: [0, 0, 0, 0, 1] and [0, 0, 0, 1, 2]
    v5 = float(_exact_var([0, 0, 0, 0, 1]))  # fractions: 1/5
    v6 = float(_exact_var([0, 0, 0, 1, 2]))  # fractions: 4/5
    np.testing.assert_allclose(floats(out, "y_var_5occ")[5:], [v5, v6], rtol=1e-12)
    np.testing.assert_allclose(floats(out, "sd")[5:], [math.sqrt(v5), math.sqrt(v6)], rtol=1e-12)


def _exact_var(vals):
    xs = [Fraction(v) for v in vals]
    m = sum(xs) / len(xs)
    return sum((x - m) ** 2 for x in xs) / (len(xs) - 1)


def test_extra_rolling_with_overflow_emits_no_runtime_warning():
    df = pd.DataFrame({"pid": 1, "t": [0, 1, 2], "y": [1e308, 1e308, 1.0]})
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        out = run(df, pfx.rolling("y", "sum", occasions=2), pfx.rolling("y", "var", occasions=2))
    same(floats(out, "y_sum_2occ"), [1e308, INF, 1e308])  # by hand; 1e308 + 1.0 rounds to 1e308


def test_extra_reference_in_another_unit_compared_as_instants():
    # time in ns, reference stored in seconds in the year 2500 (beyond the ns range): every visit is before it
    df = pd.DataFrame({"pid": 1, "t": pd.to_datetime(["2020-01-01", "2021-01-01"]).as_unit("ns"),
                       "y": [1.0, 2.0], "ref": np.array(["2500-01-01"] * 2, dtype="datetime64[s]")})
    out = run(df, pfx.baseline("y", "last_before", reference="ref"))
    same(floats(out, "y_baseline"), [2.0, 2.0])


@pytest.mark.parametrize("make", [
    lambda: pd.DataFrame({"pid": pd.Series([], dtype="str"), "t": pd.Series([], dtype="datetime64[s]"),
                          "y": pd.Series([], dtype="float64")}),
    lambda: pd.DataFrame({"pid": pd.Series([], dtype="int64"), "t": pd.Series([], dtype="uint64"),
                          "y": pd.Series([], dtype="Int64")}),
])
def test_extra_empty_frames(make):
    df = make()
    dated = df["t"].dtype.kind == "M"
    s = "2D" if dated else 2
    out = run(df, pfx.lag("y"), pfx.lag("y", offset=s), pfx.rolling("y", "median", span=s), pfx.cumulative("y", "step"),
              pfx.carry_forward("y", max_span=s), pfx.within_between("y"), pfx.gap(), pfx.occasion())
    assert len(out) == 0 and out.shape[1] == 3 + 9


def test_extra_string_ids_pandas3_and_one_row_subjects():
    df = pd.DataFrame({"pid": pd.array(["b", "a", "c", "a"], dtype="str"), "t": [0.5, 1.5, 0.0, 0.5],
                       "y": [7.0, 2.0, 9.0, 1.0]})
    out = run(df, pfx.lag("y"), pfx.rolling("y", "var"), pfx.cumulative("y", "trapezoid"), pfx.gap(),
              pfx.within_between("y"))
    same(floats(out, "y_lag1"), [NAN, 1.0, NAN, NAN])
    same(floats(out, "y_var_sofar"), [NAN, 0.5, NAN, NAN])  # (1 - 1.5)^2 + (2 - 1.5)^2 over 1
    same(floats(out, "y_auc"), [0.0, 1.5, 0.0, 0.0])  # (1 + 2) / 2 * 1.0
    same(floats(out, "y_within"), [0.0, 0.5, 0.0, -0.5])
