"""Doctest set-up shared by the package's docstrings and the README."""

import pandas as pd
import pytest


@pytest.fixture(autouse=True)
def _wide_display():
    with pd.option_context("display.width", 200, "display.max_columns", 50):
        yield
