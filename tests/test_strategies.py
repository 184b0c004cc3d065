"""The opt-in edge options of ``panelfx.testing.strategies.panels`` generate what they promise:
edge time kinds, many-part ids, extreme values, long subjects.  These are tests of the
generators only (no transform is run on their panels here)."""

from __future__ import annotations

import datetime as dt
import itertools
from collections.abc import Callable
from decimal import Decimal
from typing import Any

import numpy as np
import pandas as pd
import pytest
from hypothesis import find, given, settings
from hypothesis import strategies as st

from panelfx.testing.strategies import (
    ALL_ID_KINDS,
    ALL_TIME_KINDS,
    EDGE_TIME_KINDS,
    TIME_KINDS,
    VALUE_KINDS,
    VALUE_RANGES,
    PanelCase,
    panels,
)

I64_MIN, I64_MAX = int(np.iinfo(np.int64).min), int(np.iinfo(np.int64).max)
NS_MIN_S = -9_223_372_036  # seconds since 1970 of the first whole second datetime64[ns] holds
UNIT_PER_S = {"s": 1, "ms": 10**3, "us": 10**6}
FIRST_S, LAST_S = -30_610_224_000, 253_402_300_799  # 1000-01-01T00:00:00, 9999-12-31T23:59:59


def id_cols(case: PanelCase) -> list[str]:
    return [case.id] if isinstance(case.id, str) else list(case.id)


def subjects(case: PanelCase) -> list[pd.DataFrame]:
    """Each subject's rows, in time order."""
    f = case.frame
    codes = f.groupby(id_cols(case), observed=True, sort=False).ngroup().to_numpy()
    out = []
    for code in np.unique(codes):
        rows = f.iloc[np.flatnonzero(codes == code)]
        out.append(rows.iloc[np.argsort(time_ticks(rows["t"]), kind="stable")])
    return out


def time_ticks(t: pd.Series) -> list[Any]:
    """Times as exact Python numbers: day ordinals for dates, integer ticks of their own unit
    for datetimes and timedeltas (as UTC for tz-aware ones), ints or floats for numbers."""
    if t.dtype == object or "date32" in str(t.dtype):
        return [v.toordinal() for v in t.tolist()]
    if isinstance(t.dtype, pd.ArrowDtype):
        t = t.astype("datetime64[ns]")
    if getattr(t.dtype, "tz", None) is not None:
        t = t.dt.tz_convert("UTC").dt.tz_localize(None)
    if pd.api.types.is_extension_array_dtype(t.dtype) and t.dtype.kind in "iu":
        t = t.astype("int64")
    arr = t.to_numpy()
    return [int(v) for v in arr.view("int64")] if arr.dtype.kind in "mM" else arr.tolist()


def assert_well_formed(case: PanelCase) -> None:
    """A long panel, checked without panelfx: no null key, unique (id, time), unique labels."""
    f = case.frame
    ids = id_cols(case)
    assert list(f.columns[: len(ids) + 1]) == [*ids, "t"]
    assert case.time == "t" and case.keys == {"id": case.id, "time": "t"}
    assert f[ids].notna().all().all() and f["t"].notna().all()
    assert not f.duplicated([*ids, "t"]).any()
    assert f.index.is_unique
    assert {"y", "x", "flag", "dose"} <= set(f.columns)
    dose = f["dose"].to_numpy(dtype="float64")
    assert (dose >= 0).all() and np.isfinite(dose).all()


def collect(strategy: Any, checks: dict[str, Callable[[PanelCase], bool]], n: int = 150) -> set[str]:
    """The names of the checks that hold for at least one of n generated panels."""
    seen: set[str] = set()

    @settings(max_examples=n, database=None, derandomize=True)
    @given(case=strategy)
    def run(case):
        assert_well_formed(case)
        seen.update(name for name, cond in checks.items() if name not in seen and cond(case))

    run()
    return seen


# --------------------------------------------------------------------------- options are opt-in
def test_edge_time_kinds_are_in_every_kind_not_in_the_defaults():
    """The edge kinds are drawn by every test that asks for ALL_TIME_KINDS, not by default."""
    assert set(EDGE_TIME_KINDS) == {"datetime_s", "datetime_ms", "datetime_us", "date_objects", "arrow_date",
                                    "huge_int", "decimal"}
    assert set(EDGE_TIME_KINDS) <= set(ALL_TIME_KINDS)
    assert not set(EDGE_TIME_KINDS) & set(TIME_KINDS)
    assert VALUE_RANGES == ("normal", "extreme")


ORDINARY_TIME_KINDS = tuple(k for k in ALL_TIME_KINDS if k not in EDGE_TIME_KINDS)


@given(case=panels(id_kinds=ALL_ID_KINDS, time_kinds=ORDINARY_TIME_KINDS, value_kinds=VALUE_KINDS))
def test_defaults_stay_ordinary(case):
    """Without the new options: one or two id columns, ordinary times and values."""
    f = case.frame
    assert case.id in ("pid", ["site", "pid"])
    x = f["x"].to_numpy(dtype="float64", na_value=np.nan)
    assert ((x >= -5) & (x <= 5)).all()
    y = f["y"].to_numpy(dtype="float64", na_value=np.nan)
    assert (np.isnan(y) | (np.abs(y) <= 1e3)).all()
    assert f["dose"].isin([0.0, 0.5, 1.0, 2.5, 10.0]).all()
    t = f["t"]
    if pd.api.types.is_datetime64_any_dtype(t.dtype) or isinstance(t.dtype, pd.ArrowDtype):
        assert pd.to_datetime(t).dt.year.between(2023, 2030).all()  # near 2024, never far dates
    assert t.dtype != object


@pytest.mark.parametrize("options", [
    {"value_range": "huge"}, {"value_range": None}, {"id_parts": (0, 2)}, {"id_parts": (3, 2)},
    {"id_parts": 5}, {"id_parts": (1, 2), "id_kinds": ("multi",)}, {"time_kinds": ("datetime_ns",)},
])
def test_bad_new_options_are_refused(options):
    with pytest.raises(ValueError, match="value_range|id_parts|time_kinds"):
        find(panels(**options), lambda c: True)


# --------------------------------------------------------------------------- edge time kinds
@pytest.mark.parametrize("unit", ["s", "ms", "us"])
@given(data=st.data())
def test_datetime_units_far_dates(unit, data):
    """datetime64 in the unit asked for, every time within 1000-01-01 .. 9999-12-31 (last tick),
    a subject's occasions 1 to 40 steps of one day, hour, second or tick apart."""
    case = data.draw(panels(time_kinds=(f"datetime_{unit}",), subjects=(0, 5)))
    assert_well_formed(case)
    assert case.frame["t"].dtype == np.dtype(f"datetime64[{unit}]")
    per_s = UNIT_PER_S[unit]
    ticks = time_ticks(case.frame["t"])
    assert all(FIRST_S * per_s <= v <= (LAST_S + 1) * per_s - 1 for v in ticks)
    steps = {86_400 * per_s, 3_600 * per_s, per_s, 1}
    gaps = [b - a for s in subjects(case) for a, b in itertools.pairwise(time_ticks(s["t"]))]
    assert any(all(g % step == 0 and 1 <= g // step <= 40 for g in gaps) for step in steps)


@pytest.mark.parametrize("unit", ["s", "ms", "us"])
def test_datetime_units_reach_their_far_edges(unit):
    per_s = UNIT_PER_S[unit]

    def years(c):
        return c.frame["t"].dt.year

    checks = {
        "starts exactly 1000-01-01": lambda c: min(time_ticks(c.frame["t"])) == FIRST_S * per_s,
        "ends on the last tick of 9999": lambda c: max(time_ticks(c.frame["t"])) == (LAST_S + 1) * per_s - 1,
        "before 1677 (outside ns)": lambda c: (years(c) < 1677).any(),
        "after 2262 (outside ns)": lambda c: (years(c) > 2262).any(),
        "a subject straddles the ns lower limit": lambda c: any(
            min(time_ticks(s["t"])) < NS_MIN_S * per_s < max(time_ticks(s["t"])) for s in subjects(c)),
        "a subject straddles 1970-01-01": lambda c: any(
            min(time_ticks(s["t"])) < 0 < max(time_ticks(s["t"])) for s in subjects(c)),
    }
    if unit != "s":
        checks["sub-second times"] = lambda c: any(v % per_s for v in time_ticks(c.frame["t"]))
    seen = collect(panels(time_kinds=(f"datetime_{unit}",)), checks)
    assert seen == set(checks), sorted(set(checks) - seen)


@pytest.mark.parametrize("kind", ["date_objects", "arrow_date"])
@given(data=st.data())
def test_dates(kind, data):
    """date_objects: an object column of datetime.date (never datetime.datetime); arrow_date:
    date32[pyarrow]; days 1 to 40 apart within a subject, years 1000..9999."""
    case = data.draw(panels(time_kinds=(kind,), subjects=(1, 5)))
    assert_well_formed(case)
    t = case.frame["t"]
    if kind == "date_objects":
        assert t.dtype == object
        assert all(type(v) is dt.date for v in t)
    else:
        assert str(t.dtype) == "date32[day][pyarrow]"
    values = t.tolist()
    assert all(type(v) is dt.date and 1000 <= v.year <= 9999 for v in values)
    for s in subjects(case):
        days = time_ticks(s["t"])
        assert all(1 <= b - a <= 40 for a, b in itertools.pairwise(days))


@pytest.mark.parametrize("kind", ["date_objects", "arrow_date"])
def test_dates_reach_their_far_edges(kind):
    checks = {
        "1000-01-01": lambda c: dt.date(1000, 1, 1) in c.frame["t"].tolist(),
        "9999-12-31": lambda c: dt.date(9999, 12, 31) in c.frame["t"].tolist(),
        "outside the ns range": lambda c: any(v.year < 1677 or v.year > 2262 for v in c.frame["t"].tolist()),
    }
    seen = collect(panels(time_kinds=(kind,)), checks)
    assert seen == set(checks), sorted(set(checks) - seen)


@given(case=panels(time_kinds=("huge_int",), subjects=(0, 5)))
def test_huge_int_times(case):
    """int64 times, each subject reaching beyond 2**53, occasions 1 to 40 apart (exactly)."""
    assert_well_formed(case)
    assert case.frame["t"].dtype == np.int64
    for s in subjects(case):
        t = time_ticks(s["t"])
        assert max(abs(v) for v in t) >= 2**53
        assert all(1 <= b - a <= 40 for a, b in itertools.pairwise(t))


def test_huge_int_times_reach_the_int64_limits():
    checks = {
        "int64 maximum": lambda c: I64_MAX in time_ticks(c.frame["t"]),
        "int64 minimum": lambda c: I64_MIN in time_ticks(c.frame["t"]),
        "negative beyond -2**53": lambda c: any(v < -(2**53) for v in time_ticks(c.frame["t"])),
        "two occasions equal as float64": lambda c: any(
            float(a) == float(b) for s in subjects(c) for a, b in itertools.pairwise(time_ticks(s["t"]))),
        "a subject straddles 2**53": lambda c: any(
            min(time_ticks(s["t"])) < 2**53 < max(time_ticks(s["t"])) for s in subjects(c)),
    }
    seen = collect(panels(time_kinds=("huge_int",)), checks)
    assert seen == set(checks), sorted(set(checks) - seen)


@given(case=panels(time_kinds=("decimal",), subjects=(0, 5)))
def test_decimal_times(case):
    """float64 times, each the double nearest to a decimal of at most two places; one
    denominator (10 or 100) for the whole panel."""
    assert_well_formed(case)
    t = case.frame["t"].to_numpy()
    assert t.dtype == np.float64 and np.isfinite(t).all()
    assert (np.round(t * 100) / 100 == t).all()
    assert all(Decimal(repr(float(v))).as_tuple().exponent >= -2 for v in t)


def test_decimal_times_cover_both_denominators_and_large_offsets():
    def tenths(c):
        t = c.frame["t"].to_numpy()
        return bool((np.round(t * 10) / 10 == t).all())

    checks = {
        "tenths only, not all whole": lambda c: tenths(c) and (c.frame["t"] % 1 != 0).any(),
        "hundredths": lambda c: not tenths(c),
        "near 10**7 or 10**8": lambda c: (c.frame["t"] > 9e6).any(),
        "not exact in binary (e.g. 0.1)": lambda c: any(
            Decimal(float(v)) != Decimal(repr(float(v))) for v in c.frame["t"]),
    }
    seen = collect(panels(time_kinds=("decimal",)), checks)
    assert seen == set(checks), sorted(set(checks) - seen)


# --------------------------------------------------------------------------- many-part ids
PART_DTYPES = {"int": {"int64"}, "nullable_int": {"Int64"}, "str": {"object", "str"}, "arrow_str": {"string"},
               "category": {"category"}}  # text of kind "str" is 'str' under pandas 3, 'object' before


@given(case=panels(id_parts=(1, 5), id_kinds=ALL_ID_KINDS))
def test_id_parts_columns_and_dtypes(case):
    """1 to 5 id columns (pid alone, else id1..idk), no missing value, dtypes of the single-column kinds."""
    assert_well_formed(case)
    cols = id_cols(case)
    assert 1 <= len(cols) <= 5
    assert cols == (["pid"] if len(cols) == 1 else [f"id{j + 1}" for j in range(len(cols))])
    assert isinstance(case.id, str) == (len(cols) == 1)
    for c in cols:
        assert str(case.frame[c].dtype) in set().union(*PART_DTYPES.values()), (c, case.frame[c].dtype)


@given(case=panels(id_parts=(2, 4), id_kinds=("int", "category", "multi")))
def test_id_parts_follow_id_kinds(case):
    """Each part takes a dtype of the given single-column kinds ('multi' aside)."""
    assert 2 <= len(id_cols(case)) <= 4
    assert {str(case.frame[c].dtype) for c in id_cols(case)} <= {"int64", "category"}


@given(case=panels(id_parts=(1, 5), id_kinds=ALL_ID_KINDS, subjects=(0, 40), occasions=(1, 1),
                   shuffle=False))
def test_id_parts_together_tell_every_subject_apart(case):
    """With one occasion per subject every row is its own subject: the ids, taken
    together, must all differ (no two subjects merged)."""
    f = case.frame
    assert not f.duplicated(id_cols(case)).any()


@given(case=panels(id_parts=(1, 5), id_kinds=ALL_ID_KINDS, subjects=(0, 8), occasions=(1, 6), shuffle=False))
def test_id_parts_keep_subjects_in_one_block(case):
    """Unshuffled rows come subject by subject: each whole id is one run of rows, times
    increasing within it (a merged pair of subjects would show up as two runs or a time going back)."""
    f = case.frame
    keys = list(f[id_cols(case)].astype(object).itertuples(index=False, name=None))
    runs = [k for i, k in enumerate(keys) if i == 0 or keys[i - 1] != k]
    assert len(runs) == len(set(runs))
    t = np.array(time_ticks(f["t"]))
    same = np.array([keys[i] == keys[i - 1] for i in range(1, len(keys))], dtype=bool)
    assert (np.diff(t)[same] > 0).all()


def test_id_parts_reach_their_edges():
    def parts(c):
        return [c.frame[k] for k in id_cols(c)]

    def n_subjects(c):
        return len(c.frame.drop_duplicates(id_cols(c)))

    checks = {
        "one part": lambda c: len(id_cols(c)) == 1,
        "five parts": lambda c: len(id_cols(c)) == 5,
        "mixed dtypes": lambda c: len({str(p.dtype) for p in parts(c)}) >= 3,
        "a part alone repeats across subjects": lambda c: len(id_cols(c)) > 1 and any(
            p.nunique() < n_subjects(c) for p in parts(c)) and n_subjects(c) > 2,
        "a categorical part with over 65,536 unused categories": lambda c: any(
            isinstance(p.dtype, pd.CategoricalDtype) and len(p.cat.categories) - p.nunique() > 65_536
            for p in parts(c)),
        "the empty string as an id value": lambda c: any(
            p.dtype != "int64" and "" in set(p.astype(object)) for p in parts(c)),
        "decomposed and composed accents": lambda c: any(
            {"\u00e9", "e\u0301"} <= set(p.astype(object)) for p in parts(c)),
        "an int64-limit id value": lambda c: any(
            p.dtype in ("int64", "Int64") and (p == I64_MIN).any() for p in parts(c)),
    }
    seen = collect(panels(id_parts=(1, 5), id_kinds=ALL_ID_KINDS, subjects=(1, 30)), checks, n=100)
    assert seen == set(checks), sorted(set(checks) - seen)


# --------------------------------------------------------------------------- extreme values
FLOAT_DTYPES = {"numpy": "float64", "nullable": "Float64", "arrow": "double[pyarrow]"}
INT_DTYPES = {"numpy": "int64", "nullable": "Int64", "arrow": "int64[pyarrow]"}


@given(case=panels(value_range="extreme", value_kinds=VALUE_KINDS))
def test_extreme_values_keep_their_dtypes_and_stay_finite(case):
    """y stays float, x stays a 64-bit integer column (exact, never float), dose non-negative
    and present; no inf anywhere."""
    f = case.frame
    assert_well_formed(case)
    kind = next(k for k, d in FLOAT_DTYPES.items() if str(f["y"].dtype) == d)
    assert str(f["x"].dtype) == INT_DTYPES[kind]
    y = f["y"].to_numpy(dtype="float64", na_value=np.nan)
    assert not np.isinf(y).any()
    assert all(I64_MIN <= int(v) <= I64_MAX for v in f["x"].tolist())
    assert f["dose"].dtype == np.float64 and f["dose"].notna().all()


def test_extreme_values_reach_the_limits_of_their_types():
    def y(c):
        return c.frame["y"].to_numpy(dtype="float64", na_value=np.nan)

    def xs(c):
        return [int(v) for v in c.frame["x"].tolist()]

    def subject_scales(c):
        """The smallest |y| of each subject of 2+ occasions whose values are all present and non-zero."""
        return [np.abs(v).min() for s in subjects(c)
                for v in [s["y"].to_numpy(dtype="float64", na_value=np.nan)] if len(v) > 1 and (v != 0).all()
                and not np.isnan(v).any()]

    checks = {
        "|y| >= 1e308": lambda c: (np.abs(y(c)) >= 1e308).any(),
        "largest finite float": lambda c: (np.abs(y(c)) == np.finfo(np.float64).max).any(),
        "subnormal y": lambda c: ((np.abs(y(c)) > 0) & (np.abs(y(c)) < np.finfo(np.float64).smallest_normal)).any(),
        "-0.0 in y": lambda c: ((y(c) == 0) & np.signbit(y(c))).any(),
        "a whole subject near 1e300": lambda c: any(m >= 1e290 for m in subject_scales(c)),
        "x beyond 2**53, not exact as float64": lambda c: any(int(float(v)) != v for v in xs(c)),
        "x at the int64 maximum": lambda c: I64_MAX in xs(c),
        "x at the int64 minimum": lambda c: I64_MIN in xs(c),
        "dose >= 1e308": lambda c: (c.frame["dose"] >= 1e308).any(),
        "subnormal dose": lambda c: ((c.frame["dose"] > 0) & (c.frame["dose"] < 1e-307)).any(),
        "ordinary values too": lambda c: ((np.abs(y(c)) > 1e-3) & (np.abs(y(c)) < 1e3)).any(),
    }
    seen = collect(panels(value_range="extreme", occasions=(1, 6)), checks)
    assert seen == set(checks), sorted(set(checks) - seen)


# --------------------------------------------------------------------------- long subjects
@given(case=panels(subjects=(1, 3), occasions=(250, 300), time_kinds=(*ALL_TIME_KINDS, *EDGE_TIME_KINDS),
                   value_kinds=VALUE_KINDS, value_range="extreme"))
def test_long_subjects(case):
    """250 to 300 occasions per subject are generated (this used to fail hypothesis's
    large-example health check), still well formed."""
    assert_well_formed(case)
    groups = subjects(case)
    assert 1 <= len(groups) <= 3
    assert all(250 <= len(s) <= 300 for s in groups)


@given(case=panels(subjects=(150, 200), occasions=(1, 3), id_kinds=("int",)))
def test_many_subjects(case):
    assert_well_formed(case)
    sizes = case.frame.groupby("pid").size()
    assert 150 <= len(sizes) <= 200 and sizes.between(1, 3).all()


def test_long_panels_keep_ties_missing_values_and_order():
    """The bulk generator of panels over 100 rows keeps the features of the small ones."""
    def blank(c):
        return c.frame["y"].isna().groupby(c.frame["pid"]).all()

    def long(c):
        return len(c.frame) > 100

    checks = {
        "tied y": lambda c: long(c) and c.frame["y"].dropna().duplicated().any(),
        "missing y": lambda c: long(c) and c.frame["y"].isna().any(),
        "an all-missing subject": lambda c: long(c) and blank(c).any() and not blank(c).all(),
        "shuffled rows": lambda c: long(c) and not c.frame.sort_values(["pid", "t"]).index.equals(c.frame.index),
        "a long subject": lambda c: c.frame.groupby("pid").size().max() >= 250,
    }
    seen = collect(panels(subjects=(2, 6), occasions=(1, 300), id_kinds=("int",)), checks, n=60)
    assert seen == set(checks), sorted(set(checks) - seen)
