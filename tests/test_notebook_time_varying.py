"""The time-varying notebook runs from top to bottom and recovers the invented truths."""

from __future__ import annotations

import re

import pytest

nbformat = pytest.importorskip("nbformat")
nbclient = pytest.importorskip("nbclient")
pytest.importorskip("ipykernel")
pytest.importorskip("statsmodels")

from notebook_kit import NOTEBOOKS, check_stored_clean, execute, output_text  # noqa: E402

NOTEBOOK = NOTEBOOKS / "time_varying.ipynb"


def test_notebook_is_stored_without_outputs():
    check_stored_clean(NOTEBOOK, ("pfx.episodes(", "pfx.person_time(", "pfx.snapshot(", "PHReg(", "sm.GLM("))


@pytest.fixture(scope="module")
def text():
    nb = execute(NOTEBOOK)
    return "".join(output_text(c) for c in nb.cells if c.cell_type == "code")


def number(text: str, pattern: str) -> float:
    m = re.search(pattern + r" (-?\d+\.\d+)", text)
    assert m, pattern
    return float(m.group(1))


def test_notebook_recovers_the_invented_truths(text):
    assert "INVENTED DATA" in text and "never start >= stop: True" in text and "Warning" not in text
    # truth log(2) = 0.693; standard error about 0.12 with ~270 deaths
    cox = number(text, r"log hazard ratio of the sedative, time-varying Cox on episodes:")
    assert cox == pytest.approx(0.693, abs=0.3)
    # the record made on the day of death, used for the interval the death closes, biases the estimate upward
    naive = number(text, r"log hazard ratio, naive intervals \(value at the stop\):")
    assert naive - cox > 0.25
    # truth 1.5; log rate ratio standard error about 0.075 with ~730 falls
    assert number(text, r"rate ratio of falls, Poisson model:") == pytest.approx(1.5, abs=0.3)
