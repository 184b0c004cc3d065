"""variance_components and design_effect, checked against outside sources.

Sources (see CHECK-SOURCES.md): the Pastes data shipped in statsmodels' test files
(statsmodels/regression/tests/results/pastes.csv; nested ANOVA 1.6573 / 8.4337 / 0.6780,
grand mean 60.0533, statsmodels MixedLM REML 1.6584 / 8.4329 / 0.6780); Shrout & Fleiss
(1979), Psychological Bulletin 86:420-428, Table 2 data and ICC(1,1) = 0.17, ICC(1,k) = 0.44
(from memory, reproduced by computation); the wage panel of linearmodels (ICC 0.471804 by
ANOVA and by MixedLM REML); Kish's design effect 1 + (m - 1) rho (Kish 1965, from memory);
the design effect as 1'V1 / n**2 over total / n from the covariance matrix V the components
imply (a definition); the expectation of a quadratic form E[y'Ay] = tr(AV) + mu'A mu
(a textbook theorem, e.g. Searle, Casella & McCulloch 1992) as an independent route to
the unbalanced Method I estimates.
"""

from __future__ import annotations

import os

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import panelfx as pfx
from panelfx.errors import ColumnTypeError, NestingError, NullKeyError, OptionError


@pytest.fixture(scope="module")
def pastes() -> pd.DataFrame:
    sm = pytest.importorskip("statsmodels")
    path = os.path.join(os.path.dirname(sm.__file__), "regression", "tests", "results", "pastes.csv")
    return pd.read_csv(path)


# ------------------------------------------------------------------ outside values
def test_pastes_nested_anova(pastes):
    """statsmodels test file pastes.csv: 10 batches x 3 casks x 2 samples, cask letters
    repeating across batches.  Nested ANOVA (CHECK-SOURCES.md): batch 1.6573, cask 8.4337,
    residual 0.6780, grand mean 60.0533."""
    vc = pfx.variance_components(pastes, "strength", levels=["batch", "cask"])
    assert vc["level"].tolist() == ["batch", "cask", "residual"]
    assert vc["units"].tolist() == [10, 30, 60]
    assert vc["df"].tolist() == [9, 20, 30]
    np.testing.assert_allclose(vc["variance"], [1.6573, 8.4337, 0.6780], atol=5e-5)
    np.testing.assert_allclose(vc["mean_size"], [6.0, 2.0, 1.0])
    assert vc.attrs["grand_mean"] == pytest.approx(60.0533, abs=5e-5)
    assert not vc["negative"].any()
    # classical expected mean squares of a balanced nested design (a fact of the trade):
    # MS_batch = e + 2 cask + 6 batch, MS_cask = e + 2 cask, MS_e = e
    ms = vc["mean_sq"].to_numpy()
    e, cask, batch = ms[2], (ms[1] - ms[2]) / 2, (ms[0] - ms[1]) / 6
    np.testing.assert_allclose(vc["variance"], [batch, cask, e], rtol=1e-12)
    total = batch + cask + e
    np.testing.assert_allclose(vc["share"], [batch / total, cask / total, e / total], rtol=1e-12)
    np.testing.assert_allclose(vc["icc"][:2], [batch / total, (batch + cask) / total], rtol=1e-12)
    assert np.isnan(vc["icc"][2])


def test_pastes_reml_through_statsmodels(pastes):
    """statsmodels MixedLM REML on the same data (CHECK-SOURCES.md): 1.6584 / 8.4329 / 0.6780.
    The cask letters repeat across batches; panelfx makes the codes unique along the chain."""
    vc = pfx.variance_components(pastes, "strength", levels=["batch", "cask"], method="reml")
    np.testing.assert_allclose(vc["variance"], [1.6584, 8.4329, 0.6780], atol=5e-5)
    assert vc.attrs["method"] == "reml"
    assert vc.attrs["grand_mean"] == pytest.approx(60.0533, abs=5e-4)


SHROUT_FLEISS = [[9, 2, 5, 8], [6, 1, 3, 2], [8, 4, 6, 8], [7, 1, 2, 6], [10, 5, 6, 9], [6, 2, 4, 7]]


def test_shrout_fleiss_one_way_icc():
    """Shrout & Fleiss (1979), 6 targets rated by 4 judges (data and values from memory,
    reproduced by computation): ICC(1,1) = 0.17 and ICC(1,k) = 0.44; the two-way forms
    (0.29, 0.71, 0.62, 0.91) must not come out: the one-way form is the nested one."""
    data = np.array(SHROUT_FLEISS, dtype=float)
    df = pd.DataFrame({"target": np.repeat(np.arange(1, 7), 4), "judge": np.tile(np.arange(1, 5), 6),
                       "score": data.ravel()})
    vc = pfx.variance_components(df, "score", levels="target")
    icc = vc["icc"].iloc[0]
    assert round(icc, 2) == 0.17
    bms, wms = vc["mean_sq"]
    assert round((bms - wms) / bms, 2) == 0.44  # ICC(1,k): reliability of the mean of the 4 judges
    assert round(bms, 2) == 11.24 and round(wms, 2) == 6.26  # Shrout & Fleiss Table 3 (from memory)
    assert round(icc, 2) not in (0.29, 0.71, 0.62, 0.91)


def test_wage_panel_icc_anova_equals_reml():
    """linearmodels wage_panel, lwage by nr (545 men x 8 years, balanced): ICC 0.471804 by
    ANOVA and by statsmodels MixedLM REML (CHECK-SOURCES.md)."""
    wage_panel = pytest.importorskip("linearmodels.datasets.wage_panel")
    w = wage_panel.load()
    anova = pfx.variance_components(w, "lwage", levels=["nr"])
    reml = pfx.variance_components(w, "lwage", levels=["nr"], method="reml")
    assert anova["icc"].iloc[0] == pytest.approx(0.471804, abs=5e-7)
    assert reml["icc"].iloc[0] == pytest.approx(0.471804, abs=5e-6)
    np.testing.assert_allclose(reml["variance"], anova["variance"], rtol=1e-4)
    # balanced: Kish 1 + (m - 1) rho with m = 8
    assert anova.attrs["design_effect"] == pytest.approx(1 + 7 * 0.471804, abs=5e-6)
    assert anova.attrs["n_effective"] == pytest.approx(4360 / anova.attrs["design_effect"])


# ------------------------------------------------------------------ design effect
def test_kish_design_effect():
    """Kish (1965, from memory): 1 + (m - 1) rho; m = 7, rho = 0.2 gives 2.2 (CHECK-SOURCES.md)."""
    assert pfx.design_effect(icc=0.2, size=7) == pytest.approx(2.2, abs=1e-15)
    assert pfx.design_effect(icc=0.0, size=50) == 1.0
    assert pfx.design_effect(icc=1.0, size=12) == 12.0
    # the cluster-size-variation form (Eldridge, Ashby & Kerry 2006, from memory): cv = 0 is Kish
    assert pfx.design_effect(icc=0.05, size=20, cv=0.5) == pytest.approx(1 + (1.25 * 20 - 1) * 0.05)


def _nested(sizes: list[list[int]], seed: int, sd=(2.0, 3.0, 1.0)) -> pd.DataFrame:
    """Rows of clinic -> subject with the given numbers of rows per subject; subject numbers
    restart in each clinic."""
    rng = np.random.default_rng(seed)
    clinic, subject, y = [], [], []
    for c, subs in enumerate(sizes):
        a = sd[0] * rng.standard_normal()
        for s, n in enumerate(subs):
            b = sd[1] * rng.standard_normal()
            clinic += [f"c{c}"] * n
            subject += [s + 1] * n
            y += list(10 + a + b + sd[2] * rng.standard_normal(n))
    return pd.DataFrame({"clinic": clinic, "subject": subject, "y": y})


def _implied_deff(frame: pd.DataFrame, levels: list[str], variances: np.ndarray) -> float:
    """1'V1 / n**2 divided by total / n, V built entry by entry from the components."""
    n = len(frame)
    v = np.eye(n) * variances[-1]
    for k in range(len(levels)):
        key = frame[levels[: k + 1]].astype(str).agg("|".join, axis=1).to_numpy()
        v += variances[k] * (key[:, None] == key[None, :])
    return float(v.sum() / n**2 / (variances.sum() / n))


@pytest.mark.parametrize("sizes", [
    [[3, 3], [3, 3], [3, 3]],                       # balanced
    [[1, 4, 2], [6], [2, 2, 5, 1], [3, 3]],          # unbalanced
])
def test_design_effect_equals_the_implied_covariance(sizes):
    """The design effect of the mean equals 1'V1/n^2 / (total/n) for the components found,
    balanced or not; effective n is n / deff."""
    df = _nested(sizes, seed=5)
    vc = pfx.variance_components(df, "y", levels=["clinic", "subject"])
    variances = vc["variance"].to_numpy()
    assert (variances > 0).all()
    assert vc.attrs["design_effect"] == pytest.approx(_implied_deff(df, ["clinic", "subject"], variances),
                                                      rel=1e-12)
    assert vc.attrs["n_effective"] == pytest.approx(len(df) / vc.attrs["design_effect"], rel=1e-15)


def test_planning_formula_with_size_variation_matches_the_table():
    """Two levels, unequal cluster sizes: design_effect(icc, mean size, cv) with cv the
    standard deviation (divisor K) over the mean equals the table's design effect."""
    sizes = [2, 9, 4, 4, 1, 7, 3]
    df = _nested([[n] for n in sizes], seed=8)
    vc = pfx.variance_components(df, "y", levels=["clinic"])
    n = np.array(sizes, dtype=float)
    planned = pfx.design_effect(icc=float(vc["icc"].iloc[0]), size=n.mean(), cv=n.std() / n.mean())
    assert vc.attrs["design_effect"] == pytest.approx(planned, rel=1e-12)


# ------------------------------------------------------------------ unbalanced: an independent route
def _quadratic_form_estimates(frame: pd.DataFrame, col: str, levels: list[str]) -> np.ndarray:
    """Method I from dense matrices: SS_k = y'A_k y with A_k = P_k - P_(k-1) (P: projection on
    unit indicators), and E[y'A y] = tr(A V) (A 1 = 0 removes the mean), so
    E[SS_k] = sum_j var_j tr(A_k Z_j Z_j') + var_e tr(A_k)."""
    y = frame[col].to_numpy(dtype=float)
    n = len(y)

    def indicators(k: int) -> np.ndarray:
        if k == 0:
            return np.ones((n, 1))
        key = frame[levels[:k]].astype(str).agg("|".join, axis=1)
        return pd.get_dummies(key).to_numpy(dtype=float)

    def projection(z: np.ndarray) -> np.ndarray:
        return z @ np.linalg.pinv(z.T @ z) @ z.T

    big_l = len(levels)
    p = [projection(indicators(k)) for k in range(big_l + 1)] + [np.eye(n)]
    zz = [indicators(j) @ indicators(j).T for j in range(1, big_l + 1)]
    a = np.zeros((big_l + 1, big_l + 1))
    b = np.zeros(big_l + 1)
    for k in range(1, big_l + 2):
        q = p[k] - p[k - 1]
        b[k - 1] = y @ q @ y
        a[k - 1, :big_l] = [np.trace(q @ z) for z in zz]
        a[k - 1, big_l] = np.trace(q)
    return np.linalg.solve(a, b)


def test_unbalanced_three_levels_by_quadratic_forms():
    rng = np.random.default_rng(11)
    rows = []
    for r in range(3):
        for c in range(rng.integers(1, 4) + 1):
            for s in range(rng.integers(1, 4)):
                for _ in range(rng.integers(1, 5)):
                    rows.append((f"R{r}", f"C{c}", s, rng.normal()))
    df = pd.DataFrame(rows, columns=["region", "clinic", "subject", "y"])
    levels = ["region", "clinic", "subject"]
    vc = pfx.variance_components(df, "y", levels=levels)
    np.testing.assert_allclose(vc["variance"], _quadratic_form_estimates(df, "y", levels), rtol=1e-9, atol=1e-12)


@settings(max_examples=60, deadline=None)
@given(st.data())
def test_method_one_matches_quadratic_forms_on_random_designs(data):
    """Random unbalanced two- and three-level designs, codes restarting in every parent."""
    n_levels = data.draw(st.integers(1, 3))
    rows = []

    def grow(prefix: tuple, depth: int) -> None:
        if depth == n_levels:
            for _ in range(data.draw(st.integers(1, 3))):
                rows.append((*prefix, data.draw(st.floats(-50, 50, allow_nan=False))))
            return
        for unit in range(data.draw(st.integers(1 if depth else 2, 3))):
            grow((*prefix, unit), depth + 1)

    grow((), 0)
    levels = [f"l{k}" for k in range(n_levels)]
    df = pd.DataFrame(rows, columns=[*levels, "y"])
    try:
        vc = pfx.variance_components(df, "y", levels=levels)
    except OptionError as err:
        assert "cannot be told apart" in str(err)
        return
    want = _quadratic_form_estimates(df, "y", levels)
    np.testing.assert_allclose(vc["variance"], want, rtol=1e-6, atol=1e-6 * (1 + np.abs(want).max()))
    kept = np.maximum(vc["variance"].to_numpy(), 0)
    if kept.sum() > 0:
        np.testing.assert_allclose(vc["share"].sum(), 1.0)


# ------------------------------------------------------------------ rules
def test_negative_estimate_is_reported_flagged_and_zero_in_shares():
    # clinic means almost equal, subjects spread: the clinic component comes out negative
    df = pd.DataFrame({"clinic": np.repeat(["a", "b", "c"], 4), "subject": np.tile([1, 1, 2, 2], 3),
                       "y": [0.0, 1.0, 9.0, 10.0, 9.0, 10.0, 0.0, 1.0, 4.0, 5.0, 5.0, 6.0]})
    vc = pfx.variance_components(df, "y", levels=["clinic", "subject"])
    assert vc["variance"].iloc[0] < 0 and vc["negative"].tolist() == [True, False, False]
    assert vc["share"].iloc[0] == 0.0 and vc["icc"].iloc[0] == 0.0
    assert vc["share"].sum() == pytest.approx(1.0)
    ms = vc["mean_sq"].to_numpy()
    assert vc["variance"].iloc[0] == pytest.approx((ms[0] - ms[1]) / 4)  # as computed, not clipped


def test_codes_repeat_across_parents_and_unique_codes_are_checked():
    df = _nested([[2, 3], [4, 1, 2], [2, 2]], seed=1)
    unique = df.assign(subject=df["clinic"] + "-" + df["subject"].astype(str))
    a = pfx.variance_components(df, "y", levels=["clinic", "subject"])
    b = pfx.variance_components(unique, "y", levels=["clinic", "subject"], codes="unique")
    pd.testing.assert_frame_equal(a, b)
    assert a["units"].tolist() == [3, 7, len(df)]
    # subject numbers restart in each clinic: with codes="unique" subjects 1 and 2 are under several clinics
    with pytest.raises(NestingError, match=r"2 unit\(s\) of level 'subject' appear under more than one 'clinic'.*first codes: \[1, 2\]") \
            as err:
        pfx.variance_components(df, "y", levels=["clinic", "subject"], codes="unique")
    assert err.value.column == "subject" and err.value.ids == [1, 2] and err.value.count == 2


def test_missing_values_left_out_and_missing_codes_refused():
    df = _nested([[3, 3], [3, 3], [3, 3]], seed=2)
    holed = df.copy()
    holed.loc[[0, 7], "y"] = np.nan
    vc = pfx.variance_components(holed, "y", levels=["clinic", "subject"])
    assert vc.attrs["n"] == 16 and vc.attrs["n_missing"] == 2 and vc["units"].tolist() == [3, 6, 16]
    np.testing.assert_allclose(vc["variance"],
                               pfx.variance_components(holed.dropna(), "y", levels=["clinic", "subject"])["variance"])
    bad = df.astype({"clinic": object})
    bad.loc[4, "clinic"] = None
    with pytest.raises(NullKeyError, match="missing level code in column 'clinic': 1 row; first row labels: \\[4\\]"):
        pfx.variance_components(bad, "y", levels=["clinic", "subject"])


def test_designs_that_cannot_be_split_and_bad_options():
    one_each = pd.DataFrame({"clinic": ["a", "a", "b", "b"], "subject": [1, 2, 3, 4], "y": [1.0, 2.0, 3.0, 5.0]})
    with pytest.raises(OptionError, match="every unit of level 'subject' has a single value"):
        pfx.variance_components(one_each, "y", levels=["clinic", "subject"])
    with pytest.raises(OptionError, match="level 'clinic' has as many units as its parent level"):
        pfx.variance_components(one_each.assign(clinic="a"), "y", levels=["clinic"])
    df = _nested([[3, 3], [3, 3]], seed=3)
    for kw, message in [({"levels": []}, "at least one"), ({"levels": ["clinic", "clinic"]}, "twice"),
                        ({"levels": ["y"]}, "also one of the levels"), ({"levels": ["clinic"], "method": "ml"},
                                                                         "method must be one of"),
                        ({"levels": ["clinic"], "codes": "global"}, "codes must be one of")]:
        with pytest.raises(OptionError, match=message):
            pfx.variance_components(df, "y", **kw)
    with pytest.raises(ColumnTypeError):
        pfx.variance_components(df.assign(y=df["y"].astype(str)), "y", levels=["clinic"])
    with pytest.raises(OptionError, match="no value"):
        pfx.variance_components(df.assign(y=np.nan), "y", levels=["clinic"])
    for kw in [{"icc": 1.5, "size": 3}, {"icc": 0.1, "size": 0.5}, {"icc": 0.1, "size": 3, "cv": -1},
               {"icc": float("nan"), "size": 3}, {"icc": True, "size": 3}]:
        with pytest.raises(OptionError):
            pfx.design_effect(**kw)


def test_input_unchanged_and_any_code_dtype():
    df = _nested([[2, 3], [4, 1, 2], [2, 2]], seed=5)
    before = df.copy()
    a = pfx.variance_components(df, "y", levels=["clinic", "subject"])
    pd.testing.assert_frame_equal(df, before)
    arrow = df.astype({"clinic": "string[pyarrow]", "subject": "Int64", "y": "Float64"})
    cat = df.astype({"clinic": "category"})
    for other in (arrow, cat):
        # the nullable frame gets nullable columns back (panelfx._frames: the caller's dtype backend)
        got = pfx.variance_components(other, "y", levels=["clinic", "subject"])
        pd.testing.assert_frame_equal(got.astype(dict(a.dtypes)), a)
