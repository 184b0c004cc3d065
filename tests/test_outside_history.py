"""History transforms checked against sources outside the project."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import panelfx as pfx


def test_adam_worked_example():
    """CDISC ADaM (published standard; quoted from memory): CHG = AVAL - BASE,
    PCHG = 100 (AVAL - BASE) / BASE; a score 12 -> 6 -> 2 gives CHG -6, -10 and PCHG -50, -83.33,
    with the change fields blank on the baseline record."""
    df = pd.DataFrame({"usubjid": ["S1"] * 3, "ady": [1, 15, 29], "aval": [12.0, 6.0, 2.0]})
    out = pfx.derive(
        df,
        pfx.baseline("aval", name="base"),
        pfx.change_from_baseline("aval", after_baseline_only=True, name="chg"),
        pfx.change_from_baseline("aval", "percent", after_baseline_only=True, name="pchg"),
        id="usubjid", time="ady",
    )
    assert out["base"].tolist() == [12.0] * 3
    assert out["chg"].isna().tolist() == [True, False, False]
    assert out["chg"].iloc[1:].tolist() == [-6.0, -10.0]
    assert out["pchg"].iloc[1:].round(2).tolist() == [-50.0, -83.33]


@pytest.fixture(scope="module")
def jobtraining() -> pd.DataFrame:
    # Open dataset shipped in linearmodels (Wooldridge's job-training panel); its derived columns were
    # computed by the data's authors. Shuffle rows so the engine's ordering is exercised too.
    from linearmodels.datasets import jobtraining

    data = jobtraining.load()
    return data.sample(frac=1.0, random_state=7)


def test_jobtraining_lag_matches_shipped_column(jobtraining):
    """linearmodels.datasets.jobtraining: lscrap_1 is the lag of lscrap (exact), grant_1 the lag of grant
    with 0 at the first year."""
    out = pfx.derive(jobtraining, pfx.lag("lscrap", name="lag"), pfx.lag("grant", name="glag"),
                    id="fcode", time="year")
    pd.testing.assert_series_equal(out["lag"], jobtraining["lscrap_1"], check_names=False)
    assert (out["glag"].fillna(0) == jobtraining["grant_1"]).all()


@pytest.mark.parametrize(
    "source, shipped, atol",
    [("lscrap", "clscrap", 1e-5), ("lemploy", "clemploy", 1e-5), ("lsales", "clsales", 1e-5),
     ("lavgsal", "clavgsal", 1e-5), ("lhrsemp", "clhrsemp", 1e-5), ("hrsemp", "chrsemp", 5e-5)],
)
def test_jobtraining_differences_match_shipped_columns(jobtraining, source, shipped, atol):
    """linearmodels.datasets.jobtraining: the c* columns are within-firm first differences (stored with
    about 7 significant digits, hence the tolerances listed in ../shared/CHECK-SOURCES.md)."""
    out = pfx.derive(jobtraining, pfx.change_from_previous(source, name="d"), id="fcode", time="year")
    got, want = out["d"], jobtraining[shipped]
    assert (got.isna() == want.isna()).all()
    np.testing.assert_allclose(got.dropna(), want.dropna(), atol=atol, rtol=0)


def test_baseline_and_change_span_the_same_design():
    """Algebraic fact of the trade: regressing y on (1, baseline x, x - baseline x) and on
    (1, baseline x, x) gives identical fits; the change coefficient equals the current-x coefficient
    and the baseline coefficients differ by exactly that amount. Data: the Grunfeld investment panel
    shipped in statsmodels.datasets (textbook's 10 firms)."""
    from statsmodels.api import datasets

    g = datasets.grunfeld.load_pandas().data
    g = g[g["firm"] != "American Steel"]
    out = pfx.derive(g, pfx.baseline("value"), pfx.change_from_baseline("value"), id="firm", time="year")
    y = out["invest"].to_numpy()
    one = np.ones(len(out))
    a = np.column_stack([one, out["value_baseline"], out["value_change"]])
    b = np.column_stack([one, out["value_baseline"], out["value"]])
    ca, *_ = np.linalg.lstsq(a, y, rcond=None)
    cb, *_ = np.linalg.lstsq(b, y, rcond=None)
    np.testing.assert_allclose(a @ ca, b @ cb, rtol=1e-9)
    assert ca[2] == pytest.approx(cb[2], rel=1e-9)
    assert ca[1] - cb[1] == pytest.approx(ca[2], rel=1e-7)
