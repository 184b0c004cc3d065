"""panelfx.sklearn.DerivedFeatures in real scikit-learn pipelines on the invented demo cohort: group
folds give the features of the whole panel, clone/get_params/set_output work, the past-only guard."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import panelfx as pfx
from panelfx.demo import cohort

sklearn = pytest.importorskip("sklearn")
from sklearn.base import clone  # noqa: E402
from sklearn.exceptions import NotFittedError  # noqa: E402
from sklearn.impute import SimpleImputer  # noqa: E402
from sklearn.linear_model import LogisticRegression  # noqa: E402
from sklearn.model_selection import GroupKFold, KFold, cross_val_predict  # noqa: E402
from sklearn.pipeline import Pipeline, make_pipeline  # noqa: E402

from panelfx.sklearn import DerivedFeatures  # noqa: E402

ID = ["site", "subject"]
FEATURES = ["dose_mg_lag1", "dizzy_lag1", "sbp_lag1", "dose_mg_cum_lag1", "gap"]


def _derivation() -> pfx.Derivation:
    # past-only predictors of a dizzy spell at a visit: what was known before the visit
    return pfx.Derivation(pfx.lag("dose_mg"), pfx.lag("dizzy"), pfx.lag("sbp"), pfx.cumulative("dose_mg"),
                          pfx.lag("dose_mg_cum"), pfx.gap(), id=ID, time="visit_date")


def _model() -> Pipeline:
    return make_pipeline(SimpleImputer(), LogisticRegression(max_iter=1000))


def test_pipeline_with_group_folds_equals_deriving_on_the_whole_panel():
    """Inside a Pipeline under GroupKFold (groups from subject_key), each fold holds whole subjects,
    so the features derived in the pipeline are those of the whole panel: cross_val_predict
    (scikit-learn's own loop) gives what a hand loop over the same splits gives on features
    derived once on the whole panel."""
    X = cohort()
    y = X["dizzy"].to_numpy()
    groups = pfx.subject_key(X, id=ID)
    cv = GroupKFold(n_splits=5)
    pipe = Pipeline([("features", DerivedFeatures(_derivation(), features=FEATURES)), ("model", _model())])
    got = cross_val_predict(pipe, X, y, groups=groups, cv=cv, method="predict_proba")[:, 1]

    whole = pfx.derive(X, *_derivation().transforms, id=ID, time="visit_date", keep="new")[FEATURES]
    want = np.empty(len(X))
    for train, test in cv.split(X, y, groups):
        want[test] = _model().fit(whole.iloc[train], y[train]).predict_proba(whole.iloc[test])[:, 1]
    np.testing.assert_allclose(got, want, rtol=1e-10)
    assert 0.02 < got.mean() < 0.1  # dizzy spells are rare (about 4% of visits)


def test_row_folds_change_the_features_and_warn():
    """Split by rows (KFold), the lags of a fold skip the rows of the others: the features differ
    from the whole panel's, and on a file grouped by subject derive says so."""
    X = cohort(shuffle=False)
    features = DerivedFeatures(_derivation(), features=["sbp_lag1"]).fit(X)
    train, _ = next(KFold(n_splits=3, shuffle=True, random_state=0).split(X))
    with pytest.warns(pfx.SubsetWarning):
        part = features.transform(X.iloc[train])
    whole = features.transform(X).iloc[train]
    assert not part.equals(whole)


def test_get_params_clone_and_set_params():
    d = _derivation()
    t = DerivedFeatures(d, features=["sbp_lag1"], past_only=True)
    assert t.get_params() == {"derivation": d, "features": ["sbp_lag1"], "past_only": True}
    fitted = clone(t).fit(cohort(20, seed=1))
    c = clone(fitted)
    assert c.get_params() == t.get_params() and c.derivation == d
    with pytest.raises(NotFittedError):
        c.transform(cohort(20, seed=1))
    assert c.set_params(past_only=False).past_only is False
    pipe = make_pipeline(t, _model())
    assert pipe.get_params()["derivedfeatures__features"] == ["sbp_lag1"]
    assert clone(pipe).get_params()["derivedfeatures__derivation"] == d


def test_transform_output_and_set_output_pandas():
    """transform returns the derived columns (derive's keep="new", pandas the reference for the
    selection) with X's index; set_output(transform="pandas"), on the step or on the Pipeline,
    gives the same frame, and get_feature_names_out names its columns."""
    X = cohort(40, seed=2)
    d = _derivation()
    want = pfx.derive(X, *d.transforms, id=ID, time="visit_date")[list(d.outputs())]
    t = DerivedFeatures(d)
    out = t.fit_transform(X)
    pd.testing.assert_frame_equal(out, want)
    assert t.get_feature_names_out().tolist() == list(d.outputs())
    pd.testing.assert_frame_equal(DerivedFeatures(d).set_output(transform="pandas").fit_transform(X), want)
    pipe = make_pipeline(DerivedFeatures(d, features=FEATURES), SimpleImputer()).set_output(transform="pandas")
    imputed = pipe.fit_transform(X)
    assert list(imputed.columns) == FEATURES and imputed.index.equals(X.index)
    assert pipe.get_feature_names_out().tolist() == FEATURES


def test_features_may_pass_input_columns_through():
    X = cohort(30, seed=3)
    out = DerivedFeatures(_derivation(), features=["sbp_lag1", "dose_mg"]).fit_transform(X)
    assert list(out.columns) == ["sbp_lag1", "dose_mg"]
    pd.testing.assert_series_equal(out["dose_mg"], X["dose_mg"])


def test_past_only_guard():
    """For prediction (past_only=True, the default) features that may see later occasions are refused
    at fit, as the data dictionary marks them; selecting past-only ones or past_only=False allows it."""
    X = cohort(30, seed=4)
    d = pfx.Derivation(pfx.baseline("sbp"), pfx.lag("sbp_baseline"), pfx.lag("sbp"), pfx.within_between("dose_mg"),
                       id=ID, time="day")
    with pytest.raises(pfx.NotPastOnlyError, match=r"features \['sbp_baseline', 'sbp_baseline_lag1', "
                                                   r"'dose_mg_between', 'dose_mg_within'\] may use") as ei:
        DerivedFeatures(d).fit(X)
    assert isinstance(ei.value, pfx.OptionError) and isinstance(ei.value, ValueError)
    assert ei.value.column == "sbp_baseline" and ei.value.count == 4 and len(ei.value.columns) == 4
    assert DerivedFeatures(d, features=["sbp_lag1"]).fit_transform(X).columns.tolist() == ["sbp_lag1"]
    assert DerivedFeatures(d, past_only=False).fit_transform(X).shape == (len(X), 5)


def test_bad_options_and_input_are_typed_errors():
    X = cohort(10, seed=5)
    d = _derivation()
    with pytest.raises(pfx.ColumnTypeError, match="needs the panel as a pandas DataFrame"):
        DerivedFeatures(d).fit(X.to_numpy())
    with pytest.raises(pfx.MissingColumnError, match=r"features \['bmi'\] are neither outputs") as ei:
        DerivedFeatures(d, features=["sbp_lag1", "bmi"]).fit(X)
    assert ei.value.column == "bmi"
    with pytest.raises(pfx.OptionError, match="features must be a list of column names"):
        DerivedFeatures(d, features="sbp_lag1").fit(X)
    with pytest.raises(pfx.OptionError, match="distinct"):
        DerivedFeatures(d, features=["sbp_lag1", "sbp_lag1"]).fit(X)
    with pytest.raises(pfx.OptionError, match="derivation must be a panelfx.Derivation"):
        DerivedFeatures([pfx.lag("sbp")]).fit(X)
    with pytest.raises(pfx.OptionError, match="past_only must be True or False"):
        DerivedFeatures(d, past_only="yes").fit(X)
    fitted = DerivedFeatures(d).fit(X)
    with pytest.raises(pfx.MissingColumnError, match="'dose_mg'"):
        fitted.transform(X.drop(columns=["dose_mg"]))


def test_import_panelfx_does_not_import_sklearn():
    import subprocess
    import sys

    code = "import sys, panelfx; print('sklearn' in sys.modules)"
    assert subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          check=True).stdout.strip() == "False"
