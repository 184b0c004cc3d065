"""windows, analysis_visit and visit_pick: validation, hand-computed tables, DuckDB as a reference engine."""

from __future__ import annotations

import json

import duckdb
import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import panelfx as pfx

W = pfx.windows([("Baseline", -14, 1, 1), ("Week 4", 15, 42, 29), ("Week 12", 71, 99, 85)])


# ------------------------------------------------------------------------------- windows
@pytest.mark.parametrize("rows, kwargs, message", [
    ([], {}, "at least one window"),
    ([("A", 0, 10, 5), ("A", 20, 30, 25)], {}, "unique; repeated: \\['A'\\]"),
    ([("A", 0, 10, 11)], {}, "low <= target <= high"),
    ([("A", 5, 10, 4)], {}, "low <= target <= high"),
    ([("B", 20, 30, 25), ("A", 0, 10, 5)], {}, "not in order"),
    ([("A", 0, 10, 5), ("B", 10, 20, 15)], {}, "overlap \\(bounds are inclusive"),
    ([("A", 0, 30, 5), ("B", 10, 20, 15)], {"overlap": "nearest_target"}, "not in order"),
    ([("A", 0, None, 5), ("B", 10, 20, 15)], {}, "high must be a number"),
    ([("A", 0, 10, 5), ("B", None, 20, 15)], {}, "low must be a number"),
    ([("A", 0, 10, float("nan"))], {}, "must be finite"),
    ([("A", 0, 10, True)], {}, "target must be a number"),
    ([("", 0, 10, 5)], {}, "label must be non-empty"),
    ([("A", 0, 10)], {}, "must be \\(label, low, high, target\\)"),
    ([("A", 0, 10, 5)], {"overlap": "first"}, "overlap must be one of"),
])
def test_windows_are_validated_when_built(rows, kwargs, message):
    with pytest.raises(pfx.OptionError, match=message):
        pfx.windows(rows, **kwargs)


def test_windows_value_table_and_json():
    w = pfx.windows([("Screening", None, -1, -7), ("Day 1", 1, 1, 1), ("Follow-up", 2, None, 28)])
    assert w == pfx.windows(w.to_frame()) == pfx.windows(json.loads(json.dumps(w.rows())))
    assert w.rows() == [["Screening", None, -1, -7], ["Day 1", 1, 1, 1], ["Follow-up", 2, None, 28]]
    table = pd.DataFrame({"visit": ["a", "b"], "from": [0, 11.5], "to": [10, np.nan], "aim": [5, 20]})
    got = pfx.Windows.from_frame(table, label="visit", low="from", high="to", target="aim")
    assert got.rows() == [["a", 0, 10, 5], ["b", 11.5, None, 20]]
    assert "overlap='nearest_target'" in repr(pfx.windows(w, overlap="nearest_target"))


def test_saved_derivation_holds_the_windows_as_plain_json():
    d = pfx.Derivation(pfx.analysis_visit(W, outside="Unscheduled"),
                       pfx.visit_pick("alt", "nearest", prefer="later"), id="pid", time="ady")
    text = d.to_json()
    assert json.loads(text)["transforms"][0]["options"]["windows"][1] == ["Week 4", 15, 42, 29]
    again = pfx.Derivation.from_json(text)
    assert again == d and again.transforms[0].value == W


# ------------------------------------------------------------------------------- analysis_visit
def test_analysis_visit_hand_table():
    df = pd.DataFrame({"pid": [1] * 7 + [2], "ady": [-15, -14, 1, 2, 15, 42, 43, 85]})
    out = pfx.derive(df, pfx.analysis_visit(W), pfx.analysis_visit(W, outside="Unscheduled", name="av"),
                     id="pid", time="ady")
    assert out["visit"].astype(object).where(out["visit"].notna(), None).tolist() == \
        [None, "Baseline", "Baseline", None, "Week 4", "Week 4", None, "Week 12"]
    assert out["visit"].cat.ordered and list(out["visit"].cat.categories) == ["Baseline", "Week 4", "Week 12"]
    assert out["av"].tolist() == ["Unscheduled", "Baseline", "Baseline", "Unscheduled", "Week 4", "Week 4",
                                  "Unscheduled", "Week 12"]
    assert list(out["av"].cat.categories)[-1] == "Unscheduled"
    np.testing.assert_array_equal(out["visit_number"], [np.nan, 1, 1, np.nan, 2, 2, np.nan, 3])
    np.testing.assert_array_equal(out["visit_target"], [np.nan, 1, 1, np.nan, 29, 29, np.nan, 85])
    np.testing.assert_array_equal(out["visit_distance"], [np.nan, 15, 0, np.nan, 14, 13, np.nan, 0])


def test_overlapping_windows_nearest_target_and_earlier_on_a_tie():
    w = pfx.windows([("A", 0, 20, 5), ("B", 10, 30, 15), ("C", 12, 40, 35)], overlap="nearest_target")
    df = pd.DataFrame({"pid": 1, "d": [9, 10, 11, 12, 20, 25, 26, 31]})
    out = pfx.derive(df, pfx.analysis_visit(w), id="pid", time="d")
    # 10: A (5 away) vs B (5 away) -> A, the earlier; 25: B (10) vs C (10) -> B; 26 -> C
    assert out["visit"].tolist() == ["A", "A", "B", "B", "B", "B", "C", "C"]


def test_decimal_days_compare_as_written():
    w = pfx.windows([("A", 0.1, 0.3, 0.2), ("B", 0.3000001, 0.7, 0.5)])
    df = pd.DataFrame({"pid": 1, "m": [0.1, 0.3, 0.7]})
    out = pfx.derive(df, pfx.analysis_visit(w), id="pid", time="m")
    assert out["visit"].tolist() == ["A", "A", "B"]
    assert out["visit_distance"].tolist() == [0.1, 0.1, 0.2]  # decimal distances, not 0.09999999999999998


def test_analysis_visit_needs_study_days_for_datetime_times():
    df = pd.DataFrame({"pid": [1], "when": pd.to_datetime(["2024-01-01"])})
    with pytest.raises(pfx.OptionError, match="needs day="):
        pfx.derive(df, pfx.analysis_visit(W), id="pid", time="when")
    with pytest.raises(pfx.OptionError, match="also the label of a window"):
        pfx.analysis_visit(W, outside="Week 4")


def test_missing_day_gives_missing_visit_even_with_an_outside_label():
    when = pd.to_datetime(["2024-01-01", "2024-01-20"])
    df = pd.DataFrame({"pid": [1, 1], "when": when, "ady": [1.0, np.nan]})
    out = pfx.derive(df, pfx.analysis_visit(W, day="ady", outside="Unscheduled"), id="pid", time="when")
    assert out["visit"].iloc[0] == "Baseline" and pd.isna(out["visit"].iloc[1])


# ------------------------------------------------------------------------------- visit_pick
def pick_frame() -> pd.DataFrame:
    # Week 4 (target 29): days 22, 27, 31, 36 -> 27 and 31 tie at distance 2; day 27 has no value
    return pd.DataFrame({"pid": [1] * 6 + [2, 2], "ady": [1, 22, 27, 31, 36, 80, 27, 31],
                         "alt": [30.0, 44.0, np.nan, 41.0, 44.0, 50.0, 20.0, 20.0]})


@pytest.mark.parametrize("rule, prefer, picked_days", [
    ("nearest", "earlier", {1: [1, 31, 80], 2: [27]}),
    ("nearest", "later", {1: [1, 31, 80], 2: [31]}),
    ("first", None, {1: [1, 22, 80], 2: [27]}),
    ("last", None, {1: [1, 36, 80], 2: [31]}),
    ("max", "earlier", {1: [1, 22, 80], 2: [27]}),
    ("max", "later", {1: [1, 36, 80], 2: [31]}),
    ("min", "earlier", {1: [1, 31, 80], 2: [27]}),
    ("last_on_or_before_target", None, {1: [1, 22, 80], 2: [27]}),
])
def test_visit_pick_hand_table(rule, prefer, picked_days):
    out = pfx.derive(pick_frame(), pfx.analysis_visit(W), pfx.visit_pick("alt", rule, prefer=prefer),
                     id="pid", time="ady")
    got = {pid: g.loc[g["alt_picked"], "ady"].tolist() for pid, g in out.groupby("pid")}
    assert got == picked_days
    assert out["alt_picked"].dtype == bool


def test_prefer_is_required_exactly_where_ties_can_occur():
    for rule in ("nearest", "max", "min"):
        with pytest.raises(pfx.OptionError, match="needs prefer='earlier' or prefer='later'"):
            pfx.visit_pick("alt", rule)
    for rule in ("first", "last", "last_on_or_before_target"):
        with pytest.raises(pfx.OptionError, match="cannot tie"):
            pfx.visit_pick("alt", rule, prefer="later")
    with pytest.raises(pfx.OptionError, match="rule must be one of"):
        pfx.visit_pick("alt", "closest", prefer="later")


def test_nominal_visit_column_of_text():
    df = pd.DataFrame({"pid": [1, 1, 1], "day": [1, 2, 3], "visit": ["SCREEN", "SCREEN", None],
                       "y": [1.0, 2.0, 3.0]})
    out = pfx.derive(df, pfx.visit_pick("y", "last", visit="visit"), id="pid", time="day")
    assert out["y_picked"].tolist() == [False, True, False]


# ------------------------------------------------------------------------------- DuckDB reference
RULE_SQL = {  # ORDER BY of ROW_NUMBER() for each rule; ties as prefer says (day is unique per subject)
    ("nearest", "later"): "dist, day DESC",
    ("nearest", "earlier"): "dist, day",
    ("first", None): "day",
    ("last", None): "day DESC",
    ("max", "earlier"): "y DESC, day",
    ("min", "later"): "y, day DESC",
    ("last_on_or_before_target", None): "day DESC",
}


@st.composite
def visit_data(draw):
    n_sub = draw(st.integers(1, 5))
    rows = []
    for pid in range(n_sub):
        days = draw(st.lists(st.integers(-20, 130), min_size=1, max_size=12, unique=True))
        for d in days:
            y = draw(st.one_of(st.none(), st.sampled_from([1.0, 2.0, 3.0]), st.floats(-5, 5, width=16)))
            rows.append((pid, d, y))
    frame = pd.DataFrame(rows, columns=["pid", "day", "y"]).astype({"y": "float64"})
    perm = draw(st.permutations(list(range(len(frame)))))
    return frame.iloc[list(perm)].reset_index(drop=True)


WINDOWS_SQL = pd.DataFrame(W.rows(), columns=["label", "low", "high", "target"]).assign(
    visit_number=[1, 2, 3])


@settings(max_examples=80)
@given(frame=visit_data(), rule=st.sampled_from(sorted(RULE_SQL, key=str)))
def test_pick_matches_duckdb_range_join_and_row_number(frame, rule):
    """DuckDB: a range join on low <= day <= high, then ROW_NUMBER() OVER (PARTITION BY subject,
    visit ORDER BY <rule>) = 1 among rows with a value (the issue's reference query)."""
    name, prefer = rule
    got = pfx.derive(frame, pfx.analysis_visit(W), pfx.visit_pick("y", name, prefer=prefer),
                     id="pid", time="day")
    con = duckdb.connect()
    con.register("f", frame.reset_index(names="rid"))
    con.register("w", WINDOWS_SQL)
    extra = "AND f.day <= w.target" if name == "last_on_or_before_target" else ""
    sql = f"""
        WITH j AS (
            SELECT f.rid, f.pid, f.day, f.y, w.visit_number, abs(f.day - w.target) AS dist
            FROM f JOIN w ON w.low <= f.day AND f.day <= w.high
            WHERE f.y IS NOT NULL {extra}
        ), r AS (
            SELECT rid, ROW_NUMBER() OVER (PARTITION BY pid, visit_number ORDER BY {RULE_SQL[rule]}) AS rn FROM j
        )
        SELECT rid FROM r WHERE rn = 1 ORDER BY rid"""
    want = [r[0] for r in con.execute(sql).fetchall()]
    assert np.flatnonzero(got["y_picked"].to_numpy()).tolist() == want
    # DuckDB's range join agrees on the visit of every row, too
    vis = con.execute("SELECT f.rid, w.visit_number FROM f JOIN w ON w.low <= f.day AND f.day <= w.high "
                      "ORDER BY f.rid").fetchall()
    expect = np.full(len(frame), np.nan)
    for rid, vn in vis:
        expect[rid] = vn
    np.testing.assert_array_equal(got["visit_number"].to_numpy(dtype=float), expect)
