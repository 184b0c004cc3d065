"""The within transform checked against published fixed-effects results.

Sources: Grunfeld's investment panel as shipped in statsmodels.datasets.grunfeld (the
textbook's 10 firms: American Steel dropped) and the wage panel of
linearmodels.datasets.wage_panel.  Published figures (quoted from memory, then reproduced
exactly by computation; see CHECK-SOURCES.md): Baltagi, Econometric Analysis of Panel
Data, Table 2.1 (Grunfeld fixed effects and between estimates); Wooldridge, Introductory
Econometrics, Table 14.2 (wage panel, fixed effects with year dummies).  Least squares on
subject-mean-centred variables gives the fixed-effects slopes (a fact of the trade: the
within transformation sweeps out the subject effects).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import panelfx as pfx


def ols(y: np.ndarray, X: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    b, *_ = np.linalg.lstsq(X, y, rcond=None)
    return b, y - X @ b


@pytest.fixture(scope="module")
def grunfeld() -> pd.DataFrame:
    sm = pytest.importorskip("statsmodels.api")
    data = sm.datasets.grunfeld.load_pandas().data
    return data[data["firm"] != "American Steel"].reset_index(drop=True)


def test_grunfeld_fixed_effects(grunfeld):
    """Baltagi Table 2.1 (from memory): value 0.110124 (se 0.011857), capital 0.310065
    (se 0.017355), within R-squared 0.766758; error degrees of freedom 200 - 10 - 2 = 188."""
    assert len(grunfeld) == 200 and grunfeld["firm"].nunique() == 10
    out = pfx.derive(grunfeld, *(pfx.within_between(c) for c in ("invest", "value", "capital")),
                    id="firm", time="year")
    y = out["invest_within"].to_numpy()
    X = out[["value_within", "capital_within"]].to_numpy()
    b, resid = ols(y, X)
    s2 = resid @ resid / (200 - 10 - 2)
    se = np.sqrt(np.diag(s2 * np.linalg.inv(X.T @ X)))
    np.testing.assert_allclose(b, [0.110124, 0.310065], atol=5e-7)
    np.testing.assert_allclose(se, [0.011857, 0.017355], atol=5e-7)
    assert 1 - resid @ resid / (y @ y) == pytest.approx(0.766758, abs=5e-7)


def test_grunfeld_between_estimates(grunfeld):
    """Between estimates (least squares on firm means; Baltagi, from memory): value
    0.1346461, capital 0.0320315 - from the between part of within_between and from
    subject_summary's means alike."""
    means = pfx.subject_summary(grunfeld, ["invest", "value", "capital"], id="firm", time="year")
    b, _ = ols(means["invest_mean"].to_numpy(),
               np.column_stack([np.ones(10), means["value_mean"], means["capital_mean"]]))
    np.testing.assert_allclose(b[1:], [0.1346461, 0.0320315], atol=5e-8)
    out = pfx.derive(grunfeld, *(pfx.within_between(c) for c in ("invest", "value", "capital")),
                    id="firm", time="year")
    firms = out.drop_duplicates("firm")
    np.testing.assert_allclose(firms["value_between"], means["value_mean"], rtol=1e-13)


def test_wage_panel_fixed_effects_with_year_effects():
    """Wooldridge Table 14.2 (from memory): log wage on expersq, married, union and year
    dummies with man fixed effects: expersq -0.005185, married 0.046680, union 0.080002.
    Every regressor, the year dummies included, is centred on the man's mean."""
    wage_panel = pytest.importorskip("linearmodels.datasets.wage_panel")
    w = wage_panel.load()
    years = range(1981, 1988)
    w = w.assign(**{f"d{yr}": (w["year"] == yr).astype("float64") for yr in years})
    cols = ["lwage", "expersq", "married", "union", *(f"d{yr}" for yr in years)]
    out = pfx.derive(w, *(pfx.within_between(c) for c in cols), id="nr", time="year")
    b, _ = ols(out["lwage_within"].to_numpy(), out[[f"{c}_within" for c in cols[1:]]].to_numpy())
    np.testing.assert_allclose(b[:3], [-0.005185, 0.046680, 0.080002], atol=5e-7)
