"""episodes checked against published counting-process data and a reference Cox fit.

Source: the Stanford heart-transplant data (Crowley & Hu 1977) as shipped in counting-process
form by a survival library (tests/data/stanford_heart.csv; origin in tests/data/README.md):
103 patients, 172 (start, stop] rows, 75 deaths.  The file is collapsed to one row of facts per
patient (follow-up, death, transplant day, age, year, prior surgery), then rebuilt with
``episodes``.  Reference fit: statsmodels' PHReg (a general-purpose reference library) on the
published rows, through its ``entry=`` argument.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import panelfx as pfx

phreg = pytest.importorskip("statsmodels.duration.hazard_regression")

DATA = Path(__file__).resolve().parent / "data" / "stanford_heart.csv"
COVARIATES = ["age", "year", "surgery", "transplant"]


@pytest.fixture(scope="module")
def published() -> pd.DataFrame:
    return pd.read_csv(DATA)


@pytest.fixture(scope="module")
def facts(published) -> pd.DataFrame:
    """One row per patient, as a registry would hold them."""
    g = published.groupby("id", sort=False)
    out = g.agg(age=("age", "first"), year=("year", "first"), surgery=("surgery", "first"),
                futime=("stop", "max"), died=("event", "last")).reset_index()
    tx = published.loc[published["transplant"] == 1].groupby("id")["start"].first()
    # the file puts patient 38's transplant at day 4.5, half a day before death on day 5: the
    # fact is a transplant on day 5 (see tests/data/README.md)
    out["tx_day"] = np.ceil(out["id"].map(tx))
    return out


@pytest.fixture(scope="module")
def visits(facts) -> pd.DataFrame:
    """Visit data: acceptance (day 0) without a transplant, and the transplant day."""
    accepted = facts.assign(day=0.0, transplant=0)
    operated = facts.loc[facts["tx_day"].notna()].assign(day=lambda d: d["tx_day"], transplant=1)
    return pd.concat([accepted, operated], ignore_index=True).drop(columns="tx_day")


def test_published_file_is_what_the_source_describes(published, facts):
    assert len(published) == 172 and published["event"].sum() == 75 and published["id"].nunique() == 103
    assert (facts["tx_day"] == facts["futime"]).sum() == 1 and published.loc[published["start"] == 4.5, "id"].tolist() == [38]


def test_rebuilt_exactly_with_the_half_day_convention(published, visits):
    """With tie_shift=0.5 (the file's convention for a change on the day of death) every one of the
    172 rows comes back exactly, in the file's order."""
    out = pfx.episodes(visits, id="id", time="day", exit="futime", event="died", covariates=COVARIATES,
                       tie_shift=0.5)
    got = out[["start", "stop", "event", *COVARIATES, "id"]]
    pd.testing.assert_frame_equal(got, published[got.columns.tolist()], check_dtype=True)


def test_default_rule_keeps_the_transplant_after_the_death(published, visits):
    """By default a change at an event time goes after the event: patient 38 is one row, untransplanted."""
    out = pfx.episodes(visits, id="id", time="day", exit="futime", event="died", covariates=COVARIATES)
    assert len(out) == 171 and out["event"].sum() == 75
    p38 = out.loc[out["id"] == 38, ["start", "stop", "event", "transplant"]]
    assert p38.values.tolist() == [[0.0, 5.0, 1, 0]]
    rest = out.loc[out["id"] != 38].reset_index(drop=True)
    want = published.loc[published["id"] != 38].reset_index(drop=True)
    pd.testing.assert_frame_equal(rest[want.columns.tolist()], want)


def fit(rows: pd.DataFrame):
    exog = rows[COVARIATES].astype(float).to_numpy()
    model = phreg.PHReg(rows["stop"].to_numpy(), exog, status=rows["event"].to_numpy(),
                        entry=rows["start"].to_numpy(), ties="efron")
    return model.fit()


def test_time_varying_cox_fit_matches_the_reference_fit(published, visits):
    reference = fit(published)
    out = pfx.episodes(visits, id="id", time="day", exit="futime", event="died", covariates=COVARIATES,
                       tie_shift=0.5)
    ours = fit(out)
    np.testing.assert_allclose(ours.params, reference.params, rtol=1e-12, atol=1e-12)
    np.testing.assert_allclose(ours.bse, reference.bse, rtol=1e-10)
    # the fit itself, computed by statsmodels on this machine (age, year, surgery, transplant)
    np.testing.assert_allclose(reference.params, [0.0275, -0.1466, -0.6357, -0.0554], atol=5e-5)


def test_the_tie_rule_moves_the_fit(published, visits):
    """The default rule (transplant after the death on day 5) gives another fit than the file's
    convention, so the comparison above does tell the two apart."""
    default = pfx.episodes(visits, id="id", time="day", exit="futime", event="died", covariates=COVARIATES)
    assert abs(fit(default).params[3] - fit(published).params[3]) > 1e-3
