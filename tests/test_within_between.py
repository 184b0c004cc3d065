"""within_between(): hand-computed values, the reference, invariants, bad options."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import panelfx as pfx
from panelfx.testing import assert_matches_reference, reference
from panelfx.testing.strategies import ALL_TIME_KINDS, VALUE_KINDS, panels
from panelfx.transforms.within_between import WithinBetween

NAN = math.nan


def run(df, *trs, **kw):
    return pfx.derive(df, *trs, id="pid", time="t", **kw)


# ---------------------------------------------------------------------------- by hand
def test_mean_and_baseline_by_hand():
    df = pd.DataFrame({"pid": [1, 1, 1, 2, 2, 3], "t": [2, 0, 1, 0, 1, 0],
                       "y": [9.0, NAN, 3.0, 4.0, 4.0, NAN]})
    out = run(df, pfx.within_between("y"), pfx.within_between("y", "baseline", names=["y_base", "y_dev"]))
    # subject 1: values 3 (t=1) and 9 (t=2): mean 6, first non-missing 3; subject 3 has none
    np.testing.assert_array_equal(out["y_between"], [6, 6, 6, 4, 4, NAN])
    np.testing.assert_array_equal(out["y_within"], [3, NAN, -3, 0, 0, NAN])
    np.testing.assert_array_equal(out["y_base"], [3, 3, 3, 4, 4, NAN])
    np.testing.assert_array_equal(out["y_dev"], [6, NAN, 0, 0, 0, NAN])


def test_mean_is_accurate_for_offset_values():
    # a large common offset on 100 000 rows: a sequential running sum would be off by ~1e-4
    rng = np.random.default_rng(1)
    y = 1e10 + rng.uniform(0, 1, 100_000)
    df = pd.DataFrame({"pid": 1, "t": np.arange(len(y)), "y": y})
    out = run(df, pfx.within_between("y"))
    exact = math.fsum(y) / len(y)
    assert abs(out["y_between"].iloc[0] - exact) <= 1e-15 * exact


def test_names_and_options():
    tr = WithinBetween(col="y", names=["b", "w"])  # a saved derivation hands back a list
    assert tr.names == ("b", "w") and tr.outputs() == ("b", "w")
    assert WithinBetween(**tr.options()) == tr
    assert not tr.past_only
    assert "baseline" in pfx.within_between("y", "baseline").describe()


# ---------------------------------------------------------------------------- reference
@settings(max_examples=100, deadline=None)
@given(case=panels(time_kinds=ALL_TIME_KINDS, value_kinds=VALUE_KINDS), col_=st.sampled_from(["y", "x", "dose"]),
       between=st.sampled_from(["mean", "baseline"]))
def test_matches_reference(case, col_, between):
    """Both outputs equal the per-subject loop reference."""
    tr = pfx.within_between(col_, between)
    got = pfx.derive(case.frame, tr, **case.keys)
    want = reference(case.frame, tr, **case.keys)
    assert_matches_reference(got, want, list(tr.outputs()), rtol=1e-12, atol=1e-9)


@settings(max_examples=60, deadline=None)
@given(case=panels())
def test_parts_add_up(case):
    """between + within = y; the between part is constant within subject; within-deviations
    from the mean sum to 0 per subject."""
    out = pfx.derive(case.frame, pfx.within_between("y"), **case.keys)
    ids = [case.id] if isinstance(case.id, str) else list(case.id)
    ok = out["y"].notna()
    np.testing.assert_allclose(out.loc[ok, "y_between"] + out.loc[ok, "y_within"], out.loc[ok, "y"], atol=1e-9)
    g = out.groupby(ids, observed=True)
    assert (g["y_between"].nunique(dropna=False) <= 1).all()
    assert (g["y_within"].sum().abs() < 1e-7).all()


# ---------------------------------------------------------------------------- errors
@pytest.mark.parametrize("make, words", [
    (lambda: pfx.within_between("y", "median"), "between must be one of"),
    (lambda: pfx.within_between("y", names=["a"]), "names must be two different column names"),
    (lambda: pfx.within_between("y", names="ab"), "names must be two different column names"),
    (lambda: pfx.within_between("y", names=["a", "a"]), "names must be two different column names"),
    (lambda: pfx.within_between("y", names=["a", ""]), "names must be two different column names"),
    (lambda: pfx.within_between(None), "col must be a column name"),
])
def test_bad_options(make, words):
    with pytest.raises(pfx.OptionError, match=words):
        make()


def test_wrong_dtype_and_existing_output():
    df = pd.DataFrame({"pid": 1, "t": [0, 1], "y": [1.0, 2.0], "txt": ["a", "b"], "y_within": [0, 0]})
    with pytest.raises(pfx.ColumnTypeError, match="'txt'"):
        run(df, pfx.within_between("txt"))
    with pytest.raises(pfx.ColumnExistsError, match="'y_within'"):
        run(df, pfx.within_between("y"))
