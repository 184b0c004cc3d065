"""cumulative(): hand-computed values, the simple reference, accuracy and bad options."""

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
from panelfx.transforms.cumulative import Cumulative

NAN = math.nan


def one_subject(t, y):
    return pd.DataFrame({"pid": 1, "t": t, "y": y})


def run(df, *trs, **kw):
    return pfx.derive(df, *trs, id="pid", time="t", **kw)


def col(df, name):
    return df[name].to_numpy(dtype="float64")


# ---------------------------------------------------------------------------- by hand
def test_three_methods_by_hand():
    # t = 0, 1, 3, 6 and y = 2, 4, 4, 1:
    # sum 2, 6, 10, 11; step 0, 2*1, 2 + 4*2, 10 + 4*3; trapezoid 0, 3, 3 + 8, 11 + 7.5
    out = run(one_subject([0, 1, 3, 6], [2.0, 4.0, 4.0, 1.0]),
              pfx.cumulative("y"), pfx.cumulative("y", "step"), pfx.cumulative("y", "trapezoid"))
    np.testing.assert_array_equal(col(out, "y_cum"), [2, 6, 10, 11])
    np.testing.assert_array_equal(col(out, "y_cum_step"), [0, 2, 10, 22])
    np.testing.assert_array_equal(col(out, "y_auc"), [0, 3, 11, 18.5])


@pytest.mark.parametrize("method, skip, propagate", [
    # y = 2, NaN, 4, 1 at t = 0, 1, 3, 6
    ("sum", [2, 2, 6, 7], [2, NAN, NAN, NAN]),
    # step: (0,1] uses y0 = 2; (1,3] needs the missing y1 -> 0; (3,6] uses y2 = 4 -> 12
    ("step", [0, 2, 2, 14], [0, 2, NAN, NAN]),
    # trapezoid: both intervals touching the missing value add nothing; (3,6] adds 7.5
    ("trapezoid", [0, 0, 0, 7.5], [0, NAN, NAN, NAN]),
])
def test_missing_rules_by_hand(method, skip, propagate):
    df = one_subject([0, 1, 3, 6], [2.0, NAN, 4.0, 1.0])
    out = run(df, pfx.cumulative("y", method, name="skip"),
              pfx.cumulative("y", method, missing="propagate", name="prop"))
    np.testing.assert_array_equal(col(out, "skip"), skip)
    np.testing.assert_array_equal(col(out, "prop"), propagate)


@pytest.mark.parametrize("method, expected", [
    # t = 0, 1, 10, 12 with y = 1, 2, 3, 4; the 9-unit gap is longer than 5: restart at t = 10
    ("sum", [1, 3, 3, 7]),
    ("step", [0, 1, 0, 6]),
    ("trapezoid", [0, 1.5, 0, 7]),
])
def test_restart_after_long_gap(method, expected):
    out = run(one_subject([0, 1, 10, 12], [1.0, 2.0, 3.0, 4.0]), pfx.cumulative("y", method, restart_after=5))
    np.testing.assert_array_equal(col(out, out.columns[-1]), expected)


def test_restart_ends_propagation_and_equal_gap_does_not_restart():
    out = run(one_subject([0, 1, 10, 15], [NAN, 2.0, 3.0, 4.0]),
              pfx.cumulative("y", missing="propagate", restart_after=5),
              pfx.cumulative("y", "step", missing="propagate", restart_after=5))
    # the gap 10 -> 15 equals the span: no restart there
    np.testing.assert_array_equal(col(out, "y_cum"), [NAN, NAN, 3, 7])
    np.testing.assert_array_equal(col(out, "y_cum_step"), [0, NAN, 0, 15])


def test_datetime_times_use_the_unit():
    df = pd.DataFrame({"pid": ["a", "a", "a"], "t": pd.to_datetime(["2024-01-01", "2024-01-11", "2024-01-15"]),
                       "y": [3.0, 1.0, 5.0]})
    days = run(df, pfx.cumulative("y", "step"))
    weeks = run(df, pfx.cumulative("y", "step"), unit="W")
    np.testing.assert_allclose(col(days, "y_cum_step"), [0, 30, 34])
    np.testing.assert_allclose(col(weeks, "y_cum_step"), [0, 30 / 7, 34 / 7])
    restarted = run(df, pfx.cumulative("y", "step", restart_after="7D"))
    np.testing.assert_allclose(col(restarted, "y_cum_step"), [0, 0, 4])
    as_timedelta = Cumulative(col="y", method="step", restart_after=pd.Timedelta(days=7))
    assert as_timedelta.restart_after == "7D"  # stored as a plain string
    np.testing.assert_allclose(col(run(df, as_timedelta), "y_cum_step"), [0, 0, 4])


def test_unsorted_rows_integer_values_and_several_subjects():
    df = pd.DataFrame({"pid": [2, 1, 2, 1], "t": [5, 3, 0, 0], "y": [1, 4, 3, 2]}, index=list("abcd"))
    out = run(df, pfx.cumulative("y"), pfx.cumulative("y", "trapezoid"))
    assert list(out.index) == list("abcd")
    np.testing.assert_array_equal(col(out, "y_cum"), [4, 6, 3, 2])
    np.testing.assert_array_equal(col(out, "y_auc"), [10, 9, 0, 0])
    assert out["y_cum"].dtype == "float64"


def test_description_and_options_round_trip():
    tr = pfx.cumulative("y", "trapezoid", restart_after="30D", missing="propagate")
    assert Cumulative(**tr.options()) == tr
    assert tr.past_only
    assert "restarts" in tr.describe() and "area" in tr.describe()


# ---------------------------------------------------------------------------- reference
def _span(case, number, text):
    numeric = pd.api.types.is_numeric_dtype(case.frame[case.time].dtype)
    return number if numeric else text


@settings(max_examples=120, deadline=None)
@given(case=panels(time_kinds=ALL_TIME_KINDS, value_kinds=VALUE_KINDS),
       col_=st.sampled_from(["y", "x", "dose"]), method=st.sampled_from(["sum", "step", "trapezoid"]),
       missing=st.sampled_from(["skip", "propagate"]), restart=st.sampled_from([None, 1, 10, 25]))
def test_matches_reference(case, col_, method, missing, restart):
    """Each method, missing rule and restart span equals the per-subject loop reference."""
    span = None if restart is None else _span(case, restart, f"{restart}D")
    tr = pfx.cumulative(col_, method, missing=missing, restart_after=span)
    got = pfx.derive(case.frame, tr, **case.keys)
    want = reference(case.frame, tr, **case.keys)
    assert_matches_reference(got, want, list(tr.outputs()), rtol=1e-12, atol=1e-9)


@settings(max_examples=60, deadline=None)
@given(case=panels(), method=st.sampled_from(["sum", "step", "trapezoid"]))
def test_non_negative_exposure_never_decreases(case, method):
    """With doses >= 0, cumulative exposure is non-decreasing within subject (no restart)."""
    out = pfx.derive(case.frame, pfx.cumulative("dose", method, name="e"), **case.keys)
    ids = [case.id] if isinstance(case.id, str) else list(case.id)
    diffs = out.sort_values([*ids, case.time]).groupby(ids, observed=True)["e"].diff().dropna()
    assert (diffs >= 0).all()


def test_accuracy_on_long_subjects():
    """1e-12 relative to an exactly rounded per-subject sum (math.fsum), on 2 x 200 000 rows."""
    rng = np.random.default_rng(7)
    n = 200_000
    y = rng.uniform(0, 1000, 2 * n) * 10.0 ** rng.integers(-3, 4, 2 * n)
    df = pd.DataFrame({"pid": np.repeat([1, 2], n), "t": np.tile(np.arange(n, dtype=float), 2), "y": y})
    out = col(run(df, pfx.cumulative("y")), "y_cum")
    for k in (1, 999, n // 2, n - 1):
        for s in (0, n):
            exact = math.fsum(y[s: s + k + 1])
            assert abs(out[s + k] - exact) <= 1e-12 * exact


# ---------------------------------------------------------------------------- errors
@pytest.mark.parametrize("kw, words", [
    ({"method": "area"}, "method must be one of"),
    ({"missing": "drop"}, "missing must be one of"),
    ({"restart_after": 0}, "restart_after must be a positive"),
    ({"restart_after": -3}, "restart_after must be a positive"),
    ({"restart_after": True}, "restart_after must be a positive"),
    ({"restart_after": "0D"}, "restart_after must be a positive"),
    ({"restart_after": "-2D"}, "restart_after must be a positive"),
    ({"restart_after": "soon"}, "not a time span"),
    ({"restart_after": "30"}, "has no unit"),
    ({"restart_after": [5]}, "restart_after must be a positive"),
    ({"name": ""}, "name must be a column name"),
])
def test_bad_options(kw, words):
    with pytest.raises(pfx.OptionError, match=words):
        pfx.cumulative("y", **kw)


def test_window_type_must_fit_the_time_column():
    numeric = one_subject([0, 1], [1.0, 2.0])
    with pytest.raises(pfx.OptionError, match="does not fit time column 't', which holds numbers"):
        run(numeric, pfx.cumulative("y", restart_after="10D"))
    dated = numeric.assign(t=pd.to_datetime(["2024-01-01", "2024-01-02"]))
    with pytest.raises(pfx.OptionError, match="holds datetime values"):
        run(dated, pfx.cumulative("y", restart_after=10))


def test_wrong_dtype():
    df = one_subject([0, 1], [1.0, 2.0]).assign(txt=["1", "2"], when=pd.to_datetime(["2024-01-01"] * 2))
    with pytest.raises(pfx.ColumnTypeError, match="'txt'"):
        run(df, pfx.cumulative("txt"))
    with pytest.raises(pfx.ColumnTypeError, match="'when'"):
        run(df, pfx.cumulative("when", "step"))
    with pytest.raises(pfx.MissingColumnError, match="'nope'"):
        run(df, pfx.cumulative("nope"))
