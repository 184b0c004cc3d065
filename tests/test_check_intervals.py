"""check() warns when a frame looks like (start, stop] data declared with its start column as time."""

from __future__ import annotations

from pathlib import Path

import pandas as pd
import pytest

import panelfx as pfx
from panelfx.demo import cohort

STANFORD = Path(__file__).resolve().parent / "data" / "stanford_heart.csv"


def test_published_interval_data_declared_with_start_is_flagged():
    """The Stanford heart-transplant file (tests/data, Crowley & Hu 1977): 69 patients have two intervals,
    and each first stop is the second start."""
    data = pd.read_csv(STANFORD)
    report = pfx.check(data, id="id", time="start")
    assert report["problem"].tolist() == ["interval_data"] and report["severity"].tolist() == ["warning"]
    assert "column 'stop'" in report.loc[0, "detail"] and "69 of 69 rows" in report.loc[0, "detail"]
    assert report.loc[0, "id"] == 3 and report.loc[0, "row"] == 2  # the first interval that has a next one
    assert pfx.check(data, id="id", time="stop").empty


def test_intervals_with_datetimes_and_a_gap_are_flagged():
    day = pd.Timestamp("2024-01-01")
    starts = [day, day + pd.Timedelta("10D"), day + pd.Timedelta("25D")]
    stops = [day + pd.Timedelta("10D"), day + pd.Timedelta("20D"), day + pd.Timedelta("40D")]
    df = pd.DataFrame({"pid": 1, "from": starts, "to": stops})
    report = pfx.check(df, id="pid", time="from")
    assert report["problem"].tolist() == ["interval_data"] and "1 of 2 rows" in report.loc[0, "detail"]


def test_ordinary_panels_are_not_flagged():
    # another column of times that is not the next occasion (a fixed treatment start, a date before the visit)
    df = pd.DataFrame({"pid": [1, 1, 1, 2, 2], "day": [0, 30, 60, 0, 30], "treat": [10, 10, 10, 5, 5],
                       "lab_day": [-2, 28, 57, -1, 29]})
    assert pfx.check(df, id="pid", time="day").empty
    demo = cohort(60, seed=3)
    assert "interval_data" not in pfx.check(demo, id=["site", "subject"], time="visit_date")["problem"].tolist()
    assert "interval_data" not in pfx.check(demo, id=["site", "subject"], time="day")["problem"].tolist()


def test_assert_panel_structure_fails_on_the_warning():
    from panelfx.testing import assert_panel_structure

    data = pd.read_csv(STANFORD)
    with pytest.raises(AssertionError, match="interval_data: 1"):
        assert_panel_structure(data, id="id", time="start")
    assert_panel_structure(data, id="id", time="stop")
