"""collapse_ties: only tied rows are combined, by stated rules; disagreement is an error, never a silent drop."""

from __future__ import annotations

import duckdb
import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import panelfx as pfx
from panelfx.errors import ConflictingTiesError, OptionError


def diary() -> pd.DataFrame:
    """Invented: a home blood-glucose diary with double entries on some days."""
    return pd.DataFrame({
        "pid": [1, 1, 1, 2, 2, 1],
        "day": [0, 0, 3, 0, 5, 3],
        "seq": [2, 1, 1, 1, 1, 2],
        "glucose": [6.0, 5.0, 7.5, 8.0, np.nan, np.nan],
        "meter": ["m1", "m1", "m1", "m2", "m2", "m1"],
        "n_strips": [1, 2, 1, 1, 1, 1],
    }, index=["a", "b", "c", "d", "e", "f"])


def test_by_hand():
    out = pfx.collapse_ties(diary(), id="pid", time="day", order="seq",
                            rules={"glucose": "mean", "n_strips": "sum"})
    # groups: (1,0) = a,b ; (1,3) = c,f ; (2,0) = d ; (2,5) = e — labels of the earliest rows kept
    assert list(out.index) == ["a", "c", "d", "e"]
    assert out["glucose"].tolist()[:3] == [5.5, 7.5, 8.0]  # mean of present values (hand computed)
    assert np.isnan(out["glucose"].iloc[3])
    assert out["n_strips"].tolist() == [3, 2, 1, 1]
    assert out["rows_combined"].tolist() == [2, 2, 1, 1]
    assert out["source_rows"].tolist() == [("b", "a"), ("c", "f"), None, None]  # in the order column's order
    assert out["meter"].tolist() == ["m1", "m1", "m2", "m2"]


def test_first_and_last_follow_the_order_column_not_the_rows():
    df = diary()
    rules = {"glucose": "first", "n_strips": "sum"}
    out = pfx.collapse_ties(df, id="pid", time="day", order="seq", rules=rules)
    rev = pfx.collapse_ties(df.iloc[::-1], id="pid", time="day", order="seq", rules=rules)
    assert out.loc["a", "glucose"] == 5.0  # (1, 0) keeps label a; its seq 1 is row b: 5.0
    assert sorted(out["glucose"].fillna(-1).tolist()) == sorted(rev["glucose"].fillna(-1).tolist())
    last = pfx.collapse_ties(df, id="pid", time="day", order="seq", rules={"glucose": "last", "n_strips": "sum"})
    assert np.isnan(last.loc["c", "glucose"])  # (1, 3): seq 2 is row f, missing — "last" keeps it missing


def test_disagreement_without_a_rule_is_an_error():
    with pytest.raises(ConflictingTiesError, match="disagree on 'glucose'") as err:
        pfx.collapse_ties(diary().drop(columns="seq"), id="pid", time="day")
    assert err.value.column == "glucose" and err.value.ids == [1]


def test_rule_errors():
    with pytest.raises(OptionError, match="needs order="):
        pfx.collapse_ties(diary(), id="pid", time="day", rules={"glucose": "first"})
    with pytest.raises(OptionError, match="must be one of"):
        pfx.collapse_ties(diary(), id="pid", time="day", rules={"glucose": "avg"})
    with pytest.raises(OptionError, match="key column"):
        pfx.collapse_ties(diary(), id="pid", time="day", rules={"day": "mean"})


def test_untied_rows_pass_through_unchanged():
    df = diary().iloc[[2, 3, 4]]  # no ties
    out = pfx.collapse_ties(df, id="pid", time="day")
    pd.testing.assert_frame_equal(out.drop(columns=["rows_combined", "source_rows"]), df)


@settings(max_examples=40, deadline=None)
@given(st.lists(st.tuples(st.integers(0, 3), st.integers(0, 3), st.one_of(st.none(), st.integers(-5, 5))),
                min_size=1, max_size=30))
def test_matches_duckdb_group_by(rows):
    """DuckDB GROUP BY as the reference for the numeric rules (outside engine)."""
    df = pd.DataFrame(rows, columns=["pid", "day", "v"]).astype({"v": "float64"})
    df["w"] = df["v"]
    out = pfx.collapse_ties(df, id="pid", time="day", rules={"v": "mean", "w": "max"})
    ref = duckdb.sql("select pid, day, avg(v) as v, max(w) as w, count(*) as n from df group by pid, day").df()
    got = out[["pid", "day", "v", "w", "rows_combined"]].sort_values(["pid", "day"]).reset_index(drop=True)
    ref = ref.sort_values(["pid", "day"]).reset_index(drop=True)
    np.testing.assert_allclose(got["v"].to_numpy(float), ref["v"].to_numpy(float), equal_nan=True)
    np.testing.assert_array_equal(got["w"].to_numpy(float), ref["w"].to_numpy(float))
    assert got["rows_combined"].tolist() == ref["n"].tolist()
