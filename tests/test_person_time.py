"""panelfx.person_time: rates and exact Poisson intervals, checked against scipy and statsmodels."""

from __future__ import annotations

from decimal import Decimal, getcontext

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import panelfx as pfx
from panelfx._poisson import gamma_p, poisson_limits

stats = pytest.importorskip("scipy.stats")
rates = pytest.importorskip("statsmodels.stats.rates")
sm = pytest.importorskip("statsmodels.api")


def test_published_example_10_events_over_250_person_years():
    """CHECK-SOURCES.md (exact Garwood interval, verified with statsmodels and scipy): 10 events over
    250 person-years -> rate 0.04, 95% CI 0.019182-0.073561."""
    ep = pd.DataFrame({"start": [0.0, 100.0], "stop": [100.0, 250.0], "event": [4, 6]})
    out = pfx.person_time(ep, per=1)
    assert out[["events", "person_time"]].values.tolist() == [[10, 250.0]]
    assert out["rate"].item() == 0.04
    assert round(out["rate_lower"].item(), 6) == 0.019182 and round(out["rate_upper"].item(), 6) == 0.073561
    lo, hi = rates.confint_poisson(10, 250, method="exact-c")  # statsmodels' exact interval
    assert out["rate_lower"].item() == pytest.approx(lo, rel=1e-11)
    assert out["rate_upper"].item() == pytest.approx(hi, rel=1e-11)


@settings(max_examples=60, deadline=None)
@given(k=st.integers(0, 100_000), alpha=st.sampled_from([0.001, 0.01, 0.05, 0.1, 0.2, 0.5, 0.9]))
def test_limits_equal_the_chi_square_formula(k, alpha):
    """The textbook formula through scipy: lower = chi2(alpha/2; 2k)/2, upper = chi2(1 - alpha/2; 2k + 2)/2."""
    lo, hi = poisson_limits(np.array([k]), alpha)
    want_lo = stats.chi2.ppf(alpha / 2, 2 * k) / 2 if k else 0.0
    want_hi = stats.chi2.ppf(1 - alpha / 2, 2 * k + 2) / 2
    assert lo[0] == pytest.approx(want_lo, rel=1e-11, abs=0)
    assert hi[0] == pytest.approx(want_hi, rel=1e-11)


def test_many_strata_at_once_equal_scipy():
    k = np.r_[0, 1, 2, 3, np.arange(5, 3000, 7), 12_345, 99_999]
    lo, hi = poisson_limits(k, 0.05)
    np.testing.assert_allclose(lo[1:], stats.gamma.ppf(0.025, k[1:]), rtol=1e-11)
    np.testing.assert_allclose(hi, stats.gamma.ppf(0.975, k + 1), rtol=1e-11)
    assert lo[0] == 0.0 and hi[0] == pytest.approx(-np.log(0.025), rel=1e-14)  # k = 0: upper is -log(alpha/2)


def series_in_decimals(a: int, x: Decimal) -> Decimal:
    """P(a, x) for integer a by its power series in 50-digit decimals (slow, plain, no shared code)."""
    getcontext().prec = 50
    pi = Decimal("3.14159265358979323846264338327950288419716939937510")
    z = Decimal(a + 1)
    log_gamma = ((z - Decimal("0.5")) * z.ln() - z + (2 * pi).ln() / 2 + 1 / (12 * z) - 1 / (360 * z ** 3)
                 + 1 / (1260 * z ** 5) - 1 / (1680 * z ** 7) + 1 / (1188 * z ** 9))  # Stirling's series
    term = total = Decimal(1)
    n = 0
    while term > total * Decimal("1e-40"):
        n += 1
        term = term * x / (a + n)
        total += term
    return (a * x.ln() - x - log_gamma).exp() * total


@pytest.mark.parametrize("a, z", [(10**6, -5.0), (10**6, 2.0), (400, -3.0), (30, 1.5)])
def test_incomplete_gamma_in_the_far_tail_of_large_counts(a, z):
    """Where scipy's own gammainc loses digits (a = 1e6, five standard deviations out), a 50-digit
    decimal series is the reference."""
    x = Decimal(a) + Decimal(z) * Decimal(a).sqrt()
    want = float(series_in_decimals(a, x))
    assert gamma_p(np.array([float(a)]), np.array([float(x)]))[0] == pytest.approx(want, rel=1e-11)


def test_poisson_regression_with_a_log_person_time_offset_recovers_the_rates():
    """statsmodels GLM (Poisson, log link, offset log person-time) on the rows, one indicator per
    stratum: its maximum-likelihood rates exp(coefficient) are events / person-time of each stratum."""
    rng = np.random.default_rng(7)
    n = 400
    ep = pd.DataFrame({"arm": rng.choice(["a", "b", "c"], n), "sex": rng.choice(["f", "m"], n),
                       "start": 0.0, "stop": rng.uniform(0.1, 5.0, n)})
    ep["event"] = rng.poisson(ep["stop"] * ep["arm"].map({"a": 0.05, "b": 0.1, "c": 0.3}))
    table = pfx.person_time(ep, ["arm", "sex"], per=1)
    stratum = ep["arm"] + "|" + ep["sex"]
    design = pd.get_dummies(stratum, dtype=float)
    glm = sm.GLM(ep["event"], design, family=sm.families.Poisson(), offset=np.log(ep["stop"] - ep["start"])).fit()
    want = table.assign(name=table["arm"] + "|" + table["sex"]).set_index("name")["rate"]
    np.testing.assert_allclose(np.exp(glm.params[want.index].to_numpy()), want.to_numpy(), rtol=1e-8)
    np.testing.assert_allclose(table["person_time"].sum(), ep["stop"].sum(), rtol=1e-13)


def test_strata_sorted_with_missing_as_a_stratum_and_datetime_units():
    day = pd.Timestamp("2024-01-01")
    ep = pd.DataFrame({"g": ["b", None, "a", "b"],
                       "start": [day, day, day, day + pd.Timedelta("10D")],
                       "stop": [day + pd.Timedelta("10D"), day + pd.Timedelta("5D"), day + pd.Timedelta("1h"),
                                day + pd.Timedelta("31D")],
                       "event": [True, False, True, True]})
    out = pfx.person_time(ep, "g", unit="W", per=100)
    assert out["g"].tolist()[:2] == ["a", "b"] and pd.isna(out["g"].iloc[2])
    assert out["events"].tolist() == [1, 2, 0]
    np.testing.assert_allclose(out["person_time"], [1 / 24 / 7, 31 / 7, 5 / 7], rtol=1e-14)
    np.testing.assert_allclose(out["rate"], out["events"] / out["person_time"] * 100)
    assert pfx.person_time(ep)["person_time"].item() == pytest.approx(31 + 5 + 1 / 24)  # days by default


def test_numeric_unit_and_counts():
    ep = pd.DataFrame({"start": [0, 365.25], "stop": [365.25, 730.5], "event": [2, 0]})
    out = pfx.person_time(ep, unit=365.25)
    assert out["person_time"].item() == 2.0 and out["rate"].item() == 1000.0


def test_episodes_to_rates_in_two_calls():
    visits = pd.DataFrame({"pid": [1, 1, 2], "day": [0, 50, 0], "on": [0, 1, 1], "end": [200, 200, 100],
                           "d": [1, 1, 0]})
    ep = pfx.episodes(visits, id="pid", time="day", exit="end", event="d", covariates=["on"])
    out = pfx.person_time(ep, "on", per=1)
    assert out[["on", "events", "person_time"]].values.tolist() == [[0, 0, 50.0], [1, 1, 250.0]]


@pytest.mark.parametrize("change, match", [
    (dict(stop=[1.0, 0.0]), "stop at or before start"),
    (dict(stop=[1.0, None]), "missing start or stop"),
    (dict(event=[1, -1]), "negative"),
    (dict(event=[0.5, 1]), "whole number"),
    (dict(event=["1", "0"]), "0/1 flags or counts"),
])
def test_bad_rows(change, match):
    ep = pd.DataFrame({"start": [0.0, 1.0], "stop": [1.0, 2.0], "event": [0, 1]}, index=["a", "b"]).assign(**change)
    with pytest.raises(pfx.PanelError, match=match):
        pfx.person_time(ep)


@pytest.mark.parametrize("kw, match", [
    ({"per": 0}, "per must be"), ({"alpha": 1}, "alpha must be"), ({"unit": "Y"}, "positive number"),
    ({"by": "nope"}, "not in the frame"), ({"start": "when"}, "mix naive and time-zone-aware"), ({"by": ["rate"]}, "output column"), ({"event": 3}, "event must be"),
])
def test_bad_options(kw, match):
    ep = pd.DataFrame({"start": [0.0], "stop": [1.0], "event": [0], "rate": [1]})
    if kw.get("start") == "when":
        ep = ep.assign(when=pd.Timestamp("2024-01-01", tz="UTC"), stop=pd.Timestamp("2024-02-01"))
    with pytest.raises(pfx.PanelError, match=match):
        pfx.person_time(ep, **kw)
