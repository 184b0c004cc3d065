"""Bad input: each error path raises its typed PanelError subclass naming the column, the
count and the first offending ids; and no call ever changes the input frame."""

from __future__ import annotations

import dataclasses

import numpy as np
import pandas as pd
import pytest
from catalogue import ENTRIES, add_reference_time

import panelfx as pfx
from panelfx.errors import (
    ColumnExistsError,
    ColumnTypeError,
    DuplicateOccasionError,
    MissingColumnError,
    NotConstantError,
    NullKeyError,
    OptionError,
    PanelError,
    TimeTypeError,
)
from panelfx.testing.strategies import PanelCase


def visits() -> pd.DataFrame:
    """Invented: three subjects, rows out of order, a string index."""
    return pd.DataFrame(
        {"pid": [2, 1, 1, 3, 1, 2], "t": [0, 14, 0, 0, 28, 7], "y": [5.0, 2.0, 1.0, 9.0, np.nan, 6.0],
         "x": [1, 2, 3, 4, 5, 6], "flag": [True, False, True, False, False, True],
         "dose": [0.0, 1.0, 2.5, 0.0, 10.0, 0.5]},
        index=["r1", "r2", "r3", "r4", "r5", "r6"],
    )


def run(frame, *trs, **kw):
    return pfx.derive(frame, *(trs or (pfx.change_from_previous("y"),)), **{"id": "pid", "time": "t", **kw})


# --------------------------------------------------------------------------- the frame
@pytest.mark.parametrize(("drop", "what"), [("pid", "id"), ("t", "time"), ("y", "needed by transform #1")])
def test_missing_column(drop, what):
    with pytest.raises(MissingColumnError, match=what) as ei:
        run(visits().drop(columns=drop))
    assert ei.value.column == drop and ei.value.count == 1
    assert isinstance(ei.value, KeyError)


def test_missing_column_made_by_a_later_transform():
    with pytest.raises(MissingColumnError, match=r"made by a later transform \(#2, baseline\): reorder them") as ei:
        run(visits(), pfx.lag("y_baseline"), pfx.baseline("y"))
    assert ei.value.column == "y_baseline"


def test_null_id_names_the_row_labels():
    df = visits()
    df.loc[["r2", "r5"], "pid"] = np.nan
    with pytest.raises(NullKeyError, match="missing subject id in column 'pid': 2 rows") as ei:
        run(df)
    assert (ei.value.column, ei.value.count, ei.value.ids) == ("pid", 2, ["r2", "r5"])


def test_null_id_in_a_second_id_column():
    df = visits().assign(site=["A", "A", None, "B", "A", "A"])
    with pytest.raises(NullKeyError) as ei:
        run(df, id=["site", "pid"])
    assert ei.value.count == 1 and ei.value.ids == ["r3"]


@pytest.mark.parametrize("null", [np.nan, pd.NaT])
def test_null_time_names_the_subjects(null):
    df = visits()
    if null is pd.NaT:
        df["t"] = pd.Timestamp("2024-03-01") + pd.to_timedelta(df["t"], unit="D")
    df.loc["r5", "t"] = null
    with pytest.raises(NullKeyError, match="missing time in column 't': 1 row") as ei:
        run(df)
    assert (ei.value.column, ei.value.count, ei.value.ids) == ("t", 1, [1])


def test_duplicate_occasions():
    df = visits()
    df.loc["r6", "t"] = 0  # subject 2 now has two rows at time 0
    df.loc["r5", "t"] = 14  # subject 1 two rows at 14
    with pytest.raises(DuplicateOccasionError, match="duplicate \\(id, time\\)") as ei:
        run(df)
    assert (ei.value.column, ei.value.count) == ("t", 2)
    assert sorted(ei.value.ids) == [1, 2]


def test_text_time_says_parse_first():
    df = visits().assign(t=["2024-01-0" + str(i) for i in range(1, 7)])
    with pytest.raises(TimeTypeError, match=r"Text dates must be parsed first, e.g. .*pd.to_datetime") as ei:
        run(df)
    assert ei.value.column == "t" and ei.value.count == 6
    assert isinstance(ei.value, TypeError)


def test_text_where_numbers_are_needed():
    df = visits().astype({"y": object})
    df.loc[["r1", "r4"], "y"] = ["high", "n/a"]
    with pytest.raises(ColumnTypeError, match="text where numbers are needed.*pd.to_numeric") as ei:
        run(df)
    assert (ei.value.column, ei.value.count) == ("y", 2)
    assert ei.value.ids == [2, 3]


def test_datetimes_where_numbers_are_needed():
    df = visits().assign(y=pd.Timestamp("2024-01-01"))
    with pytest.raises(ColumnTypeError) as ei:
        run(df)
    assert ei.value.column == "y"


def test_output_name_exists():
    with pytest.raises(ColumnExistsError, match="already in the frame; choose another with name=") as ei:
        run(visits().assign(y_diff=0.0))
    assert ei.value.column == "y_diff" and ei.value.count == 1


def test_two_transforms_with_the_same_output_name():
    with pytest.raises(ColumnExistsError, match="also made by transform #1") as ei:
        run(visits(), pfx.lag("y", name="prev"), pfx.lag("x", name="prev"))
    assert ei.value.column == "prev"


def test_reference_time_that_varies_within_subject():
    df = visits().assign(start=[0, 5, 6, 0, 5, 0])
    with pytest.raises(NotConstantError, match="reference time varies within subject") as ei:
        run(df, pfx.baseline("y", "last_before", reference="start"))
    assert (ei.value.column, ei.value.count, ei.value.ids) == ("start", 2, [1])  # first (t=0) says 6, two rows 5


# --------------------------------------------------------------------------- options
BAD_OPTIONS = [
    (lambda: pfx.lag("y", 0), "periods must be a non-zero integer, got 0"),
    (lambda: pfx.lag("y", 1.5), "periods must be"),
    (lambda: pfx.lag("y", True), "periods must be"),
    (lambda: pfx.baseline("y", "earliest"), "rule must be one of"),
    (lambda: pfx.baseline("y", "last_before"), "needs reference="),
    (lambda: pfx.baseline("y", reference="start"), "used only with rule='last_before'"),
    (lambda: pfx.baseline("y", "last_before", reference=[1]), "reference must be a column name or a number"),
    (lambda: pfx.change_from_baseline("y", "log"), "kind must be one of"),
    (lambda: pfx.change_from_baseline("y", after_baseline_only="yes"), "after_baseline_only must be True or False"),
    (lambda: pfx.change_from_previous("y", "ratio"), "kind must be one of"),
    (lambda: pfx.change_from_previous("y", skip_missing=1), "skip_missing must be True or False"),
    (lambda: pfx.lag(3), "col must be a column name"),
    (lambda: pfx.baseline("y", name=""), "name must be a column name"),
]


@pytest.mark.parametrize(("build", "message"), BAD_OPTIONS, ids=[m for _, m in BAD_OPTIONS])
def test_wrong_option_values(build, message):
    """Option errors are raised when the transform is built (so saved derivations validate too)."""
    with pytest.raises(OptionError, match=message.replace("(", r"\(").replace(")", r"\)")):
        build()


@pytest.mark.parametrize(("type_name", "entry"), ENTRIES, ids=[e.label for _, e in ENTRIES])
def test_every_transform_checks_column_and_name_options(type_name, entry):
    """An empty column name or output name is an OptionError for every catalogued transform."""
    tr = entry.example()
    fields = {f.name for f in dataclasses.fields(tr)}
    checked = 0
    for field in ("col", "name"):
        if field in fields:
            with pytest.raises(OptionError, match=field):
                dataclasses.replace(tr, **{field: ""})
            checked += 1
    if "names" in fields:
        with pytest.raises(OptionError):
            dataclasses.replace(tr, names=("a",))
        checked += 1
    assert checked, f"{type_name} has none of the usual col/name options: add its own bad-option cases"


@pytest.mark.parametrize(("kw", "message"), [
    ({"id": []}, "id must be a column name or a list"),
    ({"id": ["pid", 3]}, "id must be a column name or a list"),
    ({"time": 3}, "time must be a column name"),
    ({"time": "pid"}, "also an id column"),
    ({"unit": "D"}, "numeric times whose unit is declared with time_unit="),
])
def test_wrong_declaration(kw, message):
    with pytest.raises(OptionError, match=message):
        run(visits(), **kw)


def test_wrong_unit_for_datetimes():
    df = visits().assign(t=pd.Timestamp("2024-01-01") + pd.to_timedelta(visits()["t"], unit="D"))
    with pytest.raises(OptionError, match="unit must be one of"):
        run(df, unit="fortnight")
    with pytest.raises(OptionError, match="is a number but time column 't' holds datetime"):
        run(df, pfx.baseline("y", "last_before", reference=3))


def test_not_a_transform_or_not_a_frame():
    with pytest.raises(OptionError, match="transform #2 is a str, not a panelfx transform"):
        run(visits(), pfx.lag("y"), "lag")
    with pytest.raises(pfx.FrameTypeError, match="frame must be a pandas DataFrame, a polars DataFrame or a pyarrow "
                       "Table, got a dict"):  # also a TypeError
        pfx.derive(visits().to_dict(), pfx.lag("y"), id="pid", time="t")
    with pytest.raises(OptionError, match="uses the id column"):
        run(visits(), pfx.lag("pid"))


def test_every_error_is_a_panel_error_and_a_builtin():
    for cls, builtin in [(MissingColumnError, KeyError), (NullKeyError, ValueError),
                         (DuplicateOccasionError, ValueError), (TimeTypeError, TypeError),
                         (ColumnTypeError, TypeError), (ColumnExistsError, ValueError),
                         (NotConstantError, ValueError), (OptionError, ValueError)]:
        assert issubclass(cls, PanelError) and issubclass(cls, builtin)
    err = MissingColumnError("column 'q' is missing", column="q", count=1)
    assert str(err) == "column 'q' is missing"  # not the quoted repr KeyError would print


# --------------------------------------------------------------------------- input never changed
def _input_frames() -> dict[str, pd.DataFrame]:
    base = visits()
    dt = base.assign(t=(pd.Timestamp("2024-03-30") + pd.to_timedelta(base["t"], unit="D"))
                     .dt.tz_localize("Europe/Berlin"))
    arrow = base.astype({"y": "double[pyarrow]", "x": "Int64", "pid": "string[pyarrow]"})
    return {"numbers": base, "datetime_tz": dt, "arrow_nullable": arrow}


@pytest.mark.parametrize("kind", ["numbers", "datetime_tz", "arrow_nullable"])
@pytest.mark.parametrize(("type_name", "entry"), ENTRIES, ids=[e.label for _, e in ENTRIES])
def test_input_frame_is_unchanged(type_name, entry, kind):
    """After derive (and after a failing derive) the input has the same values, dtypes,
    index and column order; the output keeps them too, with the new columns at the end."""
    frame = _input_frames()[kind]
    case = PanelCase(frame, "pid", "t")
    if set(entry.time_kinds) <= {"int", "float"} and kind == "datetime_tz":
        pytest.skip("numeric-time configuration")
    frame = entry.frame(case)
    before = frame.copy(deep=True)
    tr = entry.make(PanelCase(frame, "pid", "t"))
    tables = entry.tables_for(frame, case)
    tables_before = {k: v.copy(deep=True) for k, v in (tables or {}).items()}
    out = pfx.derive(frame, tr, id="pid", time="t", tables=tables)
    pd.testing.assert_frame_equal(frame, before, check_exact=True)
    for k, v in (tables or {}).items():  # side tables are never changed either
        pd.testing.assert_frame_equal(v, tables_before[k], check_exact=True)
    assert list(frame.columns) == list(before.columns) and frame.index.equals(before.index)
    assert list(out.columns) == [*before.columns, *tr.outputs()]
    pd.testing.assert_frame_equal(out[list(before.columns)], before, check_exact=True)
    with pytest.raises(ColumnExistsError):
        pfx.derive(out, tr, id="pid", time="t", tables=tables)
    pd.testing.assert_frame_equal(frame, before, check_exact=True)


def test_reference_time_helper_is_constant():
    """The catalogue's reference-time column is what the last_before entries assume."""
    out = add_reference_time(visits(), PanelCase(visits(), "pid", "t"))
    assert out.groupby("pid")["ref_t"].nunique().eq(1).all()
