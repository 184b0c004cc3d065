"""panelfx.Derivation: an immutable panel declaration + ordered transforms that applies
exactly as ``derive`` does, validates its order up front and describes its outputs."""

from __future__ import annotations

import dataclasses

import numpy as np
import pandas as pd
import pytest
from catalogue import ENTRIES, renamed
from hypothesis import assume, given, settings
from hypothesis import strategies as st

import panelfx as pfx
from panelfx.derivation import DICTIONARY_COLUMNS
from panelfx.testing.strategies import TIME_KINDS, panels


def _frame() -> pd.DataFrame:
    # Invented: systolic pressure at three visits; rows deliberately out of order, string labels.
    return pd.DataFrame(
        {"pid": [2, 1, 1, 2, 1], "day": [0, 14, 0, 30, 28], "sbp": [150.0, 142.0, 151.0, np.nan, 139.0]},
        index=["e", "d", "c", "b", "a"],
    )


def test_apply_is_derive_and_keeps_input():
    """apply gives what derive gives (same values, dtypes, index, row order) and leaves the input alone."""
    df = _frame()
    before = df.copy()
    trs = (pfx.baseline("sbp"), pfx.change_from_baseline("sbp"), pfx.lag("sbp_change"), pfx.within_between("sbp"))
    d = pfx.Derivation(*trs, id="pid", time="day")
    pd.testing.assert_frame_equal(d.apply(df), pfx.derive(df, *trs, id="pid", time="day"))
    pd.testing.assert_frame_equal(df, before)
    assert df.attrs == {}


@settings(max_examples=40, deadline=None)
@given(data=st.data())
def test_apply_equals_derive_on_generated_panels(data):
    """Over generated panels (id, time and index kinds) and catalogue transforms, applying a
    derivation is exactly derive."""
    picks = data.draw(st.lists(st.sampled_from(ENTRIES), min_size=1, max_size=3))
    kinds = [k for k in TIME_KINDS if all(k in e.time_kinds for _, e in picks)]
    if not kinds:
        picks, kinds = picks[:1], list(picks[0][1].time_kinds)
    case = data.draw(panels(time_kinds=kinds, index_kinds=("range", "str", "multi")))
    frame = case.frame
    chosen = []
    tables: dict = {}
    for i, (_, entry) in enumerate(picks):
        if entry.prepare is not None:
            frame = entry.prepare(frame, case)
        chosen.append(renamed(entry.make(case), i))
    for _, entry in picks:
        tables.update(entry.tables_for(frame, case) or {})
    names = [c for tr in chosen for c in tr.outputs()]
    assume(len(set(names)) == len(names))  # a transform of fixed output names picked twice
    d = pfx.Derivation(*chosen, id=case.id, time=case.time)
    expected = pfx.derive(frame, *chosen, **case.keys, tables=tables)
    pd.testing.assert_frame_equal(d.apply(frame, tables), expected)


def test_order_is_checked_up_front():
    """A transform that needs a column made by a later one fails when the derivation is built,
    naming the column and both transforms."""
    with pytest.raises(pfx.MissingColumnError, match=r"'sbp_change'.*#1 \(lag\).*later transform \(#2, "
                                                    r"change_from_baseline\): reorder") as err:
        pfx.Derivation(pfx.lag("sbp_change"), pfx.change_from_baseline("sbp"), id="pid", time="day")
    assert err.value.column == "sbp_change"
    assert isinstance(err.value, KeyError)


@pytest.mark.parametrize(
    ("transforms", "error", "match"),
    [
        ((pfx.lag("sbp"), pfx.lag("sbp")), pfx.ColumnExistsError, r"'sbp_lag1' of transform #2 .* also made by transform #1"),
        ((pfx.lag("pid"),), pfx.OptionError, r"uses the id column 'pid'"),
        ((pfx.lag("sbp", name="pid"),), pfx.ColumnExistsError, r"'pid' .* is the id or time column"),
        (("lag",), pfx.OptionError, r"transform #1 is a str, not a panelfx transform"),
    ],
)
def test_bad_transform_lists(transforms, error, match):
    with pytest.raises(error, match=match):
        pfx.Derivation(*transforms, id="pid", time="day")


@pytest.mark.parametrize(
    ("kwargs", "match"),
    [
        (dict(id="pid", time="pid"), "also an id column"),
        (dict(id="pid", time="day", unit="days"), r"unit must be one of \["),
        (dict(id=[], time="day"), "id must be a column name"),
        (dict(id="pid", time=""), "time must be a column name"),
        (dict(id="pid", time="day", description=3), "description must be a string"),
    ],
)
def test_bad_declarations(kwargs, match):
    with pytest.raises(pfx.OptionError, match=match):
        pfx.Derivation(pfx.lag("sbp"), **kwargs)


def test_missing_column_at_apply_names_it():
    """A column the frame lacks is reported before anything is computed."""
    d = pfx.Derivation(pfx.lag("sbp"), pfx.baseline("dbp"), id="pid", time="day")
    with pytest.raises(pfx.MissingColumnError, match=r"column 'dbp' needed by transform #2 \(baseline\)"):
        d.apply(_frame())


def test_immutable_hashable_and_equal():
    d = pfx.Derivation(pfx.lag("sbp"), id=["site", "pid"], time="day", description="invented")
    assert d.id == ("site", "pid") and d.id_cols == ["site", "pid"]
    with pytest.raises(dataclasses.FrozenInstanceError):
        d.time = "week"  # type: ignore[misc]
    same = pfx.Derivation([pfx.lag("sbp")], id=("site", "pid"), time="day", description="invented")
    assert d == same and hash(d) == hash(same)
    assert d != pfx.Derivation(pfx.lag("sbp", 2), id=["site", "pid"], time="day", description="invented")
    assert "transforms=(pfx.lag('sbp'),)" in repr(d)


def test_extend_composes():
    """extend returns a new derivation; it may use the earlier outputs; the original is unchanged."""
    base = pfx.Derivation(pfx.baseline("sbp"), id="pid", time="day", unit=None, description="invented")
    more = base.extend(pfx.change_from_baseline("sbp"), pfx.Derivation(pfx.lag("sbp_change"), id="pid", time="day"))
    assert base.outputs() == ("sbp_baseline",)
    assert more.outputs() == ("sbp_baseline", "sbp_change", "sbp_change_lag1")
    assert more.description == "invented"
    assert more.inputs() == ("sbp",)
    pd.testing.assert_frame_equal(
        more.apply(_frame()),
        pfx.derive(_frame(), *more.transforms, id="pid", time="day"),
    )
    with pytest.raises(pfx.OptionError, match="cannot extend"):
        base.extend(pfx.Derivation(pfx.lag("sbp"), id="pid", time="week"))
    with pytest.raises(pfx.ColumnExistsError):
        base.extend(pfx.baseline("sbp"))


def test_inputs_outputs_with_several_outputs():
    d = pfx.Derivation(pfx.within_between("sbp"), pfx.lag("sbp_within"), pfx.baseline("dbp", "last_before",
                      reference="start"), id="pid", time="day")
    assert d.outputs() == ("sbp_between", "sbp_within", "sbp_within_lag1", "dbp_baseline")
    assert d.inputs() == ("sbp", "dbp", "start")


def test_provenance_on_result():
    """apply records the derivation and its data dictionary in attrs; earlier provenance is kept."""
    first = pfx.Derivation(pfx.baseline("sbp"), id="pid", time="day")
    out = first.apply(_frame())
    record = out.attrs["panelfx"]
    assert pfx.Derivation.from_dict(record["derivation"]) == first
    assert [r["column"] for r in record["dictionary"]] == ["sbp_baseline"]
    assert record["dictionary"][0]["dtype"] == "float64"
    second = pfx.Derivation(pfx.lag("sbp_baseline"), id="pid", time="day")
    out2 = second.apply(out)
    assert pfx.Derivation.from_dict(out2.attrs["panelfx"]["derivation"]) == second
    assert out2.attrs["panelfx"]["previous"] == record
    assert "previous" not in out.attrs["panelfx"]  # the first result is not changed


def test_dictionary_without_frame():
    """One row per output column; past-only spreads (a lag of a baseline is not past-only);
    dtype unknown without a frame."""
    d = pfx.Derivation(pfx.lag("sbp"), pfx.baseline("sbp"), pfx.lag("sbp_baseline"), pfx.within_between("sbp"),
                      id="pid", time="day")
    table = d.dictionary()
    assert list(table.columns) == DICTIONARY_COLUMNS
    assert table["column"].tolist() == ["sbp_lag1", "sbp_baseline", "sbp_baseline_lag1", "sbp_between",
                                        "sbp_within"]
    assert table["step"].tolist() == [1, 2, 3, 4, 4]
    assert table["past_only"].tolist() == [True, False, False, False, False]
    assert table["sources"].tolist() == ["sbp", "sbp", "sbp_baseline", "sbp", "sbp"]
    assert table["dtype"].isna().all()
    assert table["description"].iloc[0] == pfx.lag("sbp").describe()
    assert table["description"].iloc[3].endswith("[output 1 of 2]")
    assert table["time_unit"].tolist() == [""] * 5  # carried values and means carry no time unit
    timed = pfx.Derivation(pfx.gap(), pfx.change_from_previous("sbp", "rate"), pfx.cumulative("sbp", "step"),
                           pfx.change_from_previous("day", name="day_step"), id="pid", time="day").dictionary()
    unit = "D (days) for datetime times, else the units of 'day'"
    assert timed["time_unit"].tolist() == [unit, f"per {unit}", f"sbp x {unit}", unit]


def test_dictionary_with_frame_and_units():
    """With a frame the dtypes come from the applied result, and the unit is resolved:
    numbers keep their own units, datetimes use unit (default days)."""
    df = _frame()
    d = pfx.Derivation(pfx.change_from_previous("sbp", "rate"), pfx.lag("sbp"), id="pid", time="day")
    table = d.dictionary(df)
    assert table["dtype"].tolist() == ["float64", "float64"]
    assert table["time_unit"].tolist() == ["per the units of 'day'", ""]
    dated = df.assign(day=pd.Timestamp("2024-01-01") + pd.to_timedelta(df["day"], unit="D"))
    assert d.dictionary(dated)["time_unit"].tolist() == ["per D (days)", ""]
    weekly = pfx.Derivation(*d.transforms, id="pid", time="day", unit="W")
    assert weekly.dictionary(dated)["time_unit"].tolist() == ["per W (weeks)", ""]
    assert weekly.dictionary()["time_unit"].tolist() == ["per W (weeks)", ""]
    # numeric days declared with time_unit: the rate per week converts them
    declared = pfx.Derivation(*d.transforms, id="pid", time="day", unit="W", time_unit="D")
    assert declared.apply(df).loc["d", "sbp_rate"] == pytest.approx(-4.5)
    assert declared.dictionary(df)["time_unit"].tolist() == ["per W (weeks)", ""]
    assert pfx.Derivation.from_json(declared.to_json()) == declared
    # the rate really is per week: 142 - 151 over 14 days = -9 per 2 weeks
    assert weekly.apply(dated).loc["d", "sbp_rate"] == pytest.approx(-4.5)
    with pytest.raises(pfx.OptionError, match="unit='W' converts durations of datetime times"):
        weekly.apply(df)


def test_empty_derivation():
    d = pfx.Derivation(id="pid", time="day")
    pd.testing.assert_frame_equal(d.apply(_frame()), _frame())
    assert d.dictionary().empty and list(d.dictionary().columns) == DICTIONARY_COLUMNS
