"""A missing optional package is a typed error naming the extra that installs it.

Each check hides the package (``sys.modules[name] = None`` makes Python's import fail with
ImportError, as it does when the package is not installed) and calls the code that needs it."""

from __future__ import annotations

import importlib
import sys

import numpy as np
import pandas as pd
import pytest

import panelfx as pfx


def _hide(monkeypatch, *names):
    for name in names:
        monkeypatch.setitem(sys.modules, name, None)


def test_plot_without_matplotlib(monkeypatch):
    from panelfx import plot

    _hide(monkeypatch, "matplotlib")
    with pytest.raises(pfx.MissingDependencyError, match=r"pip install 'panelfx\[plot\]'") as err:
        plot._matplotlib()
    assert err.value.extra == "plot" and isinstance(err.value, ImportError)


def test_reml_without_statsmodels(monkeypatch):
    df = pd.DataFrame({"clinic": np.repeat(["a", "b", "c"], 4), "y": np.arange(12.0)})
    _hide(monkeypatch, "statsmodels.regression.mixed_linear_model")
    with pytest.raises(pfx.MissingDependencyError, match=r"panelfx\[models\]") as err:
        pfx.variance_components(df, "y", levels="clinic", method="reml")
    assert err.value.extra == "models"


def test_dask_module_without_dask(monkeypatch):
    _hide(monkeypatch, "dask", "dask.dataframe")
    monkeypatch.delitem(sys.modules, "panelfx.dask", raising=False)
    with pytest.raises(pfx.MissingDependencyError, match=r"panelfx\[dask\]") as err:
        importlib.import_module("panelfx.dask")
    assert err.value.extra == "dask"
