"""Cross-checks against DuckDB window SQL, a general-purpose reference engine.

Source of every expected value here: DuckDB's window functions (first_value / last_value
with IGNORE NULLS, lag / lead, arg_max with FILTER), evaluated by DuckDB on the same
generated panel; the SQL is written from each transform's documented definition and
shares nothing with panelfx.  Quirks relied on (see shared CHECK-SOURCES.md): NaN in a
pandas float column reaches DuckDB as NULL; IGNORE NULLS goes inside the parentheses;
FILTER works with arg_max but not last_value.  The rolling windows have their own DuckDB
checks in the rolling tests.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Callable

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import panelfx as pfx
from panelfx.testing import assert_matches_reference
from panelfx.testing.strategies import panels

duckdb = pytest.importorskip("duckdb")

W = "OVER (PARTITION BY {ids} ORDER BY t ROWS BETWEEN UNBOUNDED PRECEDING AND UNBOUNDED FOLLOWING)"
PREV = "OVER (PARTITION BY {ids} ORDER BY t ROWS BETWEEN UNBOUNDED PRECEDING AND 1 PRECEDING)"
SO_FAR = "OVER (PARTITION BY {ids} ORDER BY t ROWS BETWEEN UNBOUNDED PRECEDING AND CURRENT ROW)"
ORD = "OVER (PARTITION BY {ids} ORDER BY t)"


def pct(y: str, ref: str) -> str:
    # percent change; missing where the reference is 0 (panelfx's documented rule, CDISC PCHG convention)
    return f"CASE WHEN {ref} = 0 THEN NULL ELSE 100.0 * ({y} - {ref}) / {ref} END"


def ratio(y: str, ref: str) -> str:
    return f"CASE WHEN {ref} = 0 THEN NULL ELSE {y}::DOUBLE / {ref} END"


# Each pair: a panelfx transform and the DuckDB expression of the same derived variable.
# {ids} is the PARTITION BY list; {dur} turns a difference of two times into the panel's
# duration units (days for datetimes).
CHECKS: list[tuple[pfx.Transform, str]] = [
    # DuckDB first_value(... IGNORE NULLS): the first non-missing value of the subject
    (pfx.baseline("y"), "first_value(y IGNORE NULLS) " + W),
    (pfx.baseline("y", "first"), "first_value(y) " + W),
    (pfx.baseline("x"), "first_value(x IGNORE NULLS) " + W),
    (pfx.change_from_baseline("y"), "y - first_value(y IGNORE NULLS) " + W),
    (pfx.change_from_baseline("y", "percent"), pct("y", "first_value(y IGNORE NULLS) " + W)),
    (pfx.change_from_baseline("y", "ratio", rule="first"), ratio("y", "first_value(y) " + W)),
    # after_baseline_only: blank up to and including the baseline occasion (the first
    # occasion whose y is present); count of present values so far is 0 before it, 1 on it
    (pfx.change_from_baseline("y", after_baseline_only=True),
     "CASE WHEN count(y) " + SO_FAR + " = 0 OR (count(y) " + SO_FAR + " = 1 AND y IS NOT NULL) THEN NULL "
     "ELSE y - first_value(y IGNORE NULLS) " + W + " END"),
    # DuckDB lag / lead
    (pfx.lag("y"), "lag(y, 1) " + ORD),
    (pfx.lag("y", 2), "lag(y, 2) " + ORD),
    (pfx.lag("x", -1), "lead(x, 1) " + ORD),
    (pfx.lag("flag"), "lag(flag, 1) " + ORD),
    (pfx.change_from_previous("y"), "y - lag(y, 1) " + ORD),
    (pfx.change_from_previous("y", "percent"), pct("y", "lag(y, 1) " + ORD)),
    (pfx.change_from_previous("y", "rate"), "(y - lag(y, 1) " + ORD + ") / {dur}(t, lag(t, 1) " + ORD + ")"),
    # skip_missing: the last earlier present value, via last_value(... IGNORE NULLS) over the rows before
    (pfx.change_from_previous("y", skip_missing=True), "y - last_value(y IGNORE NULLS) " + PREV),
    (pfx.change_from_previous("y", "rate", skip_missing=True),
     "(y - last_value(y IGNORE NULLS) " + PREV + ") / "
     "{dur}(t, last_value(CASE WHEN y IS NOT NULL THEN t END IGNORE NULLS) " + PREV + ")"),
]


def _named(tr: pfx.Transform, i: int) -> pfx.Transform:
    return dataclasses.replace(tr, name=f"c{i}")


def _duration_sql(frame: pd.DataFrame) -> str:
    t = frame["t"]
    if pd.api.types.is_numeric_dtype(t.dtype):
        return "dur_num"
    return "dur_ns"


def duckdb_values(frame: pd.DataFrame, id_: str | list[str], exprs: dict[str, str],
                  pre: dict[str, str] | None = None) -> pd.DataFrame:
    """Evaluate ``exprs`` in DuckDB over ``frame``; rows back in the frame's order and index.
    ``pre`` columns are computed first, in a CTE (window functions cannot be nested)."""
    ids = ", ".join(np.atleast_1d(id_))
    data = frame.reset_index(drop=True).assign(row_no=np.arange(len(frame)))
    con = duckdb.connect()
    try:
        con.execute("CREATE MACRO dur_num(a, b) AS (a - b)::DOUBLE")
        # datetimes: nanoseconds between the instants, in days (the default unit)
        con.execute("CREATE MACRO dur_ns(a, b) AS (epoch_ns(a) - epoch_ns(b))::DOUBLE / 86400e9")
        con.register("p", data)
        dur = _duration_sql(frame)
        cols = ", ".join(f"{e.format(ids=ids, dur=dur)} AS {name}" for name, e in exprs.items())
        source = "p"
        if pre:
            first = ", ".join(f"{e.format(ids=ids, dur=dur)} AS {name}" for name, e in pre.items())
            source = f"(SELECT *, {first} FROM p) AS q"
        out = con.execute(f"SELECT row_no, {cols} FROM {source} ORDER BY row_no").df()
    finally:
        con.close()
    out.index = frame.index
    return out.drop(columns="row_no")


@settings(max_examples=max(20, settings.default.max_examples))
@given(case=panels())
def test_history_transforms_match_duckdb(case):
    """Baseline, change and lag transforms equal DuckDB window SQL on generated panels."""
    transforms = [_named(tr, i) for i, (tr, _) in enumerate(CHECKS)]
    got = pfx.derive(case.frame, *transforms, **case.keys)
    want = duckdb_values(case.frame, case.id, {f"c{i}": sql for i, (_, sql) in enumerate(CHECKS)})
    for i, (tr, _) in enumerate(CHECKS):
        try:
            assert_matches_reference(got, want, [f"c{i}"], rtol=1e-9, id=case.id, time=case.time)
        except AssertionError as err:
            raise AssertionError(f"{tr!r} against DuckDB: {err}") from None


@given(case=panels(time_kinds=("int", "float")))
def test_last_before_matches_duckdb(case):
    """Last non-missing value on or before a reference time: DuckDB
    arg_max(y, t) FILTER (WHERE t <= ref AND y IS NOT NULL) over the subject."""
    ref = 10
    trs = [pfx.baseline("y", "last_before", reference=ref, name="b"),
           pfx.change_from_baseline("y", rule="last_before", reference=ref, name="c")]
    base = f"arg_max(y, t) FILTER (WHERE t <= {ref} AND y IS NOT NULL) OVER (PARTITION BY {{ids}})"
    got = pfx.derive(case.frame, *trs, **case.keys)
    want = duckdb_values(case.frame, case.id, {"b": base, "c": f"y - {base}"})
    assert_matches_reference(got, want, ["b", "c"], id=case.id, time=case.time)


def test_duckdb_sql_itself_on_a_worked_example():
    """The SQL above reproduces hand-computed values (guards the cross-check itself)."""
    df = pd.DataFrame({"pid": [1, 1, 1, 2], "t": [0, 10, 20, 0], "y": [np.nan, 4.0, 6.0, 0.0],
                       "x": [1, 2, 3, 4], "flag": [True, False, True, False]})
    exprs = {f"c{i}": sql for i, (_, sql) in enumerate(CHECKS)}
    out = duckdb_values(df, "pid", exprs)
    first_valid, _, _, change = (out[f"c{i}"].tolist() for i in range(4))
    assert first_valid == [4.0, 4.0, 4.0, 0.0]
    assert change[1:] == [0.0, 2.0, 0.0] and pd.isna(change[0])
    rate_skip = out[f"c{len(CHECKS) - 1}"].tolist()
    assert pd.isna(rate_skip[0]) and pd.isna(rate_skip[1]) and rate_skip[2] == pytest.approx(0.2)


# Exposure, event, filling and occasion transforms.  Each pair: transform, DuckDB expression.
STEP = "coalesce(lag(dose, 1) " + ORD + " * {dur}(t, lag(t, 1) " + ORD + "), 0)"
TRAP = "coalesce((lag(dose, 1) " + ORD + " + dose) / 2 * {dur}(t, lag(t, 1) " + ORD + "), 0)"
PRE = {"step_part": STEP, "trap_part": TRAP}
MORE: list[tuple[Callable[[], pfx.Transform], str]] = [
    (lambda: pfx.cumulative("dose"), "sum(dose) " + SO_FAR),
    # a missing value adds nothing; the running total is 0 before the first value
    (lambda: pfx.cumulative("y"), "coalesce(sum(y) " + SO_FAR + ", 0)"),
    # step integral: sum of v_{j-1} (t_j - t_{j-1}); trapezoid: sum of (v_{j-1} + v_j) / 2 (t_j - t_{j-1})
    (lambda: pfx.cumulative("dose", "step"), "sum(step_part) " + SO_FAR),
    (lambda: pfx.cumulative("dose", "trapezoid"), "sum(trap_part) " + SO_FAR),
    (lambda: pfx.events_so_far("flag"), "count(*) FILTER (WHERE flag) " + SO_FAR),
    (lambda: pfx.events_so_far("flag", include_current=False), "count(*) FILTER (WHERE flag) " + PREV),
    (lambda: pfx.ever("flag"), "bool_or(flag) " + SO_FAR),
    (lambda: pfx.ever("flag", include_current=False), "coalesce(bool_or(flag) " + PREV + ", false)"),
    (lambda: pfx.time_since("flag"), "{dur}(t, max(CASE WHEN flag THEN t END) " + SO_FAR + ")"),
    (lambda: pfx.time_since("flag", "first"), "{dur}(t, min(CASE WHEN flag THEN t END) " + SO_FAR + ")"),
    (lambda: pfx.time_since("x", include_current=False, any_nonzero=True), "{dur}(t, max(CASE WHEN x <> 0 THEN t END) " + PREV + ")"),
    # carry forward: last_value(... IGNORE NULLS) over the rows so far (CHECK-SOURCES.md)
    (lambda: pfx.carry_forward("y"), "last_value(y IGNORE NULLS) " + SO_FAR),
    (lambda: pfx.occasion(), "row_number() " + ORD),
    (lambda: pfx.gap(), "{dur}(t, lag(t, 1) " + ORD + ")"),
    (lambda: pfx.time_since_baseline(), "{dur}(t, first_value(t) " + W + ")"),
]


@settings(max_examples=max(20, settings.default.max_examples))
@given(case=panels())
def test_exposure_event_and_occasion_transforms_match_duckdb(case):
    """Cumulative sums and integrals, event counts and flags, time since events, carry
    forward, occasion number, gap and time since baseline equal DuckDB window SQL."""
    checks = [(build(), sql) for build, sql in MORE]
    transforms = [_named(tr, i) for i, (tr, _) in enumerate(checks)]
    got = pfx.derive(case.frame, *transforms, **case.keys)
    want = duckdb_values(case.frame, case.id, {f"c{i}": sql for i, (_, sql) in enumerate(checks)}, pre=PRE)
    for i, (tr, _) in enumerate(checks):
        try:
            assert_matches_reference(got, want, [f"c{i}"], rtol=1e-9, atol=1e-9, id=case.id, time=case.time)
        except AssertionError as err:
            raise AssertionError(f"{tr!r} against DuckDB: {err}") from None


@given(case=panels())
def test_within_between_matches_duckdb(case):
    """Subject mean over non-missing values (DuckDB avg() OVER the subject) and the deviation from it."""
    tr = pfx.within_between("y", names=("b", "w"))
    got = pfx.derive(case.frame, tr, **case.keys)
    mean = "avg(y) OVER (PARTITION BY {ids})"
    want = duckdb_values(case.frame, case.id, {"b": mean, "w": f"y - {mean}"})
    assert_matches_reference(got, want, ["b", "w"], rtol=1e-9, atol=1e-9, id=case.id, time=case.time)


@given(case=panels(), days=st.sampled_from([1, 2, 10]), tol_days=st.sampled_from([0, 1, 5]))
def test_lag_by_time_offset_matches_duckdb_asof_join(case, days, tol_days):
    """Value as of t - offset (latest occasion at or before it, not older than the
    tolerance): DuckDB ASOF LEFT JOIN of the panel with itself on the subject and time."""
    numeric = pd.api.types.is_numeric_dtype(case.frame["t"].dtype)
    offset, tol = (days, tol_days) if numeric else (f"{days}D", f"{tol_days}D")
    trs = [pfx.lag("y", offset=offset, name="a"), pfx.lag("y", offset=offset, tolerance=tol, name="b")]
    got = pfx.derive(case.frame, *trs, **case.keys)
    ids = list(np.atleast_1d(case.id))
    # times as numbers (days for datetimes, as instants) so that offsets are exact
    tn = "t::DOUBLE" if numeric else "epoch_ns(t)::DOUBLE / 86400e9"
    data = case.frame.reset_index(drop=True).assign(row_no=np.arange(len(case.frame)))
    on = " AND ".join(f"a.{c} = b.{c}" for c in ids)
    sql = f"""
        WITH p AS (SELECT *, {tn} AS tn FROM data)
        SELECT a.row_no, b.y AS a, CASE WHEN b.tn >= a.tn - {days} - {tol_days} THEN b.y END AS b
        FROM p AS a ASOF LEFT JOIN p AS b ON {on} AND b.tn <= a.tn - {days}
        ORDER BY a.row_no"""
    con = duckdb.connect()
    try:
        con.register("data", data)
        want = con.execute(sql).df()
    finally:
        con.close()
    want.index = case.frame.index
    assert_matches_reference(got, want, ["a", "b"], id=case.id, time=case.time)
