"""Nested centring: within_between(col, levels=[...], fit=...).

Outside checks: pandas groupby means as the reference for every level mean; Grunfeld's
investment panel (statsmodels.datasets.grunfeld, the textbook's 10 firms) with an invented
grouping of firms above them: least squares on the innermost deviations gives the
published fixed-effects slopes (Baltagi, Econometric Analysis of Panel Data, Table 2.1,
from memory: value 0.110124, capital 0.310065; CHECK-SOURCES.md), whatever levels sit
above the firm.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import panelfx as pfx
from panelfx.errors import NestingError, OptionError


def nested(seed: int = 0) -> pd.DataFrame:
    """region > clinic > pid > visit, clinic and pid numbers restarting within their parent;
    unbalanced, a few missing values, rows shuffled."""
    rng = np.random.default_rng(seed)
    rows = []
    for r in ("North", "South", "East"):
        for c in range(1, rng.integers(2, 4) + 1):
            for p in range(1, rng.integers(1, 4) + 1):
                for v in range(rng.integers(1, 5)):
                    rows.append((r, c, p, v, rng.normal(10, 3)))
    df = pd.DataFrame(rows, columns=["region", "clinic", "pid", "visit", "y"])
    df.loc[rng.choice(len(df), 4, replace=False), "y"] = np.nan
    return df.sample(frac=1, random_state=seed).reset_index(drop=True)


ID = ["region", "clinic", "pid"]


def pandas_parts(df: pd.DataFrame, use: pd.Series | None = None) -> pd.DataFrame:
    """The parts from pandas groupby means over the rows used (no panelfx code)."""
    used = df["y"].where(use) if use is not None else df["y"]
    m_r = used.groupby(df["region"]).transform("mean")
    m_c = used.groupby([df["region"], df["clinic"]]).transform("mean")
    m_p = used.groupby([df["region"], df["clinic"], df["pid"]]).transform("mean")
    return pd.DataFrame({"y_region": m_r, "y_clinic": m_c - m_r, "y_between": m_p - m_c, "y_within": df["y"] - m_p})


def test_parts_are_the_level_means_and_add_up_to_the_value():
    df = nested()
    out = pfx.derive(df, pfx.within_between("y", levels=["region", "clinic"]), id=ID, time="visit")
    want = pandas_parts(df)
    pd.testing.assert_frame_equal(out[list(want.columns)], want, check_exact=False, rtol=1e-12, atol=1e-12)
    total = out[["y_region", "y_clinic", "y_between", "y_within"]].sum(axis=1, skipna=False)
    np.testing.assert_allclose(total, df["y"], rtol=1e-14, atol=1e-12)  # NaN where y is NaN
    # row-weighted means: each inner part sums to zero over the rows of its parent
    present = out[df["y"].notna()]
    for part, parent in (("y_clinic", ["region"]), ("y_between", ["region", "clinic"]), ("y_within", ID)):
        np.testing.assert_allclose(present.groupby(parent)[part].sum(), 0.0, atol=1e-10)


def test_innermost_deviations_give_the_grunfeld_fixed_effects_slopes():
    """Baltagi Table 2.1 (from memory): value 0.110124, capital 0.310065, with an invented
    grouping of the 10 firms into sectors above them (the within part does not change)."""
    sm = pytest.importorskip("statsmodels.api")
    g = sm.datasets.grunfeld.load_pandas().data
    g = g[g["firm"] != "American Steel"].reset_index(drop=True)
    firms = sorted(g["firm"].unique())
    g["sector"] = g["firm"].map({f: f"s{i % 3}" for i, f in enumerate(firms)})  # invented grouping
    trs = [pfx.within_between(c, levels=["sector"]) for c in ("invest", "value", "capital")]
    out = pfx.derive(g, *trs, id="firm", time="year")
    X = out[["value_within", "capital_within"]].to_numpy()
    b, *_ = np.linalg.lstsq(X, out["invest_within"].to_numpy(), rcond=None)
    np.testing.assert_allclose(b, [0.110124, 0.310065], atol=5e-7)
    plain = pfx.derive(g, pfx.within_between("invest"), id="firm", time="year")
    np.testing.assert_allclose(out["invest_within"], plain["invest_within"], rtol=1e-12)
    np.testing.assert_allclose(out["invest_sector"] + out["invest_between"], plain["invest_between"], rtol=1e-12)


def test_fit_rows_alone_make_the_means_and_every_row_gets_parts():
    df = nested(1)
    key = df[ID].astype(str).agg("|".join, axis=1)
    train_subjects = key.drop_duplicates().sample(frac=0.6, random_state=1)
    df["train"] = key.isin(train_subjects)
    out = pfx.derive(df, pfx.within_between("y", levels=["region", "clinic"], fit="train"), id=ID, time="visit")
    # region and clinic means from the training rows only (pandas), for every row
    used = df["y"].where(df["train"])
    m_r = used.groupby(df["region"]).transform("mean")
    m_c = used.groupby([df["region"], df["clinic"]]).transform("mean").fillna(m_r)  # unseen clinic: region mean
    m_p = used.groupby([df[c] for c in ID]).transform("mean").fillna(m_c)  # test subject: its clinic's training mean
    np.testing.assert_allclose(out["y_region"], m_r, rtol=1e-12)
    np.testing.assert_allclose(out["y_clinic"], m_c - m_r, rtol=1e-12, atol=1e-12)
    np.testing.assert_allclose(out["y_between"], m_p - m_c, rtol=1e-12, atol=1e-12)
    np.testing.assert_allclose(out["y_within"], df["y"] - m_p, rtol=1e-12, atol=1e-12)
    test_rows = ~df["train"]
    assert test_rows.any()
    assert out.loc[test_rows, ["y_region", "y_clinic", "y_between"]].notna().all().all()
    assert (out.loc[test_rows, "y_between"] == 0).all()
    # the test subjects' values do not move any mean: change them, the training rows' parts stay
    moved = df.assign(y=df["y"].where(df["train"], df["y"] * 100 + 7))
    again = pfx.derive(moved, pfx.within_between("y", levels=["region", "clinic"], fit="train"), id=ID,
                       time="visit")
    pd.testing.assert_frame_equal(again.loc[df["train"], ["y_region", "y_clinic", "y_between", "y_within"]],
                                  out.loc[df["train"], ["y_region", "y_clinic", "y_between", "y_within"]])


def test_fit_without_levels_and_a_missing_flag_counts_as_false():
    df = pd.DataFrame({"pid": [1, 1, 1, 2, 2], "t": [0, 1, 2, 0, 1], "y": [1.0, 3.0, 11.0, 4.0, 6.0],
                       "fit": pd.array([True, True, None, False, False], dtype="boolean")})
    out = pfx.derive(df, pfx.within_between("y", fit="fit"), id="pid", time="t")
    # pid 1: mean of the fit rows 1 and 3; pid 2 has no fit row: the mean of all fit rows (2.0)
    assert out["y_between"].tolist() == [2.0, 2.0, 2.0, 2.0, 2.0]
    assert out["y_within"].tolist() == [-1.0, 1.0, 9.0, 2.0, 4.0]


def test_level_may_be_an_id_column_and_codes_repeat_across_parents():
    df = nested(2)
    a = pfx.derive(df, pfx.within_between("y", levels=["region", "clinic"]), id=ID, time="visit")
    # the same with codes made unique by hand, checked with codes="unique"
    u = df.assign(clinic=df["region"] + "/" + df["clinic"].astype(str),
                  pid=df["region"] + "/" + df["clinic"].astype(str) + "/" + df["pid"].astype(str))
    b = pfx.derive(u, pfx.within_between("y", levels=["region", "clinic"], codes="unique"), id="pid", time="visit")
    pd.testing.assert_frame_equal(a.iloc[:, 5:], b.iloc[:, 5:])
    # clinic numbers repeat across regions: as unique codes they are not nested
    with pytest.raises(NestingError, match="level 'clinic' appear under more than one 'region'"):
        pfx.derive(df, pfx.within_between("y", levels=["region", "clinic"], codes="unique"), id=ID, time="visit")


def test_a_subject_under_two_units_is_refused_with_its_ids():
    df = pd.DataFrame({"pid": [1, 1, 2, 2, 3], "t": [0, 1, 0, 1, 0], "clinic": ["a", "b", "a", "a", "c"],
                       "y": [1.0, 2.0, 3.0, 4.0, 5.0]})
    with pytest.raises(NestingError, match=r"1 subject\(s\) seen under more than one unit of level 'clinic'") as err:
        pfx.derive(df, pfx.within_between("y", levels=["clinic"]), id="pid", time="t")
    assert err.value.ids == [1] and err.value.column == "clinic" and err.value.count == 1


def test_names_options_and_saved_derivations():
    tr = pfx.within_between("y", levels=["Region Name", "clinic"])
    assert tr.outputs() == ("y_region_name", "y_clinic", "y_between", "y_within")
    assert tr.inputs() == ("y", "Region Name", "clinic") and tr.groupings() == ("Region Name", "clinic")
    assert pfx.within_between("y", levels=["clinic"], names=["c", "b", "w"]).outputs() == ("c", "b", "w")
    for kw, message in [({"levels": ["clinic"], "names": ["b", "w"]}, "names must be 3 different column names"),
                        ({"levels": ["between"]}, "repeat a name"),
                        ({"levels": ["y"]}, "also one of the levels"),
                        ({"levels": ["a", "a"]}, "twice"),
                        ({"levels": [3]}, "list of column names"),
                        ({"fit": "y"}, "fit 'y' must be"),
                        ({"fit": ""}, "fit must be a column name"),
                        ({"codes": "global"}, "codes must be one of"),
                        ({"between": "baseline", "levels": ["clinic"]}, "between='mean'")]:
        with pytest.raises(OptionError, match=message):
            pfx.within_between("y", **kw)
    df = nested(3)
    with pytest.raises(OptionError, match="time column 'visit' cannot be a level"):
        pfx.derive(df, pfx.within_between("y", levels=["visit"]), id=ID, time="visit")
    d = pfx.Derivation(pfx.within_between("y", levels=["region", "clinic"], fit=None), id=ID, time="visit")
    again = pfx.Derivation.from_json(d.to_json())
    assert again == d
    pd.testing.assert_frame_equal(again.apply(df).drop(columns=[]).iloc[:, 5:], d.apply(df).iloc[:, 5:])
    assert "region > clinic > subject" in d.dictionary()["description"].iloc[0]


def test_input_unchanged_and_row_order_kept():
    df = nested(4)
    before = df.copy()
    out = pfx.derive(df, pfx.within_between("y", levels=["region"]), id=ID, time="visit")
    pd.testing.assert_frame_equal(df, before)
    assert out.index.equals(df.index) and list(out.columns[:5]) == list(df.columns)
