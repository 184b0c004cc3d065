"""The derive contract: column order, index and row order kept, sorted input detected,
numpy / nullable / Arrow-backed dtypes for ids, times and values, several id columns,
``DataFrame.pipe``."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from hypothesis import given

import panelfx as pfx
from panelfx._panel import Panel
from panelfx.testing import assert_matches_reference, reference
from panelfx.testing.strategies import ALL_ID_KINDS, ALL_TIME_KINDS, INDEX_KINDS, VALUE_KINDS, panels

STEPS = (pfx.baseline("y"), pfx.change_from_baseline("y"), pfx.change_from_previous("y", "rate"), pfx.lag("y"),
         pfx.lag("x", -1))


def visits() -> pd.DataFrame:
    """Invented: three subjects, sorted by subject and day."""
    return pd.DataFrame({"pid": [1, 1, 1, 2, 2, 3], "day": [0, 7, 14, 0, 10, 3],
                         "y": [4.0, np.nan, 6.0, 1.0, 3.0, 2.0], "x": [1, 2, 3, 4, 5, 6]})


def test_columns_in_order_inputs_then_outputs():
    out = pfx.derive(visits(), *STEPS, id="pid", time="day")
    assert list(out.columns) == ["pid", "day", "y", "x", "y_baseline", "y_change", "y_rate", "y_lag1", "x_lead1"]


def test_unsorted_input_keeps_index_and_row_order():
    df = visits()
    shuffled = df.iloc[[4, 0, 5, 2, 1, 3]].set_axis(["e", "a", "f", "c", "b", "d"])
    out = pfx.derive(shuffled, *STEPS, id="pid", time="day")
    assert list(out.index) == ["e", "a", "f", "c", "b", "d"]
    pd.testing.assert_frame_equal(out[list(df.columns)], shuffled)
    sorted_out = pfx.derive(df, *STEPS, id="pid", time="day").set_axis(list("abcdef"))
    pd.testing.assert_frame_equal(out, sorted_out.loc[out.index])


def test_sorted_input_is_detected():
    """Grouped by subject and in time order: no sort (order is None); subjects need not be
    in id order, only contiguous."""
    assert Panel(visits(), id="pid", time="day").ordering.order is None
    grouped = visits().iloc[[3, 4, 0, 1, 2, 5]]  # subject 2 first, then 1, then 3
    assert Panel(grouped, id="pid", time="day").ordering.order is None
    assert Panel(visits().iloc[[1, 0, 2, 3, 4, 5]], id="pid", time="day").ordering.order is not None
    split = visits().iloc[[0, 3, 1, 2, 4, 5]]  # subject 1's rows not contiguous
    p = Panel(split, id="pid", time="day")
    assert p.ordering.order is not None
    assert p.starts.tolist() == [0, 3, 5] and p.subjects.pos.tolist() == [0, 1, 2, 0, 1, 0]


def test_duplicate_index_labels_and_multiindex_are_kept():
    df = visits().set_axis([0, 0, 1, 1, 2, 2])
    out = pfx.derive(df.iloc[::-1], pfx.lag("y"), id="pid", time="day")
    assert list(out.index) == [2, 2, 1, 1, 0, 0]
    want = reference(df.iloc[::-1], pfx.lag("y"), id="pid", time="day")
    assert_matches_reference(out, want, ["y_lag1"])
    mi = visits().set_index(pd.MultiIndex.from_product([["a", "b"], [1, 2, 3]]))
    assert pfx.derive(mi, pfx.lag("y"), id="pid", time="day").index.equals(mi.index)


def test_empty_and_single_row_frames():
    empty = visits().iloc[:0]
    out = pfx.derive(empty, *STEPS, id="pid", time="day")
    assert len(out) == 0 and list(out.columns)[-1] == "x_lead1"
    one = pfx.derive(visits().iloc[[2]], *STEPS, id="pid", time="day")
    assert one["y_baseline"].tolist() == [6.0] and np.isnan(one["y_lag1"].iloc[0])


def test_pipe_and_multi_column_ids():
    df = pd.DataFrame({"site": ["N", "N", "S", "S"], "subj": [1, 1, 1, 1], "day": [0, 5, 0, 5],
                       "y": [1.0, 2.0, 10.0, 13.0]})
    out = df.pipe(pfx.derive, pfx.change_from_baseline("y"), id=["site", "subj"], time="day")
    assert out["y_change"].tolist() == [0.0, 1.0, 0.0, 3.0]
    with pytest.raises(pfx.DuplicateOccasionError):
        pfx.derive(df, pfx.lag("y"), id="subj", time="day")  # subject numbers repeat across sites


ID_DTYPES = ["int64", "Int64", "int64[pyarrow]", "str", "string[pyarrow]", "category", "object"]
TIME_DTYPES = ["int64", "Int64", "float64", "Float64", "double[pyarrow]", "int32[pyarrow]",
               "datetime64[ns]", "datetime64[s]", "datetime_tz", "timestamp[us][pyarrow]", "timedelta64[ns]"]
VALUE_DTYPES = ["float64", "Float64", "double[pyarrow]", "Int64", "int64[pyarrow]", "float32"]


def _with_dtypes(id_dtype: str, time_dtype: str, value_dtype: str) -> pd.DataFrame:
    df = visits()
    ids = df["pid"] if id_dtype.startswith(("int", "Int")) else "p" + df["pid"].astype(str)
    df["pid"] = ids.astype(id_dtype) if id_dtype != "object" else ids.astype(object)
    if time_dtype == "datetime_tz":
        df["day"] = (pd.Timestamp("2024-10-20") + pd.to_timedelta(df["day"], unit="D")).dt.tz_localize(
            "America/Chicago")
    elif time_dtype.startswith(("datetime", "timestamp")):
        df["day"] = (pd.Timestamp("2024-10-20") + pd.to_timedelta(df["day"], unit="D")).astype(time_dtype)
    elif time_dtype.startswith("timedelta"):
        df["day"] = pd.to_timedelta(df["day"], unit="D")
    else:
        df["day"] = df["day"].astype(time_dtype)
    y = df["y"] if value_dtype.startswith(("float", "Float", "double")) else df["y"].fillna(5.0)
    df["y"] = y.astype(value_dtype)
    return df


@pytest.mark.parametrize("id_dtype", ID_DTYPES)
def test_id_dtypes(id_dtype):
    df = _with_dtypes(id_dtype, "int64", "float64")
    out = pfx.derive(df, *STEPS, id="pid", time="day")
    want = pfx.derive(visits(), *STEPS, id="pid", time="day")
    assert_matches_reference(out, want, [c for tr in STEPS for c in tr.outputs()], rtol=0, atol=0)
    assert out["pid"].dtype == df["pid"].dtype


@pytest.mark.parametrize("time_dtype", TIME_DTYPES)
def test_time_dtypes(time_dtype):
    """Integer days, float days, datetimes (any resolution, with a zone that changes to
    winter time inside the data) and timedeltas give the same derived values; the
    default unit of datetime durations is the day."""
    df = _with_dtypes("int64", time_dtype, "float64")
    out = pfx.derive(df, *STEPS, id="pid", time="day")
    want = pfx.derive(visits(), *STEPS, id="pid", time="day")
    # the tz case crosses the end of daylight saving (3 Nov 2024 in Chicago): durations are
    # between instants, so calendar day 7 is 7 days + 1 hour after day 0
    rtol = 1e-2 if time_dtype == "datetime_tz" else 0
    assert_matches_reference(out, want, [c for tr in STEPS for c in tr.outputs()], rtol=rtol, atol=0)
    assert out["day"].dtype == df["day"].dtype


@pytest.mark.parametrize("value_dtype", VALUE_DTYPES)
def test_value_dtypes(value_dtype):
    df = _with_dtypes("int64", "int64", value_dtype)
    base = visits().assign(y=df["y"].astype("float64"))
    out = pfx.derive(df, *STEPS, id="pid", time="day")
    want = pfx.derive(base, *STEPS, id="pid", time="day")
    assert_matches_reference(out, want, [c for tr in STEPS for c in tr.outputs()], rtol=1e-6, atol=0)
    assert out["y"].dtype == df["y"].dtype


def test_copy_on_write_output_is_independent():
    df = visits()
    out = pfx.derive(df, pfx.lag("y"), id="pid", time="day")
    out.loc[0, "y"] = -1.0
    assert df.loc[0, "y"] == 4.0


@given(case=panels(id_kinds=ALL_ID_KINDS, time_kinds=ALL_TIME_KINDS, index_kinds=INDEX_KINDS,
                   value_kinds=VALUE_KINDS))
def test_row_order_does_not_matter(case):
    """Deriving on shuffled rows gives each row what it gets from the sorted frame, for every
    id, time, index and value storage the strategy generates."""
    got = pfx.derive(case.frame, *STEPS, **case.keys)
    keys = [*np.atleast_1d(case.id), case.time]
    order = np.lexsort([pd.factorize(case.frame[k], sort=True)[0] for k in reversed(keys)])
    sorted_frame = case.frame.iloc[order]
    again = pfx.derive(sorted_frame, *STEPS, **case.keys)
    assert Panel(sorted_frame, **case.keys).ordering.order is None
    # bit for bit: the kernels never depend on where a subject sits among the others
    assert_matches_reference(got.iloc[order], again, [c for tr in STEPS for c in tr.outputs()], rtol=0.0, atol=0.0)
    assert_matches_reference(got, reference(case.frame, *STEPS, **case.keys),
                             [c for tr in STEPS for c in tr.outputs()], id=case.id, time=case.time)


def test_threads_give_the_same_bits_as_one_thread():
    """Transforms run side by side on two threads give exactly what one thread gives (the
    catalogue's transforms on a generated panel); threads must be a positive integer."""
    from catalogue import ENTRIES

    rng = np.random.default_rng(3)
    n = 3000
    df = pd.DataFrame({"pid": rng.integers(0, 300, n), "t": rng.integers(0, 400, n).astype(float) / 2,
                       "y": rng.normal(size=n), "x": rng.integers(-5, 6, n), "flag": rng.random(n) < 0.2,
                       "dose": rng.random(n) * 3}).drop_duplicates(["pid", "t"])
    trs = [e.build(True) for _, e in ENTRIES if not e.build(True).tables() and e.prepare is None]
    seen: set[str] = set()
    unique = []
    for tr in trs:  # one transform per output name
        if not seen & set(tr.outputs()):
            unique.append(tr)
            seen |= set(tr.outputs())
    trs = unique
    one = pfx.derive(df, *trs, id="pid", time="t", threads=1)
    two = pfx.derive(df, *trs, id="pid", time="t", threads=2)
    pd.testing.assert_frame_equal(one, two, check_exact=True)
    with pytest.raises(pfx.OptionError, match="threads must be a positive integer"):
        pfx.derive(df, pfx.lag("y"), id="pid", time="t", threads=0)
