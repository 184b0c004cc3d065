"""Derive on the whole panel, then split by subject: deriving on a frame with rows removed inside
subjects changes the values, and derive warns (SubsetWarning) when it can see that it happened."""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest

import panelfx as pfx
from panelfx.demo import cohort

ID = ["site", "subject"]


def _lag(frame: pd.DataFrame) -> pd.Series:
    return pfx.derive(frame, pfx.lag("sbp"), id=ID, time="day", keep="new")["sbp_lag1"]


def _quiet_lag(frame: pd.DataFrame) -> pd.Series:
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", pfx.SubsetWarning)  # the documented way to silence it
        return _lag(frame)


def test_filter_then_derive_changes_lags_and_warns():
    """On the invented demo (a file grouped by subject, default index), keeping the rows with a
    blood pressure and then deriving changes 79 of the 2,164 lags (the previous *measured* value
    instead of missing); derive warns, naming the subjects.  The reference values come from pandas:
    groupby().shift() on the whole panel."""
    df = cohort(shuffle=False)
    kept = df[df["sbp"].notna()]
    assert len(kept) == 2164
    whole = df.sort_values([*ID, "day"]).groupby(ID)["sbp"].shift().loc[kept.index]  # reference: pandas
    pd.testing.assert_series_equal(_lag(df).loc[kept.index], whole, check_names=False)
    with pytest.warns(pfx.SubsetWarning, match=r"rows removed inside subjects: 67 subject\(s\)") as record:
        after = _lag(kept)
    differ = ~((after == whole) | (after.isna() & whole.isna()))
    assert int(differ.sum()) == 79
    w = record[0]
    assert w.filename == __file__  # points at the caller's line, not panelfx's
    assert w.message.ids[0] == ("Alder Row", 2) and w.message.count == 85
    assert isinstance(w.message, pfx.PanelWarning) and isinstance(w.message, UserWarning)


def test_no_warning_on_the_whole_panel_or_whole_subjects():
    """Unfiltered, shuffled or sorted; whole subjects taken out (a site, a GroupKFold fold); a data
    cut (rows removed at the end of follow-up): no warning (pytest turns warnings into errors)."""
    from sklearn.model_selection import GroupKFold

    for df in (cohort(shuffle=False), cohort()):
        _lag(df)
        _lag(df[df["site"] != "Brookfield"])
        _lag(df[df["day"] <= 180])
        key = pfx.subject_key(df, id=ID)
        for train, test in GroupKFold(n_splits=4).split(df, groups=key):
            _lag(df.iloc[train])
            _lag(df.iloc[test])


def test_shuffled_panel_filtered_is_not_seen_by_the_index_rule():
    """Cut from a shuffled panel, a row filter cannot be told from a subject filter: no warning
    (documented), though the lags differ all the same."""
    df = cohort()
    kept = df[df["sbp"].notna()]
    assert not _lag(kept).equals(_lag(df).loc[kept.index])


def test_provenance_rule_sees_a_filtered_result_of_apply():
    """Derivation.apply records the rows and subjects it saw; pandas carries attrs through a filter,
    so deriving again on the filtered result warns, even from a shuffled panel."""
    df = cohort()
    first = pfx.Derivation(pfx.baseline("dose_mg"), id=ID, time="day").apply(df)
    assert first.attrs["panelfx"]["rows"] == 2278 and first.attrs["panelfx"]["subjects"] == 200
    kept = first[first["sbp"].notna()]
    with pytest.warns(pfx.SubsetWarning, match="came from 2278 rows of the same 200 subjects: 114 rows") as rec:
        _lag(kept)
    assert rec[0].message.count == 114
    _lag(first[first["site"] != "Dunmere"])  # whole subjects gone: silent


def test_index_rule_details():
    """Holes between subjects are fine, a hole inside a subject's run is not; labels out of order,
    a string index, a common step other than 1, or fewer than three subjects with several rows
    (which may look grouped by chance): no judgement."""
    frame = pd.DataFrame({"pid": np.repeat([1, 2, 3], 3), "t": np.tile([0, 1, 2], 3), "x": np.arange(9.0)})
    run = lambda f: pfx.derive(f, pfx.lag("x"), id="pid", time="t")  # noqa: E731
    run(frame.set_axis(pd.Index([0, 1, 2, 5, 6, 7, 9, 10, 11])))  # whole runs, holes between subjects
    with pytest.warns(pfx.SubsetWarning, match=r"1 subject\(s\).*\(1 labels missing.*first ids: \[2\]"):
        run(frame.set_axis(pd.Index([0, 1, 2, 4, 6, 7, 8, 9, 10])))
    with pytest.warns(pfx.SubsetWarning, match=r"2 subject\(s\).*\(2 labels missing.*first ids: \[2, 3\]"):
        run(frame.set_axis(pd.Index(np.array([0, 1, 2, 3, 4, 6, 7, 9, 10], dtype=np.uint32))))
    run(frame.set_axis(pd.Index([10, 9, 8, 6, 4, 3, 2, 1, 0])))  # decreasing: not a filtered default index
    run(frame.set_axis(pd.Index(list("abcdefghk"))))
    run(frame.set_axis(pd.Index([100, 103, 106, 109, 112, 115, 118, 121, 124])))  # a step of 3: no hole
    with pytest.warns(pfx.SubsetWarning, match=r"\(1 labels missing"):
        run(frame.set_axis(pd.Index([100, 103, 106, 109, 115, 118, 121, 124, 127])))
    run(frame.set_axis(pd.Index([0, 3, 6, 1, 4, 7, 2, 5, 9])).sort_index())  # interleaved runs: silent
    run(frame.iloc[:6].set_axis(pd.Index([0, 2, 3, 5, 6, 7])))  # two subjects with several rows: silent
    run(pd.concat([frame.iloc[:6], frame.iloc[6:].assign(pid=[3, 4, 5])]).set_axis(
        pd.Index([0, 2, 3, 5, 6, 7, 8, 9, 10])))  # the third has one row each: silent


def test_panelfx_own_cuts_do_not_warn():
    """assert_past_only cuts later occasions on purpose: no warning from inside it, even on a frame
    whose provenance would show the cut."""
    from panelfx.testing import assert_past_only

    df = pfx.Derivation(pfx.baseline("dose_mg"), id=ID, time="day").apply(cohort(20, seed=2))
    assert_past_only(df, pfx.lag("sbp"), id=ID, time="day")
