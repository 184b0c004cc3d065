"""panelfx.check: one row per finding, hand-computed."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import panelfx as pfx
from panelfx.check import REPORT_COLUMNS


def test_clean_panel_gives_empty_report():
    df = pd.DataFrame({"pid": [1, 1, 2], "day": [0, 30, 0]})
    report = pfx.check(df, id="pid", time="day", spacing=30)
    assert report.empty and list(report.columns) == REPORT_COLUMNS


def test_null_ids_times_and_duplicates():
    df = pd.DataFrame({"pid": [1, None, 2, 2, 2, 3], "day": [0, 5, 7, 7, 7, np.nan]}, index=list("abcdef"))
    report = pfx.check(df, id="pid", time="day")
    assert report["problem"].tolist() == ["null_id", "null_time", "duplicate", "duplicate", "duplicate"]
    assert report["severity"].unique().tolist() == ["fatal"]
    assert report["row"].tolist() == ["b", "f", "c", "d", "e"]
    assert report.loc[2, "detail"] == "3 rows share this (id, time)"
    assert report.loc[2, "id"] == 2.0


def test_schedule_findings_with_datetimes():
    day = pd.Timestamp("2025-01-01")
    when = [day, day + pd.Timedelta("33D"), day + pd.Timedelta("52D"), day + pd.Timedelta("120D"),
            day, day + pd.Timedelta("30D"), day + pd.Timedelta("31D")]
    df = pd.DataFrame({"pid": ["p"] * 4 + ["q"] * 3, "when": when}, index=[10, 11, 12, 13, 20, 21, 22])
    report = pfx.check(df, id="pid", time="when", spacing="30D", tolerance="5D")
    got = list(zip(report["problem"], report["id"], report["row"], report["time"]))
    # p: 33 -> slot 1 (ok within 5 days), 52 -> slot 2 is 8 days early, 120 -> slot 4, slot 3 missed
    # q: 31 days matches slot 1 again -> extra
    assert got == [
        ("missed", "p", None, day + pd.Timedelta("90D")),
        ("early", "p", 12, day + pd.Timedelta("52D")),
        ("extra", "q", 22, day + pd.Timedelta("31D")),
    ]
    assert report.loc[1, "detail"] == "8.0 before scheduled occasion 2 (tolerance 5.0)"


def test_default_tolerance_is_a_quarter_of_spacing():
    df = pd.DataFrame({"pid": [1, 1, 1], "week": [0.0, 1.2, 2.3]})
    report = pfx.check(df, id="pid", time="week", spacing=1)
    assert report["problem"].tolist() == ["late"]
    assert report["row"].tolist() == [2]


def test_several_missed_occasions_in_one_gap():
    df = pd.DataFrame({"pid": [1, 1], "day": [0, 40]})
    report = pfx.check(df, id="pid", time="day", spacing=10, tolerance=0)
    assert report["problem"].tolist() == ["missed"] * 3
    assert report["time"].tolist() == [10.0, 20.0, 30.0]


def test_notes_are_opt_in():
    df = pd.DataFrame({"pid": [2, 1, 1], "day": [0, 9, 0]})
    assert pfx.check(df, id="pid", time="day").empty
    notes = pfx.check(df, id="pid", time="day", notes=True)
    assert notes["problem"].tolist() == ["single_occasion", "not_in_order"]
    assert set(notes["severity"]) == {"note"}


def test_multi_column_ids_are_tuples():
    df = pd.DataFrame({"site": ["a", "a"], "subj": [1, 1], "day": [3, 3]})
    report = pfx.check(df, id=["site", "subj"], time="day")
    assert report["id"].tolist() == [("a", 1), ("a", 1)]


@pytest.mark.parametrize(
    "kwargs, error, message",
    [
        ({"spacing": "30D"}, pfx.OptionError, "does not fit time column 'day', which holds numbers"),
        ({"spacing": -3}, pfx.OptionError, "spacing must be positive"),
        ({"spacing": 30, "tolerance": -1}, pfx.OptionError, "tolerance must not be negative"),
        ({"tolerance": 2}, pfx.OptionError, "tolerance= needs spacing="),
    ],
)
def test_bad_options(kwargs, error, message):
    df = pd.DataFrame({"pid": [1, 1], "day": [0, 30]})
    with pytest.raises(error, match=message):
        pfx.check(df, id="pid", time="day", **kwargs)


def test_structural_errors_still_raise():
    df = pd.DataFrame({"pid": [1], "day": ["2025-01-01"]})
    with pytest.raises(pfx.TimeTypeError, match="parsed first"):
        pfx.check(df, id="pid", time="day")
    with pytest.raises(pfx.MissingColumnError):
        pfx.check(df, id="person", time="day")
