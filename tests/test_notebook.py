"""The walkthrough notebook runs from top to bottom and finds the generator's true effects."""

from __future__ import annotations

import re

import pytest

nbformat = pytest.importorskip("nbformat")
nbclient = pytest.importorskip("nbclient")
pytest.importorskip("ipykernel")
pytest.importorskip("statsmodels")
pytest.importorskip("matplotlib")

from notebook_kit import NOTEBOOKS, check_stored_clean, execute, output_text  # noqa: E402

WALKTHROUGH = NOTEBOOKS / "walkthrough.ipynb"


def test_notebook_is_stored_without_outputs():
    code = check_stored_clean(WALKTHROUGH, ("pfx.Derivation(", ".save(", "Derivation.load(", "pfx.subject_key(",
                                            "rows=\"by_subject\""))
    assert len(code) >= 8


@pytest.fixture(scope="module")
def executed():
    return execute(WALKTHROUGH)


def test_notebook_runs_without_error(executed):
    code = [c for c in executed.cells if c.cell_type == "code"]
    assert all(c.execution_count is not None for c in code)
    assert not [o for c in code for o in c.outputs if o["output_type"] == "error"]
    text = "".join(output_text(c) for c in code)
    assert "INVENTED DATA" in text
    for problem in ("missed", "late", "early"):
        assert problem in text
    # the derivation displayed itself as HTML (panel and dictionary)
    assert any("panelfx-derivation" in o.get("data", {}).get("text/html", "") for c in code for o in c.outputs)
    # the figures cell drew a picture
    assert any("image/png" in o.get("data", {}) for c in code for o in c.outputs)


def test_notebook_recovers_the_true_effects(executed):
    text = "".join(output_text(c) for c in executed.cells if c.cell_type == "code")
    found = {m.group(1): float(m.group(2)) for m in
             re.finditer(r"^(within effect, mixed model|between effect, mixed model|within effect, GEE): "
                         r"(-?\d+\.\d+) \(truth", text, flags=re.M)}
    assert set(found) == {"within effect, mixed model", "between effect, mixed model", "within effect, GEE"}
    # truth: within -0.3, between +0.2 (panelfx.demo.cohort defaults); standard errors
    # are about 0.013 and 0.033 with 300 subjects
    assert found["within effect, mixed model"] == pytest.approx(-0.3, abs=0.05)
    assert found["within effect, GEE"] == pytest.approx(-0.3, abs=0.05)
    assert found["between effect, mixed model"] == pytest.approx(0.2, abs=0.1)
    # the naive OLS row of the results table is far from the within effect
    naive = re.search(r"naive: OLS on current dose\s+([-+]\d+\.\d+)", text)
    assert naive is not None and float(naive.group(1)) > -0.2


def test_readme_figure_is_committed_and_small():
    png = NOTEBOOKS / "figures" / "demo_cohort.png"
    data = png.read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n"
    assert len(data) < 150_000
