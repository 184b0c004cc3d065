"""study_day: hand-computed tables, time zones, numbers, missing and bad references."""

from __future__ import annotations

import datetime as dt

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import panelfx as pfx


def days(frame: pd.DataFrame, *transforms, time: str = "when") -> pd.DataFrame:
    return pfx.derive(frame, *transforms, id="pid", time=time)


def test_day_before_on_and_after_the_reference():
    # CDISC SDTM --DY convention (SDTM Implementation Guide, from memory): the reference start
    # date is day 1, the day before it day -1; there is no day 0.  Hand-computed table.
    when = pd.to_datetime(["2024-02-27", "2024-02-28", "2024-02-29", "2024-03-01", "2024-03-30", "2023-12-31"])
    df = pd.DataFrame({"pid": [1] * 6, "when": when, "rand": pd.Timestamp("2024-02-29")})
    out = days(df, pfx.study_day("rand"), pfx.study_day("rand", "offset", name="offset_day"))
    assert out["study_day"].tolist() == [-2, -1, 1, 2, 31, -60]
    assert out["offset_day"].tolist() == [-2, -1, 0, 1, 30, -60]
    assert out["study_day"].dtype == np.int64
    assert (out["study_day"] != 0).all()


def test_time_of_day_never_matters():
    when = pd.to_datetime(["2024-05-09 23:59:59", "2024-05-10 00:00:00", "2024-05-10 23:59:59",
                           "2024-05-11 00:00:01"])
    df = pd.DataFrame({"pid": 1, "when": when, "rand": pd.Timestamp("2024-05-10 18:30")})
    assert days(df, pfx.study_day("rand"))["study_day"].tolist() == [-1, 1, 1, 2]


def test_daylight_saving_days_in_an_aware_zone():
    # Hand-computed: Europe/Berlin moved clocks forward on 2024-03-31 (a 23-hour day) and back on
    # 2024-10-27 (a 25-hour day); America/New_York moved back on 2024-11-03.  Each timestamp counts
    # on the date its own clock shows; elapsed hours / 24 would be off by one on some of these.
    berlin = pd.to_datetime(["2024-03-30 23:30", "2024-03-31 00:30", "2024-03-31 23:30", "2024-04-01 00:10",
                             "2024-10-27 00:30", "2024-10-27 23:30", "2024-10-28 00:30"]).tz_localize("Europe/Berlin")
    df = pd.DataFrame({"pid": 1, "when": berlin,
                       "rand": pd.Timestamp("2024-03-31 12:00", tz="Europe/Berlin")})
    assert days(df, pfx.study_day("rand"))["study_day"].tolist() == [-1, 1, 1, 2, 211, 211, 212]
    # 23:30 on 3 November in New York is already 4 November in UTC: still New York's 3 November
    ny = pd.to_datetime(["2024-11-02 23:30", "2024-11-03 01:30", "2024-11-03 23:30",
                         "2024-11-04 00:30"]).tz_localize("America/New_York", ambiguous=[False, True, False, False])
    df = pd.DataFrame({"pid": 1, "when": ny, "rand": pd.Timestamp("2024-11-03")})  # a naive reference date
    assert days(df, pfx.study_day("rand"))["study_day"].tolist() == [-1, 1, 1, 2]


def test_reference_in_another_zone_counts_in_its_own_zone():
    when = pd.to_datetime(["2024-06-01 08:00"]).tz_localize("Asia/Tokyo")  # 31 May 23:00 UTC
    ref = pd.Timestamp("2024-06-01 01:00", tz="UTC")
    df = pd.DataFrame({"pid": [1], "when": when, "rand": ref})
    assert days(df, pfx.study_day("rand"))["study_day"].tolist() == [1]


def test_dates_before_1970_dates_as_objects_and_timedeltas():
    df = pd.DataFrame({"pid": [1, 1], "when": [dt.date(1969, 12, 30), dt.date(1970, 1, 2)],
                       "rand": [dt.date(1969, 12, 31)] * 2})
    assert days(df, pfx.study_day("rand"))["study_day"].tolist() == [-1, 3]
    td = pd.DataFrame({"pid": [1, 1, 1], "when": pd.to_timedelta(["-1h", "0h", "49h"]),
                       "ref": pd.to_timedelta(["0h"] * 3)})
    assert days(td, pfx.study_day("ref", "offset"))["study_day"].tolist() == [-1, 0, 2]


def test_numbers():
    df = pd.DataFrame({"pid": [1, 1, 1, 2], "day": [-3, 10, 11, 5], "ref": [10, 10, 10, 0]})
    out = days(df, pfx.study_day("ref"), pfx.study_day("ref", "offset", name="rel"), time="day")
    assert out["study_day"].tolist() == [-13, 1, 2, 6]
    assert out["rel"].tolist() == [-13, 0, 1, 5]
    assert out["study_day"].dtype == np.int64
    months = pd.DataFrame({"pid": [1, 1], "m": [0.5, 2.25], "ref": [0.25, 0.25]})
    got = days(months, pfx.study_day("ref", "offset"), time="m")["study_day"]
    assert got.tolist() == [0.25, 2.0]
    with pytest.raises(pfx.ColumnTypeError, match="convention='offset'") as err:
        days(months, pfx.study_day("ref"), time="m")
    assert err.value.column == "m" and err.value.count == 2


def test_missing_reference_gives_missing_day_and_a_varying_one_is_an_error():
    when = pd.to_datetime(["2024-01-01", "2024-01-05", "2024-01-01", "2024-01-03"])
    df = pd.DataFrame({"pid": [1, 1, 2, 2], "when": when,
                       "rand": pd.to_datetime(["2024-01-02", None, None, None])})
    out = days(df, pfx.study_day("rand"))
    assert out["study_day"].dtype == np.float64
    assert out["study_day"].tolist()[:1] == [-1.0] and out["study_day"].isna().tolist() == [False, True, True, True]
    bad = df.assign(rand=pd.to_datetime(["2024-01-02", "2024-01-03", None, None]))
    with pytest.raises(pfx.NotConstantError, match="constant within subject") as err:
        days(bad, pfx.study_day("rand"))
    assert err.value.column == "rand" and err.value.ids == [1]


def test_other_date_column_and_kinds_that_do_not_mix():
    df = pd.DataFrame({"pid": [1, 1], "when": pd.to_datetime(["2024-01-01", "2024-01-09"]),
                       "onset": pd.to_datetime(["2023-12-31", None]), "rand": pd.Timestamp("2024-01-01"),
                       "num": [1, 1]})
    out = days(df, pfx.study_day("rand", date="onset"))
    assert out["onset_study_day"].iloc[0] == -1 and np.isnan(out["onset_study_day"].iloc[1])
    with pytest.raises(pfx.TimeTypeError, match="both as dates or both as numbers"):
        days(df, pfx.study_day("num"))
    with pytest.raises(pfx.OptionError, match="convention must be one of"):
        pfx.study_day("rand", "day_0")


@settings(max_examples=60)
@given(offsets=st.lists(st.integers(-800, 800), min_size=1, max_size=12),
       hours=st.lists(st.integers(0, 23), min_size=12, max_size=12),
       ref=st.integers(-30000, 30000), zone=st.sampled_from([None, "Europe/Berlin", "America/New_York",
                                                              "Australia/Lord_Howe"]))
def test_matches_python_dates(offsets, hours, ref, zone):
    """Against Python's own date arithmetic (datetime.date subtraction) on aware local dates."""
    base = dt.date(1970, 1, 1) + dt.timedelta(days=ref)
    dates = [base + dt.timedelta(days=o) for o in offsets]
    stamps = pd.to_datetime([dt.datetime(d.year, d.month, d.day, h) for d, h in zip(dates, hours)])
    if zone is not None:
        stamps = stamps.tz_localize(zone, nonexistent="shift_forward", ambiguous=True)
    df = pd.DataFrame({"pid": 1, "when": stamps, "ref": pd.Timestamp(base)}).drop_duplicates("when")
    got = days(df, pfx.study_day("ref"))["study_day"].tolist()
    local = [ts.date() for ts in df["when"]]  # the date each timestamp's own clock shows
    want = [(d - base).days + ((d - base).days >= 0) for d in local]
    assert got == want
