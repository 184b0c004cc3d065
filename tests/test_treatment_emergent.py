"""treatment_emergent: one hand-computed case per rule (the ICH E9 glossary's sense of
treatment-emergent: absent before treatment, or worsened relative to the pre-treatment state;
from memory), and checks of its inputs."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import panelfx as pfx

EX = pd.DataFrame({"pid": [1, 1, 2], "start": [10, 30, 5], "end": [20, 40, np.nan]})


def te(events, dosing=None, **kw):
    args = {"id": "pid", "onset": "onset", "start": "start", "end": "end", "after_last": 14, **kw}
    return pfx.treatment_emergent(events, EX[EX["pid"] == 1] if dosing is None else dosing, **args)


def test_every_rule():
    ae = pd.DataFrame({"pid": [1, 1, 1, 1, 1, 1, 1, 3], "onset": [9, 10, 40, 54, 55, np.nan, 25, 12]},
                      index=list("abcdefgh"))
    out = te(ae)
    assert out["treatment_emergent"].tolist() == [False, True, True, True, False, True, True, False]
    assert out["treatment_emergent_reason"].tolist() == [
        "before first dose", "on treatment", "on treatment", "within 14 after last dose", "after window",
        "onset unknown", "on treatment", "no dosing"]
    assert list(out.index) == list("abcdefgh") and out["treatment_emergent_reason"].dtype == "category"


def test_worsened_pre_existing_conditions():
    ae = pd.DataFrame({"pid": [1, 1, 1, 1], "onset": [5, 12, 12, 12], "sev": [3, 2, 1, np.nan],
                       "prior": [2, 2, np.nan, 1]})
    out = te(ae, severity="sev", prior="prior")
    assert out["treatment_emergent_reason"].tolist() == ["worsened after first dose", "pre-existing, not worsened",
                                                        "on treatment", "severity unknown"]
    assert out["treatment_emergent"].tolist() == [True, False, True, True]
    grades = pd.CategoricalDtype(["mild", "moderate", "severe"], ordered=True)
    cat = ae.assign(sev=pd.Series(["severe", "moderate", "mild", None]).astype(grades),
                    prior=pd.Series(["moderate", "moderate", None, "mild"]).astype(grades))
    assert te(cat, severity="sev", prior="prior")["treatment_emergent_reason"].tolist() == \
        out["treatment_emergent_reason"].tolist()


def test_open_ends_dates_and_errors():
    ae = pd.DataFrame({"pid": [2], "onset": [400]})
    with pytest.raises(pfx.NullKeyError, match="without an end"):
        te(ae, dosing=EX)
    assert te(ae, dosing=EX, open_end="until_time")["treatment_emergent_reason"].item() == "on treatment"
    dates = pd.DataFrame({"pid": [1], "onset": pd.to_datetime(["2024-02-20"])})
    dosing = pd.DataFrame({"pid": [1], "start": pd.to_datetime(["2024-01-01"]),
                           "end": pd.to_datetime(["2024-01-21"])})
    out = te(dates, dosing=dosing, after_last="30D")
    assert out["treatment_emergent_reason"].item() == "within 30D after last dose"  # 20 Feb = 21 Jan + 30 days
    assert te(dates, dosing=dosing, after_last="29D")["treatment_emergent_reason"].item() == "after window"
    with pytest.raises(pfx.OptionError, match="go together"):
        te(dates, dosing=dosing, severity="onset")
    with pytest.raises(pfx.TimeTypeError, match="holds number values but"):
        te(ae.assign(onset=pd.Timestamp("2024-01-01")), dosing=EX, open_end="until_time")
    with pytest.raises(pfx.ColumnExistsError):
        te(dates.assign(treatment_emergent=1), dosing=dosing, after_last="1D")
    with pytest.raises(pfx.ColumnTypeError, match="holds text in the events table but numbers"):
        te(ae.assign(pid="2"), dosing=EX)
    with pytest.raises(pfx.OptionError, match="after_last must be"):
        te(ae, dosing=EX, after_last=-1)


@settings(max_examples=40, deadline=None)
@given(data=st.data())
def test_matches_duckdb_case_sql(data):
    """The same rules written as SQL over per-subject first and last dose (DuckDB)."""
    duckdb = pytest.importorskip("duckdb")
    n = data.draw(st.integers(1, 12))
    ae = pd.DataFrame({"pid": data.draw(st.lists(st.integers(0, 3), min_size=n, max_size=n)),
                       "onset": data.draw(st.lists(st.one_of(st.integers(0, 80).map(float), st.just(np.nan)),
                                                   min_size=n, max_size=n))})
    k = data.draw(st.integers(0, 5))
    starts = data.draw(st.lists(st.integers(0, 50), min_size=k, max_size=k))
    ex = pd.DataFrame({"pid": data.draw(st.lists(st.integers(0, 2), min_size=k, max_size=k)), "start": starts,
                       "end": [s + data.draw(st.integers(0, 20)) for s in starts]}).astype("int64")
    after = data.draw(st.integers(0, 15))
    got = te(ae, dosing=ex, after_last=after)
    con = duckdb.connect()
    con.register("ae", ae.reset_index())
    con.register("ex", ex)
    want = con.execute(f"""
        WITH d AS (SELECT pid, MIN(start) AS f, MAX("end") AS l FROM ex GROUP BY pid)
        SELECT ae.index AS i, CASE
            WHEN d.f IS NULL THEN 'no dosing'
            WHEN ae.onset IS NULL THEN 'onset unknown'
            WHEN ae.onset > d.l + {after} THEN 'after window'
            WHEN ae.onset < d.f THEN 'before first dose'
            WHEN ae.onset <= d.l THEN 'on treatment'
            ELSE 'within' END AS reason
        FROM ae LEFT JOIN d ON ae.pid = d.pid ORDER BY ae.index""").df()
    reasons = got["treatment_emergent_reason"].astype(str).str.replace(r"^within .*", "within", regex=True)
    assert reasons.tolist() == want["reason"].tolist()
    flagged = want["reason"].isin(["onset unknown", "on treatment", "within"]).tolist()
    assert got["treatment_emergent"].tolist() == flagged
