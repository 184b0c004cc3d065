"""visit_grid and imputation on the grid: hand-computed grids, a loop reference, DuckDB for BOCF/WOCF."""

from __future__ import annotations

import duckdb
import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import panelfx as pfx

W = pfx.windows([("Baseline", -14, 1, 1), ("Week 4", 15, 42, 29), ("Week 12", 71, 99, 85),
                 ("Week 24", 155, 183, 169)])
NEAREST = pfx.visit_pick("alt", "nearest", prefer="later")


def lab() -> pd.DataFrame:
    return pd.DataFrame({
        "pid": ["b", "a", "a", "a", "a", "b", "c", "a"],
        "ady": [1, 1, 20, 36, 50, 90, 1, 160],
        "alt": [22.0, 30.0, 41.0, 38.0, 99.0, np.nan, 18.0, 35.0],
        "site": ["x", "y", "y", "y", "y", "x", "x", "y"],
        "eos": [120, 200, 200, 200, 200, 120, np.nan, 200],
    }, index=[f"r{i}" for i in range(8)])


def test_grid_hand_computed():
    grid = pfx.visit_grid(lab(), W, id="pid", time="ady", pick=NEAREST, until="eos")
    # a: ends day 200 -> 4 visits; day 50 is outside every window (not in the grid)
    # b: ends day 120 -> 3 visits; day 90 is in Week 12 but has no value
    # c: no end date -> up to its last record (day 1) -> Baseline only
    assert grid["pid"].tolist() == ["b"] * 3 + ["a"] * 4 + ["c"]  # subjects in order of first appearance
    assert grid["visit"].tolist() == ["Baseline", "Week 4", "Week 12", "Baseline", "Week 4", "Week 12", "Week 24",
                                      "Baseline"]
    assert grid["record"].tolist() == ["picked", "missed", "no value", "picked", "picked", "missed", "picked",
                                       "picked"]
    np.testing.assert_array_equal(grid["ady"], [1, np.nan, np.nan, 1, 36, np.nan, 160, 1])
    np.testing.assert_array_equal(grid["alt"], [22, np.nan, np.nan, 30, 38, np.nan, 35, 18])
    assert grid["site"].tolist() == ["x", np.nan, np.nan, "y", "y", np.nan, "y", "x"]
    assert list(grid.columns) == ["pid", "visit", "visit_number", "visit_target", "record", "ady", "alt", "site", "eos"]
    assert grid["visit"].cat.ordered and grid["visit_number"].tolist() == [1, 2, 3, 1, 2, 3, 4, 1]
    assert grid["visit_target"].dtype == np.int64 and isinstance(grid.index, pd.RangeIndex)


def test_records_after_the_end_still_appear_and_a_number_ends_everyone():
    grid = pfx.visit_grid(lab(), W, id="pid", time="ady", pick=NEAREST, until=30)
    # until day 30: Baseline and Week 4 for everyone; a's day-160 record keeps Week 12 (missed) and Week 24
    sizes = grid.groupby("pid", sort=False).size().to_dict()
    assert sizes == {"b": 3, "a": 4, "c": 2}
    assert grid.loc[grid["pid"] == "c", "record"].tolist() == ["picked", "missed"]
    # a window that starts on the end day is due (inclusive)
    on_low = pfx.visit_grid(lab(), W, id="pid", time="ady", pick=NEAREST, until=71)
    assert on_low.groupby("pid", sort=False).size().to_dict() == {"b": 3, "a": 4, "c": 3}


def test_imputation_on_the_grid_is_flagged():
    grid = pfx.visit_grid(lab(), W, id="pid", time="ady", pick=NEAREST, until="eos")
    out = pfx.derive(grid, pfx.carry_forward("alt", flag=True), pfx.carry_baseline("alt", flag=True),
                     pfx.carry_worst("alt", "max", flag=True), id="pid", time="visit_number")
    np.testing.assert_array_equal(out["alt_locf"], [22, 22, 22, 30, 38, 38, 35, 18])
    assert out["alt_locf_flag"].tolist() == [np.nan, "LOCF", "LOCF", np.nan, np.nan, "LOCF", np.nan, np.nan]
    np.testing.assert_array_equal(out["alt_bocf"], [22, 22, 22, 30, 38, 30, 35, 18])
    assert out["alt_bocf_flag"].tolist() == [np.nan, "BOCF", "BOCF", np.nan, np.nan, "BOCF", np.nan, np.nan]
    np.testing.assert_array_equal(out["alt_wocf"], [22, 22, 22, 30, 38, 38, 35, 18])
    assert out["alt_wocf_flag"].notna().tolist() == [False, True, True, False, False, True, False, False]
    # every filled value is flagged, and only those
    for col in ("alt_locf", "alt_bocf", "alt_wocf"):
        filled = out["alt"].isna() & out[col].notna()
        assert (out[f"{col}_flag"].notna() == filled).all()


def test_grid_options_are_checked():
    with pytest.raises(pfx.OptionError, match="pick must be a panelfx.visit_pick"):
        pfx.visit_grid(lab(), W, id="pid", time="ady", pick="nearest")  # type: ignore[arg-type]
    with pytest.raises(pfx.ColumnExistsError, match="already in the frame"):
        pfx.visit_grid(lab().assign(record=1), W, id="pid", time="ady", pick=NEAREST)
    with pytest.raises(pfx.NotConstantError):
        pfx.visit_grid(lab().assign(eos=range(8)), W, id="pid", time="ady", pick=NEAREST, until="eos")
    with pytest.raises(pfx.OptionError, match="until must be a number"):
        pfx.visit_grid(lab(), W, id="pid", time="ady", pick=NEAREST, until=[1])  # type: ignore[arg-type]


# ---------------------------------------------------------------------------- loop reference
def grid_by_loop(frame: pd.DataFrame, until: float | None) -> list[tuple]:
    """One subject at a time, one window at a time, straight from visit_grid's docstring."""
    out = []
    for pid in dict.fromkeys(frame["pid"]):
        rows = frame[frame["pid"] == pid].sort_values("ady")
        end = rows["ady"].max() if until is None else until
        due = sum(1 for (_, low, _, _) in W.items if low <= end)
        held = [k for k, (_, low, high, _) in enumerate(W.items) for d in rows["ady"] if low <= d <= high]
        n = max(due, max(held, default=-1) + 1, 1)
        for k in range(n):
            _, low, high, target = W.items[k]
            inside = rows[(rows["ady"] >= low) & (rows["ady"] <= high)]
            valid = inside[inside["alt"].notna()]
            if len(valid):
                dist = (valid["ady"] - target).abs()
                best = valid[dist == dist.min()].iloc[-1]  # nearest, the later on a tie
                out.append((pid, k + 1, "picked", best["ady"]))
            else:
                out.append((pid, k + 1, "no value" if len(inside) else "missed", None))
    return out


@settings(max_examples=60)
@given(data=st.data(), until=st.one_of(st.none(), st.integers(-20, 200)))
def test_grid_matches_a_loop(data, until):
    n_sub = data.draw(st.integers(1, 4))
    parts = []
    for pid in range(n_sub):
        days = data.draw(st.lists(st.integers(-20, 190), min_size=1, max_size=8, unique=True))
        vals = data.draw(st.lists(st.sampled_from([1.0, 2.0, np.nan]), min_size=len(days), max_size=len(days)))
        parts.append(pd.DataFrame({"pid": f"p{pid}", "ady": days, "alt": vals}))
    frame = pd.concat(parts, ignore_index=True).sample(frac=1, random_state=0)
    grid = pfx.visit_grid(frame, W, id="pid", time="ady", pick=NEAREST, until=until)
    got = [(p, v, r, None if pd.isna(d) else d) for p, v, r, d in
           zip(grid["pid"], grid["visit_number"], grid["record"], grid["ady"])]
    assert got == grid_by_loop(frame, until)


# ---------------------------------------------------------------------------- DuckDB for BOCF / WOCF
@settings(max_examples=40)
@given(values=st.lists(st.one_of(st.none(), st.integers(-3, 3).map(float)), min_size=1, max_size=24),
       cut=st.integers(1, 6))
def test_bocf_and_wocf_match_duckdb_window_sql(values, cut):
    """DuckDB window SQL (max()/min() ignore NULLs; first_value(... IGNORE NULLS))."""
    n = len(values)
    frame = pd.DataFrame({"pid": [i // cut for i in range(n)], "t": [i % cut for i in range(n)],
                          "y": pd.array(values, dtype="Float64")}).iloc[::-1]
    got = pfx.derive(frame, pfx.carry_worst("y", "max"), pfx.carry_worst("y", "min", name="y_best"),
                     pfx.carry_baseline("y"), id="pid", time="t")
    con = duckdb.connect()
    con.register("f", frame.reset_index(names="rid"))
    want = con.execute("""
        SELECT rid,
          coalesce(y, max(y) OVER w) AS wocf_max,
          coalesce(y, min(y) OVER w) AS wocf_min,
          CASE WHEN y IS NULL AND count(y) OVER w > 0 THEN first_value(y IGNORE NULLS) OVER a ELSE y END AS bocf
        FROM f
        WINDOW w AS (PARTITION BY pid ORDER BY t ROWS BETWEEN UNBOUNDED PRECEDING AND CURRENT ROW),
               a AS (PARTITION BY pid ORDER BY t ROWS BETWEEN UNBOUNDED PRECEDING AND UNBOUNDED FOLLOWING)
        ORDER BY rid""").df()
    for mine, theirs in (("y_wocf", "wocf_max"), ("y_best", "wocf_min"), ("y_bocf", "bocf")):
        a = got[mine].sort_index().to_numpy(dtype=float, na_value=np.nan)
        b = want[theirs].to_numpy(dtype=float, na_value=np.nan)
        np.testing.assert_array_equal(a, b, err_msg=mine)
