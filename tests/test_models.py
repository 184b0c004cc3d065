"""Frames for models: derive(keep="new"), derive(rows="by_subject") and subject_key, checked against
pandas, DuckDB and statsmodels (GEE, MixedLM) on the invented demo cohort."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import panelfx as pfx
from panelfx.demo import cohort

ID = ["site", "subject"]


def _small() -> pd.DataFrame:
    # invented: four visits of two people, unsorted, string index
    return pd.DataFrame({"pid": [2, 1, 1, 2], "day": [7, 7, 0, 0], "hb": [13.0, 12.0, 12.5, 13.4]},
                        index=["a", "b", "c", "d"])


# ------------------------------------------------------------------------------ keep=


def test_keep_new_is_the_derived_columns_of_the_full_result():
    """keep="new" equals pandas' column selection of the keep="all" result: derived columns only,
    same index, rows and dtypes (pandas is the reference)."""
    df = cohort(40, seed=3)
    transforms = (pfx.lag("sbp"), pfx.ever("dizzy"), pfx.within_between("dose_mg"))
    full = pfx.derive(df, *transforms, id=ID, time="visit_date")
    new = pfx.derive(df, *transforms, id=ID, time="visit_date", keep="new")
    names = ["sbp_lag1", "dizzy_ever", "dose_mg_between", "dose_mg_within"]
    pd.testing.assert_frame_equal(new, full[names])
    assert new.index.equals(df.index)


def test_keep_new_on_derivation_apply_records_provenance():
    """Derivation.apply(keep="new") gives derive's keep="new" result, with the dictionary's dtypes
    and time units read as with keep="all" (the time column is not in the result)."""
    df = cohort(30, seed=4)
    d = pfx.Derivation(pfx.lag("sbp"), pfx.time_since_baseline(), id=ID, time="visit_date")
    new = d.apply(df, keep="new")
    pd.testing.assert_frame_equal(new, pfx.derive(df, *d.transforms, id=ID, time="visit_date", keep="new"))
    assert list(new.columns) == ["sbp_lag1", "time_since_baseline"]
    rec = new.attrs["panelfx"]
    assert rec["dictionary"] == d.apply(df).attrs["panelfx"]["dictionary"]
    assert rec["rows"] == len(df) and rec["subjects"] == 30


def test_keep_new_without_transforms_is_an_empty_frame_with_the_index():
    df = _small()
    out = pfx.derive(df, id="pid", time="day", keep="new")
    assert out.shape == (4, 0) and out.index.equals(df.index)


@pytest.mark.parametrize("option, value", [("keep", "derived"), ("keep", None), ("keep", ["new"]),
                                           ("rows", "sorted"), ("rows", True)])
def test_bad_keep_or_rows_is_a_typed_error(option, value):
    with pytest.raises(pfx.OptionError, match=rf"^{option} must be one of") as ei:
        pfx.derive(_small(), pfx.lag("hb"), id="pid", time="day", **{option: value})
    assert isinstance(ei.value, ValueError)
    d = pfx.Derivation(pfx.lag("hb"), id="pid", time="day")
    with pytest.raises(pfx.OptionError, match=rf"^{option} must be one of"):
        d.apply(_small(), **{option: value})


# ------------------------------------------------------------------------------ rows=


def _pandas_by_subject(frame: pd.DataFrame, ids: list[str], time: str) -> pd.DataFrame:
    # reference (pandas): subjects numbered in order of first appearance, then a stable sort by time
    first = frame.groupby(ids, sort=False).ngroup().rename("_first")
    return frame.loc[pd.concat([first, frame[time]], axis=1).sort_values(["_first", time], kind="stable").index]


def test_rows_by_subject_matches_a_pandas_sort():
    """rows="by_subject": each subject's rows together in time order, subjects in order of first
    appearance, index labels kept (reference: pandas groupby(sort=False).ngroup + a stable sort)."""
    df = cohort(50, seed=5)  # shuffled rows
    out = pfx.derive(df, pfx.lag("sbp"), id=ID, time="visit_date", rows="by_subject")
    full = pfx.derive(df, pfx.lag("sbp"), id=ID, time="visit_date")
    pd.testing.assert_frame_equal(out, _pandas_by_subject(full, ID, "visit_date"))
    assert not out.index.equals(df.index)  # the input was shuffled: the rows did move


def test_rows_by_subject_on_sorted_input_and_with_keep_new():
    """Already grouped input comes back as it is; keep="new" with rows="by_subject" reorders the
    derived columns the same way."""
    df = cohort(20, seed=6, shuffle=False)
    out = pfx.derive(df, pfx.lag("sbp"), id=ID, time="day", rows="by_subject")
    pd.testing.assert_frame_equal(out, pfx.derive(df, pfx.lag("sbp"), id=ID, time="day"))
    small = _small()
    new = pfx.derive(small, pfx.lag("hb"), id="pid", time="day", keep="new", rows="by_subject")
    assert new.index.tolist() == ["d", "a", "c", "b"]
    assert new["hb_lag1"].tolist()[1] == 13.4


def test_rows_by_subject_breaks_ties_by_order():
    df = pd.DataFrame({"pid": [1, 1, 1], "t": [0, 0, 1], "seq": [2, 1, 1], "x": [1.0, 2.0, 3.0]})
    out = pfx.derive(df, pfx.lag("x"), id="pid", time="t", order="seq", rows="by_subject")
    assert out.index.tolist() == [1, 0, 2]


def test_dask_frames_refuse_keep_and_rows():
    dd = pytest.importorskip("dask.dataframe")
    d = pfx.Derivation(pfx.lag("hb"), id="pid", time="day")
    with pytest.raises(pfx.OptionError, match="keep= and rows= apply to pandas frames"):
        d.apply(dd.from_pandas(_small().reset_index(drop=True), npartitions=1), keep="new")


# ------------------------------------------------------------------------------ subject_key


def test_subject_key_matches_pandas_ngroup_and_duckdb_dense_rank():
    """Codes in sorted order of (site, subject): pandas groupby(sort=True).ngroup() and DuckDB's
    dense_rank() over (order by site, subject) - 1 give the same numbers."""
    duckdb = pytest.importorskip("duckdb")
    df = cohort(80, seed=7)
    key = pfx.subject_key(df, id=ID)
    assert key.name == "subject_key" and key.dtype == np.int64 and key.index.equals(df.index)
    pd.testing.assert_series_equal(key, df.groupby(ID, sort=True).ngroup().astype(np.int64),
                                   check_names=False)
    con = duckdb.connect()
    con.register("v", df[ID].reset_index(drop=True).assign(row=np.arange(len(df))))
    ranks = con.execute("select dense_rank() over (order by site, subject) - 1 as k from v order by row").fetchnumpy()
    np.testing.assert_array_equal(key.to_numpy(), ranks["k"])
    assert key.nunique() == 80


def test_subject_key_is_the_same_whatever_the_row_order():
    df = cohort(30, seed=8, shuffle=False)
    shuffled = df.sample(frac=1.0, random_state=1)
    pd.testing.assert_series_equal(pfx.subject_key(shuffled, id=ID), pfx.subject_key(df, id=ID).loc[shuffled.index])


def test_subject_key_never_merges_composite_ids_and_reads_index_levels():
    """(1, 23) and (12, 3) stay two subjects; three parts work; id may be an index level."""
    df = pd.DataFrame({"a": [1, 12, 1, 1], "b": [23, 3, 23, 2], "c": ["x", "x", "x", "y"]})
    key = pfx.subject_key(df, id=["a", "b"], name="k")
    assert key.tolist() == [1, 2, 1, 0] and key.name == "k"
    assert pfx.subject_key(df, id=["a", "b", "c"]).tolist() == [1, 2, 1, 0]
    assert pfx.subject_key(df.set_index("a"), id=["a", "b"]).tolist() == [1, 2, 1, 0]
    assert pfx.subject_key(df, id="c").tolist() == [0, 0, 0, 1]


def test_subject_key_bad_input():
    df = pd.DataFrame({"site": ["A", None, "B"], "subject": [1, 2, 3]}, index=[10, 11, 12])
    with pytest.raises(pfx.NullKeyError, match=r"missing subject id in column 'site': 1 row; first row labels: \[11\]"):
        pfx.subject_key(df, id=ID)
    with pytest.raises(pfx.MissingColumnError, match="'visit'"):
        pfx.subject_key(df, id=["site", "visit"])
    with pytest.raises(pfx.OptionError, match="name must be"):
        pfx.subject_key(df.fillna("C"), id=ID, name="")


# ------------------------------------------------------------------------------ statsmodels


def _model_frame(shuffle: bool = True) -> pd.DataFrame:
    df = cohort(seed=2026, shuffle=shuffle)
    out = pfx.derive(df, pfx.within_between("dose_mg"), pfx.lag("sbp"), id=ID, time="day", rows="by_subject")
    return out.assign(subject_key=pfx.subject_key(out, id=ID)).dropna(subset=["sbp"])


def test_mixedlm_with_subject_key_and_default_names():
    """statsmodels MixedLM, formula on default derived names (formula-safe), groups="subject_key":
    the same fit as with a text key built by pandas from both id columns, and the within effect of
    the invented cohort (-0.3 mmHg per mg) recovered."""
    smf = pytest.importorskip("statsmodels.formula.api")
    a = _model_frame()
    fit = smf.mixedlm("sbp ~ dose_mg_between + dose_mg_within", a, groups="subject_key").fit()
    text = a.assign(pid=a["site"] + "/" + a["subject"].astype(str))
    ref = smf.mixedlm("sbp ~ dose_mg_between + dose_mg_within", text, groups="pid").fit()
    np.testing.assert_allclose(fit.params.to_numpy(), ref.params.to_numpy(), rtol=1e-6)
    assert len(fit.model.group_labels) == 200
    assert abs(fit.params["dose_mg_within"] - (-0.3)) < 0.05


def test_gee_autoregressive_needs_rows_by_subject_in_time_order():
    """statsmodels GEE reads each cluster's rows in the order they come (its autoregressive working
    correlation uses that order when no time is given): rows="by_subject" gives the fit of a frame
    sorted by pandas, where the shuffled input gives another."""
    sm = pytest.importorskip("statsmodels.api")
    smf = pytest.importorskip("statsmodels.formula.api")
    formula = "sbp ~ dose_mg_between + dose_mg_within + sbp_lag1"

    def fit(frame: pd.DataFrame) -> pd.Series:
        frame = frame.dropna(subset=["sbp_lag1"])
        return smf.gee(formula, "subject_key", frame, cov_struct=sm.cov_struct.Autoregressive(grid=True)).fit().params

    a = _model_frame()
    by_pandas = a.sort_values(["subject_key", "day"])
    np.testing.assert_allclose(fit(a).to_numpy(), fit(by_pandas).to_numpy(), rtol=1e-9)
    shuffled = a.sample(frac=1.0, random_state=3)
    assert not np.allclose(fit(shuffled).to_numpy(), fit(a).to_numpy(), rtol=1e-6)


def test_subject_key_takes_other_frames_and_checks_its_options():
    """subject_key reads polars and pyarrow frames as every other function does (the key is a pandas
    Series over row numbers), refuses what is not a frame with FrameTypeError, and an unknown option
    with the typed hint."""
    import pyarrow as pa

    df = pd.DataFrame({"site": ["B", "A", "B", "A"], "subject": [1, 1, 1, 2], "day": [0, 0, 30, 0]})
    want = pfx.subject_key(df, id=["site", "subject"]).to_numpy()
    assert (pfx.subject_key(pa.Table.from_pandas(df), id=["site", "subject"]).to_numpy() == want).all()
    pl = pytest.importorskip("polars")
    assert (pfx.subject_key(pl.from_pandas(df), id=["site", "subject"]).to_numpy() == want).all()
    with pytest.raises(pfx.FrameTypeError):
        pfx.subject_key({"site": ["A"]}, id="site")
    with pytest.raises(pfx.UnknownOptionError, match="subject_key\\(\\) has no option groupby="):
        pfx.subject_key(df, id="site", groupby="site")
