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


def loop(frame, transforms, landmarks, id_, time, label="landmark"):
    """The definition, one subject and landmark at a time (slow)."""
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
                last = pfx.derive(cut, *transforms, id=id_, time=time).sort_values(time).iloc[-1]
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
