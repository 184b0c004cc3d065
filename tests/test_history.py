"""Hand-computed unit tests for baseline, change from baseline / previous, and lag."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import panelfx as pfx


@pytest.fixture
def visits() -> pd.DataFrame:
    # Invented: two people, rows deliberately out of time order, non-default index.
    return pd.DataFrame(
        {
            "pid": ["b", "a", "a", "b", "a", "b"],
            "day": [10, 20, 0, 0, 10, 25],
            "y": [4.0, 9.0, np.nan, 0.0, 6.0, 5.0],
            "start": [12, 5, 5, 12, 5, 12],
        },
        index=[60, 50, 40, 30, 20, 10],
    )


def col(df: pd.DataFrame, name: str) -> list:
    return [None if pd.isna(v) else v for v in df[name].tolist()]


def test_baseline_rules(visits):
    """first / first_valid / last_before pick the documented row and carry it to every row."""
    out = pfx.derive(
        visits,
        pfx.baseline("y", "first", name="b_first"),
        pfx.baseline("y"),
        pfx.baseline("y", "last_before", reference="start", name="b_ref"),
        id="pid", time="day",
    )
    # a: days 0 (NaN), 10 (6), 20 (9); b: days 0 (0), 10 (4), 25 (5)
    assert col(out, "b_first") == [0.0, None, None, 0.0, None, 0.0]
    assert col(out, "y_baseline") == [0.0, 6.0, 6.0, 0.0, 6.0, 0.0]
    # a's reference is day 5: nothing valid on or before it; b's is day 12: day 10 -> 4
    assert col(out, "b_ref") == [4.0, None, None, 4.0, None, 4.0]
    assert list(out.index) == [60, 50, 40, 30, 20, 10]


def test_baseline_keeps_dtype_of_text_and_ints():
    df = pd.DataFrame({"pid": [1, 1, 2], "t": [0, 1, 0], "arm": ["x", "y", "z"], "n": [3, 4, 5]})
    out = pfx.derive(df, pfx.baseline("arm"), pfx.baseline("n"), id="pid", time="t")
    assert out["arm_baseline"].tolist() == ["x", "x", "z"]
    assert out["n_baseline"].dtype == np.int64
    assert out["n_baseline"].tolist() == [3, 3, 5]


def test_baseline_numeric_reference():
    df = pd.DataFrame({"pid": [1, 1, 1], "t": [-7, 0, 7], "y": [1.0, np.nan, 3.0]})
    out = pfx.derive(df, pfx.baseline("y", "last_before", reference=0), id="pid", time="t")
    assert col(out, "y_baseline") == [1.0, 1.0, 1.0]


def test_change_from_baseline_kinds(visits):
    out = pfx.derive(
        visits,
        pfx.change_from_baseline("y"),
        pfx.change_from_baseline("y", "percent"),
        pfx.change_from_baseline("y", "ratio"),
        pfx.change_from_baseline("y", after_baseline_only=True, name="post"),
        id="pid", time="day",
    )
    # rows: b10, a20, a0, b0, a10, b25; baseline a = 6 (day 10), b = 0 (day 0)
    assert col(out, "y_change") == [4.0, 3.0, None, 0.0, 0.0, 5.0]
    # b's baseline is 0: percent and ratio are missing, never infinite
    assert col(out, "y_percent_change") == [None, 50.0, None, None, 0.0, None]
    assert col(out, "y_ratio") == [None, 1.5, None, None, 1.0, None]
    # up to and including the baseline occasion: missing
    assert col(out, "post") == [4.0, 3.0, None, None, None, 5.0]


def test_change_from_previous_kinds(visits):
    out = pfx.derive(
        visits,
        pfx.change_from_previous("y"),
        pfx.change_from_previous("y", "percent"),
        pfx.change_from_previous("y", "rate"),
        pfx.change_from_previous("y", "rate", skip_missing=True, name="rate_skip"),
        id="pid", time="day",
    )
    # a: NaN, 6, 9 at 0, 10, 20;  b: 0, 4, 5 at 0, 10, 25
    assert col(out, "y_diff") == [4.0, 3.0, None, None, None, 1.0]
    assert col(out, "y_percent_diff") == [None, 50.0, None, None, None, 25.0]
    assert col(out, "y_rate") == [0.4, 0.3, None, None, None, pytest.approx(1 / 15)]
    assert col(out, "rate_skip") == [0.4, 0.3, None, None, None, pytest.approx(1 / 15)]


def test_change_from_previous_skip_missing_uses_time_of_last_value():
    df = pd.DataFrame({"pid": [1] * 4, "t": [0, 5, 10, 20], "y": [1.0, np.nan, np.nan, 4.0]})
    out = pfx.derive(df, pfx.change_from_previous("y", skip_missing=True),
                    pfx.change_from_previous("y", "rate", skip_missing=True), id="pid", time="t")
    assert col(out, "y_diff") == [None, None, None, 3.0]
    assert col(out, "y_rate") == [None, None, None, 0.15]


def test_rate_in_days_and_hours_for_datetimes():
    df = pd.DataFrame({"pid": [1, 1], "when": pd.to_datetime(["2025-03-01", "2025-03-03"]), "y": [10.0, 14.0]})
    per_day = pfx.derive(df, pfx.change_from_previous("y", "rate"), id="pid", time="when")
    per_hour = pfx.derive(df, pfx.change_from_previous("y", "rate"), id="pid", time="when", unit="h")
    assert per_day["y_rate"].iloc[1] == 2.0
    assert per_hour["y_rate"].iloc[1] == pytest.approx(4 / 48)


def test_lag_and_lead(visits):
    out = pfx.derive(visits, pfx.lag("y"), pfx.lag("y", 2), pfx.lag("y", -1), id="pid", time="day")
    assert col(out, "y_lag1") == [0.0, 6.0, None, None, None, 4.0]
    assert col(out, "y_lag2") == [None, None, None, None, None, 0.0]
    assert col(out, "y_lead1") == [5.0, None, 6.0, 4.0, 9.0, None]


def test_lag_of_text_keeps_dtype():
    df = pd.DataFrame({"pid": [1, 1], "t": [1.5, 2.5], "arm": pd.Categorical(["p", "q"])})
    out = pfx.derive(df, pfx.lag("arm"), id="pid", time="t")
    assert isinstance(out["arm_lag1"].dtype, pd.CategoricalDtype)
    assert out["arm_lag1"].isna().tolist() == [True, False]
    assert out["arm_lag1"].iloc[1] == "p"


def test_multi_column_id_and_tz_aware_time():
    when = pd.to_datetime(["2025-01-01", "2025-01-08", "2025-01-01"]).tz_localize("Europe/Oslo")
    df = pd.DataFrame({"site": ["n", "n", "s"], "subj": [1, 1, 1], "when": when, "y": [1.0, 2.0, 3.0]})
    out = pfx.derive(df, pfx.change_from_baseline("y"), pfx.change_from_previous("y", "rate"),
                    id=["site", "subj"], time="when", unit="W")
    assert col(out, "y_change") == [0.0, 1.0, 0.0]
    assert col(out, "y_rate") == [None, 1.0, None]


@pytest.mark.parametrize(
    "make, message",
    [
        (lambda: pfx.lag("y", 0), "periods must be a non-zero integer, got 0"),
        (lambda: pfx.lag("y", 1.5), "periods must be an integer"),
        (lambda: pfx.baseline("y", "middle"), "rule must be one of"),
        (lambda: pfx.baseline("y", "last_before"), "needs reference="),
        (lambda: pfx.baseline("y", reference="start"), "used only with rule='last_before'"),
        (lambda: pfx.change_from_baseline("y", "log"), "kind must be one of"),
        (lambda: pfx.change_from_previous("y", "ratio"), "kind must be one of"),
        (lambda: pfx.change_from_previous("y", skip_missing="yes"), "skip_missing must be True or False"),
        (lambda: pfx.lag(3), "col must be a column name"),
        (lambda: pfx.lag("y", name=""), "name must be a column name"),
    ],
)
def test_option_errors(make, message):
    with pytest.raises(pfx.OptionError, match=message.replace("(", r"\(").replace(")", r"\)")):
        make()


def test_reference_must_fit_time_and_be_constant():
    df = pd.DataFrame({"pid": [1, 1], "when": pd.to_datetime(["2025-01-01", "2025-02-01"]), "y": [1.0, 2.0],
                       "start": [5, 5], "start_dt": pd.to_datetime(["2025-01-10", "2025-01-11"])})
    with pytest.raises(pfx.TimeTypeError, match="'start' holds number values"):
        pfx.derive(df, pfx.baseline("y", "last_before", reference="start"), id="pid", time="when")
    with pytest.raises(pfx.NotConstantError, match="reference time varies within subject") as err:
        pfx.derive(df, pfx.baseline("y", "last_before", reference="start_dt"), id="pid", time="when")
    assert err.value.column == "start_dt" and err.value.count == 1 and err.value.ids == [1]
    with pytest.raises(pfx.OptionError, match="is a number but time column"):
        pfx.derive(df, pfx.baseline("y", "last_before", reference=0), id="pid", time="when")


def test_transforms_are_frozen_values():
    a, b = pfx.change_from_baseline("y", "percent"), pfx.change_from_baseline("y", "percent")
    assert a == b and hash(a) == hash(b)
    assert repr(a) == "pfx.change_from_baseline('y', 'percent')"
    with pytest.raises(AttributeError):
        a.col = "z"  # type: ignore[misc]
