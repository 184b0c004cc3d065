"""rolling(): hand-computed values, the simple reference, accuracy and bad options."""

from __future__ import annotations

import contextlib
import dataclasses
import datetime as dt
import json
import math

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import panelfx as pfx
from panelfx import _kernels as K
from panelfx import _windows as W
from panelfx.testing import assert_matches_reference, reference
from panelfx.testing.strategies import ALL_TIME_KINDS, VALUE_KINDS, panels
from panelfx.transforms.rolling import CLOSED, STATS, Rolling

NAN = math.nan
INF = math.inf


def one_subject(t, y, **cols):
    return pd.DataFrame({"pid": 1, "t": t, "y": y, **cols})


def run(df, *trs, **kw):
    return pfx.derive(df, *trs, id="pid", time="t", **kw)


def col(df, name):
    return df[name].to_numpy(dtype="float64")


@contextlib.contextmanager
def kernels(*, direct: int | None = None, chunk: int | None = None, keyed: bool = True):
    """Force the kernels' internal paths: ``direct`` = longest window summed directly
    (0: always prefix sums / sparse table), ``chunk`` = cells of a padded matrix,
    ``keyed=False`` = window starts from the rank key and a binary search instead of the
    time-offset key and a merge."""
    saved = W.DIRECT_MAX, W.CHUNK_CELLS
    token = K.FORCED_SEARCH.set(() if keyed else ("rank", "searchsorted"))
    try:
        if direct is not None:
            W.DIRECT_MAX = direct
        if chunk is not None:
            W.CHUNK_CELLS = chunk
        yield
    finally:
        W.DIRECT_MAX, W.CHUNK_CELLS = saved
        K.FORCED_SEARCH.reset(token)


#: Every internal path: (longest direct window, padded-matrix cells, integer-key window starts).
PATHS = [dict(direct=0), dict(direct=100), dict(direct=0, chunk=3, keyed=False), dict()]


# ---------------------------------------------------------------------------- by hand
@pytest.mark.parametrize("paths", PATHS)
@pytest.mark.parametrize("closed, sums, counts", [
    # t = 0, 10, 20, 30 and y = 1, 2, 4, 8 with span 10: each window edge falls on an occasion.
    ("right", [1, 2, 4, 8], [1, 1, 1, 1]),  # (t - 10, t]
    ("both", [1, 3, 6, 12], [1, 2, 2, 2]),  # [t - 10, t]
    ("left", [NAN, 1, 2, 4], [0, 1, 1, 1]),  # [t - 10, t)
    ("neither", [NAN, NAN, NAN, NAN], [0, 0, 0, 0]),  # (t - 10, t)
])
def test_closed_ends_by_hand(paths, closed, sums, counts):
    df = one_subject([0, 10, 20, 30], [1.0, 2.0, 4.0, 8.0])
    with kernels(**paths):
        out = run(df, pfx.rolling("y", "sum", span=10, closed=closed, name="s"),
                  pfx.rolling("y", "count", span=10, closed=closed, name="c"))
    np.testing.assert_array_equal(col(out, "s"), sums)
    np.testing.assert_array_equal(col(out, "c"), counts)


@pytest.mark.parametrize("paths", PATHS)
def test_windows_by_hand(paths):
    df = one_subject([0, 10, 20, 30], [1.0, 2.0, 4.0, 8.0])
    with kernels(**paths):
        out = run(df, pfx.rolling("y", "sum", span=15),  # (t - 15, t]
                  pfx.rolling("y", "sum", occasions=2),
                  pfx.rolling("y", "sum", occasions=2, exclude_current=True),
                  pfx.rolling("y", "sum"),
                  pfx.rolling("y", "sum", exclude_current=True))
    np.testing.assert_array_equal(col(out, "y_sum_15"), [1, 3, 6, 12])
    np.testing.assert_array_equal(col(out, "y_sum_2occ"), [1, 3, 6, 12])
    np.testing.assert_array_equal(col(out, "y_sum_2occ_prior"), [NAN, 1, 3, 6])
    np.testing.assert_array_equal(col(out, "y_sum_sofar"), [1, 3, 7, 15])
    np.testing.assert_array_equal(col(out, "y_sum_sofar_prior"), [NAN, 1, 3, 7])


@pytest.mark.parametrize("paths", PATHS)
def test_so_far_with_missing_by_hand(paths):
    # Missing values are skipped; count is never missing.
    df = one_subject([1, 2, 3, 4], [3.0, NAN, 5.0, 1.0])
    with kernels(**paths):
        out = run(df, *(pfx.rolling("y", s) for s in ("max", "min", "mean", "median", "count")),
                  pfx.rolling("y", "count", exclude_current=True))
    np.testing.assert_array_equal(col(out, "y_max_sofar"), [3, 3, 5, 5])
    np.testing.assert_array_equal(col(out, "y_min_sofar"), [3, 3, 3, 1])
    np.testing.assert_array_equal(col(out, "y_mean_sofar"), [3, 3, 4, 3])
    np.testing.assert_array_equal(col(out, "y_median_sofar"), [3, 3, 4, 3])
    np.testing.assert_array_equal(col(out, "y_count_sofar"), [1, 1, 2, 3])
    np.testing.assert_array_equal(col(out, "y_count_sofar_prior"), [0, 1, 1, 2])
    assert out["y_count_sofar"].dtype == np.int64 and out["y_mean_sofar"].dtype == np.float64


@pytest.mark.parametrize("paths", PATHS)
def test_min_valid_by_hand(paths):
    # Windows of 3 occasions: {1}, {1, 3}, {1, 3, NaN}, {3, NaN, 4}; at least 2 values needed.
    df = one_subject([0, 1, 2, 3], [1.0, 3.0, NAN, 4.0])
    with kernels(**paths):
        out = run(df, pfx.rolling("y", occasions=3, min_valid=2),
                  pfx.rolling("y", "count", occasions=3, min_valid=2),
                  pfx.rolling("y", "sum", occasions=1, exclude_current=True, min_valid=0, name="s0"),
                  pfx.rolling("y", "mean", occasions=1, exclude_current=True, min_valid=0, name="m0"))
    np.testing.assert_array_equal(col(out, "y_mean_3occ"), [NAN, 2, 2, 3.5])
    np.testing.assert_array_equal(col(out, "y_count_3occ"), [1, 2, 2, 2])  # never missing
    # min_valid=0: the sum over no value is 0, the mean over no value stays missing.
    np.testing.assert_array_equal(col(out, "s0"), [0, 1, 3, 0])
    np.testing.assert_array_equal(col(out, "m0"), [NAN, 1, 3, NAN])


@pytest.mark.parametrize("paths", PATHS)
def test_std_var_median_by_hand(paths):
    # The classic 2, 4, 4, 4, 5, 5, 7, 9: mean 5, squared deviations add up to 32, so the
    # sample variance is 32 / 7 (the population standard deviation would be 2).
    y = [2.0, 4.0, 4.0, 4.0, 5.0, 5.0, 7.0, 9.0]
    df = one_subject(list(range(8)), y)
    with kernels(**paths):
        out = run(df, pfx.rolling("y", "var"), pfx.rolling("y", "std"), pfx.rolling("y", "median"),
                  pfx.rolling("y", "std", occasions=3))
    assert col(out, "y_var_sofar")[-1] == pytest.approx(32 / 7, rel=1e-15)
    assert col(out, "y_std_sofar")[-1] == pytest.approx(math.sqrt(32 / 7), rel=1e-15)
    assert math.isnan(col(out, "y_std_sofar")[0])  # one value: no sample std
    np.testing.assert_array_equal(col(out, "y_median_sofar"), [2, 3, 4, 4, 4, 4, 4, 4.5])
    # windows {4, 4, 4} and {4, 4, 5}: 0 exactly, then sqrt(1/3)
    assert col(out, "y_std_3occ")[3] == 0.0
    assert col(out, "y_std_3occ")[4] == pytest.approx(math.sqrt(1 / 3), rel=1e-15)


def test_datetime_ninety_days_by_hand():
    # 2024 is a leap year: 1 Jan -> 1 Mar is 60 days, 1 Jan -> 31 Mar is 90 days.
    df = one_subject(pd.to_datetime(["2024-01-01", "2024-03-01", "2024-03-31"]), [10.0, 20.0, 60.0])
    out = run(df, pfx.rolling("y", span="90D"),
              pfx.rolling("y", span=dt.timedelta(days=60), closed="both", name="d60"))
    np.testing.assert_array_equal(col(out, "y_mean_90d"), [10, 15, 40])  # 1 Jan is out on 31 Mar
    np.testing.assert_array_equal(col(out, "d60"), [10, 15, 40])  # [t - 60D, t] keeps 1 Mar


def test_closed_both_ninety_days_by_hand():
    df = one_subject(pd.to_datetime(["2024-01-01", "2024-03-01", "2024-03-31"]), [10.0, 20.0, 60.0])
    out = run(df, pfx.rolling("y", span="90D", closed="both", name="m"))
    np.testing.assert_array_equal(col(out, "m"), [10, 15, 30])  # [t - 90D, t] keeps 1 Jan


def test_spans_are_elapsed_time_across_a_clock_change():
    # Europe/Berlin moves its clocks forward in the night to 31 March 2024: noon to noon is 23 hours.
    t = pd.to_datetime(["2024-03-30 12:00", "2024-03-31 12:00"]).tz_localize("Europe/Berlin")
    df = one_subject(t, [1.0, 3.0])
    out = run(df, pfx.rolling("y", "sum", span="1D", name="day"),
              pfx.rolling("y", "sum", span="23h", name="right"),
              pfx.rolling("y", "sum", span="23h", closed="both", name="both"))
    np.testing.assert_array_equal(col(out, "day"), [1, 4])
    np.testing.assert_array_equal(col(out, "right"), [1, 3])
    np.testing.assert_array_equal(col(out, "both"), [1, 4])


def test_timedelta_times_by_hand():
    df = one_subject(pd.to_timedelta([0, 6, 12, 30], unit="h"), [1.0, 2.0, 3.0, 4.0])
    out = run(df, pfx.rolling("y", "sum", span="12h"), pfx.rolling("y", "max", span="1D", closed="both"))
    np.testing.assert_array_equal(col(out, "y_sum_12h"), [1, 3, 5, 4])
    np.testing.assert_array_equal(col(out, "y_max_1d"), [1, 2, 3, 4])


def test_caller_order_index_and_subjects_kept():
    df = pd.DataFrame({"pid": ["b", "a", "b", "a", "a"], "t": [2, 3, 1, 1, 2],
                       "y": [20.0, 3.0, 10.0, 1.0, 2.0]}, index=[50, 40, 30, 20, 10])
    before = df.copy()
    out = run(df, pfx.rolling("y", "sum", occasions=2))
    pd.testing.assert_frame_equal(df, before)
    assert list(out.index) == [50, 40, 30, 20, 10]
    np.testing.assert_array_equal(col(out, "y_sum_2occ"), [30, 5, 10, 1, 3])


@pytest.mark.parametrize("paths", PATHS)
def test_infinities_follow_ieee(paths):
    df = one_subject([1, 2, 3, 4], [1.0, INF, 2.0, -INF])
    with kernels(**paths):
        out = run(df, *(pfx.rolling("y", s) for s in ("sum", "mean", "max", "min", "median", "std")))
    np.testing.assert_array_equal(col(out, "y_sum_sofar"), [1, INF, INF, NAN])
    np.testing.assert_array_equal(col(out, "y_mean_sofar"), [1, INF, INF, NAN])
    np.testing.assert_array_equal(col(out, "y_max_sofar"), [1, INF, INF, INF])
    np.testing.assert_array_equal(col(out, "y_min_sofar"), [1, 1, 1, -INF])
    np.testing.assert_array_equal(col(out, "y_median_sofar"), [1, (1 + INF) / 2, 2, 1.5])
    np.testing.assert_array_equal(col(out, "y_std_sofar"), [NAN, NAN, NAN, NAN])


def test_bool_column_is_zero_one():
    df = one_subject([1, 2, 3, 4], [0.0] * 4, hit=[True, False, True, True])
    out = run(df, pfx.rolling("hit", "mean", occasions=2), pfx.rolling("hit", "sum"))
    np.testing.assert_array_equal(col(out, "hit_mean_2occ"), [1, 0.5, 0.5, 1])
    np.testing.assert_array_equal(col(out, "hit_sum_sofar"), [1, 1, 2, 3])


def test_empty_frame():
    df = pd.DataFrame({"pid": pd.Series([], dtype="int64"), "t": pd.Series([], dtype="float64"),
                       "y": pd.Series([], dtype="float64")})
    out = run(df, pfx.rolling("y", "max", span=3), pfx.rolling("y", "count"))
    assert len(out) == 0 and list(out.columns) == ["pid", "t", "y", "y_max_3", "y_count_sofar"]


# ---------------------------------------------------------------------------- accuracy
@pytest.mark.parametrize("paths", PATHS)
def test_small_windows_after_a_huge_value(paths):
    # Differences of running totals would keep ~1e-4 of the 1e12 spike: such rows are
    # recomputed directly, so later windows come out exact.
    y = [1e12, 1.0, 2.0, 3.0, 5.0, 5.0, 5.0]
    df = one_subject(list(range(7)), y)
    with kernels(**paths):
        out = run(df, pfx.rolling("y", "mean", span=2), pfx.rolling("y", "std", span=3),
                  pfx.rolling("y", "sum", span=2))
    np.testing.assert_array_equal(col(out, "y_mean_2")[2:], [1.5, 2.5, 4, 5, 5])
    np.testing.assert_array_equal(col(out, "y_sum_2")[2:], [3, 5, 8, 10, 10])
    assert col(out, "y_std_3")[-1] == 0.0  # the flat window {5, 5, 5}: exactly 0
    assert col(out, "y_std_3")[3] == pytest.approx(1.0, rel=1e-14)  # {1, 2, 3}
    assert col(out, "y_std_3")[5] == pytest.approx(math.sqrt(4 / 3), rel=1e-14)  # {3, 5, 5}


@pytest.mark.parametrize("paths", PATHS)
def test_fractions_after_a_huge_value_keep_their_digits(paths):
    """Values >= 0 (the running total is its own magnitude bound): 1e17 + 0.1 rounds to 1e17, so
    window sums of the later fractions from running totals would be 0 or 16; such rows are added
    up directly (math.fsum of the window as the reference)."""
    y = [1e17, 0.1, 0.2, 0.3, 0.5, 0.25, 0.125, 0.7]
    df = one_subject(list(range(len(y))), y)
    with kernels(**paths):
        out = run(df, pfx.rolling("y", "sum", occasions=5, name="s5"), pfx.rolling("y", "mean", span=2, name="m2"))
    for i in range(5, len(y)):
        assert col(out, "s5")[i] == pytest.approx(math.fsum(y[i - 4: i + 1]), rel=1e-15)
    for i in range(2, len(y)):
        assert col(out, "m2")[i] == pytest.approx(math.fsum(y[i - 1: i + 1]) / 2, rel=1e-15)


def test_large_level_small_spread():
    # Values 1e9 + noise: the centred variance keeps the spread's digits.
    rng = np.random.default_rng(5)
    n = 3000
    y = 1e9 + rng.normal(0, 1, n)
    df = one_subject(np.arange(n) * 1.0, y)
    out = run(df, pfx.rolling("y", "std", span=50), pfx.rolling("y", "mean", span=50))
    k = 50
    want_std = np.array([np.std(y[max(0, i - k + 1): i + 1], ddof=1) if i else NAN for i in range(n)])
    want_mean = np.array([math.fsum(y[max(0, i - k + 1): i + 1]) / (i + 1 - max(0, i - k + 1)) for i in range(n)])
    np.testing.assert_allclose(col(out, "y_std_50")[1:], want_std[1:], rtol=1e-8)
    # Running totals reach 3e12 here: their differences keep ~1e-14 relative (the kernels
    # recompute a row directly only beyond SUM_RTOL = 1e-10).
    np.testing.assert_allclose(col(out, "y_mean_50"), want_mean, rtol=1e-12)


@pytest.mark.parametrize("paths", PATHS)
def test_long_subject_against_sliding_windows(paths):
    # Sparse-table min/max and the padded median on long windows, against numpy's
    # sliding_window_view over a NaN-padded series (an independent construction).
    rng = np.random.default_rng(11)
    n, k = 700, 37
    y = rng.normal(size=n).round(2)
    df = pd.DataFrame({"pid": np.repeat([1, 2], [n - 200, 200]), "t": np.r_[np.arange(n - 200), np.arange(200)],
                       "y": y})
    with kernels(**paths):
        out = run(df, *(pfx.rolling("y", s, occasions=k) for s in ("min", "max", "median", "mean", "std")))
    for stat, fn in (("min", np.min), ("max", np.max), ("median", np.median), ("mean", np.mean),
                     ("std", lambda a, axis: np.std(a, axis=axis, ddof=1))):
        want = []
        for lo, hi in ((0, n - 200), (n - 200, n)):
            seg = y[lo:hi]
            for i in range(len(seg)):  # a loop in the test only: independent of the kernels
                win = seg[max(0, i - k + 1): i + 1]
                want.append(fn(win, axis=0) if len(win) > 1 or stat != "std" else NAN)
        np.testing.assert_allclose(col(out, f"y_{stat}_{k}occ"), want, rtol=1e-12, atol=1e-12)


# ---------------------------------------------------------------------------- reference
@st.composite
def configs(draw, case) -> Rolling:
    """A rolling transform whose span fits the case's time column."""
    t = case.frame[case.time]
    numeric = pd.api.types.is_numeric_dtype(t.dtype) and not pd.api.types.is_bool_dtype(t.dtype)
    hours = pd.api.types.is_timedelta64_dtype(t.dtype)
    kw: dict = {"exclude_current": draw(st.booleans())}
    window = draw(st.sampled_from(["occasions", "span", "span", "so far"]))
    if window == "occasions":
        kw["occasions"] = draw(st.integers(1, 8))
    elif window == "span":
        if numeric:
            kw["span"] = draw(st.sampled_from([1, 4, 10, 17.5, 20, 40, 100]))
        elif hours:
            kw["span"] = draw(st.sampled_from(["1h", "90min", "10h", "20h", "2D", "100h"]))
        else:
            kw["span"] = draw(st.sampled_from(["1D", "36h", "10D", "20D", "40D", "100D"]))
        kw["closed"] = draw(st.sampled_from(CLOSED))
    kw["min_valid"] = draw(st.integers(0, min(3, kw.get("occasions", 3))))
    return pfx.rolling(draw(st.sampled_from(["y", "y", "x", "flag", "dose"])), draw(st.sampled_from(STATS)), **kw)


def _assert_close_to_reference(got, want, tr, frame, case):
    name = tr.outputs()[0]
    if tr.stat in ("count", "min", "max", "median"):
        # Exact: no rounding happens beyond the median's one (a + b) / 2.
        assert_matches_reference(got, want, [name], rtol=0, atol=0, id=case.id, time=case.time)
    elif tr.stat in ("var", "std"):
        assert_matches_reference(got, want, [name], rtol=1e-9, atol=1e-300, id=case.id, time=case.time)
    else:
        # Floating sums are accurate relative to the sum of the magnitudes added (the
        # reference adds exactly): scale = sum of |value| over the same window.
        absf = frame.assign(_abs=pd.Series(frame[tr.col], dtype="float64").abs())
        scale_tr = dataclasses.replace(tr, col="_abs", stat="sum", min_valid=0, name="_scale")
        scale = reference(absf, scale_tr, **case.keys)["_scale"].to_numpy()
        # (A mean's error is the sum's divided by the count: the same bound covers it.)
        g, w = col(got, name), col(want, name)
        bad = (np.isnan(g) != np.isnan(w)) | ~(np.isnan(g) | (np.abs(g - w) <= 1e-12 * scale + 1e-9 * np.abs(w)))
        assert not bad.any(), f"{name}: rows {list(got.index[bad][:5])}: got {g[bad][:5]}, want {w[bad][:5]}"


@settings(max_examples=120, deadline=None)
@given(case=panels(time_kinds=ALL_TIME_KINDS, extremes=True, value_kinds=VALUE_KINDS), data=st.data(),
       paths=st.sampled_from(PATHS))
def test_matches_reference(case, data, paths):
    """Every statistic and window kind equals the per-row loop reference, on every internal path."""
    tr = data.draw(configs(case), label="transform")
    with kernels(**paths):
        got = pfx.derive(case.frame, tr, **case.keys)
    want = reference(case.frame, tr, **case.keys)
    _assert_close_to_reference(got, want, tr, case.frame, case)


@settings(max_examples=30, deadline=None)
@given(case=panels(), k=st.integers(1, 5), stat=st.sampled_from(STATS))
def test_leaving_out_the_current_occasion_is_a_window_of_the_lag(case, k, stat):
    """The k occasions before the current one are the k occasions ending at it, of the lag."""
    lagged = pfx.derive(case.frame, pfx.lag("y", name="y_prev"), **case.keys)
    a = pfx.derive(lagged, pfx.rolling("y", stat, occasions=k, exclude_current=True, name="a"), **case.keys)
    b = pfx.derive(lagged, pfx.rolling("y_prev", stat, occasions=k, name="b"), **case.keys)
    np.testing.assert_allclose(col(a, "a"), col(b, "b"), rtol=1e-12, atol=1e-9)


# ---------------------------------------------------------------------------- options
def test_default_names():
    assert pfx.rolling("sbp", span=90).outputs() == ("sbp_mean_90",)
    assert pfx.rolling("sbp", span=2.5).outputs() == ("sbp_mean_2p5",)
    assert pfx.rolling("sbp", span="90D").outputs() == ("sbp_mean_90d",)
    assert pfx.rolling("sbp", "median", span=pd.Timedelta(hours=36)).outputs() == ("sbp_median_36h",)
    assert pfx.rolling("sbp", occasions=3).outputs() == ("sbp_mean_3occ",)
    assert pfx.rolling("sbp", "max").outputs() == ("sbp_max_sofar",)
    assert pfx.rolling("sbp", "max", exclude_current=True).outputs() == ("sbp_max_sofar_prior",)
    assert pfx.rolling("sbp", "std", occasions=4, name="sd4").outputs() == ("sd4",)


def test_options_are_plain_values_and_round_trip():
    tr = pfx.rolling("sbp", "std", span=dt.timedelta(days=90), closed="both", min_valid=2, exclude_current=True)
    assert tr.span == "90D"
    opts = json.loads(json.dumps(tr.options()))
    assert Rolling(**opts) == tr
    assert tr.past_only and pfx.rolling("y").past_only


def test_describe_states_the_window():
    assert "(t - 90D, t]" in pfx.rolling("y", span="90D").describe()
    assert "[t - 90D, t)" in pfx.rolling("y", span="90D", closed="both", exclude_current=True).describe()
    assert "3 occasion(s) before the current one" in pfx.rolling("y", occasions=3, exclude_current=True).describe()
    assert "fewer than 2" in pfx.rolling("y", "std").describe()
    assert "never missing" in pfx.rolling("y", "count").describe()


# ---------------------------------------------------------------------------- errors
@pytest.mark.parametrize("kw, words", [
    (dict(occasions=0), "occasions must be an integer >= 1, got 0"),
    (dict(occasions=-2), "occasions must be an integer >= 1, got -2"),
    (dict(occasions=2.5), "occasions must be an integer"),
    (dict(occasions=True), "occasions must be an integer"),
    (dict(span=0), "span must be a positive"),
    (dict(span=-90), "span must be a positive"),
    (dict(span=math.inf), "span must be a positive"),
    (dict(span=math.nan), "span must be a positive"),
    (dict(span="0D"), "span must be a positive"),
    (dict(span="-90D"), "span must be a positive"),
    (dict(span=pd.Timedelta(0)), "span must be a positive"),
    (dict(span="90"), "has no unit"),
    (dict(span="1M"), "is not a time span"),
    (dict(span="ninety days"), "is not a time span"),
    (dict(span=True), "span must be a positive"),
    (dict(span=[90]), "span must be a positive"),
    (dict(occasions=3, span=90), "not both"),
    (dict(stat="average"), "stat must be one of"),
    (dict(span=90, closed="open"), "closed must be one of"),
    (dict(occasions=3, closed="both"), "applies to time windows (span=) only"),
    (dict(closed="left"), "applies to time windows (span=) only"),
    (dict(min_valid=-1), "min_valid must be an integer >= 0"),
    (dict(min_valid=1.5), "min_valid must be an integer"),
    (dict(occasions=2, min_valid=3), "every value would be missing"),
    (dict(exclude_current="yes"), "exclude_current must be True or False"),
    (dict(name=""), "name must be a column name"),
])
def test_bad_options(kw, words):
    stat = kw.pop("stat", "mean")
    with pytest.raises(pfx.OptionError) as err:
        pfx.rolling("y", stat, **kw)
    assert words in str(err.value)


def test_bad_column_name():
    with pytest.raises(pfx.OptionError, match="col must be a column name"):
        pfx.rolling(3)


@pytest.mark.parametrize("t, span, words", [
    ([0, 1, 2], "90D", "holds numbers: give a number"),
    (pd.to_datetime(["2024-01-01", "2024-01-02", "2024-01-03"]), 90, "give a timedelta or a string"),
    (pd.to_timedelta([0, 1, 2], unit="h"), 2.0, "give a timedelta or a string"),
])
def test_span_must_fit_the_time_column(t, span, words):
    with pytest.raises(pfx.OptionError, match=words):
        run(one_subject(t, [1.0, 2.0, 3.0]), pfx.rolling("y", span=span))


def test_text_and_datetime_values_are_errors():
    df = one_subject([0, 1, 2], [1.0, 2.0, 3.0], note=["a", "b", "c"], when=pd.to_datetime(["2024-01-01"] * 3))
    with pytest.raises(pfx.ColumnTypeError, match="note"):
        run(df, pfx.rolling("note", span=2))
    with pytest.raises(pfx.ColumnTypeError, match="when"):
        run(df, pfx.rolling("when", "max"))
    with pytest.raises(pfx.MissingColumnError, match="nope"):
        run(df, pfx.rolling("nope"))
    with pytest.raises(pfx.ColumnExistsError, match="y_mean_2"):
        run(df, pfx.rolling("y", span=2), pfx.rolling("y", span=2, closed="both"))
