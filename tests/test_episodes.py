"""panelfx.episodes: hand-computed intervals for every rule, errors, and a loop reference."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import panelfx as pfx
from panelfx.testing.strategies import panels

NAN = float("nan")


def ep(frame, **kw):
    kw.setdefault("id", "pid")
    kw.setdefault("time", "day")
    kw.setdefault("exit", "end")
    return pfx.episodes(frame, **kw)


def rows(out, *cols):
    """The output as a list of tuples (NaN kept as NaN: compare with _same)."""
    return [tuple(r) for r in out[list(cols)].itertuples(index=False)]


def same(got, want):
    assert len(got) == len(want), (got, want)
    for g, w in zip(got, want):
        assert len(g) == len(w), (g, w)
        for a, b in zip(g, w):
            if isinstance(b, float) and np.isnan(b):
                assert a is None or a is pd.NA or (isinstance(a, float) and np.isnan(a)), (got, want)
            else:
                assert a == b, (got, want)


# ---------------------------------------------------------------------------- the rules, by hand
def test_value_measured_at_the_event_time_never_describes_the_interval_it_closes():
    """Reverse-causation guard: x recorded at the death visit (day 20) is not used."""
    df = pd.DataFrame({"pid": [1, 1, 1], "day": [0, 10, 20], "x": [0, 1, 5], "end": 20, "died": 1})
    out = ep(df, event="died", covariates=["x"])
    same(rows(out, "start", "stop", "event", "x"), [(0.0, 10.0, 0, 0), (10.0, 20.0, 1, 1)])


def test_change_at_a_recurrent_event_time_goes_after_the_event():
    df = pd.DataFrame({"pid": [1, 1], "day": [0, 6], "x": [0, 1], "end": 15})
    events = pd.DataFrame({"pid": [1, 1], "day": [6, 12]})
    out = ep(df, covariates=["x"], events=events, gap_time=True)
    same(rows(out, "start", "stop", "event", "x", "gap_start", "gap_stop"),
         [(0.0, 6.0, 1, 0, 0.0, 6.0), (6.0, 12.0, 1, 1, 0.0, 6.0), (12.0, 15.0, 0, 1, 0.0, 3.0)])


def test_tie_shift_moves_a_change_at_an_event_time_before_the_event():
    """The published-data convention: a change on the day of the event is put tie_shift earlier."""
    df = pd.DataFrame({"pid": [1, 1], "day": [0, 6], "x": [0, 1], "end": 15})
    events = pd.DataFrame({"pid": [1, 1], "day": [6, 12]})
    out = ep(df, covariates=["x"], events=events, tie_shift=1)
    same(rows(out, "start", "stop", "event", "x"),
         [(0.0, 5.0, 0, 0), (5.0, 6.0, 1, 1), (6.0, 12.0, 1, 1), (12.0, 15.0, 0, 1)])
    # also at exit when follow-up ends in an event there (the Stanford subject 38 case)
    df = pd.DataFrame({"pid": [1, 1], "day": [0, 5], "tx": [0, 1], "end": 5, "died": 1})
    same(rows(ep(df, event="died", covariates=["tx"]), "start", "stop", "event", "tx"), [(0.0, 5.0, 1, 0)])
    same(rows(ep(df, event="died", covariates=["tx"], tie_shift=0.5), "start", "stop", "event", "tx"),
         [(0.0, 4.5, 0, 0), (4.5, 5.0, 1, 1)])
    # censored at exit: nothing to shift, the change at exit is ignored
    same(rows(ep(df.assign(died=0), event="died", covariates=["tx"], tie_shift=0.5), "start", "stop", "tx"),
         [(0.0, 5.0, 0)])


def test_tie_shift_may_not_reorder_cuts():
    df = pd.DataFrame({"pid": [1, 1, 1], "day": [0, 4.8, 5], "x": [0, 1, 2], "end": 9, "died": 0})
    events = pd.DataFrame({"pid": [1], "day": [5]})
    with pytest.raises(pfx.OptionError, match="tie_shift=0.5 moves a change") as err:
        ep(df, covariates=["x"], events=events, tie_shift=0.5)
    assert err.value.ids == [1]


def test_latency_shifts_changes_later_and_never_beyond_exit():
    df = pd.DataFrame({"pid": [1, 1, 1], "day": [0, 10, 18], "x": [0, 1, 2], "z": ["a", "b", "c"], "end": 20})
    out = ep(df, covariates=["x"], lag=5)
    # x measured at 0 takes effect at 5 (unknown before), at 10 -> 15, at 18 -> 23: beyond exit, dropped
    same(rows(out, "start", "stop", "x", "row"), [(0.0, 5.0, NAN, NAN), (5.0, 15.0, 0.0, 0), (15.0, 20.0, 1.0, 1)])
    out = ep(df, covariates=["x", "z"], lag={"x": 5})
    same(rows(out, "start", "stop", "x", "z"),
         [(0.0, 5.0, NAN, "a"), (5.0, 10.0, 0.0, "a"), (10.0, 15.0, 0.0, "b"), (15.0, 18.0, 1.0, "b"),
          (18.0, 20.0, 1.0, "c")])


def test_merge_joins_identical_neighbours_but_never_across_an_event_or_a_split():
    df = pd.DataFrame({"pid": 1, "day": [0, 5, 9, 12], "x": [1, 1, 2, 2], "end": 20}, index=list("abcd"))
    same(rows(ep(df, covariates=["x"]), "start", "stop", "x", "episode", "row"),
         [(0.0, 9.0, 1, 1, "a"), (9.0, 20.0, 2, 2, "c")])
    same(rows(ep(df, covariates=["x"], merge=False), "start", "stop", "x", "row"),
         [(0.0, 5.0, 1, "a"), (5.0, 9.0, 1, "b"), (9.0, 12.0, 2, "c"), (12.0, 20.0, 2, "d")])
    same(rows(ep(df, covariates=["x"], split_at=[7]), "start", "stop", "x"),
         [(0.0, 7.0, 1), (7.0, 9.0, 1), (9.0, 20.0, 2)])
    events = pd.DataFrame({"pid": [1], "day": [3]})
    same(rows(ep(df, covariates=["x"], events=events), "start", "stop", "event", "x"),
         [(0.0, 3.0, 1, 1), (3.0, 9.0, 0, 1), (9.0, 20.0, 0, 2)])


def test_recurrent_events_from_a_column_with_gap_times():
    # infections flagged at visits; the one at day 0 is at entry (outside (entry, exit]) and is left out
    df = pd.DataFrame({"pid": 1, "day": [0, 4, 10, 13], "inf": [1, 1, 0, 1], "end": 16})
    out = ep(df, events="inf", gap_time=True)
    same(rows(out, "start", "stop", "event", "gap_start", "gap_stop", "episode"),
         [(0.0, 4.0, 1, 0.0, 4.0, 1), (4.0, 13.0, 1, 0.0, 9.0, 2), (13.0, 16.0, 0, 0.0, 3.0, 3)])
    # events after exit are outside follow-up too; a terminal event and a recurrent one at exit are one event
    table = pd.DataFrame({"pid": [1, 1, 1], "t": [4, 16, 30]})
    out = ep(df, events=table, event=None)
    same(rows(out, "start", "stop", "event"), [(0.0, 4.0, 1), (4.0, 16.0, 1)])
    out = ep(df.assign(d=1), events=table, event="d")
    same(rows(out, "start", "stop", "event"), [(0.0, 4.0, 1), (4.0, 16.0, 1)])


def test_events_named_as_a_side_table_and_their_errors():
    df = pd.DataFrame({"pid": [1, 1, 2], "day": [0, 5, 0], "end": [9, 9, 4]})
    out = ep(df, events="falls", tables={"falls": pd.DataFrame({"pid": [2, 1], "day": [2, 3]})})
    same(rows(out, "pid", "start", "stop", "event"), [(1, 0.0, 3.0, 1), (1, 3.0, 9.0, 0), (2, 0.0, 2.0, 1),
                                                      (2, 2.0, 4.0, 0)])
    with pytest.raises(pfx.UnknownSubjectError, match="events of subjects not in the frame") as err:
        ep(df, events=pd.DataFrame({"pid": [7, 1], "day": [2, 3]}))
    assert err.value.ids == [7]
    with pytest.raises(pfx.DuplicateOccasionError):
        ep(df, events=pd.DataFrame({"pid": [1, 1], "day": [2, 2]}))
    with pytest.raises(pfx.ColumnTypeError, match="no subject could match"):  # the check of derive's side tables
        ep(df, events=pd.DataFrame({"pid": ["1"], "day": [2]}))
    with pytest.raises(pfx.NullKeyError):
        ep(df, events=pd.DataFrame({"pid": [1, 1], "day": [2, None]}))
    with pytest.raises(pfx.MissingColumnError, match="not exactly one column"):
        ep(df, events=pd.DataFrame({"pid": [1], "a": [2], "b": [3]}))


def test_lexis_split_on_age_from_birth_dates():
    """Bands on a second time scale: age in Julian years since birth; a band is (lower, upper] in age."""
    birth = pd.Timestamp("1980-01-01")
    df = pd.DataFrame({"pid": [1, 1], "day": pd.to_datetime(["2015-06-01", "2025-03-01"]), "x": [0, 1],
                       "end": pd.Timestamp("2032-01-01"), "born": birth})
    out = ep(df, covariates=["x"], split_at={"since": "born", "bands": [40, 50], "unit": "Y", "name": "age"})
    at40 = birth + pd.Timedelta(days=40 * 365.25)
    at50 = birth + pd.Timedelta(days=50 * 365.25)
    got = rows(out, "start", "stop", "x", "age")
    assert got == [(pd.Timestamp("2015-06-01"), at40, 0, "<=40"), (at40, pd.Timestamp("2025-03-01"), 0, "(40, 50]"),
                   (pd.Timestamp("2025-03-01"), at50, 1, "(40, 50]"), (at50, pd.Timestamp("2032-01-01"), 1, ">50")]
    assert list(out["age"].cat.categories) == ["<=40", "(40, 50]", ">50"] and out["age"].cat.ordered
    with pytest.raises(pfx.OptionError, match="give 'unit'"):
        ep(df, split_at={"since": "born", "bands": [40]})


def test_lexis_split_on_age_at_entry_with_numeric_days():
    df = pd.DataFrame({"pid": [1, 2], "day": [0, 0], "end": [1000, 300], "age0": [38.5, 20.0]})
    out = ep(df, split_at={"at_entry": "age0", "bands": [40], "unit": 365.25})
    # subject 1 turns 40 after (40 - 38.5) * 365.25 = 547.875 days: exact on the decimal clock
    same(rows(out, "pid", "start", "stop", "age0_band"),
         [(1, 0.0, 547.875, "<=40"), (1, 547.875, 1000.0, ">40"), (2, 0.0, 300.0, "<=40")])


def test_lexis_split_on_age_at_entry_with_datetimes():
    df = pd.DataFrame({"pid": [1], "day": [pd.Timestamp("2020-01-01")], "end": [pd.Timestamp("2023-01-01")],
                       "age0": [49.5]})
    out = ep(df, split_at={"at_entry": "age0", "bands": [50], "unit": "Y", "name": "age"})
    turns_50 = pd.Timestamp("2020-01-01") + pd.Timedelta(days=0.5 * 365.25)
    assert rows(out, "start", "stop", "age") == [(pd.Timestamp("2020-01-01"), turns_50, "<=50"),
                                                 (turns_50, pd.Timestamp("2023-01-01"), ">50")]


def test_split_at_fixed_times_and_at_every_event_time():
    df = pd.DataFrame({"pid": [1, 2], "day": [0, 0], "end": [10, 6], "d": [1, 1]})
    same(rows(ep(df, event="d", split_at="events"), "pid", "start", "stop", "event"),
         [(1, 0.0, 6.0, 0), (1, 6.0, 10.0, 1), (2, 0.0, 6.0, 1)])
    same(rows(ep(df, event="d", split_at=[2, 8, 40, "events"]), "pid", "start", "stop"),
         [(1, 0.0, 2.0), (1, 2.0, 6.0), (1, 6.0, 8.0), (1, 8.0, 10.0), (2, 0.0, 2.0), (2, 2.0, 6.0)])


def test_entry_takes_the_last_value_at_or_before_it():
    df = pd.DataFrame({"pid": 1, "day": [0, 3, 8, 15], "x": [0, 1, 2, 3], "start_day": 5, "end": 12},
                      index=[10, 11, 12, 13])
    same(rows(ep(df, entry="start_day", covariates=["x"]), "start", "stop", "x", "row"),
         [(5.0, 8.0, 1, 11), (8.0, 12.0, 2, 12)])
    # entry before every occasion: nothing measured yet
    same(rows(ep(df.assign(start_day=-2), entry="start_day", covariates=["x"]), "start", "stop", "x"),
         [(-2.0, 0.0, NAN), (0.0, 3.0, 0.0), (3.0, 8.0, 1.0), (8.0, 12.0, 2.0)])


def test_missing_values_carried_or_kept():
    df = pd.DataFrame({"pid": 1, "day": [0, 4, 8], "x": [1.0, NAN, 2.0], "y": [5.0, 6.0, 6.0], "end": 10})
    same(rows(ep(df, covariates=["x", "y"]), "start", "stop", "x", "y", "row"),
         [(0.0, 4.0, 1.0, 5.0, 0), (4.0, 8.0, 1.0, 6.0, 1), (8.0, 10.0, 2.0, 6.0, 2)])
    same(rows(ep(df, covariates=["x", "y"], missing="keep"), "start", "stop", "x", "y"),
         [(0.0, 4.0, 1.0, 5.0), (4.0, 8.0, NAN, 6.0), (8.0, 10.0, 2.0, 6.0)])
    # carried x is the same as before: with y alone changing there is still a change at 4
    same(rows(ep(df, covariates=["x"]), "start", "stop", "x", "row"), [(0.0, 8.0, 1.0, 0), (8.0, 10.0, 2.0, 2)])


def test_covariates_from_a_side_table_are_a_stream_of_their_own():
    df = pd.DataFrame({"pid": [1, 1, 2], "day": [0, 5, 0], "x": [0, 1, 7], "end": [10, 10, 3]})
    labs = pd.DataFrame({"pid": [1, 1, 9, 2], "day": [2, 7, 1, -1], "hb": [12.0, 11.0, 99.0, 13.0]})
    out = ep(df, covariates=["x", "hb"], tables={"labs": labs})
    same(rows(out, "pid", "start", "stop", "x", "hb", "row"),
         [(1, 0.0, 2.0, 0, NAN, 0), (1, 2.0, 5.0, 0, 12.0, 0), (1, 5.0, 7.0, 1, 12.0, 1), (1, 7.0, 10.0, 1, 11.0, 1),
          (2, 0.0, 3.0, 7, 13.0, 2)])
    with pytest.raises(pfx.OptionError, match="is in the frame and table"):
        ep(df, covariates=["x"], tables={"labs": labs.rename(columns={"hb": "x"})})


def test_output_dtypes_ids_and_order():
    df = pd.DataFrame({"site": ["B", "A", "B"], "pid": [1, 1, 1], "day": [3, 0, 0],
                       "arm": pd.Categorical(["t", "c", "t"]), "end": [9, 4, 9]}, index=["r1", "r2", "r3"])
    out = pfx.episodes(df, id=["site", "pid"], time="day", exit="end", covariates=["arm"], merge=False)
    assert list(out.columns) == ["site", "pid", "start", "stop", "event", "arm", "episode", "row"]
    assert out["site"].tolist() == ["B", "B", "A"]  # subjects in order of first appearance
    assert out["row"].tolist() == ["r3", "r1", "r2"]
    assert isinstance(out["arm"].dtype, pd.CategoricalDtype)
    assert out["event"].dtype == np.int64 and out["episode"].tolist() == [1, 2, 1]
    assert isinstance(out.index, pd.RangeIndex)


def test_datetimes_keep_their_zone_and_resolution():
    day = pd.Timestamp("2024-03-01", tz="Europe/Berlin")
    df = pd.DataFrame({"pid": [1, 1], "day": [day, day + pd.Timedelta("10D")], "x": [1, 2],
                       "end": day + pd.Timedelta("30D")})
    out = ep(df, covariates=["x"], lag="2D", gap_time=True, unit="W")
    assert out["start"].tolist() == [day, day + pd.Timedelta("2D"), day + pd.Timedelta("12D")]
    assert out["start"].dt.tz is not None
    assert out["gap_stop"].tolist() == pytest.approx([2 / 7, 12 / 7, 30 / 7])
    with pytest.raises(pfx.OptionError, match="does not fit"):
        ep(df, covariates=["x"], lag=2)


def test_no_covariates_row_is_the_last_occasion():
    df = pd.DataFrame({"pid": 1, "day": [0, 4], "end": 10}, index=[5, 6])
    out = ep(df, split_at=[2, 6])
    same(rows(out, "start", "stop", "row"), [(0.0, 2.0, 5), (2.0, 6.0, 5), (6.0, 10.0, 6)])


def test_input_is_not_changed():
    df = pd.DataFrame({"pid": [2, 1, 1], "day": [0, 4, 0], "x": [1, 2, 3], "end": [5, 9, 9]})
    before = df.copy()
    ep(df, covariates=["x"], lag=1, split_at=[3])
    pd.testing.assert_frame_equal(df, before)


# ---------------------------------------------------------------------------- errors
def test_exit_at_or_before_entry_is_an_error_listing_the_ids():
    df = pd.DataFrame({"pid": [1, 2, 3, 3], "day": [0, 5, 0, 2], "end": [4, 5, -1, -1]})
    with pytest.raises(pfx.FollowUpError, match="exit at or before entry") as err:
        ep(df)
    assert err.value.ids == [2, 3] and err.value.count == 2 and err.value.column == "end"


def test_follow_up_columns_must_be_constant_and_present():
    df = pd.DataFrame({"pid": [1, 1], "day": [0, 5], "end": [9, 8], "d": [0, 1]})
    with pytest.raises(pfx.NotConstantError, match="exit must be constant"):
        ep(df)
    with pytest.raises(pfx.FollowUpError, match="missing exit"):
        ep(df.assign(end=[9, None]))
    with pytest.raises(pfx.NotConstantError, match="event flag"):
        ep(df.assign(end=9), event="d")
    with pytest.raises(pfx.FollowUpError, match="missing event flag"):
        ep(df.assign(end=9, d=[1, None]), event="d")
    with pytest.raises(pfx.TimeTypeError):
        ep(df.assign(end=pd.Timestamp("2024-01-01")))


@pytest.mark.parametrize("kw, match", [
    ({"missing": "drop"}, "missing must be one of"),
    ({"merge": 1}, "merge must be True or False"),
    ({"covariates": ["x", "x"]}, "twice"),
    ({"covariates": ["day"]}, "the id or time column"),
    ({"covariates": ["nope"]}, "neither in the frame"),
    ({"lag": -1}, "lag must be"),
    ({"lag": {"y": 1}}, "not among the covariates"),
    ({"tie_shift": 0}, "tie_shift must be"),
    ({"split_at": "weekly"}, "the only word allowed"),
    ({"split_at": [None]}, "is not a time"),
    ({"split_at": {"since": "end", "bands": []}}, "non-empty list"),
    ({"split_at": {"since": "end", "bands": [2, 1]}}, "must increase"),
    ({"split_at": {"since": "end", "at_entry": "x", "bands": [1]}}, "exactly one of"),
    ({"split_at": {"since": "end", "bands": [1], "width": 2}}, "unknown key"),
    ({"split_at": {"since": "end", "bands": [1], "unit": "Y"}}, "positive number"),
    ({"events": 3}, "events must be"),
    ({"events": "nope"}, "neither a column"),
    ({"tables": {"a": [1]}}, "tables must map"),
    ({"exit": None}, "exit must be a column name"),
])
def test_bad_options(kw, match):
    df = pd.DataFrame({"pid": [1, 1], "day": [0, 5], "x": [1, 2], "end": 9})
    with pytest.raises(pfx.PanelError, match=match):
        ep(df, **kw)


def test_output_names_must_not_clash():
    df = pd.DataFrame({"pid": [1, 1], "day": [0, 5], "stop": [1, 2], "end": 9})
    with pytest.raises(pfx.ColumnExistsError, match="'stop'"):
        ep(df, covariates=["stop"])


def test_empty_frame_gives_no_intervals():
    df = pd.DataFrame({"pid": pd.Series(dtype="int64"), "day": pd.Series(dtype="float64"), "x": pd.Series(dtype=int),
                       "end": pd.Series(dtype="float64")})
    out = ep(df, covariates=["x"], split_at=[1, "events"], gap_time=True)
    assert out.empty and list(out.columns) == ["pid", "start", "stop", "event", "gap_start", "gap_stop", "x",
                                               "episode", "row"]


# ---------------------------------------------------------------------------- loop reference
def reference(frame, id_cols, exit, covs, event=None, events_col=None, lag=0, tie_shift=None, merge=True,
              missing="carry", split_times=(), split_events=False, gap_time=False):
    """Straight from the documented rules, one subject at a time with plain Python."""
    keys = list(frame[id_cols].itertuples(index=False, name=None))
    labels = list(frame.index)
    subjects = list(dict.fromkeys(keys))
    per = {}
    for pos, k in enumerate(keys):
        per.setdefault(k, []).append(pos)
    info = {}
    for k in subjects:
        rs = sorted(per[k], key=lambda p: frame["t"].iloc[p])
        E = float(frame["t"].iloc[rs[0]])
        X = float(frame[exit].iloc[rs[0]])
        evs = set()
        if events_col is not None:
            for p in rs:
                v = frame[events_col].iloc[p]
                if not pd.isna(v) and bool(v) and E < float(frame["t"].iloc[p]) <= X:
                    evs.add(float(frame["t"].iloc[p]))
        if event is not None and bool(frame[event].iloc[rs[0]]):
            evs.add(X)
        info[k] = (rs, E, X, evs)
    all_events = sorted({e for (_, _, _, evs) in info.values() for e in evs})
    out = []
    for k in subjects:
        rs, E, X, evs = info[k]
        eff = {}
        for p in rs:
            e = float(frame["t"].iloc[p]) + (lag if covs else 0)
            if tie_shift is not None and e in evs and E < e <= X:
                e -= tie_shift
            eff[p] = e
        hard = set(evs) | {s for s in list(split_times) + (all_events if split_events else []) if E < s < X}
        cuts = {E, X} | {e for e in eff.values() if E < e < X} | {e for e in evs if e < X} | hard
        if tie_shift is not None:
            for p in rs:
                orig = float(frame["t"].iloc[p]) + (lag if covs else 0)
                if eff[p] != orig:
                    others = [E, *evs, *(float(frame["t"].iloc[q]) + (lag if covs else 0) for q in rs if q != p)]
                    if eff[p] <= max(c for c in others if c < orig):
                        raise pfx.OptionError("tie shift")
        points = sorted(c for c in cuts if E <= c <= X)
        ivs = []
        for a, b in zip(points, points[1:]):
            vals, src = [], []
            for c in covs:
                cands = [p for p in rs if eff[p] <= a and (missing == "keep" or not pd.isna(frame[c].iloc[p]))]
                best = max(cands, key=lambda p: eff[p]) if cands else None
                vals.append(frame[c].iloc[best] if best is not None else NAN)
                src.append(rs.index(best) if best is not None else -1)
            if covs:
                r = max(src)
            else:
                before = [i for i, p in enumerate(rs) if float(frame["t"].iloc[p]) <= a]
                r = max(before) if before else -1
            ivs.append([a, b, int(b in evs), vals, r])
        merged = []
        for iv in ivs:
            if merge and merged and not merged[-1][2] and iv[0] not in hard and all(
                    (pd.isna(u) and pd.isna(v)) or (not pd.isna(u) and not pd.isna(v) and u == v)
                    for u, v in zip(merged[-1][3], iv[3])):
                merged[-1][1], merged[-1][2] = iv[1], iv[2]
            else:
                merged.append(iv)
        for n, (a, b, e, vals, r) in enumerate(merged, start=1):
            row = {"start": a, "stop": b, "event": e}
            if gap_time:
                prior = [v for v in evs if v <= a]
                origin = max(prior) if prior else E
                row["gap_start"], row["gap_stop"] = a - origin, b - origin
            row.update(dict(zip(covs, vals)))
            row["episode"] = n
            row["row"] = labels[rs[r]] if r >= 0 else None
            out.append(row)
    return out


@settings(max_examples=60, deadline=None)
@given(case=panels(time_kinds=("int", "float"), occasions=(1, 5), subjects=(1, 5)), data=st.data())
def test_matches_the_loop_reference(case, data):
    frame = case.frame.copy()
    ids = [case.id] if isinstance(case.id, str) else list(case.id)
    key = frame[ids].astype(str).agg("|".join, axis=1)
    first = frame.groupby(key, sort=False)["t"].transform("min").to_numpy(dtype=float)
    length = np.array(data.draw(st.lists(st.integers(1, 60), min_size=len(frame), max_size=len(frame))), dtype=float)
    frame["end"] = first + pd.Series(length, index=frame.index).groupby(key, sort=False).transform("first")
    died = data.draw(st.lists(st.booleans(), min_size=len(frame), max_size=len(frame)))
    frame["died"] = pd.Series(died, index=frame.index).groupby(key, sort=False).transform("first")
    opts = dict(
        lag=data.draw(st.sampled_from([0, 0, 1, 3, 2.5])),
        tie_shift=data.draw(st.sampled_from([None, None, 0.5])),
        merge=data.draw(st.booleans()),
        missing=data.draw(st.sampled_from(["carry", "keep"])),
        split_times=data.draw(st.lists(st.sampled_from([-5.0, 3.0, 7.5, 20.0]), unique=True, max_size=2)),
        split_events=data.draw(st.booleans()),
        gap_time=data.draw(st.booleans()),
    )
    covs = data.draw(st.sampled_from([["x"], ["y"], ["x", "y", "flag"], []]))
    event = data.draw(st.sampled_from([None, "died"]))
    events_col = data.draw(st.sampled_from([None, "flag"]))
    try:
        want = reference(frame, ids, "end", covs, event=event, events_col=events_col, **opts)
    except pfx.OptionError:
        with pytest.raises(pfx.OptionError, match="tie_shift"):
            pfx.episodes(frame, id=case.id, time="t", exit="end", event=event, events=events_col, covariates=covs,
                         lag=opts["lag"] or None, tie_shift=opts["tie_shift"], merge=opts["merge"],
                         missing=opts["missing"], gap_time=opts["gap_time"],
                         split_at=[*opts["split_times"], *(["events"] if opts["split_events"] else [])])
        return
    got = pfx.episodes(frame, id=case.id, time="t", exit="end", event=event, events=events_col, covariates=covs,
                       lag=opts["lag"] or None, tie_shift=opts["tie_shift"], merge=opts["merge"],
                       missing=opts["missing"], gap_time=opts["gap_time"],
                       split_at=[*opts["split_times"], *(["events"] if opts["split_events"] else [])])
    assert len(got) == len(want)
    assert (got["start"] < got["stop"]).all()
    for g, w in zip(got.to_dict("records"), want):
        for col, v in w.items():
            u = g[col]
            if pd.isna(v):
                assert pd.isna(u), (col, g, w)
            elif isinstance(v, float):
                assert u == pytest.approx(v, rel=1e-12, abs=1e-12), (col, g, w)
            else:
                assert u == v, (col, g, w)


@settings(max_examples=30, deadline=None)
@given(case=panels(time_kinds=("int",), occasions=(1, 5), subjects=(1, 4), missing=False), data=st.data())
def test_datetimes_give_the_same_intervals_as_day_numbers(case, data):
    frame = case.frame.copy()
    ids = [case.id] if isinstance(case.id, str) else list(case.id)
    key = frame[ids].astype(str).agg("|".join, axis=1)
    frame["end"] = frame.groupby(key, sort=False)["t"].transform("max") + data.draw(st.integers(1, 9))
    lag = data.draw(st.sampled_from([None, 2]))
    kw = dict(id=case.id, exit="end", covariates=["x", "y"], events="flag", gap_time=True, split_at=[3, "events"])
    days = pfx.episodes(frame, time="t", lag=lag, **kw)
    origin = pd.Timestamp("2020-02-29")
    dated = frame.assign(t=origin + pd.to_timedelta(frame["t"], unit="D"),
                         end=origin + pd.to_timedelta(frame["end"], unit="D"))
    when = pfx.episodes(dated, time="t", lag=None if lag is None else f"{lag}D",
                        **{**kw, "split_at": [origin + pd.Timedelta("3D"), "events"]})
    pd.testing.assert_series_equal(when["start"], origin + pd.to_timedelta(days["start"], unit="D"),
                                   check_dtype=False, check_names=False)
    pd.testing.assert_frame_equal(when.drop(columns=["start", "stop"]), days.drop(columns=["start", "stop"]))


# ---------------------------------------------------------------------------- the as-of search
@pytest.mark.parametrize("kind", ["small integers", "huge integers", "floats"])
def test_last_at_or_before_on_every_search_path(kind):
    """Offsets for integer ticks, dense ranks when they do not fit or for binary floats: both against a loop."""
    from panelfx._clock import last_at_or_before

    rng = np.random.default_rng(5)
    n, q = 300, 200
    grp = np.sort(rng.integers(0, 20, n))
    if kind == "small integers":
        t = rng.integers(-50, 50, n)
    elif kind == "huge integers":
        t = rng.choice(np.array([-(2**62), -5, 0, 7, 2**62], dtype=np.int64), n)
    else:
        t = rng.choice(np.array([-1 / 3, 0.1, 0.2, 0.30000000000000004, 2.5]), n)
    order = np.lexsort((t, grp))
    grp, t = grp[order], t[order]
    qg = rng.integers(0, 21, q)
    qt = t[rng.integers(0, n, q)] if kind != "small integers" else rng.integers(-60, 60, q)
    for strict in (False, True):
        got = last_at_or_before(grp, t, qg, qt, strict=strict)
        want = [max([j for j in range(n) if grp[j] == g and (t[j] < v if strict else t[j] <= v)], default=-1)
                for g, v in zip(qg, qt)]
        assert got.tolist() == want


def test_binary_float_times_fall_back_to_float_comparisons():
    """Times that are not short decimals (thirds) are compared as floats; ties are still exact ties."""
    df = pd.DataFrame({"pid": 1, "day": [0.0, 1 / 3, 2 / 3], "x": [0, 1, 2], "end": 1.0})
    events = pd.DataFrame({"pid": [1], "day": [2 / 3]})
    out = ep(df, covariates=["x"], events=events)
    same(rows(out, "start", "stop", "event", "x"), [(0.0, 1 / 3, 0, 0), (1 / 3, 2 / 3, 1, 1), (2 / 3, 1.0, 0, 2)])
