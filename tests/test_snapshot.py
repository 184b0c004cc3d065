"""panelfx.snapshot: equal to the loop "cut at the landmark -> derive -> last row", without the loop."""

from __future__ import annotations

import importlib

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import panelfx as pfx
from panelfx.testing import assert_past_only
from panelfx.testing.strategies import panels

snapshot_module = importlib.import_module("panelfx.snapshot")  # the package attribute is the function

PAST = [pfx.lag("y"), pfx.change_from_previous("y"), pfx.carry_forward("y"), pfx.cumulative("dose", "step"),
        pfx.events_so_far("flag"), pfx.time_since("flag"), pfx.occasion(), pfx.gap(), pfx.rolling("y", occasions=2)]
FUTURE = [pfx.baseline("y"), pfx.change_from_baseline("y"), pfx.within_between("y"), pfx.lag("y", -1)]


def loop(frame, transforms, landmarks, id_, time, label="landmark", tables=None, table_time="day", order=None):
    """The definition, one subject and landmark at a time (slow): side-table records after the
    landmark are removed too."""
    ids = [id_] if isinstance(id_, str) else list(id_)
    keys = list(frame[ids].itertuples(index=False, name=None))
    out = []
    for k in dict.fromkeys(keys):
        mine = frame.loc[[kk == k for kk in keys]]
        for lm in landmarks:
            cut = mine.loc[mine[time] <= lm]
            row = dict(zip(ids, k))
            row[label] = lm
            if len(cut):
                cut_tables = None if tables is None else {
                    nm: tab.loc[~(tab[table_time] > lm).fillna(False).to_numpy(dtype=bool)]
                    for nm, tab in tables.items()}
                got = pfx.derive(cut, *transforms, id=id_, time=time, tables=cut_tables, order=order)
                last = got.sort_values([time] if order is None else [time, order]).iloc[-1]
                row.update({c: last[c] for c in last.index if c not in ids})
            out.append(row)
    return out


def equal(got: pd.DataFrame, want: list[dict]) -> None:
    assert len(got) == len(want)
    records = got.to_dict("records")
    for g, w in zip(records, want):
        for col in got.columns:
            a, b = g[col], w.get(col, np.nan)
            if pd.isna(b):
                assert pd.isna(a), (col, g, w)
            elif isinstance(b, (float, np.floating)):
                assert float(a) == pytest.approx(float(b), rel=1e-9, abs=1e-12), (col, g, w)
            else:
                assert a == b, (col, g, w)


def landmarks_for(frame, time, draws, data):
    """Landmarks from the draws, and one at an occasion's own time (the tie that matters)."""
    t = frame[time]
    if pd.api.types.is_numeric_dtype(t.dtype):
        out = [float(v) if pd.api.types.is_float_dtype(t.dtype) else int(v) for v in draws]
    else:
        origin = pd.Timestamp("2024-01-01", tz=t.dt.tz)
        out = [origin + pd.Timedelta(days=int(v)) for v in draws]
    if len(frame):
        tied = t.iloc[data.draw(st.integers(0, len(frame) - 1))]
        tied = tied.item() if isinstance(tied, np.generic) else tied
        if tied not in out:
            out.append(tied)
    return out


@settings(max_examples=40, deadline=None)
@given(case=panels(subjects=(1, 4), occasions=(1, 5)),
       draws=st.lists(st.integers(-25, 120), min_size=1, max_size=3, unique=True), data=st.data())
def test_past_only_snapshot_equals_the_loop(case, draws, data):
    steps = data.draw(st.lists(st.sampled_from(PAST), min_size=1, max_size=3, unique_by=lambda t: t.type_name))
    lms = landmarks_for(case.frame, case.time, draws, data)
    got = pfx.snapshot(case.frame, steps, at=lms, id=case.id, time=case.time)
    equal(got, loop(case.frame, steps, lms, case.id, case.time))


@settings(max_examples=25, deadline=None)
@given(case=panels(subjects=(1, 4), occasions=(1, 5)),
       draws=st.lists(st.integers(-25, 120), min_size=1, max_size=3, unique=True), data=st.data())
def test_snapshot_with_future_transforms_equals_the_loop(case, draws, data):
    steps = data.draw(st.lists(st.sampled_from(FUTURE + PAST), min_size=1, max_size=3,
                               unique_by=lambda t: t.type_name))
    lms = landmarks_for(case.frame, case.time, draws, data)
    got = pfx.snapshot(case.frame, steps, at=lms, id=case.id, time=case.time, allow_future=True)
    equal(got, loop(case.frame, steps, lms, case.id, case.time))


@settings(max_examples=25, deadline=None)
@given(case=panels(subjects=(1, 4), occasions=(1, 6), time_kinds=("int",)), data=st.data())
def test_snapshot_uses_nothing_after_the_landmark(case, data):
    """The transforms are past-only (assert_past_only), and the snapshot does not move when every
    row after each subject's landmark is changed or removed."""
    steps = [pfx.lag("y"), pfx.cumulative("dose", "step"), pfx.rolling("y", occasions=3)]
    assert_past_only(case.frame, *steps, id=case.id, time=case.time)
    ids = [case.id] if isinstance(case.id, str) else list(case.id)
    key = case.frame[ids].astype(str).agg("|".join, axis=1)
    first = case.frame.groupby(key, sort=False)[case.time].transform("min")
    frame = case.frame.assign(lm=first + data.draw(st.integers(0, 60)))
    got = pfx.snapshot(frame, steps, at="lm", id=case.id, time=case.time)
    after = frame[case.time] > frame["lm"]
    changed = frame.assign(y=frame["y"].where(~after, 1e6), dose=frame["dose"].where(~after, 99.0))
    pd.testing.assert_frame_equal(pfx.snapshot(changed, steps, at="lm", id=case.id, time=case.time), got)
    cut = pfx.snapshot(frame.loc[~after], steps, at="lm", id=case.id, time=case.time)
    by_id = [*ids, "lm"]  # removing rows may change which subject appears first
    pd.testing.assert_frame_equal(cut.sort_values(by_id).reset_index(drop=True),
                                  got.sort_values(by_id).reset_index(drop=True))


def test_by_hand_with_a_landmark_column_and_a_derivation():
    df = pd.DataFrame({"pid": [1, 1, 1, 2, 2, 3], "day": [0, 30, 60, 0, 45, 10],
                       "sbp": [150.0, 140.0, 135.0, 128.0, 131.0, 120.0], "lm": [45, 45, 45, None, None, 5]})
    d = pfx.Derivation(pfx.change_from_previous("sbp"), pfx.cumulative("sbp", "step"), id="pid", time="day")
    out = pfx.snapshot(df, d, at="lm")
    assert list(out.columns) == ["pid", "lm", "day", "sbp", "sbp_diff", "sbp_cum_step"]
    assert out["pid"].tolist() == [1, 3]  # subject 2 has no landmark; subject 3 none of its rows by day 5
    assert out.iloc[0].tolist() == [1, 45.0, 30, 140.0, -10.0, 150.0 * 30]
    assert out.iloc[1, 2:].isna().all()


def test_derive_runs_once_whatever_the_number_of_subjects(monkeypatch):
    calls = []
    real = snapshot_module.derive

    def counting(*args, **kwargs):
        calls.append(len(args[0]))
        return real(*args, **kwargs)

    monkeypatch.setattr(snapshot_module, "derive", counting)
    df = pd.DataFrame({"pid": np.repeat(np.arange(50), 4), "day": np.tile([0, 10, 20, 30], 50),
                       "y": np.arange(200.0)})
    pfx.snapshot(df, [pfx.lag("y")], at=[5, 15, 25], id="pid", time="day")
    pfx.snapshot(df, [pfx.baseline("y")], at=[5, 15, 25], id="pid", time="day", allow_future=True)
    assert calls == [200, 50 * (1 + 2 + 3)]


def test_future_transforms_are_refused_unless_allowed():
    df = pd.DataFrame({"pid": [1, 1], "day": [0, 5], "y": [1.0, 2.0]})
    with pytest.raises(pfx.OptionError, match=r"#2 \(baseline\) use later occasions"):
        pfx.snapshot(df, [pfx.lag("y"), pfx.baseline("y")], at=[3], id="pid", time="day")
    out = pfx.snapshot(df, [pfx.lag("y"), pfx.baseline("y")], at=[3], id="pid", time="day", allow_future=True)
    assert out["y_baseline"].tolist() == [1.0]


def test_datetime_landmarks_and_their_kind():
    day = pd.Timestamp("2024-05-01")
    df = pd.DataFrame({"pid": ["a", "a", "b"], "when": [day, day + pd.Timedelta("7D"), day], "y": [1.0, 3.0, 5.0]})
    out = pfx.snapshot(df, pfx.lag("y"), at=[day + pd.Timedelta("7D")], id="pid", time="when")
    assert out["landmark"].tolist() == [day + pd.Timedelta("7D")] * 2 and out["y_lag1"].tolist()[0] == 1.0
    with pytest.raises(pfx.OptionError, match="holds naive datetime"):
        pfx.snapshot(df, pfx.lag("y"), at=[5], id="pid", time="when")


@pytest.mark.parametrize("kw, error, match", [
    ({"at": [3, 3]}, pfx.OptionError, "twice"),
    ({"at": []}, pfx.OptionError, "at least one"),
    ({"at": {"a": 1}}, pfx.OptionError, "column name or a list"),
    ({"at": "nope"}, pfx.MissingColumnError, "nope"),
    ({"at": "day"}, pfx.OptionError, "the id or time column"),
    ({"at": "lm"}, pfx.NotConstantError, "constant within subject"),
    ({"at": [3], "name": "y"}, pfx.ColumnExistsError, "already in the frame"),
    ({"at": [3], "id": None}, pfx.OptionError, "give id= and time="),
    ({"at": [3], "allow_future": 1}, pfx.OptionError, "allow_future"),
])
def test_bad_options(kw, error, match):
    df = pd.DataFrame({"pid": [1, 1], "day": [0, 5], "y": [1.0, 2.0], "lm": [1, 2]})
    kw = {"id": "pid", "time": "day", **kw}
    with pytest.raises(error, match=match):
        pfx.snapshot(df, [pfx.lag("y")], **kw)


def test_derivation_declaration_must_agree():
    d = pfx.Derivation(pfx.lag("y"), id="pid", time="day")
    df = pd.DataFrame({"pid": [1], "day": [0], "y": [1.0]})
    with pytest.raises(pfx.OptionError, match="differs from the derivation"):
        pfx.snapshot(df, d, at=[1], time="other")


def test_side_tables_are_cut_at_the_landmark_too():
    """as_of reads a laboratory table: backward (past-only) and nearest (uses later records), against the loop."""
    rng = np.random.default_rng(3)
    visits = pd.DataFrame({"pid": np.repeat([1, 2, 3], 4), "day": np.tile([0, 30, 60, 90], 3),
                           "y": rng.normal(size=12).round(2)})
    labs = pd.DataFrame({"pid": [1, 1, 1, 2, 2, 3, 9], "day": [5, 29, 61, 40, 100, 0, 3],
                         "alt": [30.0, 41.0, 55.0, 20.0, 25.0, None, 99.0]})
    tables = {"labs": labs}
    lms = [0, 30, 45, 90]
    past = [pfx.as_of("labs", "alt", time="day"), pfx.lag("y")]
    got = pfx.snapshot(visits, past, at=lms, id="pid", time="day", tables=tables)
    equal(got, loop(visits, past, lms, "pid", "day", tables=tables))
    np.testing.assert_array_equal(got["alt_asof"].to_numpy(dtype=float)[:4], [np.nan, 41.0, 41.0, 55.0])
    nearest = [pfx.as_of("labs", "alt", time="day", direction="nearest", name="alt_near"), pfx.baseline("y")]
    with pytest.raises(pfx.OptionError, match="use later occasions"):
        pfx.snapshot(visits, nearest, at=lms, id="pid", time="day", tables=tables)
    got = pfx.snapshot(visits, nearest, at=lms, id="pid", time="day", tables=tables, allow_future=True)
    want = loop(visits, nearest, lms, "pid", "day", tables=tables)
    equal(got, want)
    # the nearest record as of day 45 for subject 1 is the one at 29, not the later one at 61
    assert got.loc[(got["pid"] == 1) & (got["landmark"] == 45), "alt_near"].item() == 41.0


def test_tied_occasions_with_an_order_column():
    df = pd.DataFrame({"pid": [1, 1, 1, 1], "day": [0, 10, 10, 20], "seq": [1, 2, 1, 1], "y": [1.0, 3.0, 2.0, 4.0]})
    steps = [pfx.lag("y"), pfx.cumulative("y")]
    got = pfx.snapshot(df, steps, at=[10, 15], id="pid", time="day", order="seq")
    equal(got, loop(df, steps, [10, 15], "pid", "day", order="seq"))
    assert got["y"].tolist() == [3.0, 3.0]  # the last of the tied rows in (day, seq)
    d = pfx.Derivation(*steps, id="pid", time="day", order="seq")
    pd.testing.assert_frame_equal(pfx.snapshot(df, d, at=[10, 15]), got)
