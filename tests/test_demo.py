"""The invented demo cohort (panelfx.demo.cohort) and the ``python -m panelfx demo`` command."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import panelfx as pfx
from panelfx import demo
from panelfx.__main__ import main as cli_main

ID = ["site", "subject"]


@pytest.fixture(scope="module")
def big() -> pd.DataFrame:
    return demo.cohort(1000, seed=11, shuffle=False)


def test_same_seed_same_frame_and_other_seed_differs():
    a = demo.cohort(60, seed=5)
    b = demo.cohort(60, seed=5)
    pd.testing.assert_frame_equal(a, b)
    c = demo.cohort(60, seed=6)
    assert not (len(a) == len(c) and a.equals(c))


def test_columns_and_dtypes():
    df = demo.cohort(30, seed=1)
    assert df.columns.tolist() == ["site", "subject", "visit_date", "day", "sbp", "dose_mg", "treat_start",
                                   "salt_g", "dizzy"]
    assert df["site"].map(type).eq(str).all()
    assert df["subject"].dtype == np.int64
    assert df["day"].dtype == np.int64
    assert pd.api.types.is_datetime64_any_dtype(df["visit_date"])
    assert pd.api.types.is_datetime64_any_dtype(df["treat_start"])
    for col in ("sbp", "dose_mg", "salt_g"):
        assert df[col].dtype == np.float64
    assert df["dizzy"].dtype == bool
    assert isinstance(df.index, pd.RangeIndex) and df.index.equals(pd.RangeIndex(len(df)))


def test_labelled_invented_everywhere(capsys):
    df = demo.cohort(10)
    assert df.attrs["invented"].startswith("INVENTED")
    assert "invented" in demo.cohort.__doc__.lower() and "invented" in demo.__doc__.lower()
    assert demo.main(["--subjects", "12", "--rows", "0"]) == 0
    assert capsys.readouterr().out.startswith("INVENTED DATA")


def test_missing_shares(big):
    assert 0.04 < big["sbp"].isna().mean() < 0.06
    assert 0.065 < big["salt_g"].isna().mean() < 0.095
    assert big[["site", "subject", "visit_date", "day", "dose_mg", "treat_start", "dizzy"]].notna().all().all()
    assert demo.cohort(50, sbp_missing=0.0, salt_missing=0.0)[["sbp", "salt_g"]].notna().all().all()


def test_subject_numbers_repeat_across_sites(big):
    subjects = big[ID].drop_duplicates()
    assert len(subjects) == 1000
    assert big["site"].nunique() == 5
    # every site numbers its subjects 1..n_site, so number 1 occurs at every site
    per_site = subjects.groupby("site")["subject"].agg(["min", "max", "size"])
    assert (per_site["min"] == 1).all() and (per_site["max"] == per_site["size"]).all()
    assert big["subject"].nunique() < len(subjects)


def test_staggered_enrolment_and_day_counts_from_it(big):
    enrol = big.groupby(ID)["visit_date"].transform("min")
    assert ((big["visit_date"] - enrol).dt.days == big["day"]).all()
    first = big.groupby(ID)["day"].min()
    assert (first == 0).all()
    start = enrol.drop_duplicates()
    assert (start.max() - start.min()).days > 600  # spread over about two years
    assert start.dt.to_period("M").nunique() >= 20


def test_visits_planned_every_30_days_with_irregularities(big):
    report = pfx.check(big, id=ID, time="visit_date", spacing="30D")
    counts = report["problem"].value_counts()
    assert set(counts.index) == {"missed", "early", "late"}  # no duplicates, no fatal problems
    n = len(big)
    assert 0.02 < counts["late"] / n < 0.06
    assert 0.015 < counts["early"] / n < 0.05
    assert 0.03 < counts["missed"] / n < 0.09
    # ordinary visits stay within 2 days of their planned day
    flagged = set(report["row"].dropna())
    ok = big.drop(index=list(flagged))
    off = (ok["day"] + 15) % 30 - 15
    assert off.abs().max() <= 2


def test_treatment_start_and_dose(big):
    assert big.groupby(ID)["treat_start"].nunique().eq(1).all()
    before = big["visit_date"] < big["treat_start"]
    assert (big.loc[before, "dose_mg"] == 0).all()
    assert (big.loc[~before, "dose_mg"] >= 5).all() and big["dose_mg"].max() <= 60
    # one to three untreated visits, then treatment; the dose is titrated within subject
    untreated = before.groupby([big["site"], big["subject"]]).sum()
    assert untreated.between(1, 3).all()
    treated = big.loc[~before]
    assert (treated.groupby(ID)["dose_mg"].nunique() > 1).mean() > 0.4
    assert (big["dose_mg"] % 5 == 0).all()


def test_dizzy_is_a_rare_event(big):
    assert 0.01 < big["dizzy"].mean() < 0.08


def test_shuffled_by_default_sorted_on_request():
    shuffled = demo.cohort(40, seed=3)
    ordered = demo.cohort(40, seed=3, shuffle=False)
    keys = ["site", "subject", "visit_date"]
    assert not shuffled[keys].equals(shuffled.sort_values(keys)[keys])
    assert ordered[keys].equals(ordered.sort_values(keys).reset_index(drop=True)[keys])
    pd.testing.assert_frame_equal(shuffled.sort_values(keys).reset_index(drop=True), ordered)


@pytest.mark.parametrize("bad", [dict(n_subjects=0), dict(n_sites=0), dict(n_sites=9), dict(sbp_missing=1.0)])
def test_bad_generator_options(bad):
    with pytest.raises(ValueError):
        demo.cohort(**{"n_subjects": 10, **bad})


def _fit(y: np.ndarray, *cols: np.ndarray) -> np.ndarray:
    X = np.column_stack([np.ones(len(y)), *cols])
    return np.linalg.lstsq(X, y, rcond=None)[0]


def test_true_within_and_between_effects_are_recovered(big):
    df = big[big["sbp"].notna()]
    y = df["sbp"].to_numpy()
    dose = df["dose_mg"]
    keys = [df["site"], df["subject"]]

    # Subject mean and deviation from it: the deviation carries the within effect.
    mean = dose.groupby(keys).transform("mean")
    _, b_mean, b_dev = _fit(y, mean, dose - mean)
    assert b_dev == pytest.approx(-0.3, abs=0.03)
    # The subject mean is a blurred copy of the start dose (untreated visits count 0,
    # titration moves it), so its slope sits a few hundredths under the true between
    # effect (0.17 on average over seeds, sd 0.02 at this size; measured for the docstring).
    assert b_mean == pytest.approx(0.2, abs=0.08)

    # Baseline (start) dose and change from it: the design the truth is written in.
    start = dose.where(dose > 0).groupby(keys).transform("first")
    _, b_start, b_change = _fit(y, start, dose - start)
    assert b_start == pytest.approx(0.2, abs=0.06)
    assert b_change == pytest.approx(-0.3, abs=0.03)

    # The current dose alone mixes the two into a number far from both.
    _, b_naive = _fit(y, dose)
    assert -0.2 < b_naive < 0.1


def test_effects_are_parameters():
    df = demo.cohort(1000, seed=4, within_effect=-0.6, between_effect=0.5, shuffle=False)
    df = df[df["sbp"].notna()]
    dose = df["dose_mg"]
    start = dose.where(dose > 0).groupby([df["site"], df["subject"]]).transform("first")
    _, b_start, b_change = _fit(df["sbp"].to_numpy(), start, dose - start)
    assert b_start == pytest.approx(0.5, abs=0.06)
    assert b_change == pytest.approx(-0.6, abs=0.03)
    assert df.attrs["truth"] == {"within_effect": -0.6, "between_effect": 0.5, "salt_effect": 1.0}


def test_demo_command_runs_in_process(capsys):
    assert cli_main(["demo", "--subjects", "40", "--seed", "7", "--rows", "5"]) == 0
    out = capsys.readouterr().out
    assert "INVENTED DATA" in out and "Kestrel Valley" in out
    assert "cohort(40, seed=7)" in out
    assert "spacing='30D'" in out
    for problem in ("missed", "early", "late"):
        assert problem in out
    transforms = demo.history_transforms()
    for tr in transforms:
        for name in tr.outputs():
            assert f"{name}: {tr.describe()}" in out
    assert "sbp_baseline" in out and "dose_mg_lag1" in out
    assert "last non-missing value on or before the reference time (column 'treat_start')" in out
    # the first rows are printed: one table row per requested row, plus the header
    table = out.split("sorted for reading:\n", 1)[1].split("\n\n", 1)[0].splitlines()
    assert len(table) == 6


def test_demo_derive_matches_a_simple_recomputation():
    df = demo.cohort(30, seed=2)
    out = pfx.derive(df, *demo.history_transforms(), id=ID, time="visit_date")
    pd.testing.assert_frame_equal(out[df.columns], df)
    # last sbp on or before treatment start, recomputed with plain pandas
    pre = df[(df["visit_date"] <= df["treat_start"]) & df["sbp"].notna()].sort_values("visit_date")
    expected = pre.groupby(ID)["sbp"].last()
    got = out.set_index(ID)["sbp_baseline"].groupby(level=[0, 1]).first()
    pd.testing.assert_series_equal(got.loc[expected.index], expected, check_names=False, check_index_type=False)
    assert got.drop(index=expected.index).isna().all()


def test_demo_command_rejects_bad_options(capsys):
    with pytest.raises(SystemExit):
        demo.main(["--subjects", "0"])
    assert "--subjects" in capsys.readouterr().err
