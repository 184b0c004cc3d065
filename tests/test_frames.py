"""Frames in, same frames out: pandas (numpy, nullable, Arrow-backed), polars and pyarrow input give
the same values, in the caller's own type and dtype backend, and the input is never changed.

References outside the project: polars' ``DataFrame.from_pandas`` / ``to_arrow`` / ``equals`` and
pyarrow's ``Table.from_pandas`` / ``Table.equals`` / ``Array.to_pylist`` make the inputs and compare
the outputs; pandas' ``convert_dtypes(dtype_backend=...)`` makes the nullable and Arrow-backed
frames (pandas' own notion of a dtype backend).  Data are invented.
"""

from __future__ import annotations

import datetime as dt

import numpy as np
import pandas as pd
import polars as pl
import pyarrow as pa
import pyarrow.compute as pc
import pytest
from hypothesis import given
from hypothesis import strategies as st

import panelfx as pfx
from panelfx._frames import backend_of


def invented_panel(seed: int = 3, n_subjects: int = 6) -> pd.DataFrame:
    """Invented: hydration checks (litres drunk) of hikers on a trek, unsorted, with gaps."""
    rng = np.random.default_rng(seed)
    sizes = rng.integers(1, 6, n_subjects)
    pid = np.repeat(np.arange(1, n_subjects + 1), sizes)
    day = np.concatenate([np.sort(rng.choice(40, k, replace=False)) for k in sizes])
    litres = rng.normal(2.0, 0.5, len(pid)).round(2)
    litres[rng.random(len(pid)) < 0.25] = np.nan
    blister = rng.random(len(pid)) < 0.3
    order = rng.permutation(len(pid))
    return pd.DataFrame({"pid": pid[order], "day": day[order], "litres": litres[order],
                         "blister": blister[order]})


def steps() -> list[pfx.Transform]:
    return [
        pfx.lag("litres", name="litres_prev"),
        pfx.baseline("litres", name="litres_base"),
        pfx.change_from_baseline("litres", name="litres_chg"),
        pfx.change_from_previous("litres", "rate", skip_missing=True, name="litres_rate"),
        pfx.rolling("litres", span=10, name="litres_mean_10"),
        pfx.carry_forward("litres", name="litres_locf"),
        pfx.events_so_far("blister", name="blister_events"),
        pfx.time_since("blister", name="blister_time_since"),
        pfx.ever("blister", name="blister_ever"),
        pfx.occasion(), pfx.gap(),
        pfx.cumulative("litres", "step", name="litres_area"),
    ]


OUTPUTS = [n for tr in steps() for n in tr.outputs()]


def as_numpy(df: pd.DataFrame) -> pd.DataFrame:
    return df


def as_nullable(df: pd.DataFrame) -> pd.DataFrame:
    return df.convert_dtypes(dtype_backend="numpy_nullable")


def as_arrow_pandas(df: pd.DataFrame) -> pd.DataFrame:
    return df.convert_dtypes(dtype_backend="pyarrow")


def as_polars(df: pd.DataFrame) -> pl.DataFrame:
    return pl.from_pandas(df)  # polars' own import: NaN becomes null


def as_table(df: pd.DataFrame) -> pa.Table:
    return pa.Table.from_pandas(df, preserve_index=False)  # pyarrow's own import: NaN becomes null


MAKERS = {"numpy": as_numpy, "nullable": as_nullable, "arrow": as_arrow_pandas, "polars": as_polars,
          "table": as_table}


def pylist(values: pd.Series) -> list:
    """A column as Python values, missing as None (pyarrow's from_pandas: NaN, NaT and NA are nulls)."""
    arr = pa.array(values, from_pandas=True)
    if pa.types.is_floating(arr.type):  # a NaN already inside an Arrow column is missing too
        arr = pc.if_else(pc.is_nan(arr), pa.scalar(None, arr.type), arr)
    return arr.to_pylist()


def copy_of(frame):
    return frame.copy(deep=True) if isinstance(frame, pd.DataFrame) else frame.clone() \
        if isinstance(frame, pl.DataFrame) else pa.Table.from_batches(frame.to_batches(), frame.schema)


def same_input(a, b) -> None:
    if isinstance(a, pd.DataFrame):
        pd.testing.assert_frame_equal(a, b)
    else:
        assert a.equals(b)


@pytest.mark.parametrize("kind", list(MAKERS))
def test_same_values_in_every_frame_type(kind):
    """The same derivation gives the same values whatever the frame (compared through pfx.to_pandas)."""
    raw = invented_panel()
    want = pfx.derive(raw, *steps(), id="pid", time="day")
    frame = MAKERS[kind](raw)
    before = copy_of(frame)
    got = pfx.derive(frame, *steps(), id="pid", time="day")
    same_input(frame, before)  # the input is never changed
    back = pfx.to_pandas(got)
    assert list(back.columns) == [*raw.columns, *OUTPUTS]
    for col in OUTPUTS:
        assert pylist(back[col]) == pylist(want[col]), col


def test_output_type_and_backend():
    """polars in -> polars out, Table in -> Table out, Arrow-backed pandas -> Arrow-backed derived
    columns, nullable pandas -> nullable ones, numpy pandas -> numpy ones (as before)."""
    raw = invented_panel()
    out = {k: pfx.derive(m(raw), *steps(), id="pid", time="day") for k, m in MAKERS.items()}
    assert all(isinstance(out["numpy"][c].dtype, np.dtype) for c in OUTPUTS)
    assert backend_of(out["nullable"]) == backend_of(as_nullable(raw)) == "numpy_nullable"
    assert all(out["nullable"][c].dtype.na_value is pd.NA for c in OUTPUTS)
    assert backend_of(out["arrow"]) == "pyarrow"
    assert all(isinstance(out["arrow"][c].dtype, pd.ArrowDtype) for c in OUTPUTS)
    assert isinstance(out["polars"], pl.DataFrame) and isinstance(out["table"], pa.Table)
    # the caller's own columns come back as they were, then the derived ones
    assert out["polars"].select(as_polars(raw).columns).equals(as_polars(raw))
    assert out["table"].select(raw.columns.tolist()).equals(as_table(raw))
    # derived missing values are nulls (not NaN) in Arrow: the first lag of every subject
    lag = out["table"].column("litres_prev")
    assert lag.null_count >= raw["pid"].nunique() and not pc.any(pc.is_nan(lag)).as_py()
    assert out["polars"]["litres_prev"].null_count() >= raw["pid"].nunique()
    assert out["arrow"]["litres_prev"].isna().sum() >= raw["pid"].nunique()


def test_pandas_index_and_row_order_kept_polars_order_kept():
    raw = invented_panel().set_axis([f"r{i}" for i in range(len(invented_panel()))])
    got = pfx.derive(as_arrow_pandas(raw), pfx.lag("litres"), id="pid", time="day")
    assert got.index.equals(raw.index)
    pol = pfx.derive(as_polars(raw.reset_index(drop=True)), pfx.occasion(), id="pid", time="day")
    assert pol["pid"].to_list() == raw["pid"].tolist()  # rows in the input's order, not sorted


def test_backend_rule():
    """Every column Arrow-backed: pyarrow; nullable and no numpy numbers: nullable; else numpy."""
    raw = invented_panel()
    assert backend_of(raw) == "numpy"
    mixed = raw.assign(litres=raw["litres"].astype("double[pyarrow]"))
    assert backend_of(mixed) == "numpy"
    out = pfx.derive(mixed, pfx.lag("day", name="day_prev"), id="pid", time="day")
    assert out["day_prev"].dtype == np.float64  # as before for a mix
    dated = as_nullable(raw).assign(when=pd.Timestamp("2024-05-01") + pd.to_timedelta(raw["day"], unit="D"))
    assert backend_of(dated) == "numpy_nullable"  # datetimes sit beside nullable columns, as pandas reads them


def test_side_tables_may_be_polars_or_arrow():
    raw = invented_panel()
    labs = pd.DataFrame({"pid": [1, 1, 2, 3], "drawn": [0, 10, 3, 1], "salt": [1.5, 2.5, 3.5, 4.5]})
    step = pfx.as_of("labs", "salt", time="drawn", name="salt_asof")
    want = pfx.derive(raw, step, id="pid", time="day", tables={"labs": labs})
    for maker in (as_polars, as_table, as_arrow_pandas):
        got = pfx.derive(maker(raw), step, id="pid", time="day", tables={"labs": maker(labs)})
        assert pylist(pfx.to_pandas(got)["salt_asof"]) == pylist(want["salt_asof"])


def test_datetime_times_in_polars_and_arrow():
    raw = invented_panel()
    dated = raw.assign(day=pd.Timestamp("2024-05-01") + pd.to_timedelta(raw["day"], unit="D"))
    want = pfx.derive(dated, pfx.gap(), pfx.rolling("litres", span="10D", name="litres_mean_10d"),
                      id="pid", time="day")
    as_dates = pl.from_pandas(dated).with_columns(pl.col("day").dt.date())  # polars Date: Arrow date32
    for frame in (pl.from_pandas(dated), as_dates, as_table(dated), as_dates.to_arrow()):
        got = pfx.to_pandas(pfx.derive(frame, pfx.gap(), pfx.rolling("litres", span="10D", name="litres_mean_10d"),
                                       id="pid", time="day"))
        for col in ("gap", "litres_mean_10d"):
            assert pylist(got[col]) == pylist(want[col])


def test_date_objects_as_times():
    """Object columns of datetime.date (as some readers deliver dates) are dates; a mix of dates and
    datetimes keeps the times of day."""
    raw = invented_panel()
    stamps = pd.Timestamp("2024-05-01") + pd.to_timedelta(raw["day"], unit="D")
    want = pfx.derive(raw.assign(day=stamps), pfx.gap(), id="pid", time="day")
    objects = raw.assign(day=pd.Series(stamps.dt.date.to_numpy(dtype=object), dtype=object))
    assert objects["day"].dtype == object
    assert pylist(pfx.derive(objects, pfx.gap(), id="pid", time="day")["gap"]) == pylist(want["gap"])
    report = pfx.check(objects, id="pid", time="day", spacing="7D")
    pd.testing.assert_frame_equal(report.drop(columns="time"),
                                  pfx.check(raw.assign(day=stamps), id="pid", time="day", spacing="7D")
                                  .drop(columns="time"))
    mix = pd.DataFrame({"pid": [1, 1], "day": pd.Series([dt.date(2024, 1, 1), dt.datetime(2024, 1, 2, 6)],
                                                        dtype=object)})
    assert pfx.derive(mix, pfx.gap(), id="pid", time="day")["gap"].tolist() == [pytest.approx(np.nan, nan_ok=True),
                                                                                1.25]


@pytest.mark.parametrize(("values", "says", "not_said"), [
    (["2024-01-01", "2024-01-08"], "Text dates must be parsed", "mix"),
    (["2024-01-01", dt.date(2024, 1, 8)], "a mix of str, datetime.date", "Text dates"),
    ([dt.time(8), dt.time(9)], "datetime.time objects", "Text dates"),
    ([1, 2], "numbers as Python objects", "Text dates"),
])
def test_time_hint_says_what_is_there(values, says, not_said):
    frame = pd.DataFrame({"pid": [1, 1], "day": pd.Series(values, dtype=object)})
    for call in (lambda: pfx.derive(frame, pfx.gap(), id="pid", time="day"),
                 lambda: pfx.check(frame, id="pid", time="day")):
        with pytest.raises(pfx.TimeTypeError, match=says) as err:
            call()
        assert not_said not in str(err.value)


def test_check_on_polars_and_arrow():
    raw = pd.DataFrame({"site": ["a", "a", "a", "b", "b"], "pid": [1, 1, 1, 2, 2], "day": [0, 31, 95, 0, 0]})
    want = pfx.check(raw, id="pid", time="day", spacing=30, tolerance=4)
    for frame in (pl.from_pandas(raw), as_table(raw), as_arrow_pandas(raw)):
        got = pfx.check(frame, id="pid", time="day", spacing=30, tolerance=4)
        assert type(got) is type(frame)
        back = pfx.to_pandas(got)
        for col in ("problem", "severity", "id", "row", "detail"):
            assert pylist(back[col]) == pylist(want[col]), col
        assert [None if v is None else float(v) for v in pylist(back["time"])] == \
            [None if v is None else float(v) for v in want["time"]]
    # several id columns: a struct per finding in Arrow and polars (a tuple in pandas)
    got = pfx.check(pl.from_pandas(raw), id=["site", "pid"], time="day")
    assert got["id"].to_list() == [{"site": "b", "pid": 2}] * 2
    assert pfx.check(raw, id=["site", "pid"], time="day")["id"].tolist() == [("b", 2)] * 2


def test_not_a_frame_is_a_typed_error():
    for bad, shown in [({"pid": [1]}, "a dict"), (pd.Series([1.0]), "a pandas Series"),
                       (pl.DataFrame({"pid": [1], "day": [0]}).lazy(), "call .collect()")]:
        with pytest.raises(pfx.FrameTypeError, match=r"must be a pandas DataFrame, a polars DataFrame or a pyarrow "
                                                     r"Table, got .*" + shown) as err:
            pfx.derive(bad, pfx.lag("y"), id="pid", time="day")
        assert isinstance(err.value, TypeError) and isinstance(err.value, pfx.PanelError)
    with pytest.raises(pfx.FrameTypeError, match="table 'labs' must be"):
        pfx.derive(invented_panel(), pfx.as_of("labs", "x", time="t"), id="pid", time="day",
                   tables={"labs": pl.DataFrame({"pid": [1]}).lazy()})
    with pytest.raises(pfx.FrameTypeError, match="frame must be .* got a list"):
        pfx.check([1, 2], id="pid", time="day")
    with pytest.raises(pfx.FrameTypeError):
        pfx.to_pandas(np.zeros((2, 2)))


def test_every_entry_point_hands_back_the_callers_type():
    """Frame-level functions: the same values from polars and pyarrow input, in their type."""
    raw = invented_panel()
    intervals = pd.DataFrame({"pid": [1, 1, 2], "start": [0, 5, 0], "stop": [5, 9, 4], "event": [0, 1, 1],
                              "arm": ["x", "x", "y"]})
    nested = pd.DataFrame({"group": [1, 1, 1, 2, 2, 2, 3, 3], "pid": [1, 1, 2, 3, 3, 4, 5, 5],
                           "y": [1.0, 1.2, 2.0, 3.1, 2.9, 4.0, 1.0, 1.5]})
    ties = pd.DataFrame({"pid": [1, 1, 2], "day": [0, 0, 3], "y": [1.0, 3.0, 2.0]})
    events = pd.DataFrame({"pid": [1, 1, 2], "onset": [1, 40, 3]})
    dosing = pd.DataFrame({"pid": [1], "start": [3], "end": [20]})
    d = pfx.Derivation(pfx.lag("litres", name="litres_prev"), id="pid", time="day")
    calls = {
        "summary": (raw, lambda f: pfx.subject_summary(f, "litres", id="pid", time="day")),
        "collapse": (ties, lambda f: pfx.collapse_ties(f, id="pid", time="day", rules={"y": "mean"})),
        "visit_grid": (raw, lambda f: pfx.visit_grid(f, [("V1", 0, 10, 0), ("V2", 11, 30, 20)], id="pid",
                                                     time="day", pick=pfx.visit_pick("litres", "first"))),
        "episodes": (raw.assign(end=45, fell=raw["pid"] % 2),
                     lambda f: pfx.episodes(f, id="pid", time="day", exit="end", event="fell", covariates=["litres"])),
        "person_time": (intervals, lambda f: pfx.person_time(f, "arm", per=1)),
        "snapshot": (raw, lambda f: pfx.snapshot(f, pfx.lag("litres", name="litres_prev"), at=[10, 20],
                                                 id="pid", time="day")),
        "variance": (nested, lambda f: pfx.variance_components(f, "y", levels=["group", "pid"])),
        "grid": (raw, lambda f: pfx.grid(f, "litres", id="pid", time="day", every=10, shape="wide")),
        "grid_long": (raw, lambda f: pfx.grid(f, "litres", id="pid", time="day", every=10)),
        "emergent": (events, lambda f: pfx.treatment_emergent(f, dosing, id="pid", onset="onset", start="start",
                                                            end="end", after_last=14)),
        "apply": (raw, d.apply),
    }
    for name, (data, call) in calls.items():
        want = call(data)
        flat = want.reset_index(drop=not any(want.index.names))  # a named index comes back as columns
        flat = flat.set_axis([str(c) for c in flat.columns], axis=1)
        for maker in (as_polars, as_table):
            got = call(maker(data))
            assert isinstance(got, pl.DataFrame if maker is as_polars else pa.Table), name
            back = pfx.to_pandas(got)
            assert list(back.columns) == list(flat.columns), name
            for col in flat.columns:
                assert pylist(back[col]) == pylist(flat[col]), (name, col)
    # attrs (provenance, the design effect) go to a pyarrow Table's schema metadata
    table = pfx.variance_components(as_table(nested), "y", levels=["group", "pid"])
    assert b"panelfx.attrs" in table.schema.metadata and b"design_effect" in table.schema.metadata[b"panelfx.attrs"]
    assert b"panelfx.attrs" in d.apply(as_table(raw)).schema.metadata


def test_polars_is_not_imported_by_panelfx():
    import subprocess
    import sys

    code = "import sys, panelfx, panelfx._frames; sys.exit('polars' in sys.modules)"
    assert subprocess.run([sys.executable, "-c", code]).returncode == 0


@given(seed=st.integers(0, 10_000), n=st.integers(1, 8))
def test_property_polars_and_table_equal_pandas(seed, n):
    """Random invented panels: polars and pyarrow input give pandas' values, column by column."""
    raw = invented_panel(seed, n)
    want = pfx.derive(raw, *steps(), id="pid", time="day")
    for maker in (as_polars, as_table, as_arrow_pandas):
        back = pfx.to_pandas(pfx.derive(maker(raw), *steps(), id="pid", time="day"))
        for col in OUTPUTS:
            assert pylist(back[col]) == pylist(want[col]), col


def test_testing_kit_takes_polars_and_arrow():
    """assert_past_only cuts a polars or pyarrow frame as it cuts the pandas one."""
    from panelfx.testing import assert_past_only

    raw = invented_panel()
    for maker in (as_polars, as_table):
        assert_past_only(maker(raw), pfx.lag("litres", name="litres_prev"), id="pid", time="day")
        with pytest.raises(AssertionError):
            assert_past_only(maker(raw), pfx.lag("litres", -1, name="litres_next"), id="pid", time="day")


def test_to_pandas_is_exact_and_keeps_categories():
    """Integers with missing values stay exact integers (Arrow-backed, not floats), polars
    categoricals and enums become pandas Categoricals (pyarrow's dictionary conversion), and a
    polars categorical id works as a pandas one."""
    big = 2**53 + 1
    frame = pl.DataFrame({"pid": pl.Series(["b", "a", "b"], dtype=pl.Categorical), "day": [0, 0, 5],
                          "count": [big, None, big + 2]})
    back = pfx.to_pandas(frame)
    assert back["count"].dtype == "int64[pyarrow]" and back["count"].tolist()[::2] == [big, big + 2]
    assert isinstance(back["pid"].dtype, pd.CategoricalDtype)
    out = pfx.derive(frame, pfx.lag("count", name="count_prev"), id="pid", time="day")
    assert out["count_prev"].to_list() == [None, None, big]
    assert out["pid"].dtype == pl.Categorical  # the caller's own column, as it came


def test_objects_arrow_cannot_type_are_a_typed_error():
    """A result column of mixed Python objects has no Arrow type: a ColumnTypeError naming it
    (tuples of one width become a struct)."""
    from panelfx._frames import read_frame

    incoming = read_frame(pa.table({"pid": [1, 2]}))
    odd = pd.DataFrame({"pid": [1, 2], "what": pd.Series(["a", 1], dtype=object)})
    with pytest.raises(pfx.ColumnTypeError, match="column 'what' holds mixed-integer values") as err:
        incoming.back(odd)
    assert err.value.column == "what"
    pairs = pd.DataFrame({"pair": pd.Series([("a", 1), None], dtype=object)})
    assert incoming.back(pairs, {"pair": ["site", "pid"]}).column("pair").to_pylist() == [
        {"site": "a", "pid": 1}, None]
